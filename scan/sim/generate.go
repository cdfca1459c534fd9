package sim

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// Image sizes.
const (
	SizeDemo = "demo" // a crop of demoWires × demoTicks per plane around the interaction
	SizeFull = "full" // every wire of each plane × the whole readout window
)

// Demo crop (common practice for a scanning view: 1.2 m of wires × 0.96 m
// of drift at 3 mm pitch and 0.8 mm per tick).
const (
	demoWires       = 400
	demoTicks       = 1200
	demoWiresBefore = 120 // wires kept upstream of the vertex (the beam runs toward higher wires)
)

// Options configure a generated dataset.
type Options struct {
	Events int
	Seed   int64
	Size   string             // SizeDemo (default) or SizeFull
	Mix    map[string]float64 // class → relative weight; nil means DefaultMix
	// Compress writes each event as one deflated .npz instead of .npy
	// files (see dataset.Writer.Compress): several times smaller on disk.
	Compress bool
}

// DefaultMix is the class mix of the demo dataset.
func DefaultMix() map[string]float64 {
	return map[string]float64{ClassNumuCC: 0.40, ClassNueCC: 0.15, ClassNCPi0: 0.15, ClassNCOther: 0.15, ClassCosmic: 0.15}
}

// ParseMix reads a mix such as "numu-cc=0.4,nue-cc=0.15,cosmic=0.1".
func ParseMix(s string) (map[string]float64, error) {
	mix := map[string]float64{}
	for _, part := range strings.Split(s, ",") {
		part = strings.TrimSpace(part)
		if part == "" {
			continue
		}
		k, v, ok := strings.Cut(part, "=")
		if !ok {
			return nil, fmt.Errorf("mix entry %q: want class=weight", part)
		}
		var w float64
		if _, err := fmt.Sscan(strings.TrimSpace(v), &w); err != nil {
			return nil, fmt.Errorf("mix entry %q: weight is not a number", part)
		}
		mix[strings.TrimSpace(k)] = w
	}
	return mix, nil
}

// Validate checks the options.
func (o Options) Validate() error {
	var errs []error
	if o.Events < 1 {
		errs = append(errs, fmt.Errorf("events must be at least 1, got %d", o.Events))
	}
	switch o.Size {
	case "", SizeDemo, SizeFull:
	default:
		errs = append(errs, fmt.Errorf("size %q: want %q or %q", o.Size, SizeDemo, SizeFull))
	}
	if o.Mix != nil {
		known := map[string]bool{}
		for _, c := range Classes() {
			known[c] = true
		}
		var sum float64
		for k, w := range o.Mix {
			if !known[k] {
				errs = append(errs, fmt.Errorf("mix: unknown class %q (want one of %s)", k, strings.Join(Classes(), ", ")))
			}
			if !(w >= 0) || math.IsInf(w, 0) {
				errs = append(errs, fmt.Errorf("mix: weight of %s must be a finite number ≥ 0, got %g", k, w))
			}
			sum += w
		}
		if !(sum > 0) {
			errs = append(errs, errors.New("mix: weights sum to zero"))
		}
	}
	return errors.Join(errs...)
}

// EventID is the ID of the event with the given index.
func EventID(index int) string { return fmt.Sprintf("tarn-%05d", index+1) }

// Detector response (physics.md §7; common practice where no source is named).
const (
	lifetimeUs   = 6000.0 // electron lifetime, µs (demo default, common practice)
	diffLCm2s    = 6.6    // longitudinal diffusion, cm²/s ([LI16] parametrisation at 0.5 kV/cm; coefficients from memory)
	diffTCm2s    = 13.0   // transverse diffusion, cm²/s (Derenzo, in McDonald's compilation)
	shapingUs    = 1.0    // Gaussian σ of the shaped pulse, µs (a ~2 µs shaping amplifier)
	noiseENC     = 400.0  // electronics noise, e⁻ rms (cold electronics, arXiv:1705.07341)
	electronsADC = 200.0  // gain: electrons per ADC count at the pulse peak
	truthMinE    = 200.0  // a pixel gets a truth code when its charge reaches 1 ADC
)

// Cosmic muons (physics.md §8: PDG cosmic-ray review, from memory).
const (
	cosmicIv       = 70e-4 // vertical intensity above 1 GeV/c, cm⁻² s⁻¹ sr⁻¹
	cosmicMarginCm = 300.0 // the generation plane extends this far beyond the top face
	cosmicPMin     = 1000.0
	cosmicPMax     = 1e5
	cosmicIndex    = 2.7   // invented momentum spectrum ∝ (p + a)^−2.7 above 1 GeV/c …
	cosmicShift    = 1100. // … with a = 1.1 GeV/c, which gives a mean of 4 GeV/c
	muPlusFraction = 1.27 / 2.27
	muMinusDecay   = 0.25 // fraction of stopped μ⁻ that decay rather than capture in argon (from memory)
	michelMaxMeV   = 52.83
)

