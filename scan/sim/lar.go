// Package sim generates the demo events of the invented Tarn test stand:
// neutrino interactions and cosmic muons transported through liquid argon
// with published energy-loss, scattering and shower physics, then drifted
// to the three wire planes and digitised with noise. Every event comes with
// its truth (class, vertex, particles) and a per-pixel truth image.
//
// Physics values and their sources are listed beside each constant; section
// numbers refer to the project's physics reference (physics.md) and to the
// PDG Review of Particle Physics 2024, chapter 34 ("Passage of particles
// through matter"), written [PDG34] below.
package sim

import (
	"math"
	"sort"
	"sync"
)

// Liquid-argon constants ([PDG-LAr] and [PDG34] Table 34.1; physics.md §1).
const (
	larDensity = 1.396    // g/cm³
	larZoverA  = 0.45059  // ⟨Z/A⟩
	larI       = 188.0e-6 // mean excitation energy, MeV
	larX0      = 14.004   // radiation length, cm (19.55 g/cm²)
	larEc      = 32.84    // critical energy for electrons (Rossi), MeV
	larRM      = 9.043    // Molière radius, cm
	kBethe     = 0.307075 // K = 4πN_A r_e² m_e c², MeV mol⁻¹ cm²
	wIon       = 23.6e-6  // W-value, MeV per electron–ion pair [MIY74]
	avogadro   = 6.02214076e23
	classicalR = 2.8179403262e-13 // classical electron radius r_e, cm (CODATA)

	// Sternheimer density-effect parameters for liquid argon ([PDG-LAr]).
	stA    = 0.1956
	stK    = 3.000
	stX0   = 0.2000
	stX1   = 3.000
	stCbar = 5.2146
)

// Particle masses in MeV (PDG Summary Tables 2024).
const (
	massE   = 0.51099895
	massMu  = 105.6583755
	massPi  = 139.57039
	massPi0 = 134.9768
	massP   = 938.27208816
)

// pairLambdaHigh is the high-energy pair-production mean free path 9/7 X0
// ([PDG34] eq. 34.32; physics.md §5): 18.0 cm.
const pairLambdaHigh = 9.0 / 7.0 * larX0

// electronDEdx is the collision loss of shower electrons and positrons in
// MeV/cm. Rossi's definition of the critical energy (ionisation loss per
// radiation length equals the energy) makes it Ec/X0 = 2.35 MeV/cm, which
// keeps the cascade consistent with the Ec and X0 above.
const electronDEdx = larEc / larX0

// kinematics returns β², βγ and γ of a particle of mass m with kinetic energy t.
func kinematics(t, m float64) (beta2, betagamma, gamma float64) {
	gamma = 1 + t/m
	betagamma = math.Sqrt(gamma*gamma - 1)
	beta2 = betagamma * betagamma / (gamma * gamma)
	return
}

// momentum returns p in MeV/c for kinetic energy t and mass m.
func momentum(t, m float64) float64 { return math.Sqrt(t * (t + 2*m)) }

// wMax is the largest energy transfer to a free electron in one collision
// ([PDG34] eq. 34.4).
func wMax(betagamma, gamma, m float64) float64 {
	r := massE / m
	return 2 * massE * betagamma * betagamma / (1 + 2*gamma*r + r*r)
}

// densityEffect is δ(βγ) of [PDG34] eq. 34.7 with the LAr Sternheimer
// parameters; argon is an insulator, so δ = 0 below x0.
func densityEffect(betagamma float64) float64 {
	x := math.Log10(betagamma)
	switch {
	case x >= stX1:
		return 2*math.Ln10*x - stCbar
	case x >= stX0:
		return 2*math.Ln10*x - stCbar + stA*math.Pow(stX1-x, stK)
	default:
		return 0
	}
}

// betheDEdx is the mean energy loss of a singly charged particle of mass m
// and kinetic energy t in liquid argon, in MeV/cm ([PDG34] eq. 34.5, no
// shell or Barkas corrections, no radiative losses).
func betheDEdx(t, m float64) float64 {
	beta2, bg, gamma := kinematics(t, m)
	wm := wMax(bg, gamma, m)
	arg := 2 * massE * bg * bg * wm / (larI * larI)
	bracket := 0.5*math.Log(arg) - beta2 - densityEffect(bg)/2
	return larDensity * kBethe * larZoverA / beta2 * bracket
}

// landauXi is ξ of [PDG34] eq. 34.12 for a step of ds cm, in MeV.
func landauXi(beta2, ds float64) float64 {
	return 0.5 * kBethe * larZoverA * larDensity * ds / beta2
}

// mostProbableLoss is the Landau–Vavilov–Bichsel most probable energy loss
// in a step of ds cm ([PDG34] eq. 34.12, j = 0.200), in MeV.
func mostProbableLoss(t, m, ds float64) float64 {
	beta2, bg, _ := kinematics(t, m)
	xi := landauXi(beta2, ds)
	return xi * (math.Log(2*massE*bg*bg/larI) + math.Log(xi/larI) + 0.200 - beta2 - densityEffect(bg))
}

