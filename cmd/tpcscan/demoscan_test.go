package main

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
	"github.com/tpcscan/tpcscan/store/sqlite"
)

// demoCampaign makes an SQLite campaign of n events that every scanner
// sees (K = 3), with a generated-looking truth: 20% cosmic only, the rest
// spread over the neutrino classes, and a selection that keeps νμ CC with
// score = truth-dependent.
func demoCampaign(t *testing.T, n int) (string, scan.Campaign, map[string]string) {
	t.Helper()
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "demo.db")
	st, err := sqlite.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	mix := []string{"numu-cc", "numu-cc", "numu-cc", "nue-cc", "nc-pi0", "nc-other", "nc-other", "cosmic", "cosmic", "numu-cc"}
	truth := map[string]string{}
	var evs []scan.CampaignEvent
	for i := range n {
		id := fmt.Sprintf("ev%04d", i)
		truth[id] = mix[i%len(mix)]
		score := float64((i*37)%100) / 100
		if truth[id] == "numu-cc" {
			score = 0.5 + score/2
		}
		evs = append(evs, scan.CampaignEvent{EventID: id,
			Selection: &scan.Selection{EventID: id, Selected: score >= 0.6, Class: "numu-cc", Score: score}})
	}
	c := scan.Campaign{Name: "demo", Dataset: "unused", Mode: scan.ModeLabel, PerEvent: 3, Seed: 5, Schema: scan.DefaultSchema()}
	if c.ID, err = st.CreateCampaign(ctx, c, evs); err != nil {
		t.Fatal(err)
	}
	return path, c, truth
}

// TestDemoScanRecovery is the "done when": simulated scanners with
// known efficiency and accuracy fill a campaign; the efficiency command
// recovers each efficiency within its 95% Clopper–Pearson interval and the
// Dawid–Skene consensus recovers each scanner's accuracy on interactions.
func TestDemoScanRecovery(t *testing.T) {
	ctx := context.Background()
	path, c, truth := demoCampaign(t, 400)
	scanners, err := parseSimScanners("ana:0.95:0.9,ben:0.85:0.8:45,cleo:0.75:0.95:20")
	if err != nil {
		t.Fatal(err)
	}
	st, c, err := openCampaign(ctx, path, "demo")
	if err != nil {
		t.Fatal(err)
	}
	n, err := simulateScans(ctx, st, c, truth, scanners, "cosmic", 11, nil)
	st.Close()
	if err != nil {
		t.Fatal(err)
	}
	if n != 3*400 {
		t.Fatalf("%d passes submitted, want %d", n, 3*400)
	}
	m := runJSON(t, "efficiency", "--db", path, "--absent", "cosmic")
	eff := map[string]float64{"ana": 0.95, "ben": 0.85, "cleo": 0.75}
	for _, p := range m["pairs"].([]any) {
		pr := p.(map[string]any)
		for _, side := range []string{"a", "b"} {
			name := pr[side].(string)
			iv := pr["efficiency_"+side+"_interval"].([]any)
			lo, hi := iv[0].(float64), iv[1].(float64)
			if eff[name] < lo || eff[name] > hi {
				t.Errorf("pair %v/%v: %s's efficiency %v [%v, %v] misses the known %v", pr["a"], pr["b"], name, pr["efficiency_"+side], lo, hi, eff[name])
			}
		}
		// 320 real interactions; Chapman within 3 standard errors.
		if ch, se := pr["chapman"].(float64), pr["chapman_se"].(float64); math.Abs(ch-320) > 3*se {
			t.Errorf("pair %v/%v: Chapman %v ± %v, true 320", pr["a"], pr["b"], ch, se)
		}
	}
	// Dawid–Skene: the diagonal of each scanner's confusion on νμ CC is
	// eff·acc; check it within 4σ of a binomial on the ~160 νμ CC events.
	m = runJSON(t, "consensus", "--db", path, "--method", "dawid-skene")
	cats := m["categories"].([]any)
	k := -1
	for i, cat := range cats {
		if cat == "numu-cc" {
			k = i
		}
	}
	acc := map[string]float64{"ana": 0.9, "ben": 0.8, "cleo": 0.95}
	for _, r := range m["raters"].([]any) {
		rq := r.(map[string]any)
		name := rq["rater"].(string)
		want := eff[name] * acc[name]
		got := rq["confusion"].([]any)[k].([]any)[k].(float64)
		if sigma := math.Sqrt(want * (1 - want) / 160); math.Abs(got-want) > 4*sigma {
			t.Errorf("%s: π[numu-cc][numu-cc] = %.3f, known %.3f (4σ = %.3f)", name, got, want, 4*sigma)
		}
	}
	if stored := m["stored"].(float64); stored < 350 {
		t.Errorf("stored %v consensus labels, want most of 400", stored)
	}
}

