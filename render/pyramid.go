package render

import (
	"math"

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
	for l.wires > 1 || l.ticks > 1 {
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

// halve reduces a level by 2×2 blocks. Odd edges form short blocks. Max
// ignores NaN (a comparison with NaN is false), so one bad sample does not
// blank a block.
func halve(src level) level {
	dst := level{wires: (src.wires + 1) / 2, ticks: (src.ticks + 1) / 2}
	n := dst.wires * dst.ticks
	dst.max = make([]float32, n)
	dst.sum = make([]float32, n)
	full := src.ticks / 2 // output ticks built from two input ticks
	for w := 0; w < dst.wires; w++ {
		w0 := 2 * w
		w1 := min(w0+1, src.wires-1)
		am := src.max[w0*src.ticks : (w0+1)*src.ticks]
		as := src.sum[w0*src.ticks : (w0+1)*src.ticks]
		bm := src.max[w1*src.ticks : (w1+1)*src.ticks]
		bs := src.sum[w1*src.ticks : (w1+1)*src.ticks]
		if w1 == w0 { // last odd wire: a block of one wire
			bs = nil
		}
		om := dst.max[w*dst.ticks : (w+1)*dst.ticks]
		os := dst.sum[w*dst.ticks : (w+1)*dst.ticks]
		for t := 0; t < full; t++ {
			m := am[2*t]
			if v := am[2*t+1]; v > m {
				m = v
			}
			if v := bm[2*t]; v > m {
				m = v
			}
			if v := bm[2*t+1]; v > m {
				m = v
			}
			om[t] = m
			s := as[2*t] + as[2*t+1]
			if bs != nil {
				s += bs[2*t] + bs[2*t+1]
			}
			os[t] = s
		}
		if full < dst.ticks { // last odd tick
			t := src.ticks - 1
			om[full] = max32(am[t], bm[t])
			s := as[t]
			if bs != nil {
				s += bs[t]
			}
			os[full] = s
		}
	}
	return dst
}

func max32(a, b float32) float32 {
	if b > a {
		return b
	}
	return a
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
					if v > m {
						m = v
					}
				}
				col[j] = m
			}
		}
	}
	if r != ReduceSum {
		for j, v := range col {
			if math.IsInf(float64(v), -1) { // every sample was NaN
				col[j] = nan
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