// rangeTable holds the CSDA range of one particle species as a function of
// kinetic energy on a logarithmic grid, from the integral of 1/betheDEdx.
type rangeTable struct {
	mass       float64
	lnT0, dlnT float64
	t, r       []float64 // kinetic energy (MeV) and range (cm), increasing
}

// Table grid: from the kinetic energy at βγ = 0.046 (1 MeV for a proton,
// where the Bethe formula still holds to ~10%) up to 100 GeV.
const (
	tableBG0    = 0.0462
	tableTMax   = 1e5
	tablePoints = 1200
)

func newRangeTable(m float64) *rangeTable {
	t0 := m * (math.Sqrt(1+tableBG0*tableBG0) - 1)
	rt := &rangeTable{mass: m, lnT0: math.Log(t0)}
	rt.dlnT = (math.Log(tableTMax) - rt.lnT0) / (tablePoints - 1)
	rt.t = make([]float64, tablePoints)
	rt.r = make([]float64, tablePoints)
	// Below the grid the loss grows roughly as 1/T, so R(t0) ≈ t0/(2 S(t0)).
	prev := t0 / betheDEdx(t0, m)
	rt.t[0], rt.r[0] = t0, 0.5*prev
	for i := 1; i < tablePoints; i++ {
		t := math.Exp(rt.lnT0 + float64(i)*rt.dlnT)
		cur := t / betheDEdx(t, m) // dR/dlnT
		rt.t[i] = t
		rt.r[i] = rt.r[i-1] + 0.5*(prev+cur)*rt.dlnT
		prev = cur
	}
	return rt
}

// Range returns the CSDA range in cm of a particle with kinetic energy t.
func (rt *rangeTable) Range(t float64) float64 {
	if t <= rt.t[0] {
		return rt.r[0] * (t / rt.t[0]) * (t / rt.t[0])
	}
	f := (math.Log(t) - rt.lnT0) / rt.dlnT
	i := int(f)
	if i >= tablePoints-1 {
		return rt.r[tablePoints-1]
	}
	w := f - float64(i)
	return rt.r[i] + w*(rt.r[i+1]-rt.r[i])
}

// Energy returns the kinetic energy whose CSDA range is r cm.
func (rt *rangeTable) Energy(r float64) float64 {
	if r <= 0 {
		return 0
	}
	if r <= rt.r[0] {
		return rt.t[0] * math.Sqrt(r/rt.r[0])
	}
	i := sort.SearchFloat64s(rt.r, r)
	if i >= tablePoints {
		return rt.t[tablePoints-1]
	}
	w := (r - rt.r[i-1]) / (rt.r[i] - rt.r[i-1])
	return math.Exp(rt.lnT0 + (float64(i-1)+w)*rt.dlnT)
}

// species are the charged hadrons and muons the stepper knows.
type species int

const (
	spMuon species = iota
	spPion
	spProton
	nSpecies
)

func (s species) mass() float64 {
	return [...]float64{massMu, massPi, massP}[s]
}

// rangeTables is computed once; the tables are read-only afterwards.
var rangeTables = sync.OnceValue(func() [nSpecies]*rangeTable {
	var t [nSpecies]*rangeTable
	for s := species(0); s < nSpecies; s++ {
		t[s] = newRangeTable(s.mass())
	}
	return t
})

// Modified box recombination ([ACC13], fitted at 481 V/cm; physics.md §7).
const (
	boxAlpha = 0.93
	boxBeta  = 0.212 // (kV/cm)(g/cm²)/MeV
)

// recombinationFloor is the smallest stopping power (MeV/cm) given to the
// box model: below ~0.3 MeV/cm ln(α + ξ) turns negative. Only fluctuated
// thin steps reach it; the fit was made on tracks of 1.5–30 MeV/cm.
const recombinationFloor = 1.0

// recombination returns the fraction of ionisation electrons that escape
// recombination at stopping power dEdx (MeV/cm) in field e (kV/cm):
// R = ln(α + ξ)/ξ with ξ = β·dEdx/(ρE).
func recombination(dEdx, e float64) float64 {
	xi := boxBeta * max(dEdx, recombinationFloor) / (larDensity * e)
	return math.Log(boxAlpha+xi) / xi
}

// highlandTheta0 is the plane rms scattering angle after length x cm for a
// singly charged particle of momentum p (MeV/c) and velocity β
// ([PDG34] eq. 34.16).
func highlandTheta0(p, beta, x float64) float64 {
	t := x / larX0
	return 13.6 / (beta * p) * math.Sqrt(t) * (1 + 0.038*math.Log(t/(beta*beta)))
}
