package render

import (
	"math"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
)

// bruteSample computes one pixel straight from the image: the level cells
// Sample assigns to it, each expanded to its block × block samples.
func bruteSample(img *scan.Image, win Window, block, i, j int, r Reduce) float32 {
	b := float64(block)
	lw := (img.Wires + block - 1) / block
	lt := (img.Ticks + block - 1) / block
	cs := spans(make([]span, i+1), win.Wire0/b, win.WiresPerPx/b, lw)[i]
	rs := spans(make([]span, j+1), win.Tick0/b, win.TicksPerPx/b, lt)[j]
	if cs.a >= cs.b || rs.a >= rs.b {
		return float32(math.NaN())
	}
	acc := float32(math.Inf(-1))
	if r == ReduceSum {
		acc = 0
	}
	for w := int(cs.a) * block; w < min(int(cs.b)*block, img.Wires); w++ {
		for t := int(rs.a) * block; t < min(int(rs.b)*block, img.Ticks); t++ {
			if r == ReduceSum {
				acc += img.At(w, t)
			} else {
				acc = max(acc, img.At(w, t))
			}
		}
	}
	return acc
}

// wantBlock is the block size Sample should read for a window: the
// largest of 1, 4, 8, 16, … not above the window's pixel size.
func wantBlock(win Window, levels int) int {
	s := min(win.WiresPerPx, win.TicksPerPx)
	b := 1
	for next, n := 4, 1; n < levels && float64(next) <= s; next, n = next*2, n+1 {
		b = next
	}
	return b
}

func TestSampleMatchesBruteForce(t *testing.T) {
	img := synthPlane(203, 517, 7) // odd sizes exercise short edge blocks
	p := NewPyramid(img)
	windows := map[string]Window{
		"whole, aligned":   {0, 0, 4, 8},
		"whole, unaligned": {-3.3, -10.7, 2.9, 6.1},
		"zoom-in":          {50.2, 100.7, 0.37, 0.61},
		"one sample":       {10, 10, 1, 1},
		"anisotropic":      {0, 0, 13.5, 1.3},
		"past the edges":   {150, 400, 5, 7},
		"huge blocks":      {-100, -100, 300, 900},
	}
	for name, win := range windows {
		for _, r := range []Reduce{ReduceMax, ReduceSum} {
			g := Grid{W: 40, H: 60}
			p.Sample(&g, win, r)
			block := wantBlock(win, len(p.levels))
			if got := p.levelFor(win).block; got != block {
				t.Fatalf("%s: reads blocks of %d, want %d", name, got, block)
			}
			for j := range g.H {
				for i := range g.W {
					want := bruteSample(img, win, block, i, j, r)
					got := g.Pix[j*g.W+i]
					if math.IsNaN(float64(want)) != math.IsNaN(float64(got)) ||
						math.Abs(float64(got-want)) > 1e-3*math.Max(1, math.Abs(float64(want))) {
						t.Fatalf("%s, reduce %d: pixel (%d,%d) = %g, brute force %g", name, r, i, j, got, want)
					}
				}
			}
		}
	}
}

// Charge conservation is the definition of ReduceSum: over a window that
// covers the image, the pixels add up to the image total.
func TestSumConservesCharge(t *testing.T) {
	img := synthPlane(301, 777, 3)
	var total float64
	for _, v := range img.Pix {
		total += float64(v)
	}
	p := NewPyramid(img)
	for _, win := range []Window{{0, 0, 1, 1}, {-0.5, -2.5, 3.7, 9.1}, {-7, -7, 16.3, 40.2}, {0, 0, 301, 777}} {
		w := int(math.Ceil((float64(img.Wires)-win.Wire0)/win.WiresPerPx)) + 1
		h := int(math.Ceil((float64(img.Ticks)-win.Tick0)/win.TicksPerPx)) + 1
		g := Grid{W: w, H: h}
		p.Sample(&g, win, ReduceSum)
		var sum float64
		for _, v := range g.Pix {
			if !math.IsNaN(float64(v)) {
				sum += float64(v)
			}
		}
		if math.Abs(sum-total) > 1e-3*math.Abs(total)+1 {
			t.Errorf("window %+v: pixels sum to %.1f, image holds %.1f", win, sum, total)
		}
	}
}

// A minimum-ionising track along one wire must survive full zoom-out with
// ReduceMax: its pixels stay above the auto range's low end, where a block
// mean (sum / samples) would sink into the noise.
func TestOneWireTrackVisibleAtZoomOut(t *testing.T) {
	img := noisePlane(2000, tarnTicks, 11)
	const wire, q = 1234, 30 // 10σ: a minimum-ionising peak (common practice)
	for tick := 1000; tick < 3000; tick++ {
		img.Set(wire, tick, img.At(wire, tick)+q)
	}
	p := NewPyramid(img)
	rng := AutoRange(img, DefaultLoPct, DefaultHiPct)
	win := Window{WiresPerPx: 2000.0 / paneW, TicksPerPx: float64(tarnTicks) / (2 * paneH)}
	g := Grid{W: paneW, H: 2 * paneH}
	p.Sample(&g, win, ReduceMax)
	col := int(wire / win.WiresPerPx)
	row0, row1 := int(1000/win.TicksPerPx)+1, int(3000/win.TicksPerPx)-1
	for j := row0; j < row1; j++ {
		if v := g.Pix[j*g.W+col]; float64(v) <= rng.Lo {
			t.Fatalf("row %d: track pixel %.1f ≤ range low end %.1f", j, v, rng.Lo)
		}
		for _, i := range []int{col - 3, col + 3} { // its neighbours stay dark
			if v := g.Pix[j*g.W+i]; float64(v) > rng.Lo {
				t.Fatalf("row %d: noise pixel %d = %.1f above low end %.1f", j, i, v, rng.Lo)
			}
		}
	}
	p.Sample(&g, win, ReduceSum)
	mean := float64(g.Pix[(row0+1)*g.W+col]) / (win.WiresPerPx * win.TicksPerPx)
	if mean > rng.Lo {
		t.Errorf("block mean %.1f above low end %.1f: the test would not show why max matters", mean, rng.Lo)
	}
}

