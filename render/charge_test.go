package render

import (
	"math"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
)

func TestRangeFrac(t *testing.T) {
	lin := Range{Lo: 10, Hi: 110}
	lg := Range{Lo: 10, Hi: 10 + math.E*math.E - 1, Log: true} // log1p(Hi−Lo) = 2
	cases := []struct {
		name string
		r    Range
		v    float64
		want float64
	}{
		{"linear low end", lin, 10, 0},
		{"linear middle", lin, 60, 0.5},
		{"linear clipped below", lin, -500, 0},
		{"linear clipped above", lin, 1e9, 1},
		{"log half way", lg, 10 + math.E - 1, 0.5}, // log1p(e−1) = 1
		{"log clipped", lg, 1e6, 1},
		{"empty range", Range{Lo: 5, Hi: 5}, 6, 1},
	}
	for _, c := range cases {
		if got := c.r.Frac(c.v); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("%s: Frac(%g) = %g, want %g", c.name, c.v, got, c.want)
		}
		if c.want > 0 && c.want < 1 {
			if back := c.r.Value(c.want); math.Abs(back-c.v) > 1e-9 {
				t.Errorf("%s: Value(%g) = %g, want %g", c.name, c.want, back, c.v)
			}
		}
	}
	if !math.IsNaN(lin.Frac(math.NaN())) {
		t.Error("Frac(NaN) is not NaN")
	}
}

// percentile follows the default of numpy.percentile and R's quantile
// (Hyndman & Fan 1996, type 7): for 1, 2, 3, 4 the 25th percentile is
// 1.75 and the median 2.5.
func TestPercentileType7(t *testing.T) {
	v := []float32{1, 2, 3, 4}
	for _, c := range []struct{ p, want float64 }{{0, 1}, {25, 1.75}, {50, 2.5}, {100, 4}, {150, 4}} {
		if got := percentile(v, c.p); math.Abs(got-c.want) > 1e-9 {
			t.Errorf("percentile(%g) = %g, want %g", c.p, got, c.want)
		}
	}
	if !math.IsNaN(percentile(nil, 50)) {
		t.Error("percentile of nothing is not NaN")
	}
}

// On pure Gaussian noise of known σ the MAD estimate must recover σ: for a
// normal distribution MAD = Φ⁻¹(3/4)·σ = 0.6745σ (any statistics
// handbook), so 1.4826·MAD = σ.
func TestAutoRangeNoiseFloor(t *testing.T) {
	img := noisePlane(500, 2000, 5)
	r := AutoRange(img, DefaultLoPct, DefaultHiPct)
	want := NoiseSigmas * synthNoise
	if math.Abs(r.Lo-want) > 0.05*want {
		t.Errorf("noise only: Lo = %.2f, want %g·σ = %.2f within 5%%", r.Lo, float64(NoiseSigmas), want)
	}
	if !(r.Hi > r.Lo) {
		t.Errorf("Hi %.2f not above Lo %.2f", r.Hi, r.Lo)
	}
	// Tracks move the high end into their charge, not the low end.
	sig := synthPlane(500, 2000, 5)
	rs := AutoRange(sig, DefaultLoPct, DefaultHiPct)
	if math.Abs(rs.Lo-r.Lo) > 0.05*r.Lo {
		t.Errorf("with tracks: Lo moved from %.2f to %.2f", r.Lo, rs.Lo)
	}
	if rs.Hi < 25 || rs.Hi > 150 {
		t.Errorf("with tracks: Hi = %.1f, want inside the tracks' 25–90 ADC peaks (plus overlaps)", rs.Hi)
	}
}

func TestAutoRangeEdgeCases(t *testing.T) {
	clean := scan.NewImage(100, 100)
	for w := range 100 {
		clean.Set(w, 50, 40)
	}
	cases := []struct {
		name string
		img  *scan.Image
		lo   float64
	}{
		{"nil", nil, 0},
		{"empty", scan.NewImage(0, 0), 0},
		{"all zero", scan.NewImage(50, 50), 0},
		{"noiseless track", clean, 0},
	}
	for _, c := range cases {
		r := AutoRange(c.img, DefaultLoPct, DefaultHiPct)
		if r.Lo != c.lo || !(r.Hi > r.Lo) || math.IsNaN(r.Hi) {
			t.Errorf("%s: range %+v, want Lo %g and Hi above it", c.name, r, c.lo)
		}
	}
	if r := AutoRange(clean, DefaultLoPct, DefaultHiPct); r.Frac(40) != 1 {
		t.Errorf("noiseless track at 40 ADC maps to %g, want the top of the scale", r.Frac(40))
	}
	nan := noisePlane(50, 50, 1)
	nan.Pix[7] = float32(math.NaN())
	nan.Pix[9] = float32(math.Inf(1))
	if r := AutoRange(nan, DefaultLoPct, DefaultHiPct); math.IsNaN(r.Lo) || math.IsNaN(r.Hi) || math.IsInf(r.Lo, 0) {
		t.Errorf("NaN/Inf samples leak into the range: %+v", r)
	}
	if r := FullRange(clean); r.Lo != 0 || r.Hi != 40 {
		t.Errorf("FullRange = %+v, want 0…40", r)
	}
}

// A sum of n independent Gaussian samples of σ has σ√n (variances add; any
// probability text), so ForSum's low end must keep summed noise as dark as
// AutoRange keeps single samples: well under 1% of pixels above it.
func TestForSumKeepsNoiseDark(t *testing.T) {
	img := noisePlane(800, 3200, 4)
	r := AutoRange(img, DefaultLoPct, DefaultHiPct)
	if got := r.ForSum(Window{0, 0, 1, 1}); got != r {
		t.Errorf("one sample per pixel: %+v, want %+v unchanged", got, r)
	}
	win := Window{0, 0, 10, 40}
	g := Grid{W: 80, H: 80}
	NewPyramid(img).Sample(&g, win, ReduceSum)
	s := r.ForSum(win)
	above := 0
	for _, v := range g.Pix {
		if float64(v) > s.Lo {
			above++
		}
	}
	if above > len(g.Pix)/100 {
		t.Errorf("%d of %d summed-noise pixels above the low end %.1f", above, len(g.Pix), s.Lo)
	}
	if s.Hi != r.Hi*40 {
		t.Errorf("high end %.1f, want %.1f (a track along the 40-tick side)", s.Hi, r.Hi*40)
	}
}
