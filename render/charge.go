package render

import (
	"math"
	"slices"

	"github.com/tpcscan/tpcscan/scan"
)

// Range maps charge to the [0, 1] colour-scale coordinate.
type Range struct {
	Lo, Hi float64
	Log    bool // logarithmic between Lo and Hi; linear otherwise; values are clipped
}

// Frac returns v's position on the scale, clipped to [0, 1]; NaN stays
// NaN. The log mapping is log(1 + (v−Lo)) / log(1 + (Hi−Lo)) with charge in
// ADC counts, which is defined for any Lo (a plain log(v/Lo) is not, and
// baseline-subtracted charge is often ≤ 0).
func (r Range) Frac(v float64) float64 {
	if math.IsNaN(v) {
		return v
	}
	if v <= r.Lo {
		return 0
	}
	if v >= r.Hi || !(r.Hi > r.Lo) {
		return 1
	}
	if r.Log {
		return math.Log1p(v-r.Lo) / math.Log1p(r.Hi-r.Lo)
	}
	return (v - r.Lo) / (r.Hi - r.Lo)
}

// Value is the inverse of Frac: the charge at scale position f ∈ [0, 1].
func (r Range) Value(f float64) float64 {
	if r.Log {
		return r.Lo + math.Expm1(f*math.Log1p(r.Hi-r.Lo))
	}
	return r.Lo + f*(r.Hi-r.Lo)
}

// ForSum adapts a per-sample range (as AutoRange gives) to ReduceSum pixels
// of window win, each adding about n = WiresPerPx·TicksPerPx samples (at
// least 1). Noise adds in quadrature, so the low end, a noise floor above a
// zero baseline, grows as √n; a track adds its charge along its length
// inside the pixel, at most the pixel's longer side in samples, so the high
// end grows by that.
func (r Range) ForSum(win Window) Range {
	w, t := math.Max(win.WiresPerPx, 1), math.Max(win.TicksPerPx, 1)
	if math.IsNaN(w+t) || math.IsInf(w+t, 0) {
		return r
	}
	out := Range{Lo: r.Lo * math.Sqrt(w*t), Hi: r.Hi * math.Max(w, t), Log: r.Log}
	if !(out.Hi > out.Lo) {
		out.Hi = out.Lo + math.Max(1, r.Hi-r.Lo)
	}
	return out
}

// Auto-range defaults: the low end sits just above the noise, the high end
// at the 99.5th percentile of the charge above it (common practice: a high
// percentile, not the maximum, keeps one hot sample from darkening
// everything else).
const (
	DefaultLoPct = 50
	DefaultHiPct = 99.5
	// NoiseSigmas is how far above the median the low end sits at least, in
	// robust noise σ. With ReduceMax a pixel shows the largest of many noise
	// samples: the largest of ~10³ Gaussian samples is about 3.2σ, so 5σ
	// keeps a zoomed-out noise floor dark (common practice).
	NoiseSigmas = 5
)

// autoSamples bounds the strided sample used for the noise estimate.
const autoSamples = 1 << 16

// autoAbove bounds how many samples above the low end are sorted, and
// aboveStride is how densely they are looked for.
const (
	autoAbove   = 1 << 18
	aboveStride = 3
)

// AutoRange picks a linear range from charge percentiles of the image (e.g.
// DefaultLoPct and DefaultHiPct). The low end is the loPct percentile of
// the samples, but never below the noise floor, median + NoiseSigmas·σ with
// σ = 1.4826·MAD (the median absolute deviation scaled to a Gaussian σ;
// Rousseeuw & Croux 1993); both come from a deterministic strided sample.
// The high end is the hiPct percentile of all samples above the low end,
// so that sparse charge decides it. An image without charge above its
// noise gets Hi = Lo + 1.
func AutoRange(img *scan.Image, loPct, hiPct float64) Range {
	if img == nil || len(img.Pix) == 0 {
		return Range{Lo: 0, Hi: 1}
	}
	sample := strided(img.Pix, autoSamples)
	slices.Sort(sample)
	med, sigma := robustNoise(sample)
	lo := math.Max(med+NoiseSigmas*sigma, percentile(sample, loPct))
	if math.IsNaN(lo) || math.IsInf(lo, 0) {
		lo = 0
	}
	// Charge is sparse, so the high end comes from a dense sample (every
	// third sample: a track along one wire or one tick still gives a third
	// of its samples), not from the noise sample.
	lo32 := float32(lo)
	var above []float32
	for i := 0; i < len(img.Pix); i += aboveStride {
		if v := img.Pix[i]; v > lo32 && !math.IsInf(float64(v), 1) {
			above = append(above, v)
		}
	}
	if len(above) > autoAbove { // bound the sort
		above = strided(above, autoAbove)
	}
	slices.Sort(above)
	hi := percentile(above, hiPct)
	if !(hi > lo) {
		hi = lo + 1
	}
	return Range{Lo: lo, Hi: hi}
}

// FullRange is the linear range from the image's smallest to its largest
// finite sample.
func FullRange(img *scan.Image) Range {
	lo, hi := math.Inf(1), math.Inf(-1)
	if img != nil {
		for _, v := range img.Pix {
			f := float64(v)
			if math.IsNaN(f) || math.IsInf(f, 0) {
				continue
			}
			lo, hi = math.Min(lo, f), math.Max(hi, f)
		}
	}
	if math.IsInf(lo, 0) {
		return Range{Lo: 0, Hi: 1}
	}
	if !(hi > lo) {
		hi = lo + 1
	}
	return Range{Lo: lo, Hi: hi}
}

// strided returns about n samples spread evenly over pix, NaN dropped. The
// stride is odd so that it does not stay in step with a row length.
func strided(pix []float32, n int) []float32 {
	step := max(1, len(pix)/n)
	if step > 1 && step%2 == 0 {
		step++
	}
	out := make([]float32, 0, len(pix)/step+1)
	for i := 0; i < len(pix); i += step {
		if v := pix[i]; v == v && !math.IsInf(float64(v), 0) {
			out = append(out, v)
		}
	}
	return out
}

// robustNoise returns the median and the MAD-based σ of sorted samples.
func robustNoise(s []float32) (med, sigma float64) {
	if len(s) == 0 {
		return 0, 0
	}
	med = percentile(s, 50)
	v := make([]float32, len(s))
	for i, x := range s {
		v[i] = float32(math.Abs(float64(x) - med))
	}
	slices.Sort(v)
	return med, 1.4826 * percentile(v, 50)
}

// percentile of sorted values with linear interpolation between order
// statistics (the "type 7" rule of Hyndman & Fan 1996); NaN when empty.
func percentile(sorted []float32, p float64) float64 {
	n := len(sorted)
	if n == 0 {
		return math.NaN()
	}
	p = math.Min(math.Max(p, 0), 100)
	h := p / 100 * float64(n-1)
	i := int(h)
	if i >= n-1 {
		return float64(sorted[n-1])
	}
	return float64(sorted[i]) + (h-float64(i))*float64(sorted[i+1]-sorted[i])
}