// TestDemoScanDeterministic: the same seed gives the same labels, whatever
// order the store hands out events in.
func TestDemoScanDeterministic(t *testing.T) {
	ctx := context.Background()
	scanners, _ := parseSimScanners("ana:0.9:0.9,ben:0.8:0.7")
	var outs []string
	for range 2 {
		path, _, truth := demoCampaign(t, 40)
		st, c, err := openCampaign(ctx, path, "")
		if err != nil {
			t.Fatal(err)
		}
		if _, err := simulateScans(ctx, st, c, truth, scanners, "cosmic", 11, nil); err != nil {
			t.Fatal(err)
		}
		st.Close()
		out, err := runForTest(t, "consensus", "--db", path, "--json", "--dry-run")
		if err != nil {
			t.Fatal(err)
		}
		outs = append(outs, out)
	}
	if outs[0] != outs[1] || !strings.Contains(outs[0], `"posterior"`) {
		t.Errorf("same seed, different labels:\n%s\n%s", outs[0], outs[1])
	}
}

func TestParseSimScanners(t *testing.T) {
	for _, tc := range []struct{ in, want string }{
		{"ana:0.9", "want NAME:EFFICIENCY:ACCURACY"},
		{"ana:1.2:0.9", "in [0, 1]"},
		{"ana:x:0.9", `"x" is not a number`},
		{"ana:0.9:0.9,ana:0.8:0.8", "given twice"},
		{"", "no scanner"},
	} {
		if _, err := parseSimScanners(tc.in); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%q: err = %v, want %q", tc.in, err, tc.want)
		}
	}
}

// TestReportCommand: demo-scan then report writes one self-contained page
// whose headline and every figure are there.
func TestReportCommand(t *testing.T) {
	ctx := context.Background()
	path, _, truth := demoCampaign(t, 90)
	scanners, _ := parseSimScanners("ana:0.95:0.9,ben:0.85:0.8:45,cleo:0.75:0.95:20")
	st, c, err := openCampaign(ctx, path, "")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := simulateScans(ctx, st, c, truth, scanners, "cosmic", 2, nil); err != nil {
		t.Fatal(err)
	}
	st.Close()
	dir := filepath.Join(t.TempDir(), "out")
	out, err := runForTest(t, "report", "--db", path, "--out", dir, "--bootstrap", "20", "--signal", "numu-cc")
	if err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	page, err := os.ReadFile(filepath.Join(dir, "index.html"))
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{`id="kappa"`, `id="pairs"`, `id="vs-consensus"`, `id="efficiency"`, `id="selection"`, `id="time"`, "<svg", "selection efficiency"} {
		if !strings.Contains(string(page), want) {
			t.Errorf("report lacks %q", want)
		}
	}
	if !strings.Contains(out, "(6 figures)") {
		t.Errorf("output %q", out)
	}
}

