package render

import (
	"math"
	"runtime"
	"sync"

	"github.com/tpcscan/tpcscan/scan"
)

// Pyramid holds a plane image at successive 2× reductions (max and sum) so
// that Sample touches O(W·H) stored values at any zoom. Level k reduces
// blocks of 2^k wires × 2^k ticks; level 0 is the image itself. The extra
// memory is 2 × (1/4 + 1/16 + …) < 2/3 of the image.
type Pyramid struct {
	img    *scan.Image
	levels []level
}

// level is one reduction of the image, stored wire-major like scan.Image.
type level struct {
	wires, ticks int
	max, sum     []float32
}

// NewPyramid builds the pyramid of one plane image, once per event. A nil
// or empty image gives a pyramid whose samples are all NaN.
func NewPyramid(img *scan.Image) *Pyramid {
	p := &Pyramid{img: img}
	if img == nil || img.Wires <= 0 || img.Ticks <= 0 || len(img.Pix) < img.Wires*img.Ticks {
		return p
	}
	l := level{wires: img.Wires, ticks: img.Ticks, max: img.Pix, sum: img.Pix}
	p.levels = append(p.levels, l)
	// Stop before a side shrinks to one cell: further levels would help only
	// thin strips (whose samples are few anyway) and could exceed the
	// memory bound there.
	for l.wires >= 3 && l.ticks >= 3 {
		l = halve(l)
		p.levels = append(p.levels, l)
	}
	return p
}

// Image returns the full-resolution image the pyramid was built from.
func (p *Pyramid) Image() *scan.Image { return p.img }

// Bytes returns the memory the reductions hold, beyond the image itself.
func (p *Pyramid) Bytes() int {
	n := 0
	for _, l := range p.levels[min(1, len(p.levels)):] {
		n += 4 * (len(l.max) + len(l.sum))
	}
	return n
}

// halve reduces a level by 2×2 blocks. Odd edges form short blocks. Output
// wires are independent, so they are split across
// the CPUs.
func halve(src level) level {
	dst := level{wires: (src.wires + 1) / 2, ticks: (src.ticks + 1) / 2}
	n := dst.wires * dst.ticks
	dst.max = make([]float32, n)
	dst.sum = make([]float32, n)
	parallel(dst.wires, func(w0, w1 int) {
		for w := w0; w < w1; w++ {
			halveWire(src, dst, w)
		}
	})
	return dst
}

// parallel runs f over [0, n) in up to GOMAXPROCS chunks and waits.
func parallel(n int, f func(lo, hi int)) {
	k := min(runtime.GOMAXPROCS(0), n/64+1)
	if k <= 1 {
		f(0, n)
		return
	}
	var wg sync.WaitGroup
	for i := range k {
		lo, hi := i*n/k, (i+1)*n/k
		wg.Go(func() { f(lo, hi) })
	}
	wg.Wait()
}

// halveWire builds output wire w of dst from input wires 2w and 2w+1.
func halveWire(src, dst level, w int) {
	t := src.ticks
	a := 2 * w
	b := min(a+1, src.wires-1)
	om := dst.max[w*dst.ticks : (w+1)*dst.ticks]
	os := dst.sum[w*dst.ticks : (w+1)*dst.ticks]
	am, bm := src.max[a*t:(a+1)*t], src.max[b*t:(b+1)*t]
	as, bs := src.sum[a*t:(a+1)*t], src.sum[b*t:(b+1)*t]
	full := t / 2
	if a == b { // last odd wire: blocks of one wire
		bm, bs = am, make([]float32, t)
	}
	pairs(om[:full], os[:full], am, as, bm, bs)
	if full < dst.ticks { // last odd tick: blocks of one tick
		om[full] = max(am[t-1], bm[t-1])
		os[full] = as[t-1] + bs[t-1]
	}
}

// pairs reduces two wires of samples, 2×2 at a time, into max and sum:
// the hot loop of building a pyramid. The builtin max is branch-free, which
// matters on noise, where a compare-and-branch would mispredict half the
// time; it also makes a NaN sample win, so a block holding one shows as
// missing data.
func pairs(om, os, am, as, bm, bs []float32) {
	os = os[:len(om)]
	for i := range om {
		if len(am) < 2 || len(bm) < 2 || len(as) < 2 || len(bs) < 2 {
			break
		}
		om[i] = max(am[0], am[1], bm[0], bm[1])
		os[i] = (as[0] + as[1]) + (bs[0] + bs[1])
		am, bm, as, bs = am[2:], bm[2:], as[2:], bs[2:]
	}
}

