package ui

import (
	"context"
	"fmt"
	"io"
	"math"
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"
	"github.com/charmbracelet/x/ansi"
	"github.com/charmbracelet/x/exp/golden"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
)

// numbersCase is a two-scanner campaign of 12 events small enough to check
// by hand (class per event for scanners a and b; "cosmic" = nothing found):
//
//	e01–e04 numu/numu   e05 numu/nue   e06 nue/numu   e07–e09 nue/nue
//	e10 numu/cosmic     e11 cosmic/nue e12 cosmic/cosmic
//
// The selection keeps e01–e06 as numu-cc; e05 has been adjudicated nue-cc.
func numbersCase() NumbersInput {
	a := []string{"numu-cc", "numu-cc", "numu-cc", "numu-cc", "numu-cc", "nue-cc", "nue-cc", "nue-cc", "nue-cc", "numu-cc", "cosmic", "cosmic"}
	b := []string{"numu-cc", "numu-cc", "numu-cc", "numu-cc", "nue-cc", "numu-cc", "nue-cc", "nue-cc", "nue-cc", "cosmic", "nue-cc", "cosmic"}
	in := NumbersInput{Campaign: scan.Campaign{Name: "hand", PerEvent: 2, Schema: scan.DefaultSchema()}}
	for i := range a {
		ev := fmt.Sprintf("e%02d", i+1)
		in.Events = append(in.Events, scan.CampaignEvent{EventID: ev,
			Selection: &scan.Selection{EventID: ev, Selected: i < 6, Class: "numu-cc", Score: 1 - float64(i)/12}})
		in.Passes = append(in.Passes,
			scan.Pass{EventID: ev, Scanner: "a", State: scan.PassSubmitted, Label: scan.Label{Class: a[i]}, Seconds: float64(10 + i)},
			scan.Pass{EventID: ev, Scanner: "b", State: scan.PassSubmitted, Label: scan.Label{Class: b[i]}, Seconds: 30})
	}
	// An open pass and an unassigned extra pass count as open work only.
	in.Passes = append(in.Passes, scan.Pass{EventID: "e01", Scanner: "c", State: scan.PassDraft},
		scan.Pass{EventID: "e02", State: scan.PassAssigned})
	in.Consensus = []scan.Consensus{{EventID: "e05", Method: MethodAdjudication, Label: scan.Label{Class: "nue-cc"}, Posterior: 1}}
	return in
}