func TestSampleZoomInRepeatsNearest(t *testing.T) {
	img := scan.NewImage(4, 4)
	for i := range img.Pix {
		img.Pix[i] = float32(i)
	}
	g := Grid{W: 16, H: 16}
	NewPyramid(img).Sample(&g, Window{WiresPerPx: 0.25, TicksPerPx: 0.25}, ReduceMax)
	for j := range 16 {
		for i := range 16 {
			if got, want := g.Pix[j*16+i], img.At(i/4, j/4); got != want {
				t.Fatalf("pixel (%d,%d) = %g, want sample (%d,%d) = %g", i, j, got, i/4, j/4, want)
			}
		}
	}
}

func TestSampleBadInput(t *testing.T) {
	img := scan.NewImage(10, 20)
	cases := []struct {
		name string
		p    *Pyramid
		win  Window
		w, h int
	}{
		{"nil image", NewPyramid(nil), Window{0, 0, 1, 1}, 4, 4},
		{"empty image", NewPyramid(scan.NewImage(0, 0)), Window{0, 0, 1, 1}, 4, 4},
		{"short pixel slice", NewPyramid(&scan.Image{Wires: 5, Ticks: 5, Pix: make([]float32, 3)}), Window{0, 0, 1, 1}, 4, 4},
		{"zero scale", NewPyramid(img), Window{0, 0, 0, 1}, 4, 4},
		{"negative scale", NewPyramid(img), Window{0, 0, 1, -1}, 4, 4},
		{"NaN origin", NewPyramid(img), Window{math.NaN(), 0, 1, 1}, 4, 4},
		{"infinite scale", NewPyramid(img), Window{0, 0, math.Inf(1), 1}, 4, 4},
		{"left of image", NewPyramid(img), Window{-100, 0, 1, 1}, 4, 4},
		{"below image", NewPyramid(img), Window{0, 50, 1, 1}, 4, 4},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			g := Grid{W: c.w, H: c.h}
			c.p.Sample(&g, c.win, ReduceMax)
			if len(g.Pix) != c.w*c.h {
				t.Fatalf("len(Pix) = %d, want %d", len(g.Pix), c.w*c.h)
			}
			for i, v := range g.Pix {
				if !math.IsNaN(float64(v)) {
					t.Fatalf("pixel %d = %g, want NaN (no image there)", i, v)
				}
			}
		})
	}
	for _, size := range [][2]int{{0, 0}, {0, 5}, {5, 0}, {-1, 3}} {
		g := Grid{W: size[0], H: size[1], Pix: make([]float32, 9)}
		NewPyramid(img).Sample(&g, Window{0, 0, 1, 1}, ReduceMax)
		if len(g.Pix) != 0 || g.W < 0 || g.H < 0 {
			t.Errorf("grid %v: got W=%d H=%d len=%d, want an empty grid", size, g.W, g.H, len(g.Pix))
		}
	}
}

func TestSampleEmptyAndNaNPlanes(t *testing.T) {
	zero := scan.NewImage(64, 64)
	g := Grid{W: 8, H: 8}
	NewPyramid(zero).Sample(&g, Window{0, 0, 8, 8}, ReduceMax)
	for i, v := range g.Pix {
		if v != 0 {
			t.Fatalf("all-zero plane: pixel %d = %g", i, v)
		}
	}
	withNaN := scan.NewImage(64, 64)
	withNaN.Set(10, 10, float32(math.NaN()))
	NewPyramid(withNaN).Sample(&g, Window{0, 0, 8, 8}, ReduceMax)
	if !math.IsNaN(float64(g.Pix[1*8+1])) {
		t.Errorf("block over a NaN sample = %g, want NaN (missing data)", g.Pix[9])
	}
	if g.Pix[0] != 0 {
		t.Errorf("block without NaN = %g, want 0", g.Pix[0])
	}
}

// The prepared event must stay within 2× its raw size (issue 4): the
// reductions may add at most the raw size again.
func TestPyramidMemory(t *testing.T) {
	for _, size := range [][2]int{{1578, 5600}, {2000, 5600}, {3, 3}, {1, 1000}} {
		img := scan.NewImage(size[0], size[1])
		p := NewPyramid(img)
		raw := 4 * len(img.Pix)
		if extra := p.Bytes(); extra > raw {
			t.Errorf("%v: pyramid adds %d bytes to %d raw", size, extra, raw)
		} else {
			t.Logf("%v: pyramid adds %.3f× the raw size", size, float64(extra)/float64(raw))
		}
	}
}
