package ui

import (
	"fmt"
	"math"
	"sync"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
)

// Source is where the station gets its events: a dataset's event IDs in
// order and a loader. *dataset.Dataset is adapted by DatasetSource.
type Source interface {
	EventIDs() []string
	Load(id string) (*scan.Event, error)
}

// prepared is an event ready to draw: its pyramids (built once) and each
// plane's automatic charge range.
type prepared struct {
	ev    *scan.Event
	pyr   []*render.Pyramid
	rng   []render.Range
	tick0 float64 // first detector tick any plane covers
	tick1 float64 // one past the last
	peak  []point // each plane's highest sample, where the cursor starts
}

// Charge percentiles for the automatic colour range (common practice:
// a median floor keeps noise dark, a high percentile keeps tracks from
// saturating).
const autoLoPct, autoHiPct = 50, 99.5

// prepare builds the pyramids of an event. It is pure CPU work and runs
// inside a tea.Cmd.
func prepare(ev *scan.Event) (*prepared, error) {
	if err := ev.Validate(); err != nil {
		return nil, err
	}
	n := len(ev.Planes)
	p := &prepared{ev: ev, tick0: math.Inf(1), tick1: math.Inf(-1),
		pyr: make([]*render.Pyramid, n), rng: make([]render.Range, n), peak: make([]point, n)}
	// Planes are independent: build them on all cores.
	var wg sync.WaitGroup
	for i, img := range ev.Planes {
		wg.Go(func() {
			p.pyr[i] = render.NewPyramid(img)
			p.rng[i] = autoRange(img)
			p.peak[i] = peakOf(i, img, p.pyr[i])
		})
		p.tick0 = math.Min(p.tick0, float64(img.Tick0))
		p.tick1 = math.Max(p.tick1, float64(img.Tick0+img.Ticks))
	}
	wg.Wait()
	if p.tick1 <= p.tick0 {
		p.tick0, p.tick1 = 0, float64(ev.Detector.ReadoutTicks)
	}
	return p, nil
}

// autoRange is render.AutoRange with a usable fallback for empty planes.
func autoRange(img *scan.Image) render.Range {
	if img.Wires == 0 || img.Ticks == 0 {
		return render.Range{Lo: 0, Hi: 1}
	}
	r := render.AutoRange(img, autoLoPct, autoHiPct)
	if !(r.Hi > r.Lo) {
		r.Hi = r.Lo + 1
	}
	return r
}

// loadEvent loads and prepares one event.
func loadEvent(src Source, id string) (*prepared, error) {
	ev, err := src.Load(id)
	if err != nil {
		return nil, fmt.Errorf("load event %s: %w", id, err)
	}
	p, err := prepare(ev)
	if err != nil {
		return nil, fmt.Errorf("load event %s: %w", id, err)
	}
	return p, nil
}

// peakOf finds the plane's highest sample (detector coordinates, the
// centre of the sample) through its pyramid: the brightest block of a
// coarse 64×64 max sampling, then the brightest sample inside it, so the
// cost does not grow with the plane. An empty plane gives its middle.
func peakOf(i int, img *scan.Image, pyr *render.Pyramid) point {
	mid := point{Plane: i, Wire: float64(img.Wire0) + float64(img.Wires)/2, Tick: float64(img.Tick0) + float64(img.Ticks)/2}
	if img.Wires == 0 || img.Ticks == 0 {
		return mid
	}
	const n = 64
	win := render.Window{WiresPerPx: float64(img.Wires) / n, TicksPerPx: float64(img.Ticks) / n}
	g := render.Grid{W: n, H: n}
	pyr.Sample(&g, win, render.ReduceMax)
	col, row, ok := argmax(&g)
	if !ok {
		return mid
	}
	// The pyramid's blocks need not align with the grid's: search the
	// neighbouring cells too.
	w0, t0 := max(int(float64(col-1)*win.WiresPerPx), 0), max(int(float64(row-1)*win.TicksPerPx), 0)
	w1 := min(int(math.Ceil(float64(col+2)*win.WiresPerPx)), img.Wires)
	t1 := min(int(math.Ceil(float64(row+2)*win.TicksPerPx)), img.Ticks)
	best, bw, bt := float32(math.Inf(-1)), -1, -1
	for w := w0; w < w1; w++ {
		r := img.Row(w)
		for t := t0; t < t1; t++ {
			if r[t] > best {
				best, bw, bt = r[t], w, t
			}
		}
	}
	if bw < 0 {
		return mid
	}
	return point{Plane: i, Wire: float64(img.Wire0+bw) + 0.5, Tick: float64(img.Tick0+bt) + 0.5}
}

// argmax returns the grid cell with the highest value, skipping NaN.
func argmax(g *render.Grid) (col, row int, ok bool) {
	best := float32(math.Inf(-1))
	for k, v := range g.Pix[:g.W*g.H] {
		if v > best {
			best, col, row, ok = v, k%g.W, k/g.W, true
		}
	}
	return col, row, ok
}
