package sim

import (
	"math"
	"math/rand/v2"
)

// Transport settings (common practice unless a source is named).
const (
	stepCm        = 0.3   // step of charged particles: one wire pitch
	minStepCm     = 0.01  // steps never shrink below 0.1 mm near the end of range
	electronCut   = 1.0   // MeV: e± below this deposit their energy on the spot (range ≲ 4 mm)
	photonCut     = 0.1   // MeV: photons below this are absorbed on the spot (photoelectric)
	bremCut       = 1.0   // MeV: bremsstrahlung photons below this are part of the continuous loss
	deltaVisible  = 3.0   // MeV: δ-rays above this (range ≳ 1 cm) are tracked as electrons
	mcsRefLenCm   = larX0 // length at which the Highland log term is evaluated for step-wise scattering
	pointDEdx     = 4.0   // MeV/cm given to the recombination of energy deposited on the spot
	deltaGaussMin = 30.0  // mean δ-ray count per step above which their sum is drawn from a normal
)

// deposit is ionisation charge left along a straight segment a→b: the
// number of electrons that escape recombination (before drift), the tick
// shift of the particle's arrival time, and the pixel-truth code.
type deposit struct {
	a, b  [3]float32
	q     float32
	shift float32
	code  int32
}

// pending is a secondary waiting on the transport stack.
type pending struct {
	photon bool
	pos    vec
	dir    vec
	e      float64 // kinetic energy (photons: energy)
}

// transport steps particles through liquid argon inside a volume and
// collects their deposits. All secondaries inherit the code of the truth
// particle being transported.
type transport struct {
	rng   *rand.Rand
	vol   box
	field float64 // drift field, kV/cm (recombination)
	code  int32
	shift float32
	deps  []deposit
	stack []pending
	lost  float64 // energy (MeV) carried out of the volume; for tests
}

func newTransport(r *rand.Rand, vol box, field float64) *transport {
	return &transport{rng: r, vol: vol, field: field}
}

// depositSeg records dE MeV lost along a→b at stopping power dEdx.
func (tr *transport) depositSeg(a, b vec, dE, dEdx float64) {
	if dE <= 0 {
		return
	}
	q := dE / wIon * recombination(dEdx, tr.field)
	tr.deps = append(tr.deps, deposit{
		a:     [3]float32{float32(a[0]), float32(a[1]), float32(a[2])},
		b:     [3]float32{float32(b[0]), float32(b[1]), float32(b[2])},
		q:     float32(q),
		shift: tr.shift,
		code:  tr.code,
	})
}

// scatter moves a particle ds along dir with multiple Coulomb scattering:
// in each of two perpendicular planes the lateral offset and the deflection
// are drawn together ([PDG34] eqs. 34.20 and 34.22):
// y = z1·ds·θ0/√12 + z2·ds·θ0/2, θ = z2·θ0.
func (tr *transport) scatter(pos, dir vec, ds, theta0 float64) (vec, vec) {
	u, v := basis(dir)
	theta0 = min(theta0, 1.0)
	z1, z2 := tr.rng.NormFloat64(), tr.rng.NormFloat64()
	z3, z4 := tr.rng.NormFloat64(), tr.rng.NormFloat64()
	yu := z1*ds*theta0/math.Sqrt(12) + z2*ds*theta0/2
	yv := z3*ds*theta0/math.Sqrt(12) + z4*ds*theta0/2
	np := pos.axpy(ds, dir).axpy(yu, u).axpy(yv, v)
	nd := dir.axpy(math.Tan(z2*theta0), u).axpy(math.Tan(z4*theta0), v).unit()
	return np, nd
}

// stepTheta0 is the plane rms angle for one step of ds cm. Steps add in
// quadrature, so the Highland log term is evaluated at a fixed length
// (one X0) rather than per step: the rms after one X0 of steps then equals
// eq. 34.16 at one X0 ([PDG34] warns that per-step Highland in quadrature
// comes out too small).
func stepTheta0(p, beta, ds float64) float64 {
	return highlandTheta0(p, beta, mcsRefLenCm) * math.Sqrt(ds/mcsRefLenCm)
}

// trackEnd is how a stepped track ended.
type trackEnd struct {
	pos, dir   vec
	t          float64 // kinetic energy left (0 if it stopped)
	length     float64 // path length travelled, cm
	stopped    bool    // ranged out inside the volume
	interacted bool    // reached maxLen: a nuclear interaction
}

