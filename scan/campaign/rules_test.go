package campaign

import (
	"slices"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
)

func TestPositionsIsPermutation(t *testing.T) {
	for _, n := range []int{0, 1, 2, 17, 1000} {
		p := Positions(42, n)
		s := slices.Clone(p)
		slices.Sort(s)
		for i, v := range s {
			if v != i {
				t.Fatalf("n=%d: not a permutation: %v", n, p)
			}
		}
	}
	if !slices.Equal(Positions(7, 50), Positions(7, 50)) {
		t.Error("same seed gave different orders")
	}
	if slices.Equal(Positions(7, 50), Positions(8, 50)) {
		t.Error("different seeds gave the same order")
	}
}

func TestStartOffset(t *testing.T) {
	const n = 1000
	seen := map[int]bool{}
	for _, s := range []string{"ana", "ben", "chidi", "dana", "eli"} {
		o := StartOffset(1, s, n)
		if o < 0 || o >= n {
			t.Fatalf("offset %d out of range", o)
		}
		if o != StartOffset(1, s, n) {
			t.Fatal("offset not deterministic")
		}
		seen[o] = true
	}
	if len(seen) < 4 {
		t.Errorf("five scanners share offsets: %v", seen)
	}
	if StartOffset(1, "ana", 0) != 0 {
		t.Error("empty ring must give 0")
	}
}

func TestNeedsExtraPass(t *testing.T) {
	tests := []struct {
		name    string
		k       int
		classes []string
		extras  int
		want    bool
	}{
		{"agree", 2, []string{"numu-cc", "numu-cc"}, 0, false},
		{"disagree", 2, []string{"numu-cc", "nc-pi0"}, 0, true},
		{"not all in", 3, []string{"numu-cc", "nc-pi0"}, 0, false},
		{"only first k count", 2, []string{"cosmic", "cosmic", "none"}, 0, false},
		{"already added", 2, []string{"numu-cc", "nue-cc"}, 1, false},
		{"k=1 never", 1, []string{"numu-cc"}, 0, false},
		{"three way", 3, []string{"a", "a", "b"}, 0, true},
	}
	for _, tt := range tests {
		if got := NeedsExtraPass(tt.k, tt.classes, tt.extras); got != tt.want {
			t.Errorf("%s: got %v, want %v", tt.name, got, tt.want)
		}
	}
}

func TestEffectiveClass(t *testing.T) {
	sel := &scan.Selection{Class: "nue-cc"}
	if got := EffectiveClass(scan.Label{Verdict: "agree"}, sel); got != "nue-cc" {
		t.Errorf("agree: %q", got)
	}
	if got := EffectiveClass(scan.Label{Verdict: "disagree", Class: "nc-pi0"}, sel); got != "nc-pi0" {
		t.Errorf("disagree: %q", got)
	}
	if got := EffectiveClass(scan.Label{Class: "cosmic"}, nil); got != "cosmic" {
		t.Errorf("label: %q", got)
	}
}
