package main

import (
	"bytes"
	"context"
	"path/filepath"
	"strings"
	"testing"

	"github.com/charmbracelet/x/exp/golden"
)

func runForTest(t *testing.T, args ...string) (string, error) {
	t.Helper()
	var out, errb bytes.Buffer
	env := &environ{stdin: strings.NewReader(""), stdout: &out, stderr: &errb, getenv: func(string) string { return "" }}
	err := run(context.Background(), env, args)
	return out.String(), err
}

func TestCheckCommand(t *testing.T) {
	root := filepath.Join("..", "..", "testdata", "datasets")
	out, err := runForTest(t, "check", filepath.Join(root, "valid"))
	if err != nil {
		t.Fatalf("valid fixture: %v\n%s", err, out)
	}
	for _, want := range []string{"events    3 (1 hits, 1 npy, 1 npz), 3 read cleanly", "problems  none", "coll 20 wires"} {
		if !strings.Contains(out, want) {
			t.Errorf("summary lacks %q:\n%s", want, out)
		}
	}
	out, err = runForTest(t, "check", filepath.Join(root, "broken-nan"))
	if err == nil || !strings.Contains(err.Error(), "1 problem") {
		t.Errorf("broken-nan: err = %v", err)
	}
	if !strings.Contains(out, "event e1: e1/coll.npy: element [3, 5] is NaN") {
		t.Errorf("broken-nan output lacks the named reason:\n%s", out)
	}
	if _, err := runForTest(t, "check"); err == nil {
		t.Error("check without a folder succeeded")
	}
}

// TestCheckGolden pins the summary screens of a clean and a broken dataset
// (update with go test ./cmd/tpcscan -run TestCheckGolden -update).
func TestCheckGolden(t *testing.T) {
	root := filepath.Join("..", "..", "testdata", "datasets")
	for _, name := range []string{"valid", "broken-duplicate-id", "broken-symlink"} {
		t.Run(name, func(t *testing.T) {
			out, _ := runForTest(t, "check", filepath.Join(root, name))
			golden.RequireEqual(t, out)
		})
	}
}