// heavy steps a muon, pion or proton of kinetic energy t (MeV) from pos
// along dir until it stops, leaves the volume, or has travelled maxLen cm
// (where the caller puts a nuclear interaction; +Inf for none).
func (tr *transport) heavy(sp species, pos, dir vec, t, maxLen float64) trackEnd {
	rt := rangeTables()[sp]
	m := sp.mass()
	var length float64
	for {
		if !tr.vol.contains(pos) {
			return trackEnd{pos: pos, dir: dir, t: t, length: length}
		}
		if length >= maxLen {
			return trackEnd{pos: pos, dir: dir, t: t, length: length, interacted: true}
		}
		r := rt.Range(t)
		if r <= 2*minStepCm {
			end := pos.axpy(r, dir)
			tr.depositSeg(pos, end, t, t/max(r, 1e-4))
			return trackEnd{pos: end, dir: dir, length: length + r, stopped: true}
		}
		ds := stepCm
		if r < 2*stepCm {
			ds = max(minStepCm, r/2)
		}
		meanLoss := t - rt.Energy(r-ds)
		local, deltas := tr.sampleLoss(t, m, ds, meanLoss)
		p := momentum(t, m)
		beta := p / (t + m)
		np, nd := tr.scatter(pos, dir, ds, stepTheta0(p, beta, ds))
		tr.depositSeg(pos, np, local, local/ds)
		for _, e := range deltas {
			tr.stack = append(tr.stack, pending{pos: pos.axpy(tr.rng.Float64(), np.sub(pos)), dir: deltaDirection(tr.rng, dir, e, t, m), e: e})
		}
		t -= local
		for _, e := range deltas {
			t -= e
		}
		pos, dir = np, nd
		length += ds
		if t <= 0 {
			return trackEnd{pos: pos, dir: dir, length: length, stopped: true}
		}
	}
}

// sampleLoss draws the energy lost by a heavy particle in one step: a
// Moyal variate around the most probable loss of [PDG34] eq. 34.12 with
// scale ξ, plus δ-rays with the 1/T² spectrum between a cut and W_max.
// The cut is chosen so that the δ-rays carry the rest of the mean loss
// (⟨T⟩ above the cut is ξ·ln(W_max/T_cut)), so the mean of the total equals
// the Bethe mean exactly. δ-rays above deltaVisible are returned to be
// tracked; the rest is deposited with the step. Where the Moyal part alone
// already exceeds the mean (slow, heavily ionising particles), the loss is
// the mean plus a centred Moyal fluctuation.
func (tr *transport) sampleLoss(t, m, ds, meanLoss float64) (local float64, visible []float64) {
	beta2, bg, gamma := kinematics(t, m)
	xi := landauXi(beta2, ds)
	mp := mostProbableLoss(t, m, ds)
	rest := meanLoss - (mp + moyalMean*xi)
	if rest <= 0 || mp <= 0 {
		return clamp(meanLoss+xi*(moyal(tr.rng)-moyalMean), 0, t), nil
	}
	local = max(0, mp+xi*moyal(tr.rng))
	wm := wMax(bg, gamma, m)
	tcut := wm * math.Exp(-rest/xi)
	n := xi * (1/tcut - 1/wm)
	if n > deltaGaussMin {
		// Many small δ-rays: their sum is nearly normal (variance ξ(W_max − T_cut)).
		local += max(0, rest+math.Sqrt(xi*(wm-tcut))*tr.rng.NormFloat64())
		return min(local, t), nil
	}
	budget := t - local
	for k := poisson(tr.rng, n); k > 0; k-- {
		e := 1 / (1/tcut - tr.rng.Float64()*(1/tcut-1/wm))
		if e > budget {
			continue
		}
		budget -= e
		if e > deltaVisible {
			visible = append(visible, e)
		} else {
			local += e
		}
	}
	return min(local, t), visible
}

// deltaDirection is the direction of a δ-ray of kinetic energy e knocked
// out by a particle of mass m and kinetic energy t moving along dir:
// cos θ = (e/p_e)(p_max/W_max) ([PDG34] §34.2.7), at a random azimuth.
func deltaDirection(r *rand.Rand, dir vec, e, t, m float64) vec {
	_, bg, gamma := kinematics(t, m)
	wm := wMax(bg, gamma, m)
	cosT := (e / momentum(e, massE)) * (momentum(wm, massE) / wm)
	return rotate(dir, min(1, cosT), 2*math.Pi*r.Float64())
}

func clamp(x, lo, hi float64) float64 { return max(lo, min(hi, x)) }

// drain transports everything on the secondary stack.
func (tr *transport) drain() {
	for len(tr.stack) > 0 {
		p := tr.stack[len(tr.stack)-1]
		tr.stack = tr.stack[:len(tr.stack)-1]
		if p.photon {
			tr.photon(p.pos, p.dir, p.e)
		} else {
			tr.electron(p.pos, p.dir, p.e)
		}
	}
}
