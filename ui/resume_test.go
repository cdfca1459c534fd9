package ui

import (
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// A resume point written late must not overwrite a newer one.
func TestResumeSaverKeepsNewest(t *testing.T) {
	var r resumeSaver
	older, newer := r.take(), r.take()
	var wrote []uint64
	save := func(seq uint64) func() error {
		return func() error { wrote = append(wrote, seq); return nil }
	}
	if err := r.write(newer, save(newer)); err != nil {
		t.Fatal(err)
	}
	if err := r.write(older, save(older)); err != nil {
		t.Fatal(err)
	}
	if len(wrote) != 1 || wrote[0] != newer {
		t.Errorf("wrote %v, want only the newer point %d", wrote, newer)
	}
}

// Only a label that says nothing counts as untouched.
func TestEmptyLabel(t *testing.T) {
	for _, c := range []struct {
		name string
		l    scan.Label
		want bool
	}{
		{"zero", scan.Label{}, true},
		{"class", scan.Label{Class: "numu-cc"}, false},
		{"flag", scan.Label{Flags: []string{"not-contained"}}, false},
		{"confidence", scan.Label{Confidence: "1"}, false},
		{"comment", scan.Label{Comment: "?"}, false},
		{"mark", scan.Label{Marks: []scan.Mark{{Kind: scan.MarkVertex}}}, false},
		{"vertex", scan.Label{Vertex3D: &detector.Point{}}, false},
		{"verdict", scan.Label{Verdict: "agree"}, false},
	} {
		if got := emptyLabel(c.l); got != c.want {
			t.Errorf("%s: emptyLabel = %v, want %v", c.name, got, c.want)
		}
	}
}
