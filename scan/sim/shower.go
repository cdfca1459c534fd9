package sim

import (
	"math"
	"math/rand/v2"
)

// Electromagnetic cascades are grown particle by particle rather than
// painted from a mean profile, so that a shower shows the branching
// sub-tracks, gaps and isolated Compton blips a scanner sees:
//   - e±: continuous collision loss Ec/X0 per cm, Highland scattering, and
//     bremsstrahlung photons above bremCut drawn from the complete-screening
//     spectrum dN/dk = (1/X0)(1/k)(4/3 − 4/3·y + y²), y = k/E
//     ([PDG34] eq. 34.29), whose energy-weighted integral is E per X0;
//   - γ: Compton scattering (Klein–Nishina) and pair production after
//     exponential distances with the total mean free path below.
// The longitudinal profile and lateral spread then follow from X0, Ec and
// R_M; tests compare them with [PDG34] eqs. 34.35–34.37.

// electron steps an electron or positron of kinetic energy t until it
// falls below electronCut or leaves the volume, and returns its end point.
func (tr *transport) electron(pos, dir vec, t float64) vec {
	for {
		if !tr.vol.contains(pos) {
			return pos
		}
		if t < electronCut {
			tr.depositSeg(pos, pos, t, pointDEdx)
			return pos
		}
		ds := min(stepCm, t/electronDEdx)
		for k := poisson(tr.rng, bremPerX0(t)*ds/larX0); k > 0; k-- {
			if e := sampleBrem(tr.rng, t); e < t {
				t -= e
				tr.stack = append(tr.stack, pending{photon: true, pos: pos, dir: dir, e: e})
			}
		}
		// Collision loss with a centred Moyal fluctuation of scale ξ
		// ([PDG34] eq. 34.12), so electron tracks flicker like muon tracks.
		p := momentum(t, massE)
		beta2 := p * p / ((t + massE) * (t + massE))
		loss := clamp(electronDEdx*ds+landauXi(beta2, ds)*(moyal(tr.rng)-moyalMean), 0, t)
		np, nd := tr.scatter(pos, dir, ds, stepTheta0(p, math.Sqrt(beta2), ds))
		tr.depositSeg(pos, np, loss, loss/ds)
		t -= loss
		pos, dir = np, nd
	}
}

// bremPerX0 is the number of bremsstrahlung photons above bremCut emitted
// per radiation length by an electron of energy e: the integral of the
// complete-screening spectrum from bremCut to e.
func bremPerX0(e float64) float64 {
	if e <= bremCut {
		return 0
	}
	c := bremCut / e
	return 4.0/3.0*math.Log(1/c) - 4.0/3.0*(1-c) + (1-c*c)/2
}

// sampleBrem draws a photon energy on [bremCut, e] from the
// complete-screening spectrum: 1/k by inversion, then the bracket by
// rejection (it is at most 4/3).
func sampleBrem(r *rand.Rand, e float64) float64 {
	for {
		k := bremCut * math.Pow(e/bremCut, r.Float64())
		y := k / e
		if r.Float64()*4.0/3.0 <= 4.0/3.0-4.0/3.0*y+y*y {
			return k
		}
	}
}

// photon transports a photon of energy e from pos along dir through
// Compton scatters until it converts, is absorbed, or leaves the volume. It
// returns where it first interacted and whether that happened inside.
func (tr *transport) photon(pos, dir vec, e float64) (first vec, ok bool) {
	for {
		if e < photonCut {
			if tr.vol.contains(pos) {
				tr.depositSeg(pos, pos, e, pointDEdx)
			}
			return first, ok
		}
		muC, muP := comptonMu(e), pairMu(e)
		pos = pos.axpy(expo(tr.rng, 1/(muC+muP)), dir)
		if !tr.vol.contains(pos) {
			tr.lost += e
			return first, ok
		}
		if !ok {
			first, ok = pos, true
		}
		if tr.rng.Float64()*(muC+muP) < muC {
			eps, cosT := sampleKleinNishina(tr.rng, e/massE)
			phi := 2 * math.Pi * tr.rng.Float64()
			nd := rotate(dir, cosT, phi)
			te := e * (1 - eps)
			// The electron carries the momentum the photon lost.
			edir := dir.scale(e).sub(nd.scale(e * eps)).unit()
			tr.stack = append(tr.stack, pending{pos: pos, dir: edir, e: te})
			e, dir = e*eps, nd
			continue
		}
		avail := e - 2*massE
		x := sampleBetheHeitler(tr.rng)
		for _, te := range []float64{x * avail, (1 - x) * avail} {
			// Pair members leave at angles of order m_e/E ([PDG34] §34.4.2).
			cosT := math.Cos(massE / (te + massE))
			tr.stack = append(tr.stack, pending{pos: pos, dir: rotate(dir, cosT, 2*math.Pi*tr.rng.Float64()), e: te})
		}
		return first, ok
	}
}

