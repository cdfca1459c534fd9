package main

import (
	"encoding/json"
	"math"
	"path/filepath"
	"strings"
	"testing"
)

func labelsFixture(name string) string { return filepath.Join("..", "..", "testdata", "labels", name) }

// runJSON runs a command with --json and decodes its output.
func runJSON(t *testing.T, args ...string) map[string]any {
	t.Helper()
	out, err := runForTest(t, append(args, "--json")...)
	if err != nil {
		t.Fatalf("%v: %v\n%s", args, err, out)
	}
	var m map[string]any
	if err := json.Unmarshal([]byte(out), &m); err != nil {
		t.Fatalf("%v: output is not JSON: %v\n%s", args, err, out)
	}
	return m
}

func TestAgreeCommandJSON(t *testing.T) {
	// Fleiss (1971) worked example: κ = 5437/12637 (statsmodels 0.13.5).
	m := runJSON(t, "agree", "--labels", labelsFixture("fleiss1971.csv"))
	if k := m["fleiss_kappa"].(float64); math.Abs(k-5437.0/12637) > 1e-12 {
		t.Errorf("fleiss_kappa = %v", k)
	}
	if m["items"].(float64) != 30 || len(m["raters"].([]any)) != 6 || len(m["categories"].([]any)) != 5 {
		t.Errorf("items/raters/categories = %v/%v/%v", m["items"], m["raters"], m["categories"])
	}
	p := m["pairwise"].([]any)[0].(map[string]any)
	for _, key := range []string{"a", "b", "items", "percent_agreement", "cohen_kappa"} {
		if _, ok := p[key]; !ok {
			t.Errorf("pairwise entry lacks %q: %v", key, p)
		}
	}
	if _, ok := p["weighted_kappa"]; ok {
		t.Error("weighted_kappa present without --weights")
	}

	// Krippendorff (2011) worked example, interval metric: 0.849 (exact
	// 0.8491071428571428); ratings per unit differ, so Fleiss is null.
	m = runJSON(t, "agree", "--labels", labelsFixture("krippendorff2011.csv"), "--metric", "interval",
		"--weights", "quadratic", "--bootstrap", "50", "--seed", "3")
	if a := m["krippendorff_alpha"].(float64); math.Abs(a-0.8491071428571428) > 1e-9 {
		t.Errorf("krippendorff_alpha = %v", a)
	}
	if m["fleiss_kappa"] != nil || m["metric"] != "interval" {
		t.Errorf("fleiss_kappa = %v, metric = %v; want null, interval", m["fleiss_kappa"], m["metric"])
	}
	p = m["pairwise"].([]any)[0].(map[string]any)
	if _, ok := p["weighted_kappa"].(float64); !ok {
		t.Errorf("weighted_kappa missing: %v", p)
	}
	if ci, ok := p["cohen_kappa_ci"].([]any); !ok || len(ci) != 2 {
		t.Errorf("cohen_kappa_ci = %v", p["cohen_kappa_ci"])
	}
	if m["intervals"].(map[string]any)["fleiss_kappa"].([]any)[0] != nil {
		t.Error("an undefined Fleiss' kappa got a bootstrap interval")
	}
}

func TestAgreeCommandTable(t *testing.T) {
	out, err := runForTest(t, "agree", "--labels", labelsFixture("krippendorff2011.csv"), "--metric", "ordinal")
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"12 events, 4 scanners, 5 categories", "Krippendorff's alpha (ordinal)  0.815", "Fleiss' kappa", "undefined"} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q:\n%s", want, out)
		}
	}
}

