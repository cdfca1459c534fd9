package agree

import (
	"context"
	"fmt"
	"math"
	"reflect"
	"strconv"
	"strings"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// simTable simulates n items with the given class priors and raters.
func simTable(t testing.TB, n int, priors []float64, raters []SimRater, seed uint64) (*Table, []int) {
	t.Helper()
	truth := make([]int, n)
	acc := 0.0
	j := 0
	for c, p := range priors { // deterministic class mix in the exact proportions
		acc += p
		for ; j < int(math.Round(acc*float64(n))) && j < n; j++ {
			truth[j] = c
		}
	}
	codes, err := SimulateRatings(truth, raters, seed)
	if err != nil {
		t.Fatal(err)
	}
	items := make([]string, n)
	for i := range items {
		items[i] = "e" + strconv.Itoa(i)
	}
	names := make([]string, len(raters))
	for r := range raters {
		names[r] = raters[r].Name
	}
	cats := make([]string, len(priors))
	for c := range cats {
		cats[c] = "c" + strconv.Itoa(c)
	}
	tab, err := TableFromCodes(items, names, cats, codes)
	if err != nil {
		t.Fatal(err)
	}
	return tab, truth
}

func TestMajorityVote(t *testing.T) {
	rs := []Rating{
		{"1", "a", "cc"}, {"1", "b", "cc"}, {"1", "c", "nc"}, // 2:1 for cc
		{"2", "a", "cc"}, {"2", "b", "nc"}, // tie 1:1
		{"3", "a", "nc"}, {"3", "b", "nc"}, {"3", "c", "nc"},
		{"4", "a", "cc"}, {"4", "b", "nc"}, {"4", "c", "pi0"}, // tie 1:1:1
	}
	tab, err := NewTable(rs, nil)
	if err != nil {
		t.Fatal(err)
	}
	res := MajorityVote(tab)
	want := []struct {
		label string
		post  float64
	}{{"cc", 2.0 / 3}, {"", 0.5}, {"nc", 1}, {"", 1.0 / 3}}
	for i, w := range want {
		got := res.Items[i]
		name := ""
		if got.Label != Missing {
			name = tab.Categories[got.Label]
		}
		if name != w.label {
			t.Errorf("item %s: label %q, want %q", got.Item, name, w.label)
		}
		near(t, "posterior of item "+got.Item, got.Posterior, w.post, 1e-12)
	}
	// Most contested first: the three-way tie before the two-way tie.
	if !reflect.DeepEqual(res.Adjudicate, []string{"4", "2"}) {
		t.Errorf("adjudicate = %v, want [4 2]", res.Adjudicate)
	}
}

// TestDawidSkeneRecovery: simulated scanners with known confusion matrices
// (seeded); Dawid & Skene (1979) EM must recover each matrix and the class
// priors, and beat the majority vote at finding the truth.
func TestDawidSkeneRecovery(t *testing.T) {
	known := [][][]float64{
		{{0.90, 0.05, 0.05}, {0.10, 0.80, 0.10}, {0.05, 0.15, 0.80}},
		{{0.70, 0.20, 0.10}, {0.20, 0.70, 0.10}, {0.10, 0.10, 0.80}},
		{{0.95, 0.03, 0.02}, {0.05, 0.90, 0.05}, {0.02, 0.08, 0.90}},
		{{0.60, 0.30, 0.10}, {0.25, 0.60, 0.15}, {0.10, 0.20, 0.70}},
	}
	var raters []SimRater
	for r, m := range known {
		raters = append(raters, SimRater{Name: "s" + strconv.Itoa(r), Coverage: 0.8, Confusion: m})
	}
	priors := []float64{0.5, 0.3, 0.2}
	tab, truth := simTable(t, 20000, priors, raters, 42)
	res, err := DawidSkeneEM(tab, DSOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for c, p := range priors {
		near(t, "prior "+strconv.Itoa(c), res.Priors[c], p, 0.015)
	}
	for r, m := range known {
		rq := res.Raters[r]
		for k := range m {
			for l := range m[k] {
				// Each estimate is a binomial proportion over about
				// 0.8·20000·prior items: its 3σ is below 0.03 here.
				sigma := math.Sqrt(m[k][l] * (1 - m[k][l]) / rq.RowItems[k])
				if d := math.Abs(rq.Confusion[k][l] - m[k][l]); d > 4*sigma+0.005 {
					t.Errorf("rater %d π[%d][%d] = %.4f, known %.4f (|Δ| = %.4f > 4σ = %.4f)",
						r, k, l, rq.Confusion[k][l], m[k][l], d, 4*sigma)
				}
			}
		}
	}
	maj := MajorityVote(tab)
	right := func(items []ItemLabel) int {
		n := 0
		for i, it := range items {
			if it.Label == truth[i] {
				n++
			}
		}
		return n
	}
	if ds, mv := right(res.Items), right(maj.Items); ds <= mv {
		t.Errorf("Dawid–Skene found %d true classes, majority vote %d: want more", ds, mv)
	}
	// Determinism: the same table gives the same result.
	again, _ := DawidSkeneEM(tab, DSOptions{})
	if !reflect.DeepEqual(again.Priors, res.Priors) || again.Iterations != res.Iterations {
		t.Error("Dawid–Skene is not deterministic")
	}
}

// TestScannerEfficiencyRecovery: scanners with known efficiency and class
// accuracy (ScannerConfusion); capture–recapture must recover each
// efficiency within its 95% Clopper–Pearson interval.
func TestScannerEfficiencyRecovery(t *testing.T) {
	effs := []float64{0.95, 0.85, 0.75}
	var raters []SimRater
	for r, e := range effs {
		m, err := ScannerConfusion(4, 0, e, 0.9)
		if err != nil {
			t.Fatal(err)
		}
		raters = append(raters, SimRater{Name: "s" + strconv.Itoa(r), Coverage: 1, Confusion: m})
	}
	tab, _ := simTable(t, 3000, []float64{0.2, 0.4, 0.3, 0.1}, raters, 7)
	rec := Efficiencies(tab, []string{"c0"}, 0.95, ClopperPearson)
	if len(rec) != 3 {
		t.Fatalf("%d pairs, want 3", len(rec))
	}
	for _, r := range rec {
		a, b := tab.Rater(r.A), tab.Rater(r.B)
		for _, c := range []struct {
			name string
			p    Proportion
			want float64
		}{{r.A, r.EffA, effs[a]}, {r.B, r.EffB, effs[b]}} {
			if c.want < c.p.Low || c.want > c.p.High {
				t.Errorf("pair %s/%s: efficiency of %s = %.4f [%.4f, %.4f] misses the known %.2f",
					r.A, r.B, c.name, c.p.Value, c.p.Low, c.p.High, c.want)
			}
		}
		// 2400 true interactions; Chapman N within 3 SE.
		if math.Abs(r.Chapman-2400) > 3*r.ChapmanSE {
			t.Errorf("pair %s/%s: Chapman N = %.0f ± %.0f, true 2400", r.A, r.B, r.Chapman, r.ChapmanSE)
		}
	}
}

func TestBootstrapDeterministic(t *testing.T) {
	raters := []SimRater{
		{Name: "a", Coverage: 1, Confusion: [][]float64{{0.9, 0.1}, {0.2, 0.8}}},
		{Name: "b", Coverage: 0.9, Confusion: [][]float64{{0.8, 0.2}, {0.1, 0.9}}},
	}
	tab, _ := simTable(t, 500, []float64{0.6, 0.4}, raters, 3)
	ctx := context.Background()
	ci1, err := Bootstrap(ctx, tab, Options{Weights: Linear}, 200, 99, 0.95)
	if err != nil {
		t.Fatal(err)
	}
	ci2, _ := Bootstrap(ctx, tab, Options{Weights: Linear}, 200, 99, 0.95)
	if fmt.Sprint(ci1) != fmt.Sprint(ci2) { // NaN ≠ NaN defeats DeepEqual
		t.Errorf("same seed, different intervals: %+v vs %+v", ci1, ci2)
	}
	a, _ := Agree(tab, Options{})
	k := a.Pairs[0].Kappa
	if !(ci1.Kappa[0].Low < k && k < ci1.Kappa[0].High) {
		t.Errorf("kappa %g outside its bootstrap interval %+v", k, ci1.Kappa[0])
	}
	// Fleiss is undefined here (b skips 10%), so its interval is too.
	if !math.IsNaN(ci1.Fleiss.Low) {
		t.Errorf("Fleiss interval %+v, want undefined", ci1.Fleiss)
	}
	// The same with one worker or five: resample i has its own generator.
	for _, w := range []int{1, 5} {
		ciw, _ := bootstrap(ctx, tab, Options{Weights: Linear}, 200, 99, 0.95, w, nil)
		if fmt.Sprint(ciw) != fmt.Sprint(ci1) {
			t.Errorf("%d workers changed the intervals: %+v vs %+v", w, ciw, ci1)
		}
	}
	ci3, _ := Bootstrap(ctx, tab, Options{}, 200, 100, 0.95)
	if reflect.DeepEqual(ci1.Kappa, ci3.Kappa) {
		t.Error("different seeds gave identical intervals")
	}
}

func TestValidate(t *testing.T) {
	// 10 events: consensus signal "cc" on 1–6, "nc" on 7–10. The selection
	// keeps 1–4 (cc) and 7 (nc): efficiency 4/6, purity 4/5.
	cons := map[string]string{}
	var sel []scan.Selection
	for i := 1; i <= 10; i++ {
		id := strconv.Itoa(i)
		cons[id] = "cc"
		if i > 6 {
			cons[id] = "nc"
		}
		keep := i <= 4 || i == 7
		sel = append(sel, scan.Selection{EventID: id, Selected: keep, Class: "cc", Score: float64(11-i) / 10})
	}
	sel = append(sel, scan.Selection{EventID: "99", Selected: true, Class: "cc", Score: 1})
	v, err := Validate(sel, cons, []string{"cc"}, 0.95, ClopperPearson)
	if err != nil {
		t.Fatal(err)
	}
	if v.Efficiency.K != 4 || v.Efficiency.N != 6 || v.Purity.K != 4 || v.Purity.N != 5 {
		t.Errorf("efficiency %d/%d, purity %d/%d; want 4/6, 4/5", v.Efficiency.K, v.Efficiency.N, v.Purity.K, v.Purity.N)
	}
	if !reflect.DeepEqual(v.NoConsensus, []string{"99"}) {
		t.Errorf("no consensus = %v, want [99]", v.NoConsensus)
	}
	// Curve over score ≥ t: scores 1.0 … 0.1; at t = 0.5 the top six
	// events (all cc) pass: efficiency 6/6, purity 6/6; at t = 0.1 all ten.
	for _, p := range v.Curve {
		switch {
		case math.Abs(p.Threshold-0.5) < 1e-9:
			if p.Efficiency.K != 6 || p.Purity.N != 6 {
				t.Errorf("t=0.5: %+v", p)
			}
		case math.Abs(p.Threshold-0.1) < 1e-9:
			if p.Efficiency.K != 6 || p.Purity.N != 10 {
				t.Errorf("t=0.1: %+v", p)
			}
		}
	}
	if len(v.Curve) != 10 {
		t.Errorf("curve has %d points, want 10 distinct scores", len(v.Curve))
	}
	// Class rows: nc has 4 events, 1 selected.
	for _, c := range v.Classes {
		if c.Class == "nc" && (c.Selected.K != 1 || c.Selected.N != 4) {
			t.Errorf("nc row %+v, want 1 of 4 selected", c.Selected)
		}
	}
}

func TestBoxIoU(t *testing.T) {
	box := func(plane detector.Role, w0, t0, w1, t1 float64) scan.Mark {
		return scan.Mark{Kind: scan.MarkBox, Plane: plane, Points: []detector.PlanePoint{{Wire: w0, Tick: t0}, {Wire: w1, Tick: t1}}}
	}
	for _, tc := range []struct {
		name string
		a, b scan.Mark
		iou  float64
		ok   bool
	}{
		// Hand arithmetic: 10×10 boxes overlapping 5×10 → 50/(100+100−50) = 1/3.
		{"half overlap", box("coll", 0, 0, 10, 10), box("coll", 5, 0, 15, 10), 1.0 / 3, true},
		{"corners swapped", box("coll", 10, 10, 0, 0), box("coll", 0, 0, 10, 10), 1, true},
		{"disjoint", box("coll", 0, 0, 1, 1), box("coll", 2, 2, 3, 3), 0, true},
		{"other plane", box("coll", 0, 0, 1, 1), box("ind1", 0, 0, 1, 1), 0, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			iou, ok := BoxIoU(tc.a, tc.b)
			if ok != tc.ok || (ok && math.Abs(iou-tc.iou) > 1e-12) {
				t.Errorf("BoxIoU = %g, %v; want %g, %v", iou, ok, tc.iou, tc.ok)
			}
		})
	}
	// Vertex distance: a 3-4-5 triangle in cm.
	labels := map[string]map[string]scan.Label{"e1": {
		"a": {Vertex3D: &detector.Point{X: 0, Y: 0, Z: 0}, Marks: []scan.Mark{box("coll", 0, 0, 10, 10)}},
		"b": {Vertex3D: &detector.Point{X: 3, Y: 4, Z: 0}, Marks: []scan.Mark{box("coll", 5, 0, 15, 10)}},
	}}
	sp := Spatial(labels, []string{"a", "b"})
	near(t, "vertex distance", sp[0].MeanVertexCm, 5, 1e-12)
	near(t, "IoU", sp[0].MeanIoU, 1.0/3, 1e-12)
}

func TestNewTableErrors(t *testing.T) {
	for _, tc := range []struct {
		name  string
		rs    []Rating
		order []string
		want  string
	}{
		{"rater with no labels", []Rating{{"1", "a", "x"}, {"1", "b", ""}}, nil, `rater "b" has no labels`},
		{"label outside order", []Rating{{"1", "a", "x"}}, []string{"y"}, `label "x" is not in the declared order`},
		{"two labels", []Rating{{"1", "a", "x"}, {"1", "a", "y"}}, nil, "gave two labels"},
		{"empty", nil, nil, "no ratings"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := NewTable(tc.rs, tc.order)
			if err == nil || !contains(err.Error(), tc.want) {
				t.Errorf("err = %v, want %q", err, tc.want)
			}
		})
	}
	tab, _ := NewTable([]Rating{{"1", "a", "x"}, {"1", "b", "x"}}, nil)
	if _, err := Agree(tab, Options{}); err != ErrSingleCategory {
		t.Errorf("single category: err = %v", err)
	}
	tab, _ = NewTable([]Rating{{"1", "a", "x"}, {"1", "b", "y"}}, nil)
	if _, err := Agree(tab, Options{Metric: Interval}); err == nil || !contains(err.Error(), "numeric") {
		t.Errorf("interval on words: err = %v", err)
	}
}

