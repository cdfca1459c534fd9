package ui

import (
	"regexp"
	"strconv"
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"
	"github.com/tpcscan/tpcscan/render"
)

// With a calibration the legend gains a MeV row whose labels are the ADC
// labels times the calibration; without one it shows ADC only.
func TestLegendMeVRow(t *testing.T) {
	const mev = 0.5
	for _, c := range []struct {
		name string
		cal  float64
		want bool
	}{{"no calibration", 0, false}, {"calibrated", mev, true}} {
		m := New(Options{Source: newSynthSource(1, 400), Tier: render.Tier256, MeVPerADC: c.cal})
		send(t, m, tea.WindowSizeMsg{Width: 160, Height: 48})
		run(t, m, m.Init())
		lines := strings.Split(ansi.Strip(m.View()), "\n")
		adc, mevRow := -1, -1
		for i, l := range lines {
			if strings.HasSuffix(strings.TrimSpace(l), "ADC") {
				adc = i
			}
			if strings.HasSuffix(strings.TrimSpace(l), "MeV") {
				mevRow = i
			}
		}
		if adc < 0 {
			t.Fatalf("%s: no ADC legend row", c.name)
		}
		if got := mevRow >= 0; got != c.want {
			t.Fatalf("%s: MeV row shown = %v, want %v", c.name, got, c.want)
		}
		if !c.want {
			continue
		}
		num := regexp.MustCompile(`[0-9][0-9.]*(e[+-]?[0-9]+)?`)
		a := num.FindAllString(lines[adc], -1)
		e := num.FindAllString(lines[mevRow], -1)
		if len(a) == 0 || len(a) != len(e) {
			t.Fatalf("ADC labels %v and MeV labels %v do not pair up", a, e)
		}
		for k := range a {
			x, _ := strconv.ParseFloat(a[k], 64)
			y, _ := strconv.ParseFloat(e[k], 64)
			if d := y - x*mev; d > 0.01*x*mev+1e-9 || -d > 0.01*x*mev+1e-9 {
				t.Errorf("label %d: %g ADC shown as %g MeV, want %g", k, x, y, x*mev)
			}
		}
	}
}
