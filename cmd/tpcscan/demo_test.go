package main

import (
	"errors"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestDemoCommand generates a small dataset with pictures, checks it with
// the check command, and checks the usage errors.
func TestDemoCommand(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "tarn")
	pics := filepath.Join(t.TempDir(), "png")
	out, err := runForTest(t, "demo", "-events", "3", "-seed", "5", "-out", dir, "-png", pics, "-mix", "nc-pi0=1")
	if err != nil {
		t.Fatalf("demo: %v\n%s", err, out)
	}
	if !strings.Contains(out, "wrote 3 events to "+dir+" (nc-pi0 3)") {
		t.Errorf("demo output: %q", out)
	}
	if out, err := runForTest(t, "check", dir); err != nil || !strings.Contains(out, "problems  none") {
		t.Errorf("check of the demo dataset: %v\n%s", err, out)
	}
	f, err := os.Open(filepath.Join(pics, "tarn-00002_coll.png"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	cfg, err := png.DecodeConfig(f)
	if err != nil || cfg.Width != 400 || cfg.Height != 300 {
		t.Errorf("collection picture: %+v, %v; want 400×300", cfg, err)
	}
	for _, args := range [][]string{
		{"demo", "-out", dir, "-events", "1"},           // folder holds a dataset already
		{"demo", "-out", t.TempDir(), "-mix", "numu=1"}, // unknown class
		{"demo", "-out", t.TempDir(), "-size", "huge"},  // unknown size
		{"demo", "-out", t.TempDir(), "extra"},          // stray argument
	} {
		if _, err := runForTest(t, args...); err == nil {
			t.Errorf("%v succeeded", args)
		}
	}
	var ue usageError
	if _, err := runForTest(t, "demo", "-mix", "numu=1"); !errors.As(err, &ue) {
		t.Errorf("bad mix gave %v, want a usage error", err)
	}
}