func TestAgreeCommandErrors(t *testing.T) {
	for _, tc := range []struct {
		name string
		args []string
		want string
	}{
		{"unknown column", []string{"agree", "--labels", labelsFixture("unknown_column.csv")}, `unknown column "colour"`},
		{"rater without labels", []string{"agree", "--labels", labelsFixture("rater_without_labels.csv")}, `rater "b" has no labels`},
		{"single category", []string{"agree", "--labels", labelsFixture("single_category.csv")}, "only one category"},
		{"interval on words", []string{"agree", "--labels", labelsFixture("double_scan.csv"), "--metric", "interval"}, `needs numeric labels; got "nc-pi0"`},
		{"weights without order", []string{"agree", "--labels", labelsFixture("double_scan.csv"), "--weights", "linear"}, "need an ordered scale"},
		{"label outside order", []string{"agree", "--labels", labelsFixture("double_scan.csv"), "--order", "none,numu-cc"}, `label "nc-pi0" is not in the declared order`},
		{"no input", []string{"agree"}, "exactly one of --labels"},
		{"both inputs", []string{"agree", "--labels", "a.csv", "--db", "b.db"}, "exactly one of --labels"},
		{"missing file", []string{"agree", "--labels", "nope.csv"}, "read labels"},
		{"bad metric", []string{"agree", "--labels", "a.csv", "--metric", "cubic"}, `unknown metric "cubic"`},
		{"efficiency without absent", []string{"efficiency", "--labels", labelsFixture("double_scan.csv")}, "--absent"},
		{"bad cl", []string{"efficiency", "--labels", labelsFixture("double_scan.csv"), "--absent", "none", "--cl", "95"}, "between 0 and 1"},
		{"bad method", []string{"consensus", "--labels", labelsFixture("double_scan.csv"), "--method", "vote"}, `unknown --method "vote"`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := runForTest(t, tc.args...)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("err = %v, want it to contain %q", err, tc.want)
			}
		})
	}
}

func TestAgreeMedianSeconds(t *testing.T) {
	// double_scan.csv times: ana 31…42 s (median (36+37)/2 = 36.5),
	// ben 22…44 s in steps of 2 (median (32+34)/2 = 33).
	m := runJSON(t, "agree", "--labels", labelsFixture("double_scan.csv"))
	ms := m["median_seconds_per_item"].(map[string]any)
	if ms["ana"] != 36.5 || ms["ben"] != 33.0 {
		t.Errorf("median seconds = %v, want ana 36.5, ben 33", ms)
	}
}

func TestEfficiencyCommandJSON(t *testing.T) {
	// double_scan.csv: ana finds e1–e8 (8), ben e3–e10 (8), both e3–e8 (6)
	// of 12 events. Hand arithmetic: Lincoln–Petersen 8·8/6 = 32/3;
	// Chapman 9·9/7 − 1 = 74/7; Seber variance 9·9·2·2/(7²·8) = 324/392;
	// efficiency of ana = 6/8 (m/n_ben); combined = (8+8−6)/(32/3) = 15/16.
	m := runJSON(t, "efficiency", "--labels", labelsFixture("double_scan.csv"), "--absent", "none")
	p := m["pairs"].([]any)[0].(map[string]any)
	for key, want := range map[string]float64{
		"found_a": 8, "found_b": 8, "found_both": 6, "lincoln_petersen": 32.0 / 3, "chapman": 74.0 / 7,
		"chapman_se": math.Sqrt(324.0 / 392), "efficiency_a": 0.75, "efficiency_b": 0.75, "efficiency_combined": 15.0 / 16,
	} {
		got, ok := p[key].(float64)
		if !ok || math.Abs(got-want) > 1e-12 {
			t.Errorf("%s = %v, want %v", key, p[key], want)
		}
	}
	if p["a"] != "ana" || p["b"] != "ben" {
		t.Errorf("pair = %v/%v", p["a"], p["b"])
	}
}