// generator builds one event.
type generator struct {
	r     *rand.Rand
	det   *detector.Detector
	vol   box
	tr    *transport
	truth *Truth
}

// Generate builds the event with the given index for the options: its
// planes (and pixel truth) and its truth record. The result depends only
// on the detector, opt.Seed, opt.Size, opt.Mix and the index.
func Generate(det *detector.Detector, opt Options, index int) (*scan.Event, *Truth) {
	r := eventRand(opt.Seed, index)
	vol := box{lo: vec{0, -det.HeightCm / 2, 0}, hi: vec{det.DriftLengthCm, det.HeightCm / 2, det.LengthCm}}
	g := &generator{
		r:     r,
		det:   det,
		vol:   vol,
		tr:    newTransport(r, vol, det.DriftFieldKVcm),
		truth: &Truth{Event: EventID(index), PixelCodes: pixelCodesDoc},
	}
	mix := opt.Mix
	if mix == nil {
		mix = DefaultMix()
	}
	g.truth.Class = pickClass(r, mix)
	var focus vec
	if g.truth.Class == ClassCosmic {
		focus = g.triggerCosmic()
	} else {
		focus = g.interaction(g.truth.Class)
	}
	g.cosmicOverlay()
	ev := &scan.Event{
		ID:       g.truth.Event,
		Meta:     scan.EventMeta{Run: 1, Event: int64(index + 1)},
		Detector: det,
	}
	ev.Planes, ev.Truth = g.readout(opt.Size, focus)
	return ev, g.truth
}

// pickClass draws a class from the mix, visiting classes in a fixed order.
func pickClass(r *rand.Rand, mix map[string]float64) string {
	var sum float64
	for _, c := range Classes() {
		sum += mix[c]
	}
	u := r.Float64() * sum
	last := ""
	for _, c := range Classes() {
		if mix[c] <= 0 {
			continue
		}
		last = c
		if u < mix[c] {
			return c
		}
		u -= mix[c]
	}
	return last
}

// particle kinds the generator emits.
type kind int

const (
	kMuon kind = iota
	kPion
	kProton
	kElectron
	kPhoton
	kPi0
)

func (k kind) name() string {
	return [...]string{"muon", "pion", "proton", "electron", "photon", "pi0"}[k]
}

// add records a truth particle and returns its ID.
func (g *generator) add(p Particle) int {
	p.ID = len(g.truth.Particles) + 1
	g.truth.Particles = append(g.truth.Particles, p)
	return p.ID
}

// emit transports one particle (and all its secondaries) from pos along
// dir and records it in the truth with the given parent and time.
func (g *generator) emit(k kind, pdg int, pos, dir vec, ke float64, parent int, t0Us float64, origin string) int {
	id := g.add(Particle{Type: k.name(), PDG: pdg, Start: pos, KEMeV: ke, Parent: parent, T0Us: t0Us, Origin: origin})
	g.tr.code = int32(id)
	g.tr.shift = float32(t0Us / g.det.SamplingUs)
	end, stopped := pos, false
	var te trackEnd
	switch k {
	case kMuon, kPion, kProton:
		maxLen := math.Inf(1)
		if k != kMuon && ke > hadronicMinMeV {
			maxLen = expo(g.r, hadronicLambdaCm)
		}
		te = g.tr.heavy(species(k-kMuon), pos, dir, ke, maxLen) // kMuon, kPion, kProton follow spMuon, spPion, spProton
		end, stopped = te.pos, te.stopped
	case kElectron:
		end = g.tr.electron(pos, dir, ke)
	case kPhoton:
		if first, ok := g.tr.photon(pos, dir, ke); ok {
			end = first
		} else {
			end = g.exitPoint(pos, dir)
		}
	}
	g.tr.drain()
	p := &g.truth.Particles[id-1]
	p.End, p.Stopped, p.Interacted = end, stopped && g.vol.contains(end), te.interacted
	switch {
	case te.interacted:
		g.hadronic(te, pdg, id, t0Us, origin)
	case k == kMuon && p.Stopped && (pdg == -13 || g.r.Float64() < muMinusDecay):
		g.michel(end, id, t0Us, origin)
	case k == kPion && p.Stopped && pdg == 211:
		// π⁺ → μ⁺ν at rest: the muon gets (m_π − m_μ)²/(2m_π) = 4.12 MeV
		// (range ≈ 1.5 mm) and then decays; a stopped π⁻ is captured
		// (its nuclear break-up is not simulated).
		g.emit(kMuon, -13, end, isotropic(g.r), (massPi-massMu)*(massPi-massMu)/(2*massPi), id, t0Us, origin)
	}
	return id
}

