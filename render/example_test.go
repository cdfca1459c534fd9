package render_test

import (
	"fmt"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
)

// One frame: sample a window of a plane from its pyramid, paint it, write
// it out. A 64-wire × 64-tick plane with one track along a diagonal, shown
// whole in 16 × 8 cells of the mono tier.
func Example() {
	img := scan.NewImage(64, 64)
	for w := range 64 {
		img.Set(w, w, 40)
	}
	pyr := render.NewPyramid(img)
	tier := render.TierMono
	px, py := render.PixelsPerCell(tier)
	g := &render.Grid{W: 16 * px, H: 8 * py}
	pyr.Sample(g, render.Window{WiresPerPx: 64.0 / 16, TicksPerPx: 64.0 / 8}, render.ReduceMax)
	c := render.NewCanvas(16, 8)
	render.Paint(c, 0, 0, g, render.Scales()[0], render.AutoRange(img, render.DefaultLoPct, render.DefaultHiPct), tier)
	for _, line := range c.Lines(tier) {
		fmt.Printf("|%s|\n", line)
	}
	// Output:
	// |@@              |
	// |  @@            |
	// |    @@          |
	// |      @@        |
	// |        @@      |
	// |          @@    |
	// |            @@  |
	// |              @@|
}