func TestConsensusCommandJSON(t *testing.T) {
	m := runJSON(t, "consensus", "--labels", labelsFixture("double_scan.csv"), "--method", "majority")
	items := m["items"].([]any)
	if len(items) != 12 {
		t.Fatalf("%d items, want 12", len(items))
	}
	byItem := map[string]map[string]any{}
	for _, it := range items {
		e := it.(map[string]any)
		byItem[e["item"].(string)] = e
	}
	// e3: both numu-cc → label numu-cc, posterior 1; e1: ana numu-cc, ben
	// none → tied, label null, posterior 0.5; e11: both none.
	if byItem["e3"]["label"] != "numu-cc" || byItem["e3"]["posterior"] != 1.0 {
		t.Errorf("e3 = %v", byItem["e3"])
	}
	if byItem["e1"]["label"] != nil || byItem["e1"]["posterior"] != 0.5 {
		t.Errorf("e1 = %v, want a tie", byItem["e1"])
	}
	if len(m["adjudicate"].([]any)) != 6 { // e1, e2, e4, e5, e9, e10
		t.Errorf("adjudicate = %v", m["adjudicate"])
	}
	r := m["raters"].([]any)[0].(map[string]any)
	if r["rater"] != "ana" || r["accuracy"].(float64) != 1 {
		t.Errorf("rater = %v (ana agrees with every untied majority)", r)
	}
	m = runJSON(t, "consensus", "--labels", labelsFixture("krippendorff2011.csv"), "--method", "dawid-skene")
	if m["converged"] != true || len(m["raters"].([]any)) != 4 {
		t.Errorf("dawid-skene: converged %v, raters %d", m["converged"], len(m["raters"].([]any)))
	}
}

func TestValidateCommandJSON(t *testing.T) {
	// Majority consensus of double_scan.csv: numu-cc on e3, e6, e7, e8,
	// none on e11, e12; the other six are tied and left out. The selection
	// keeps e3, e6, e8 (numu-cc) and e12 (none): efficiency 3/4, purity 3/4.
	// Wilson 95% for 3/4, by hand with z = 1.959964: centre
	// (0.75 + z²/8)/(1 + z²/4) = 0.62753, half-width
	// z·√(0.75·0.25/4 + z²/64)/(1 + z²/4) = 0.32689.
	m := runJSON(t, "validate", "--labels", labelsFixture("double_scan.csv"), "--selection", labelsFixture("selection.csv"),
		"--signal", "numu-cc", "--interval", "wilson")
	eff := m["efficiency"].(map[string]any)
	pur := m["purity"].(map[string]any)
	if eff["k"] != 3.0 || eff["n"] != 4.0 || pur["k"] != 3.0 || pur["n"] != 4.0 {
		t.Errorf("efficiency %v, purity %v; want 3/4 and 3/4", eff, pur)
	}
	if lo, hi := eff["low"].(float64), eff["high"].(float64); math.Abs(lo-0.30064) > 1e-4 || math.Abs(hi-0.95441) > 1e-4 {
		t.Errorf("Wilson interval [%v, %v], want [0.30064, 0.95441]", lo, hi)
	}
	if m["events"] != 6.0 || m["events_without_consensus"] != 6.0 {
		t.Errorf("events %v, without consensus %v; want 6 and 6", m["events"], m["events_without_consensus"])
	}
	if c := m["curve"].([]any); len(c) != 6 {
		t.Errorf("curve has %d points, want 6 distinct scores", len(c))
	}
	// Clopper–Pearson is the default.
	m = runJSON(t, "validate", "--labels", labelsFixture("double_scan.csv"), "--selection", labelsFixture("selection.csv"), "--signal", "numu-cc")
	if m["interval"] != "clopper-pearson" {
		t.Errorf("default interval %v", m["interval"])
	}
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"validate", "--labels", labelsFixture("double_scan.csv"), "--selection", labelsFixture("selection.csv")}, "--signal"},
		{[]string{"validate", "--labels", labelsFixture("double_scan.csv"), "--signal", "numu-cc"}, "--selection"},
		{[]string{"validate", "--labels", labelsFixture("double_scan.csv"), "--selection", labelsFixture("double_scan.csv"), "--signal", "x"}, "double_scan.csv"},
	} {
		if _, err := runForTest(t, tc.args...); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%v: err = %v, want %q", tc.args[1:], err, tc.want)
		}
	}
}