func TestComputeNumbersByHand(t *testing.T) {
	n := ComputeNumbers(context.Background(), numbersCase(), NumbersOptions{Bootstrap: 100})
	near := func(what string, got, want float64) {
		t.Helper()
		if math.Abs(got-want) > 1e-9 {
			t.Errorf("%s = %.12g, want %.12g", what, got, want)
		}
	}
	if n.Events != 12 || n.Done != 12 || n.Ratings != 24 {
		t.Errorf("events %d, done %d, ratings %d; want 12, 12, 24", n.Events, n.Done, n.Ratings)
	}
	if len(n.Scanners) != 3 || n.Scanners[0].Submitted != 12 || n.Scanners[2].Open != 1 {
		t.Errorf("scanners %+v; want a and b with 12 submitted, c with 1 open", n.Scanners)
	}
	// Median of 10…21 s is (15 + 16)/2.
	near("median time of a", n.Scanners[0].MedianSeconds, 15.5)
	if n.Agreement == nil || len(n.Agreement.Pairs) != 1 {
		t.Fatalf("agreement %+v (%s)", n.Agreement, n.AgreeNote)
	}
	// Cohen's kappa by hand (Cohen 1960, κ = (p_o − p_e)/(1 − p_e)):
	// p_o = 8/12; marginals a = (6 numu, 4 nue, 2 cosmic), b = (5, 5, 2),
	// p_e = (30 + 20 + 4)/144 = 3/8; κ = (2/3 − 3/8)/(5/8) = 7/15.
	near("Cohen's kappa", n.Agreement.Pairs[0].Kappa, 7.0/15)
	near("percent agreement", n.Agreement.PercentAgreement, 8.0/12)
	if n.CIs == nil || !(n.CIs.Kappa[0].Low <= 7.0/15 && 7.0/15 <= n.CIs.Kappa[0].High) {
		t.Errorf("bootstrap interval %+v does not hold the estimate 7/15", n.CIs)
	}
	// Capture–recapture by hand: a found 10, b found 10, both 9.
	// Lincoln–Petersen N = 100/9; Chapman N = 11·11/10 − 1 = 11.1; a's
	// efficiency = m/n₂ = 0.9.
	if len(n.Efficiency) != 1 {
		t.Fatalf("efficiency pairs %d, want 1", len(n.Efficiency))
	}
	r := n.Efficiency[0]
	if r.N1 != 10 || r.N2 != 10 || r.M != 9 {
		t.Errorf("n1 %d n2 %d m %d, want 10 10 9", r.N1, r.N2, r.M)
	}
	near("Lincoln–Petersen", r.LincolnPetersen, 100.0/9)
	near("Chapman", r.Chapman, 11.1)
	near("efficiency of a", r.EffA.Value, 0.9)
	// Consensus: e05 adjudicated; the majority vote is tied on e06, e10,
	// e11 and decides the other 8. Selected e01–e06 with consensus:
	// e01–e04 numu, e05 nue (e06 tied, left out) → purity 4/5; numu
	// events e01–e04 all selected → efficiency 4/4.
	if n.Tied != 3 || !strings.Contains(n.Consensus, "1 adjudication") || !strings.Contains(n.Consensus, "8 majority vote") {
		t.Errorf("consensus %q with %d tied; want 1 adjudication, 8 majority vote, 3 tied", n.Consensus, n.Tied)
	}
	if v := n.Selection; v == nil || v.Purity.K != 4 || v.Purity.N != 5 || v.Efficiency.K != 4 || v.Efficiency.N != 4 {
		t.Errorf("selection %+v (%s); want purity 4/5 and efficiency 4/4", n.Selection, n.SelectionNote)
	}
	if len(n.Signal) != 1 || n.Signal[0] != "numu-cc" {
		t.Errorf("signal %v, want the selection's class numu-cc", n.Signal)
	}
}

func TestComputeNumbersEdges(t *testing.T) {
	for _, tc := range []struct {
		name string
		in   NumbersInput
		want string
	}{
		{"no labels", NumbersInput{Campaign: scan.Campaign{PerEvent: 2}}, "no submitted labels yet"},
		{"one scanner", NumbersInput{Campaign: scan.Campaign{PerEvent: 1}, Passes: []scan.Pass{
			{EventID: "e1", Scanner: "a", State: scan.PassSubmitted, Label: scan.Label{Class: "x"}},
			{EventID: "e2", Scanner: "a", State: scan.PassSubmitted, Label: scan.Label{Class: "y"}}}}, "agreement needs two"},
		{"one class", NumbersInput{Campaign: scan.Campaign{PerEvent: 2}, Passes: []scan.Pass{
			{EventID: "e1", Scanner: "a", State: scan.PassSubmitted, Label: scan.Label{Class: "x"}},
			{EventID: "e1", Scanner: "b", State: scan.PassSubmitted, Label: scan.Label{Class: "x"}}}}, "only one category"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			n := ComputeNumbers(context.Background(), tc.in, NumbersOptions{})
			if n.Agreement != nil || !strings.Contains(n.AgreeNote, tc.want) {
				t.Errorf("agreement %v, note %q; want none and a note with %q", n.Agreement, n.AgreeNote, tc.want)
			}
			st := NewStyles(lipgloss.NewRenderer(io.Discard), render.TierMono)
			p := numbersPane{st: &st, num: &n}
			if out := p.view(100, 40); !strings.Contains(out, tc.want) {
				t.Errorf("panel does not say %q:\n%s", tc.want, out)
			}
		})
	}
}