// Nuclear interactions of protons and charged pions.
const (
	hadronicLambdaCm = 85.7 // nuclear interaction length of LAr, 119.7 g/cm² ([PDG-LAr], from memory); used for pions too
	hadronicMinMeV   = 40.0 // below this kinetic energy tracks are not given interactions
)

// hadronic ends a proton or pion track in a nuclear interaction with an
// invented break-up: a pion goes on as a pion half of the time (a kink,
// with 40–80% of its energy), and up to two protons share at most 60% of
// what is left; the rest goes to neutrons and binding, which leave no charge.
func (g *generator) hadronic(te trackEnd, pdg, parent int, t0Us float64, origin string) {
	budget := 0.6 * te.t
	if (pdg == 211 || pdg == -211) && g.r.Float64() < 0.5 {
		tp := te.t * (0.4 + 0.4*g.r.Float64())
		budget = 0.6 * (te.t - tp)
		g.emit(kPion, pdg, te.pos, rotate(te.dir, 1-0.7*g.r.Float64(), 2*math.Pi*g.r.Float64()), tp, parent, t0Us, origin)
	}
	for range g.r.IntN(3) {
		tk := 15 + expo(g.r, 60)
		if tk > budget {
			break
		}
		budget -= tk
		g.emit(kProton, 2212, te.pos, isotropic(g.r), tk, parent, t0Us, origin)
	}
}

// exitPoint is where a straight line from pos along dir leaves the volume.
func (g *generator) exitPoint(pos, dir vec) vec {
	_, out, ok := g.vol.clip(pos, dir)
	if !ok || out < 0 {
		return pos
	}
	return pos.axpy(out, dir)
}

// michel adds the decay electron of a stopped muon, with the lowest-order
// spectrum x²(3 − 2x), x = E/52.83 MeV, emitted isotropically (decays at
// rest take ~2 µs, well inside one tick's worth of drift time).
func (g *generator) michel(at vec, parent int, t0Us float64, origin string) {
	var x float64
	for {
		x = g.r.Float64()
		if g.r.Float64() <= x*x*(3-2*x) {
			break
		}
	}
	g.emit(kElectron, 11, at, isotropic(g.r), x*michelMaxMeV, parent, t0Us, origin)
}

// neutrinoEnergy draws from the invented Tarn beam spectrum: a Gamma
// density with shape 3 and scale 0.4 GeV (mode 0.8 GeV, mean 1.2 GeV),
// kept within 0.25–6 GeV.
func neutrinoEnergy(r *rand.Rand) float64 {
	for {
		e := 0.4 * (expo(r, 1) + expo(r, 1) + expo(r, 1))
		if e >= 0.25 && e <= 6 {
			return e
		}
	}
}

// inelasticity draws the fraction y of the neutrino energy given to the
// hadrons as y = u^1.8 (invented; mean 1/2.8 ≈ 0.36), redrawn above yMax
// so that the lepton keeps at least 50 MeV of kinetic energy.
func inelasticity(r *rand.Rand, yMax float64) float64 {
	for {
		y := math.Pow(r.Float64(), 1.8)
		if y <= yMax {
			return y
		}
	}
}

// forward returns a direction around the beam axis +z whose polar angle
// has cos θ = c.
func forward(r *rand.Rand, c float64) vec {
	return rotate(vec{0, 0, 1}, clamp(c, -1, 1), 2*math.Pi*r.Float64())
}

// hadronDir is an invented, mildly forward angular distribution for the
// hadrons of the final state.
func hadronDir(r *rand.Rand) vec {
	return forward(r, 1-2*math.Pow(r.Float64(), 1.6))
}