// sampleBetheHeitler draws the fraction of the available energy given to
// one member of a pair, from the high-energy shape 1 − (4/3)x(1 − x)
// ([PDG34] eq. 34.31).
func sampleBetheHeitler(r *rand.Rand) float64 {
	for {
		x := r.Float64()
		if r.Float64() <= 1-4.0/3.0*x*(1-x) {
			return x
		}
	}
}

// electronDensity is the number of electrons per cm³ in liquid argon.
const electronDensity = larDensity * avogadro * larZoverA

// kleinNishina is the total Compton cross section per electron in cm² for a
// photon of energy k in units of m_e c² (Klein & Nishina 1929).
func kleinNishina(k float64) float64 {
	l := math.Log(1 + 2*k)
	a := (1 + k) / (k * k) * (2*(1+k)/(1+2*k) - l/k)
	b := l / (2 * k)
	c := (1 + 3*k) / ((1 + 2*k) * (1 + 2*k))
	return 2 * math.Pi * classicalR * classicalR * (a + b - c)
}

// comptonMu is the Compton attenuation coefficient (1/cm) at energy e MeV.
func comptonMu(e float64) float64 { return electronDensity * kleinNishina(e/massE) }

// pairFraction returns the pair cross section as a fraction of its high-energy
// limit 7/(9X0), against photon energy in MeV. The shape (zero at
// threshold, about three quarters at 100 MeV, within 5% of the limit above
// 1 GeV) is from memory of the argon curves in [PDG34] Fig. 34.17 and the
// NIST XCOM tables; the limit itself is exact.
func pairFraction(e float64) float64 {
	tab := [...][2]float64{
		{2 * massE, 0}, {1.5, 0.005}, {2, 0.02}, {3, 0.06}, {5, 0.14}, {10, 0.30},
		{20, 0.47}, {50, 0.65}, {100, 0.76}, {200, 0.84}, {500, 0.91}, {1000, 0.945},
		{3000, 0.975}, {1e4, 0.99}, {1e5, 0.999},
	}
	if e <= tab[0][0] {
		return 0
	}
	for i := 1; i < len(tab); i++ {
		if e < tab[i][0] {
			w := math.Log(e/tab[i-1][0]) / math.Log(tab[i][0]/tab[i-1][0])
			return tab[i-1][1] + w*(tab[i][1]-tab[i-1][1])
		}
	}
	return 1
}

// pairMu is the pair-production attenuation coefficient (1/cm).
func pairMu(e float64) float64 { return pairFraction(e) / pairLambdaHigh }

// photonLambda is the mean free path (cm) of a photon of energy e MeV
// before its first Compton scatter or conversion. Above ~10 GeV it tends
// to 9/7 X0 = 18.0 cm; at 100 MeV it is ≈ 22 cm.
func photonLambda(e float64) float64 { return 1 / (comptonMu(e) + pairMu(e)) }

// sampleKleinNishina draws the scattered photon's energy fraction ε and
// cos θ for a photon of energy k (units of m_e c²), by the composition and
// rejection method of Butcher & Messel (1960).
func sampleKleinNishina(r *rand.Rand, k float64) (eps, cosT float64) {
	eps0 := 1 / (1 + 2*k)
	a1 := -math.Log(eps0)
	a2 := (1 - eps0*eps0) / 2
	for {
		if a1/(a1+a2) > r.Float64() {
			eps = math.Exp(-a1 * r.Float64())
		} else {
			eps = math.Sqrt(eps0*eps0 + (1-eps0*eps0)*r.Float64())
		}
		oneMinusCos := (1 - eps) / (eps * k)
		sin2 := oneMinusCos * (2 - oneMinusCos)
		if r.Float64() <= 1-eps*sin2/(1+eps*eps) {
			return eps, 1 - oneMinusCos
		}
	}
}
