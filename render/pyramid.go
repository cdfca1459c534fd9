package render

import (
	"math"
	"runtime"
	"sync"

	"github.com/tpcscan/tpcscan/scan"
)

// Pyramid holds a plane image at successive reductions (max and sum) so
// that Sample touches O(W·H) stored values at any zoom. The first level
// reduces blocks of 4 wires × 4 ticks, each further level 2 × 2 of the one
// before; level 0 is the image itself. Skipping the 2×2 level costs a
// frame at most 4 × 4 reads per pixel at that zoom, and saves most of the
// memory and time of building: the reductions add 2 × (1/16 + 1/64 + …) =
// 1/6 of the image.
type Pyramid struct {
	img    *scan.Image
	levels []level
}

// level is one reduction of the image, stored wire-major like scan.Image;
// a cell covers block × block samples.
type level struct {
	wires, ticks int
	block        int
	max, sum     []float32
}

// NewPyramid builds the pyramid of one plane image, once per event. A nil
// or empty image gives a pyramid whose samples are all NaN.
func NewPyramid(img *scan.Image) *Pyramid {
	p := &Pyramid{img: img}
	if img == nil || img.Wires <= 0 || img.Ticks <= 0 || len(img.Pix) < img.Wires*img.Ticks {
		return p
	}
	l := level{wires: img.Wires, ticks: img.Ticks, block: 1, max: img.Pix, sum: img.Pix}
	p.levels = append(p.levels, l)
	if l.wires < 4 || l.ticks < 4 {
		return p
	}
	l = reduce(l, 4)
	p.levels = append(p.levels, l)
	// Stop before a side shrinks to one cell: further levels would help only
	// thin strips, whose cells are few anyway.
	for l.wires >= 3 && l.ticks >= 3 {
		l = reduce(l, 2)
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

// reduce builds the next level from src by f × f blocks; edges form short
// blocks. Each output wire folds its f input wires into one row (max and
// sum per tick), then folds that row f ticks at a time. Output wires are
// independent, so they are split across the CPUs.
func reduce(src level, f int) level {
	dst := level{wires: (src.wires + f - 1) / f, ticks: (src.ticks + f - 1) / f, block: src.block * f}
	n := dst.wires * dst.ticks
	dst.max = make([]float32, n)
	dst.sum = make([]float32, n)
	parallel(dst.wires, func(w0, w1 int) {
		mx, sm := make([]float32, src.ticks), make([]float32, src.ticks)
		for w := w0; w < w1; w++ {
			foldWires(mx, sm, src, w*f, min(w*f+f, src.wires))
			o := w * dst.ticks
			foldTicks(dst.max[o:o+dst.ticks], dst.sum[o:o+dst.ticks], mx, sm, f)
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

// foldWires sets mx and sm to the per-tick max and sum of wires [a, b).
// The builtin max is branch-free, which matters on noise, where a compare
// and branch would mispredict half the time; it also makes a NaN sample
// win, so a block holding one shows as missing data.
func foldWires(mx, sm []float32, src level, a, b int) {
	t := src.ticks
	copy(mx, src.max[a*t:(a+1)*t])
	copy(sm, src.sum[a*t:(a+1)*t])
	same := &src.max[0] == &src.sum[0] // level 0: one array for both
	for w := a + 1; w < b; w++ {
		rm := src.max[w*t : (w+1)*t]
		if same {
			maxAdd(mx, sm, rm)
			continue
		}
		rs := src.sum[w*t : (w+1)*t]
		rs = rs[:len(sm)]
		for i, v := range rm[:len(mx)] {
			mx[i] = max(mx[i], v)
		}
		for i, v := range rs {
			sm[i] += v
		}
	}
}

// maxAdd folds one row of samples into running max and sum rows: the hot
// loop of building a pyramid.
func maxAdd(mx, sm, row []float32) {
	row = row[:len(mx)]
	sm = sm[:len(mx)]
	for i, v := range row {
		mx[i] = max(mx[i], v)
		sm[i] += v
	}
}

// foldTicks reduces rows mx and sm f ticks at a time into om and os.
func foldTicks(om, os, mx, sm []float32, f int) {
	full := len(mx) / f
	switch f {
	case 4:
		for k := range full {
			a, b := mx[4*k:4*k+4:4*k+4], sm[4*k:4*k+4:4*k+4]
			om[k] = max(max(a[0], a[1]), max(a[2], a[3]))
			os[k] = (b[0] + b[1]) + (b[2] + b[3])
		}
	case 2:
		for k := range full {
			a, b := mx[2*k:2*k+2:2*k+2], sm[2*k:2*k+2:2*k+2]
			om[k] = max(a[0], a[1])
			os[k] = b[0] + b[1]
		}
	default:
		for k := range full {
			om[k], os[k] = foldSpan(mx[f*k:f*k+f], sm[f*k:f*k+f])
		}
	}
	if full < len(om) { // a short block at the end
		om[full], os[full] = foldSpan(mx[f*full:], sm[f*full:])
	}
}

func foldSpan(mx, sm []float32) (m, s float32) {
	m = mx[0]
	for i, v := range mx {
		m = max(m, v)
		s += sm[i]
	}
	return m, s
}

// span is the range [a, b) of level cells one pixel reduces over.
type span struct{ a, b int32 }

// Sample fills dst (its W and H set by the caller; Pix resized as needed)
// with the window's pixels using reduction r. It reads the deepest level
// whose blocks are no larger than a pixel, so its cost does not grow with
// zoom-out. Each level cell goes to the pixel its first sample falls in,
// which makes ReduceSum conserve charge; at zoom-in (a pixel smaller than a
// sample) pixels repeat the nearest sample. Pixels outside the image are
// NaN, and so are pixels over a NaN sample (missing data). The cost per
// pixel grows with the window's aspect: with W wires and T ticks per pixel
// it reads about max(W,T)/min(W,T) level cells (up to 16× that between
// zoom 1 and 4). A Pyramid is never modified after NewPyramid, so Sample
// may run concurrently.
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
	l := p.levelFor(win)
	src := l.max
	if r == ReduceSum {
		src = l.sum
	}
	block := float64(l.block)
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

// levelFor returns the deepest level whose blocks are no larger than the
// window's pixels in either direction.
func (p *Pyramid) levelFor(win Window) level {
	s := min(win.WiresPerPx, win.TicksPerPx)
	l := p.levels[0]
	for _, c := range p.levels[1:] {
		if float64(c.block) > s {
			break
		}
		l = c
	}
	return l
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
