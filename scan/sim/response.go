package sim

import (
	"math"
	"math/rand/v2"

	"github.com/tpcscan/tpcscan/scan"
)

// The readout turns deposits into plane images:
//  1. each deposit's electrons are attenuated by the electron lifetime over
//     their drift time and spread by diffusion (σ = √(2Dt));
//  2. the segment is projected onto each plane and cut into pieces no
//     longer than one wire and two ticks;
//  3. each piece is shared between wires by the fraction of its transverse
//     Gaussian falling in each wire's cell, and shaped in time by a Gaussian
//     of σ = √(σ_shaping² + σ_L²) normalised so that a point charge Q
//     arriving at once peaks at Q: the convention in which an electronics
//     noise of ENC electrons is an rms in the same units;
//  4. noise (ENC e⁻ rms, correlated over about a tick) is added and the
//     sum is converted to ADC counts at electronsADC e⁻ per count and
//     rounded.
// Induction planes are drawn unipolar, like the collection plane, as if
// their bipolar signals had already been deconvolved.

// hit is one piece of charge on one wire: a Gaussian pulse in ticks.
type hit struct {
	wire, code        int32
	tick, sigma, peak float32 // image-local tick, σ in ticks, peak in e⁻
}

// window is the part of a plane's readout an image covers.
type window struct{ wire0, tick0, wires, ticks int }

// readout digitises the collected deposits onto every plane, as a crop
// around focus (SizeDemo) or the whole readout (SizeFull).
func (g *generator) readout(size string, focus vec) ([]*scan.Image, []*scan.TruthImage) {
	planes := make([]*scan.Image, len(g.det.Planes))
	truth := make([]*scan.TruthImage, len(g.det.Planes))
	noise := noiseTable(g.r, g.det.ReadoutTicks)
	for i := range g.det.Planes {
		win := g.window(i, size, focus)
		img := &scan.Image{Wires: win.wires, Ticks: win.ticks, Wire0: win.wire0, Tick0: win.tick0, Pix: make([]float32, win.wires*win.ticks)}
		tru := &scan.TruthImage{Wires: win.wires, Ticks: win.ticks, Wire0: win.wire0, Tick0: win.tick0, Pix: make([]int32, win.wires*win.ticks)}
		hits, start := bucketByWire(g.planeHits(i, win), win.wires)
		fill(img, tru, hits, start)
		digitise(g.r, img, noise)
		planes[i], truth[i] = img, tru
	}
	return planes, truth
}

// window chooses the image's part of plane i's readout.
func (g *generator) window(i int, size string, focus vec) window {
	p := g.det.Planes[i]
	if size == SizeFull {
		return window{wires: p.Wires, ticks: g.det.ReadoutTicks}
	}
	nw, nt := min(demoWires, p.Wires), min(demoTicks, g.det.ReadoutTicks)
	w := int(math.Round(p.Wire(focus[1], focus[2]))) - demoWiresBefore
	t := int(math.Round(g.det.Tick(focus[0]))) - nt/2
	return window{
		wire0: min(max(w, 0), p.Wires-nw),
		tick0: min(max(t, 0), g.det.ReadoutTicks-nt),
		wires: nw, ticks: nt,
	}
}

// planeHits projects every deposit onto plane i inside the window.
func (g *generator) planeHits(i int, win window) []hit {
	p := g.det.Planes[i]
	s, c := math.Sincos(p.AngleDeg * math.Pi / 180)
	tickCm := g.det.TickCm()
	sigSh := shapingUs / g.det.SamplingUs
	nw, nt := float64(win.wires), float64(win.ticks)
	wireOf := func(q [3]float32) float64 {
		return (-float64(q[1])*s+float64(q[2])*c-p.OffsetCm)/p.PitchCm - float64(win.wire0)
	}
	var hits []hit
	for _, d := range g.tr.deps {
		w0, w1 := wireOf(d.a), wireOf(d.b)
		if max(w0, w1) < -3 || min(w0, w1) > nw+3 {
			continue
		}
		base := g.det.TriggerTick + float64(d.shift) - float64(win.tick0)
		t0, t1 := base+float64(d.a[0])/tickCm, base+float64(d.b[0])/tickCm
		if max(t0, t1) < -20 || min(t0, t1) > nt+20 {
			continue
		}
		tUs := max(0, float64(d.a[0]+d.b[0])/2) / g.det.DriftVelocityCmUs
		sT := math.Sqrt(2*diffTCm2s*tUs*1e-6) / p.PitchCm
		sL := math.Sqrt(2*diffLCm2s*tUs*1e-6) / tickCm
		sig := math.Sqrt(sigSh*sigSh + sL*sL)
		peak := float64(d.q) * math.Exp(-tUs/lifetimeUs) * sigSh / sig
		n := int(math.Ceil(max(math.Abs(w1-w0), math.Abs(t1-t0)/2, 1)))
		n = min(n, 4096)
		for j := range n {
			f := (float64(j) + 0.5) / float64(n)
			w, t := w0+f*(w1-w0), t0+f*(t1-t0)
			hits = shareWires(hits, w, sT, win.wires, hit{code: d.code, tick: float32(t), sigma: float32(sig), peak: float32(peak / float64(n))})
		}
	}
	return hits
}

