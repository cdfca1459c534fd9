package render

import (
	"math"

	"github.com/tpcscan/tpcscan/scan"
)

// Synthetic full-size event for benchmarks and the byte-count test: the
// demo detector's plane sizes (1578, 1578 and 2000 wires × 5600 ticks),
// Gaussian noise of σ = 3 ADC and a few straight tracks and a blob whose
// peaks (25–90 ADC) stand well above it. The noise level and a signal of
// roughly ten times it are common practice for baseline-subtracted wire
// data, not a measurement. It is cheap to make: noise comes from a small
// table of Gaussian values indexed by a xorshift generator.

var tarnPlaneWires = [3]int{1578, 1578, 2000}

const (
	tarnTicks  = 5600
	synthNoise = 3.0
)

// synthEvent builds the three planes of the synthetic event.
func synthEvent() []*scan.Image {
	var planes []*scan.Image
	for p, w := range tarnPlaneWires {
		planes = append(planes, synthPlane(w, tarnTicks, uint64(p+1)))
	}
	return planes
}

// gaussTable holds 4096 standard normal quantiles, evenly spread in
// probability, so that indexing it at random samples a Gaussian.
func gaussTable() []float32 {
	t := make([]float32, 4096)
	for i := range t {
		p := (float64(i) + 0.5) / float64(len(t))
		t[i] = float32(math.Sqrt2 * math.Erfinv(2*p-1))
	}
	return t
}

// noisePlane is a plane of Gaussian noise of σ = synthNoise only.
func noisePlane(wires, ticks int, seed uint64) *scan.Image {
	img := scan.NewImage(wires, ticks)
	g := gaussTable()
	x := seed*0x9E3779B97F4A7C15 | 1
	for i := range img.Pix {
		x ^= x << 13
		x ^= x >> 7
		x ^= x << 17
		img.Pix[i] = synthNoise * g[x&4095]
	}
	return img
}

func synthPlane(wires, ticks int, seed uint64) *scan.Image {
	img := noisePlane(wires, ticks, seed)
	// Tracks: (wire, tick) start, end, peak charge per sample.
	tracks := []struct{ w0, t0, w1, t1, q float64 }{
		{0.30, 0.40, 0.75, 0.55, 30},  // long muon-like track
		{0.30, 0.40, 0.38, 0.30, 90},  // short heavily ionising stub
		{0.30, 0.40, 0.45, 0.48, 40},  // second prong
		{0.05, 0.02, 0.95, 0.98, 25},  // crossing cosmic, corner to corner
		{0.60, 0.10, 0.62, 0.90, 28},  // steep cosmic, nearly along drift
		{0.10, 0.70, 0.40, 0.705, 28}, // flat track along the wires
	}
	for _, tr := range tracks {
		drawTrack(img, tr.w0*float64(wires), tr.t0*float64(ticks), tr.w1*float64(wires), tr.t1*float64(ticks), tr.q)
	}
	drawBlob(img, 0.5*float64(wires), 0.6*float64(ticks), 25, 60, 50)
	return img
}

// drawTrack adds a line of charge, q per sample along it: a Gaussian
// profile of 2 ticks across the drift direction where the track runs along
// the wires, one sample per tick where it runs along the drift.
func drawTrack(img *scan.Image, w0, t0, w1, t1, q float64) {
	n := int(math.Max(math.Abs(w1-w0), math.Abs(t1-t0))) + 1
	steep := math.Abs(t1-t0) > math.Abs(w1-w0)
	for i := range n {
		f := float64(i) / float64(max(n-1, 1))
		w := int(w0 + f*(w1-w0))
		t := t0 + f*(t1-t0)
		if steep {
			img.Set(w, int(t), img.At(w, int(t))+float32(q))
			continue
		}
		for dt := -4; dt <= 4; dt++ {
			tt := int(t) + dt
			d := float64(tt) - t
			img.Set(w, tt, img.At(w, tt)+float32(q*math.Exp(-d*d/8)))
		}
	}
}

// drawBlob adds a shower-like patch: charge falling off from a centre.
func drawBlob(img *scan.Image, wc, tc, rw, rt, q float64) {
	for w := int(wc - 2*rw); w <= int(wc+2*rw); w++ {
		for t := int(tc - 2*rt); t <= int(tc+2*rt); t++ {
			dw, dt := (float64(w)-wc)/rw, (float64(t)-tc)/rt
			r2 := dw*dw + dt*dt
			if r2 < 4 && (w*7+t*13)%5 == 0 { // patchy, as showers are
				img.Set(w, t, img.At(w, t)+float32(q*math.Exp(-r2)))
			}
		}
	}
}
