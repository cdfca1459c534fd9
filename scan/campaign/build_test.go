package campaign

import (
	"fmt"
	"strings"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
)

func ids(n int) []string {
	out := make([]string, n)
	for i := range out {
		out[i] = fmt.Sprintf("ev-%03d", i)
	}
	return out
}

func spec(mode string) Spec {
	return Spec{Campaign: scan.Campaign{Name: "c", Dataset: "/d", Mode: mode, PerEvent: 2, Seed: 11, Schema: scan.DefaultSchema()}}
}

func TestBuildWithoutSelection(t *testing.T) {
	_, evs, sum, err := Build(spec(scan.ModeLabel), ids(5))
	if err != nil {
		t.Fatal(err)
	}
	if len(evs) != 5 || evs[0].EventID != "ev-000" || evs[0].Selection != nil || sum.Events != 5 {
		t.Errorf("events %+v, summary %+v", evs, sum)
	}
}

func TestBuildIncludeUnselected(t *testing.T) {
	all := ids(100)
	var sel []scan.Selection
	for i, id := range all[:90] { // the last 10 dataset events are not in the file
		sel = append(sel, scan.Selection{EventID: id, Selected: i%3 == 0, Class: "numu-cc", Score: float64(i) / 100})
	}
	for _, f := range []float64{0, 0.25, 1} {
		sp := spec(scan.ModeLabel)
		sp.Selection, sp.IncludeUnselected = sel, f
		_, evs, sum, err := Build(sp, all)
		if err != nil {
			t.Fatal(err)
		}
		wantUnsel := int(f*60 + 0.5)
		if sum.Selected != 30 || sum.Unselected != 60 || sum.UnselectedIncluded != wantUnsel || sum.NotInSelection != 10 || len(evs) != 30+wantUnsel {
			t.Errorf("f=%g: summary %+v, %d events", f, sum, len(evs))
		}
		for i := 1; i < len(evs); i++ {
			if evs[i].EventID <= evs[i-1].EventID {
				t.Fatalf("f=%g: events not in dataset order", f)
			}
		}
		for _, e := range evs {
			if e.Selection == nil || e.Selection.EventID != e.EventID {
				t.Fatalf("event %s lost its selection row", e.EventID)
			}
		}
	}
	// Same seed, same sample; another seed, another sample.
	sample := func(seed int64) string {
		sp := spec(scan.ModeLabel)
		sp.Selection, sp.IncludeUnselected, sp.Campaign.Seed = sel, 0.25, seed
		_, evs, _, _ := Build(sp, all)
		var b strings.Builder
		for _, e := range evs {
			b.WriteString(e.EventID)
		}
		return b.String()
	}
	if sample(1) != sample(1) || sample(1) == sample(2) {
		t.Error("unselected sample does not follow the seed")
	}
}

func TestBuildRefuses(t *testing.T) {
	sel := []scan.Selection{{EventID: "ev-000", Selected: true, Class: "numu-cc"}}
	tests := []struct {
		name string
		mod  func(*Spec)
		want string
	}{
		{"verify needs selection", func(s *Spec) { s.Campaign.Mode = scan.ModeVerify }, "needs the selection"},
		{"fraction without selection", func(s *Spec) { s.IncludeUnselected = 0.1 }, "needs a selection"},
		{"fraction out of range", func(s *Spec) { s.Selection, s.IncludeUnselected = sel, 1.5 }, "[0, 1]"},
		{"event missing from dataset", func(s *Spec) { s.Selection = append(sel, scan.Selection{EventID: "ev-999"}) }, "1 selection events are not in dataset /d: ev-999"},
		{"class outside schema", func(s *Spec) { s.Selection = []scan.Selection{{EventID: "ev-000", Selected: true, Class: "ccqe"}} }, "schema neutrino lacks: ccqe"},
		{"nothing selected", func(s *Spec) { s.Selection = []scan.Selection{{EventID: "ev-000"}} }, "no events"},
	}
	for _, tt := range tests {
		sp := spec(scan.ModeLabel)
		tt.mod(&sp)
		_, _, _, err := Build(sp, ids(3))
		if err == nil || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%s: err = %v, want %q", tt.name, err, tt.want)
		}
	}
}