// TestAgreeSpatial: two scanners' boxes and vertices on one event; hand
// arithmetic: 10×10 boxes overlapping 5×10 → IoU 50/150 = 1/3; vertices
// (0,0,0) and (3,4,0) cm → 5 cm.
func TestAgreeSpatial(t *testing.T) {
	ctx := context.Background()
	path, _, _ := demoCampaign(t, 2)
	st, c, err := openCampaign(ctx, path, "")
	if err != nil {
		t.Fatal(err)
	}
	box := func(w0 float64) scan.Mark {
		return scan.Mark{Kind: scan.MarkBox, Plane: detector.Collection,
			Points: []detector.PlanePoint{{Wire: w0, Tick: 100}, {Wire: w0 + 10, Tick: 110}}}
	}
	marks := map[string]scan.Label{
		"ana": {Class: "numu-cc", Confidence: "3", Marks: []scan.Mark{box(0)}, Vertex3D: &detector.Point{}},
		"ben": {Class: "nue-cc", Confidence: "3", Marks: []scan.Mark{box(5)}, Vertex3D: &detector.Point{X: 3, Y: 4}},
	}
	for _, who := range []string{"ana", "ben"} {
		for range 2 {
			p, err := st.NextPass(ctx, c.ID, who)
			if err != nil {
				t.Fatal(err)
			}
			l := marks[who]
			if p.EventID != "ev0000" {
				l = scan.Label{Class: "cosmic", Confidence: "3"}
			}
			if _, err := st.SaveRevision(ctx, p.ID, who, scan.Revision{State: scan.PassSubmitted, Label: l, Seconds: 10}); err != nil {
				t.Fatal(err)
			}
		}
	}
	st.Close()
	m := runJSON(t, "agree", "--db", path)
	sp := m["spatial"].([]any)[0].(map[string]any)
	if sp["boxes"] != 1.0 || math.Abs(sp["mean_iou"].(float64)-1.0/3) > 1e-12 || sp["mean_vertex_distance_cm"] != 5.0 {
		t.Errorf("spatial = %v", sp)
	}
}

func FuzzParseSimScanners(f *testing.F) {
	for _, s := range []string{"ana:0.95:0.9", "ana:0.95:0.9:30,ben:0.8:0.7", "a:1:1:1e-3", ":::", "x:NaN:0.5", ","} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		sc, err := parseSimScanners(s)
		if err != nil {
			return
		}
		for _, x := range sc {
			if x.name == "" || !(x.eff >= 0 && x.eff <= 1) || !(x.acc >= 0 && x.acc <= 1) || !(x.sec > 0) {
				t.Fatalf("accepted %q as %+v", s, x)
			}
		}
	})
}

// TestAgreeConfidenceField: demo-scan gives the highest confidence to a
// right answer and the middle one to a wrong one; the confidence field is
// ordinal on the schema's full declared scale (1, 2, 3, level 1 unused).
func TestAgreeConfidenceField(t *testing.T) {
	ctx := context.Background()
	path, _, truth := demoCampaign(t, 40)
	scanners, _ := parseSimScanners("ana:0.9:0.8,ben:0.8:0.7")
	st, c, err := openCampaign(ctx, path, "")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := simulateScans(ctx, st, c, truth, scanners, "cosmic", 4, nil); err != nil {
		t.Fatal(err)
	}
	st.Close()
	m := runJSON(t, "agree", "--db", path, "--field", "confidence", "--weights", "quadratic", "--metric", "ordinal")
	if cats := fmt.Sprint(m["categories"]); cats != "[1 2 3]" {
		t.Errorf("categories %s, want the declared scale [1 2 3]", cats)
	}
	p := m["pairwise"].([]any)[0].(map[string]any)
	if _, ok := p["weighted_kappa"].(float64); !ok {
		t.Errorf("weighted_kappa = %v", p["weighted_kappa"])
	}
	if _, err := runForTest(t, "agree", "--labels", labelsFixture("double_scan.csv"), "--field", "confidence"); err == nil || !strings.Contains(err.Error(), "--field needs --db") {
		t.Errorf("--field with --labels: err = %v", err)
	}
}
