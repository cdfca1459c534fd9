package report

import (
	"bytes"
	"context"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"github.com/tpcscan/tpcscan/scan"
)

// demoInput is a small campaign: 3 scanners on 60 events; ana misses
// every tenth interaction, the selection keeps scores ≥ 0.5.
func demoInput() Input {
	classes := []string{"numu-cc", "nc-pi0", "cosmic"}
	var passes []scan.Pass
	var events []scan.CampaignEvent
	for i := range 60 {
		id := fmt.Sprintf("e%02d", i)
		truth := classes[i%3]
		score := float64(i%10) / 10
		events = append(events, scan.CampaignEvent{EventID: id,
			Selection: &scan.Selection{EventID: id, Selected: score >= 0.5, Class: "numu-cc", Score: score}})
		for _, who := range []string{"ana", "ben", "cleo"} {
			label := truth
			if who == "ana" && i%10 == 0 && truth != "cosmic" {
				label = "cosmic"
			}
			if who == "ben" && i%7 == 0 {
				label = "nc-pi0"
			}
			passes = append(passes, scan.Pass{EventID: id, Scanner: who, State: scan.PassSubmitted,
				Seconds: float64(20 + i%13), Label: scan.Label{Class: label}})
		}
	}
	return Input{Campaign: scan.Campaign{Name: "demo <b>", Dataset: "d", Schema: scan.DefaultSchema()},
		Passes: passes, Events: events, Absent: []string{"cosmic"}, Signal: []string{"numu-cc"},
		CL: 0.95, Bootstrap: 50, Seed: 1, Generated: time.Date(2026, 1, 2, 3, 4, 0, 0, time.UTC)}
}

func TestBuildAndWrite(t *testing.T) {
	rep, err := Build(context.Background(), demoInput())
	if err != nil {
		t.Fatal(err)
	}
	var ids []string
	for _, f := range rep.Figures {
		ids = append(ids, f.ID)
		if f.Definition == "" || f.Method == "" {
			t.Errorf("figure %s lacks its definition or method", f.ID)
		}
		for i, s := range f.SVGs {
			if !strings.HasPrefix(string(s), "<svg") {
				t.Errorf("figure %s plot %d is not inline SVG: %.40q", f.ID, i, s)
			}
		}
	}
	if got, want := strings.Join(ids, ","), "kappa,pairs,vs-consensus,efficiency,selection,time"; got != want {
		t.Errorf("figures %s, want %s", got, want)
	}
	var buf bytes.Buffer
	if err := rep.WriteHTML(&buf); err != nil {
		t.Fatal(err)
	}
	page := buf.String()
	for _, want := range []string{
		"Kappa depends on prevalence", "conventions, not tests", "Correlated misses",
		"Clopper–Pearson", "Chapman (1951)", "Dawid &amp; Skene (1979)", "demo &lt;b&gt;",
	} {
		if !strings.Contains(page, want) {
			t.Errorf("page lacks %q", want)
		}
	}
	for _, bad := range []string{"<script", "demo <b>"} { // no scripts; names escaped
		if strings.Contains(page, bad) {
			t.Errorf("page contains %q", bad)
		}
	}
	// Self-contained: no external resource may be loaded (the SVG
	// namespace URI is an identifier, not a fetch).
	for _, attr := range []string{`src="http`, `href="http`, "@import", "url(http"} {
		if strings.Contains(page, attr) {
			t.Errorf("page loads an external resource: %q", attr)
		}
	}
}

func TestBuildHeadlineNumbers(t *testing.T) {
	rep, err := Build(context.Background(), demoInput())
	if err != nil {
		t.Fatal(err)
	}
	kv := map[string]string{}
	for _, s := range rep.Stats {
		kv[s.Key] = s.Value
	}
	// The selection keeps scores 0.5–0.9 (half the events). The consensus
	// (Dawid–Skene over three scanners) restores the truth: 20 numu-cc
	// events, of which those with i%10 ≥ 5 are kept: 10 of 20; purity 10/30.
	if !strings.Contains(kv["selection efficiency"], "(10/20)") || !strings.Contains(kv["selection purity"], "(10/30)") {
		t.Errorf("selection: %q, %q", kv["selection efficiency"], kv["selection purity"])
	}
	if kv["scanners"] != "3" || kv["submitted passes"] != "180" {
		t.Errorf("stats = %v", kv)
	}
}

func TestEmptyCampaign(t *testing.T) {
	in := demoInput()
	in.Passes = nil
	rep, err := Build(context.Background(), in)
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Figures) != 0 || len(rep.Notes) == 0 {
		t.Errorf("empty campaign: %d figures, notes %v", len(rep.Figures), rep.Notes)
	}
}

func TestRampIsMonotoneInLightness(t *testing.T) {
	// Colour-blind safety by construction: lightness must fall strictly
	// along the ramp (relative luminance, ITU-R BT.709 weights on linear
	// sRGB, common practice).
	prev := math.Inf(1)
	for i := 0; i <= 50; i++ {
		c, _ := ramp(float64(i) / 50)
		r, g, b, _ := c.RGBA()
		lum := 0.2126*lin(r) + 0.7152*lin(g) + 0.0722*lin(b)
		if lum >= prev {
			t.Fatalf("step %d: luminance %.4f does not fall (previous %.4f)", i, lum, prev)
		}
		prev = lum
	}
}

func lin(v uint32) float64 {
	c := float64(v) / 0xffff
	if c <= 0.04045 {
		return c / 12.92
	}
	return math.Pow((c+0.055)/1.055, 2.4)
}