// interaction generates the neutrino interaction of the class at a vertex
// drawn uniformly in the active volume and returns the vertex. The final
// states are schematic (multiplicities and energies of the right size, no
// cross-section model and no exact momentum balance).
func (g *generator) interaction(class string) vec {
	v := vec{
		g.r.Float64() * g.det.DriftLengthCm,
		(g.r.Float64() - 0.5) * g.det.HeightCm,
		g.r.Float64() * g.det.LengthCm,
	}
	eNu := neutrinoEnergy(g.r) * 1000 // MeV
	g.truth.NeutrinoGeV = eNu / 1000
	g.truth.Vertex = g.vertex(v)
	const origin = "interaction"
	y := inelasticity(g.r, 1-(massMu+50)/eNu)
	had := y * eNu // energy given to the hadronic system
	switch class {
	case ClassNumuCC, ClassNueCC:
		m, k, pdg := massMu, kMuon, 13
		if class == ClassNueCC {
			m, k, pdg = massE, kElectron, 11
		}
		eLep := eNu * (1 - y)
		p := math.Sqrt(eLep*eLep - m*m)
		// Lepton angle from an exponential Q² (mean 0.3 GeV², invented).
		q2 := expo(g.r, 0.3e6)
		c := (eLep - (q2+m*m)/(2*eNu)) / p
		g.emit(k, pdg, v, forward(g.r, c), eLep-m, 0, 0, origin)
		if class == ClassNumuCC && had > 350 && g.r.Float64() < min(0.7, (had-250)/800) {
			g.emit(kPion, 211, v, hadronDir(g.r), (had-massPi)*(0.3+0.4*g.r.Float64()), 0, 0, origin)
			had *= 0.4
		}
		g.protons(v, had, [4]float64{0.25, 0.40, 0.25, 0.10})
	case ClassNCPi0:
		t := min(30+expo(g.r, 220), eNu*0.8)
		g.pi0(v, t)
		g.protons(v, had*0.5, [4]float64{0.35, 0.40, 0.25, 0})
	case ClassNCOther:
		if g.r.Float64() < 0.5 {
			pdg := 211
			if g.r.Float64() < 0.4 {
				pdg = -211
			}
			g.emit(kPion, pdg, v, hadronDir(g.r), 40+expo(g.r, 180), 0, 0, origin)
		}
		g.protons(v, max(had, 150), [4]float64{0, 0.45, 0.35, 0.20})
	}
	return v
}

// protonBonusMeV is added to the hadronic energy the protons share, a
// stand-in for nucleons knocked out of the argon nucleus on the way out
// (invented, like the rest of the final-state model).
const protonBonusMeV = 120

// protons emits 0–3 protons (probabilities w) sharing the hadronic energy
// had (MeV) plus protonBonusMeV: each gets 20 MeV plus an exponential share
// (mean 70 MeV); the first is cut to the budget, later ones that no longer
// fit are dropped.
func (g *generator) protons(v vec, had float64, w [4]float64) {
	u, n := g.r.Float64(), 0
	for n < 3 && u >= w[n] {
		u -= w[n]
		n++
	}
	budget := min(had+protonBonusMeV, 1200)
	for j := range n {
		t := 20 + expo(g.r, 70)
		if t > budget {
			if j > 0 || budget < 25 {
				break
			}
			t = budget // the first proton always fits
		}
		budget -= t
		g.emit(kProton, 2212, v, hadronDir(g.r), t, 0, 0, "interaction")
	}
}

// pi0 emits a π0 of kinetic energy t at v and its two decay photons:
// isotropic in the π0 rest frame, boosted to the lab, so that
// m² = 2E1E2(1 − cos θ12) and the opening angle is never below
// 2 arcsin(m/E) (physics.md §6). The 1.2% Dalitz mode is not simulated.
func (g *generator) pi0(v vec, t float64) {
	dir := hadronDir(g.r)
	id := g.add(Particle{Type: kPi0.name(), PDG: 111, Start: v, End: v, KEMeV: t, Origin: "interaction"})
	g1, g2 := pi0Decay(g.r, t, dir)
	for _, ph := range [2]vec4{g1, g2} {
		g.emit(kPhoton, 22, v, ph.p.unit(), ph.e, id, 0, "interaction")
	}
}

// vec4 is an energy and a momentum (MeV).
type vec4 struct {
	e float64
	p vec
}

// pi0Decay returns the two photons of a π0 with kinetic energy t moving
// along dir.
func pi0Decay(r *rand.Rand, t float64, dir vec) (vec4, vec4) {
	e := t + massPi0
	gamma := e / massPi0
	beta := math.Sqrt(1 - 1/(gamma*gamma))
	half := massPi0 / 2
	n := isotropic(r)
	boost := func(k vec) vec4 {
		par := k.dot(dir) * half
		eLab := gamma * (half + beta*par)
		pPar := gamma * (par + beta*half)
		perp := k.scale(half).sub(dir.scale(par))
		return vec4{e: eLab, p: dir.scale(pPar).add(perp)}
	}
	return boost(n), boost(n.scale(-1))
}