// span is the range [a, b) of level cells one pixel reduces over.
type span struct{ a, b int32 }

// Sample fills dst (its W and H set by the caller; Pix resized as needed)
// with the window's pixels using reduction r. It reads the deepest level
// whose blocks are no larger than a pixel, so its cost does not grow with
// zoom-out. Each level cell goes to the pixel its first sample falls in,
// which makes ReduceSum conserve charge; at zoom-in (a pixel smaller than a
// sample) pixels repeat the nearest sample. Pixels outside the image are
// NaN.
func (p *Pyramid) Sample(dst *Grid, win Window, r Reduce) {
	if dst.W <= 0 || dst.H <= 0 {
		dst.W, dst.H = max(dst.W, 0), max(dst.H, 0)
		dst.Pix = dst.Pix[:0]
		return
	}
	n := dst.W * dst.H
	if cap(dst.Pix) < n {
		dst.Pix = make([]float32, n)
	}
	dst.Pix = dst.Pix[:n]
	nan := float32(math.NaN())
	ok := len(p.levels) > 0 && win.WiresPerPx > 0 && win.TicksPerPx > 0 &&
		!math.IsInf(win.WiresPerPx, 0) && !math.IsInf(win.TicksPerPx, 0) &&
		!math.IsNaN(win.Wire0+win.Tick0) && !math.IsInf(win.Wire0+win.Tick0, 0)
	if !ok {
		fill(dst.Pix, nan)
		return
	}
	k := 0
	if s := min(win.WiresPerPx, win.TicksPerPx); s >= 2 {
		k = min(int(math.Log2(s)), len(p.levels)-1)
		if math.Exp2(float64(k)) > s { // guard log rounding
			k--
		}
	}
	l := p.levels[k]
	src := l.max
	if r == ReduceSum {
		src = l.sum
	}
	block := math.Exp2(float64(k))
	cols := spans(make([]span, dst.W), win.Wire0/block, win.WiresPerPx/block, l.wires)
	rows := spans(make([]span, dst.H), win.Tick0/block, win.TicksPerPx/block, l.ticks)
	col := make([]float32, dst.H)
	for i, c := range cols {
		if c.a >= c.b {
			for j := range dst.H {
				dst.Pix[j*dst.W+i] = nan
			}
			continue
		}
		reduceColumn(col, src, l.ticks, c, rows, r)
		for j, v := range col {
			dst.Pix[j*dst.W+i] = v
		}
	}
}

// reduceColumn reduces the level cells of wires [c.a, c.b) into one column
// of pixels, a row span per pixel.
func reduceColumn(col, src []float32, ticks int, c span, rows []span, r Reduce) {
	nan := float32(math.NaN())
	for j, s := range rows {
		if s.a >= s.b {
			col[j] = nan
			continue
		}
		if r == ReduceSum {
			col[j] = 0
		} else {
			col[j] = float32(math.Inf(-1))
		}
	}
	for w := int(c.a); w < int(c.b); w++ {
		line := src[w*ticks : (w+1)*ticks]
		if r == ReduceSum {
			for j, s := range rows {
				if s.a < s.b {
					acc := col[j]
					for _, v := range line[s.a:s.b] {
						acc += v
					}
					col[j] = acc
				}
			}
			continue
		}
		for j, s := range rows {
			if s.a < s.b {
				m := col[j]
				for _, v := range line[s.a:s.b] {
					m = max(m, v) // branch-free: noise defeats prediction
				}
				col[j] = m
			}
		}
	}
}

// spans fills out with the level cells each pixel reduces over: pixel i
// covers [o + i·d, o + (i+1)·d) in level cells and takes the cells that
// start inside it; a pixel narrower than a cell takes the cell under its
// centre. Cells outside [0, n) are dropped, so pixels off the image get an
// empty span.
func spans(out []span, o, d float64, n int) []span {
	for i := range out {
		lo := o + float64(i)*d
		hi := o + float64(i+1)*d // not lo+d: neighbours must agree on edges
		a, b := math.Ceil(lo), math.Ceil(hi)
		if a >= b {
			a = math.Floor(lo + d/2)
			b = a + 1
		}
		a, b = math.Max(a, 0), math.Min(b, float64(n))
		if a >= b {
			out[i] = span{}
			continue
		}
		out[i] = span{int32(a), int32(b)}
	}
	return out
}

func fill(s []float32, v float32) {
	for i := range s {
		s[i] = v
	}
}
