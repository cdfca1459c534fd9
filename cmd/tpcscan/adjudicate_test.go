package main

import (
	"errors"
	"path/filepath"
	"strings"
	"testing"
)

// TestAdjudicateRefuses checks the refusals that come before the terminal
// is taken over: each names what is wrong.
func TestAdjudicateRefuses(t *testing.T) {
	db := filepath.Join(t.TempDir(), "scan.db")
	if out, err := runForTest(t, "campaign", "new", "--dataset", validDataset(), "--db", db, "--name", "tiny", "--seed", "3"); err != nil {
		t.Fatalf("campaign new: %v\n%s", err, out)
	}
	for _, tc := range []struct {
		name  string
		args  []string
		want  string
		usage bool
	}{
		{"no db", nil, "needs --db", true},
		{"argument", []string{"--db", db, "extra"}, "takes no arguments", true},
		{"bad level", []string{"--db", db, "--cl", "1.5"}, "confidence level", true},
		{"control name", []string{"--db", db, "--coordinator", "eve\x1b[2J"}, "without control characters", true},
		{"bad colour", []string{"--db", db, "--color", "sepia"}, "sepia", true},
		{"no campaign", []string{"--db", db, "--campaign", "other"}, "other", false},
		{"no dataset", []string{"--db", db, "--coordinator", "dana", "--dataset", filepath.Join(t.TempDir(), "gone")}, "--dataset", false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := runForTest(t, append([]string{"adjudicate"}, tc.args...)...)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %v, want one containing %q", err, tc.want)
			}
			var ue usageError
			if errors.As(err, &ue) != tc.usage {
				t.Errorf("usage error %v, want %v (%v)", !tc.usage, tc.usage, err)
			}
		})
	}
}