func contains(s, sub string) bool { return strings.Contains(s, sub) }

func TestSummarize(t *testing.T) {
	// Two scanners, the Wikipedia "Cohen's kappa" 2×2 table (from memory:
	// 20 yes/yes, 5 yes/no, 10 no/yes, 15 no/no; κ = 0.4), with "no" as the
	// absent label: n1 = 25, n2 = 30, m = 20.
	var rs []Rating
	add := func(n int, a, b string) {
		for range n {
			id := strconv.Itoa(len(rs))
			rs = append(rs, Rating{id, "a", a}, Rating{id, "b", b})
		}
	}
	add(20, "yes", "yes")
	add(5, "yes", "no")
	add(10, "no", "yes")
	add(15, "no", "no")
	tab, err := NewTable(rs, nil)
	if err != nil {
		t.Fatal(err)
	}
	s := Summarize(tab, []string{"no"})
	near(t, "mean kappa", s.MeanKappa, 0.4, 1e-12)
	near(t, "percent agreement", s.PercentAgreement, 0.7, 1e-12)
	if s.Events != 50 || s.Scanners != 2 || s.Contested != 15 {
		t.Errorf("events %d, scanners %d, contested %d; want 50, 2, 15", s.Events, s.Scanners, s.Contested)
	}
	if len(s.Efficiency) != 1 || s.Efficiency[0].N1 != 25 || s.Efficiency[0].N2 != 30 || s.Efficiency[0].M != 20 {
		t.Errorf("efficiency %+v", s.Efficiency)
	}
}