// TestLoadNumbersInputReopened: a pass reopened as a draft after a
// submit still counts with its submitted label.
func TestLoadNumbersInputReopened(t *testing.T) {
	ctx := context.Background()
	st, id, _ := adjCampaign(t)
	ps, err := st.ScannerPasses(ctx, id, "alice")
	if err != nil {
		t.Fatal(err)
	}
	p := ps[0]
	if _, err := st.SaveRevision(ctx, p.ID, "alice", scan.Revision{State: scan.PassDraft, Label: scan.Label{Class: "none"}}); err != nil {
		t.Fatal(err)
	}
	in, err := LoadNumbersInput(ctx, st, id)
	if err != nil {
		t.Fatal(err)
	}
	for _, q := range in.Passes {
		if q.ID == p.ID && (q.State != scan.PassSubmitted || q.Label.Class != adjVotes[p.EventID]["alice"]) {
			t.Errorf("reopened pass: %s %q, want submitted %q", q.State, q.Label.Class, adjVotes[p.EventID]["alice"])
		}
	}
}

// TestDashboardGolden pins the stand-alone panel at 120×40 on the test
// campaign (escapes stripped).
func TestDashboardGolden(t *testing.T) {
	st, id, _ := adjCampaign(t)
	d := NewDashboard(DashboardOptions{Store: st, CampaignID: id, Tier: render.TierMono, Numbers: NumbersOptions{Bootstrap: 50}})
	d.Update(tea.WindowSizeMsg{Width: 120, Height: 40})
	msg := d.Init()()
	d.Update(msg)
	out := d.View()
	checkFrameSize(t, out, 120, 40)
	golden.RequireEqual(t, ansi.Strip(out))
	if _, cmd := d.Update(keyMsg("q")); cmd == nil {
		t.Error("q does not quit the panel")
	}
}

func TestDashboardNoStore(t *testing.T) {
	d := NewDashboard(DashboardOptions{})
	d.Update(tea.WindowSizeMsg{Width: 80, Height: 10})
	if cmd := d.Init(); cmd != nil {
		t.Error("a panel without a store starts I/O")
	}
	if !strings.Contains(ansi.Strip(d.View()), "no campaign database") {
		t.Errorf("no error shown:\n%s", ansi.Strip(d.View()))
	}
}

// bigCampaign is 100,000 events × 3 scanners with 5 classes, about one
// vote in five off the first scanner's class (a deterministic pattern).
func bigCampaign() NumbersInput {
	classes := []string{"numu-cc", "nue-cc", "nc-pi0", "nc-other", "cosmic"}
	in := NumbersInput{Campaign: scan.Campaign{Name: "big", PerEvent: 3, Schema: scan.DefaultSchema()}}
	x := uint64(88172645463325252)
	for i := range 100_000 {
		ev := fmt.Sprintf("ev-%06d", i)
		in.Events = append(in.Events, scan.CampaignEvent{EventID: ev, Selection: &scan.Selection{EventID: ev, Selected: i%3 == 0, Class: "numu-cc", Score: float64(i%100) / 100}})
		truth := i % len(classes)
		for _, who := range []string{"a", "b", "c"} {
			x ^= x << 13
			x ^= x >> 7
			x ^= x << 17
			c := truth
			if x%5 == 0 {
				c = int(x>>8) % len(classes)
			}
			in.Passes = append(in.Passes, scan.Pass{EventID: ev, Scanner: who, State: scan.PassSubmitted, Label: scan.Label{Class: classes[c]}, Seconds: 30})
		}
	}
	return in
}

// BenchmarkComputeNumbers measures the numbers panel on a large campaign,
// without and with the default bootstrap.
func BenchmarkComputeNumbers(b *testing.B) {
	in := bigCampaign()
	for _, boot := range []int{-1, 200} {
		b.Run(fmt.Sprintf("bootstrap=%d", max(boot, 0)), func(b *testing.B) {
			for b.Loop() {
				ComputeNumbers(context.Background(), in, NumbersOptions{Bootstrap: boot})
			}
		})
	}
}

// BenchmarkFindDisputes measures building the adjudication list.
func BenchmarkFindDisputes(b *testing.B) {
	in := bigCampaign()
	for b.Loop() {
		findDisputes(in.Passes, in.Events, nil)
	}
}