// shareWires appends h to the wires whose cells receive charge centred at
// continuous wire w with transverse spread sT (in wires).
func shareWires(hits []hit, w, sT float64, nw int, h hit) []hit {
	if sT < 0.08 {
		k := int(math.Floor(w + 0.5))
		if k >= 0 && k < nw {
			h.wire = int32(k)
			hits = append(hits, h)
		}
		return hits
	}
	lo, hi := int(math.Floor(w-3*sT+0.5)), int(math.Floor(w+3*sT+0.5))
	inv := 1 / (sT * math.Sqrt2)
	prev := math.Erf((float64(lo) - 0.5 - w) * inv)
	peak := h.peak
	for k := lo; k <= hi; k++ {
		cur := math.Erf((float64(k) + 0.5 - w) * inv)
		if k >= 0 && k < nw {
			h.wire = int32(k)
			h.peak = peak * float32((cur-prev)/2)
			hits = append(hits, h)
		}
		prev = cur
	}
	return hits
}

// bucketByWire sorts hits by wire, keeping their order within a wire (a
// stable counting sort), and returns them with the start of each wire's run.
func bucketByWire(hits []hit, nw int) ([]hit, []int) {
	start := make([]int, nw+1)
	for _, h := range hits {
		start[h.wire+1]++
	}
	for k := 1; k <= nw; k++ {
		start[k] += start[k-1]
	}
	out := make([]hit, len(hits))
	next := append([]int(nil), start[:nw]...)
	for _, h := range hits {
		out[next[h.wire]] = h
		next[h.wire]++
	}
	return out, start
}

// fill adds the pulses of the hits to the image (in electrons) and sets
// each pixel's truth code to the particle that put the most charge there.
// Deposits arrive grouped by particle, so within a wire the hits of one
// particle form one run: a run's charge is summed in cur, then compared
// with the best so far.
func fill(img *scan.Image, tru *scan.TruthImage, hits []hit, start []int) {
	nt := img.Ticks
	cur := make([]float32, nt)
	best := make([]float32, nt)
	for w := 0; w < img.Wires; w++ {
		run := hits[start[w]:start[w+1]]
		if len(run) == 0 {
			continue
		}
		row := img.Pix[w*nt : (w+1)*nt]
		trow := tru.Pix[w*nt : (w+1)*nt]
		wlo, whi := nt, -1
		code, lo, hi := run[0].code, nt, -1
		flush := func() {
			for t := lo; t <= hi; t++ {
				if cur[t] > best[t] {
					best[t] = cur[t]
					if cur[t] >= truthMinE {
						trow[t] = code
					}
				}
				cur[t] = 0
			}
			wlo, whi = min(wlo, lo), max(whi, hi)
			lo, hi = nt, -1
		}
		for _, h := range run {
			if h.code != code {
				flush()
				code = h.code
			}
			a, b := addPulse(row, cur, h)
			lo, hi = min(lo, a), max(hi, b)
		}
		flush()
		for t := wlo; t <= whi; t++ {
			best[t] = 0
		}
	}
}

// addPulse adds a Gaussian pulse to row and cur over ±3σ and returns the
// tick range it touched. The Gaussian is evaluated by recurrence: the
// ratio of neighbouring samples itself changes by the constant e^(−2a).
func addPulse(row, cur []float32, h hit) (lo, hi int) {
	t, s := float64(h.tick), float64(h.sigma)
	lo, hi = max(0, int(math.Ceil(t-3*s))), min(len(row)-1, int(math.Floor(t+3*s)))
	if lo > hi {
		return len(row), -1
	}
	a := 1 / (2 * s * s)
	dt := float64(lo) - t
	v := float64(h.peak) * math.Exp(-a*dt*dt)
	r := math.Exp(-a * (2*dt + 1))
	q := math.Exp(-2 * a)
	for k := lo; k <= hi; k++ {
		row[k] += float32(v)
		cur[k] += float32(v)
		v *= r
		r *= q
	}
	return lo, hi
}

// noiseCorrTicks is the Gaussian σ (ticks) of the time correlation of the
// noise: shaped electronics noise is not white from sample to sample
// (common practice: about half the pulse width).
const noiseCorrTicks = 1.0

// noiseTable returns unit-variance noise that digitise reads in windows at
// random offsets, one window per wire: drawing a fresh normal for each of
// the ~29 million samples of a full event would dominate its cost. Wires
// share values at different lags, which nothing downstream can see. The
// normals are smoothed by a Gaussian of noiseCorrTicks and rescaled to
// unit variance, so neighbouring ticks are correlated as after shaping.
func noiseTable(r *rand.Rand, ticks int) []float32 {
	const half = 3
	n := max(1<<16, 4*ticks)
	raw := make([]float64, n+2*half)
	for i := range raw {
		raw[i] = r.NormFloat64()
	}
	var kern [2*half + 1]float64
	var norm float64
	for k := range kern {
		d := float64(k - half)
		kern[k] = math.Exp(-d * d / (2 * noiseCorrTicks * noiseCorrTicks))
		norm += kern[k] * kern[k]
	}
	for k := range kern {
		kern[k] /= math.Sqrt(norm)
	}
	tab := make([]float32, n)
	for i := range tab {
		var v float64
		for k, w := range kern {
			v += w * raw[i+k]
		}
		tab[i] = float32(v)
	}
	return tab
}

// digitise adds noise to an image in electrons and converts it to ADC counts.
func digitise(r *rand.Rand, img *scan.Image, noise []float32) {
	nt := img.Ticks
	const enc, inv = float32(noiseENC), float32(1 / electronsADC)
	// Adding and subtracting 1.5·2²³ rounds a float32 below 2²² in
	// magnitude to the nearest integer (ties to even) without a branch.
	const magic = float32(1<<23 + 1<<22)
	for w := 0; w < img.Wires; w++ {
		row := img.Pix[w*nt : (w+1)*nt]
		nz := noise[r.IntN(len(noise)-nt+1):]
		nz = nz[:len(row)]
		for t, v := range row {
			a := float32((v+enc*nz[t])*inv + magic)
			row[t] = a - magic
		}
	}
}