// vertex returns v in cm and on each plane.
func (g *generator) vertex(v vec) *Vertex {
	vx := &Vertex{Cm: v}
	for i, p := range g.det.Planes {
		w, t := g.det.Project(i, detector.Point{X: v[0], Y: v[1], Z: v[2]})
		vx.Planes = append(vx.Planes, PlaneHit{Plane: p.Role, Wire: w, Tick: t})
	}
	return vx
}

// cosmicTimeWindow returns the range of arrival times (µs from the
// trigger) for which some of a muon's charge falls inside the readout.
func (g *generator) cosmicTimeWindow() (lo, hi float64) {
	driftTicks := g.det.DriftLengthCm / g.det.TickCm()
	lo = -(g.det.TriggerTick + driftTicks) * g.det.SamplingUs
	hi = (float64(g.det.ReadoutTicks) - g.det.TriggerTick) * g.det.SamplingUs
	return lo, hi
}

// cosmicOverlay adds the cosmic muons crossing the detector during the
// readout window. Muons are thrown on a horizontal plane at the top of the
// detector, extended by cosmicMarginCm on every side, at the rate
// I_v·S·π/2 (physics.md §8), with cos θ drawn from cos³θ on the plane
// (cos²θ per solid angle) and times uniform over the window; those whose
// line misses the active volume are dropped.
func (g *generator) cosmicOverlay() {
	lo, hi := g.cosmicTimeWindow()
	sx := g.det.DriftLengthCm + 2*cosmicMarginCm
	sz := g.det.LengthCm + 2*cosmicMarginCm
	n := poisson(g.r, cosmicIv*math.Pi/2*sx*sz*(hi-lo)*1e-6)
	for range n {
		p := vec{g.r.Float64()*sx - cosmicMarginCm, g.det.HeightCm / 2, g.r.Float64()*sz - cosmicMarginCm}
		d := cosmicDirection(g.r)
		t0 := lo + g.r.Float64()*(hi-lo)
		g.cosmic(p, d, t0)
	}
}

// cosmicDirection draws a downward direction with cos θ (zenith) from the
// density 4cos³θ on a horizontal plane and a uniform azimuth.
func cosmicDirection(r *rand.Rand) vec {
	c := math.Pow(1-r.Float64(), 0.25)
	s := math.Sqrt(1 - c*c)
	sp, cp := math.Sincos(2 * math.Pi * r.Float64())
	return vec{s * cp, -c, s * sp}
}

// cosmic transports a muon whose line passes through p along d, starting
// where it enters the active volume; it returns false if the line misses.
func (g *generator) cosmic(p, d vec, t0 float64) (entry, exit vec, ok bool) {
	in, out, hit := g.vol.clip(p, d)
	if !hit {
		return vec{}, vec{}, false
	}
	entry = p.axpy(in+1e-6, d)
	exit = p.axpy(out, d)
	pm := cosmicMomentum(g.r)
	pdg := 13
	if g.r.Float64() < muPlusFraction {
		pdg = -13
	}
	g.emit(kMuon, pdg, entry, d, math.Sqrt(pm*pm+massMu*massMu)-massMu, 0, t0, "cosmic")
	return entry, exit, true
}

// cosmicMomentum draws p (MeV/c) from the invented spectrum ∝ (p + a)^−n
// on [1, 100] GeV/c by inversion.
func cosmicMomentum(r *rand.Rand) float64 {
	for {
		p := (cosmicPMin+cosmicShift)*math.Pow(1-r.Float64(), -1/(cosmicIndex-1)) - cosmicShift
		if p <= cosmicPMax {
			return p
		}
	}
}

// triggerCosmic adds the muon that opened a cosmic-only readout window: it
// crosses the active volume at the trigger time (within ±20 µs). It
// returns a point on its path inside the volume, which the demo crop
// centres on.
func (g *generator) triggerCosmic() vec {
	for {
		p := vec{g.r.Float64() * g.det.DriftLengthCm, g.det.HeightCm / 2, g.r.Float64() * g.det.LengthCm}
		d := cosmicDirection(g.r)
		t0 := (g.r.Float64() - 0.5) * 40
		entry, exit, ok := g.cosmic(p, d, t0)
		if ok {
			// Centre on the drift position it appears at, shifted by its time.
			f := entry.add(exit.sub(entry).scale(0.2 + 0.6*g.r.Float64()))
			f[0] += t0 / g.det.SamplingUs * g.det.TickCm()
			return f
		}
	}
}
