package sim

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"github.com/tpcscan/tpcscan/scan/detector"
)

// Section numbers (§) refer to the project's physics reference, which
// lists each value with its published source.

// unbounded returns a box large enough to contain any shower: the medium
// of the physics tests.
func unbounded() box { return box{lo: vec{-1e9, -1e9, -1e9}, hi: vec{1e9, 1e9, 1e9}} }

func relErr(got, want float64) float64 { return math.Abs(got-want) / math.Abs(want) }

func muonT(p float64) float64 { return math.Sqrt(p*p+massMu*massMu) - massMu }

// TestBetheMeanLoss checks eq. 34.5 with the LAr density effect against the
// PDG muon tables for liquid argon ([PDG-μ] via the PUMAS table, §2) and
// the PDG minimum ionisation 1.508 MeV cm²/g ([PDG-LAr], §1). tol ±1%.
func TestBetheMeanLoss(t *testing.T) {
	for _, c := range []struct {
		name string
		t    float64 // kinetic energy, MeV
		want float64 // MeV cm²/g
	}{
		{"muon T=100 MeV", 100, 1.670},
		{"muon T=300 MeV", 300, 1.509},
		{"muon T=1000 MeV", 1000, 1.644},
		{"muon minimum, p=0.35 GeV/c", muonT(350), 1.508},
	} {
		got := betheDEdx(c.t, massMu) / larDensity
		if relErr(got, c.want) > 0.01 {
			t.Errorf("%s: ⟨dE/dx⟩ = %.4f MeV cm²/g, want %.3f ±1%%", c.name, got, c.want)
		}
	}
	// Proton at T = 100 MeV: NIST PSTAR electronic stopping power in argon
	// 5.213 MeV cm²/g (§2 table). tol ±1%.
	if got := betheDEdx(100, massP) / larDensity; relErr(got, 5.213) > 0.01 {
		t.Errorf("proton T=100 MeV: %.4f MeV cm²/g, want 5.213 (PSTAR) ±1%%", got)
	}
}

// TestMostProbableLoss checks eq. 34.12 against the values computed in §2
// (3 mm of LAr): 1.592 MeV/cm for a 400 MeV/c muon, 1.691 at 4 GeV/c.
// tol ±3% (§2 states no tabulated source; these are the formula's values).
func TestMostProbableLoss(t *testing.T) {
	for _, c := range []struct{ p, want float64 }{{400, 1.592}, {1000, 1.607}, {4000, 1.691}} {
		got := mostProbableLoss(muonT(c.p), massMu, 0.3) / 0.3
		if relErr(got, c.want) > 0.03 {
			t.Errorf("muon p=%g MeV/c: MPV %.4f MeV/cm, want %.3f ±3%%", c.p, got, c.want)
		}
	}
}

// stepMuons sends n muons of kinetic energy t0 along +z through a slab of
// LAr of the given thickness and returns the mean energy loss per cm, the
// collected charge per cm (electrons after recombination) and the energy
// lost in each 3 mm step.
func stepMuons(n int, t0, thick float64) (dEdx, dQdx float64) {
	r := eventRand(11, 0)
	vol := box{lo: vec{-1e3, -1e3, 0}, hi: vec{1e3, 1e3, thick}}
	var lost, length, charge float64
	for range n {
		tr := newTransport(r, vol, 0.5)
		end := tr.heavy(spMuon, vec{0, 0, 0}, vec{0, 0, 1}, t0, math.Inf(1))
		tr.drain()
		lost += t0 - end.t
		length += end.length
		for _, d := range tr.deps {
			charge += float64(d.q)
		}
	}
	return lost / length, charge / length
}

// TestMuonMIPMeanDEdx checks that the sampled losses of muons near minimum
// ionisation (p ≈ 0.39 GeV/c) average to the PDG minimum ionisation in LAr,
// 2.105 MeV/cm ([PDG-LAr], §1; the issue asks for ±5%).
func TestMuonMIPMeanDEdx(t *testing.T) {
	got, _ := stepMuons(300, muonT(390), 20)
	t.Logf("mean dE/dx %.4f MeV/cm", got)
	if relErr(got, 2.105) > 0.05 {
		t.Errorf("mean dE/dx of simulated muons = %.4f MeV/cm, want 2.105 ±5%%", got)
	}
}

// TestMuonChargePerCm checks the charge left by simulated muons after
// recombination against the modified box model ([ACC13]: α = 0.93,
// β = 0.212, at 0.5 kV/cm) applied to their mean loss: Q = ln(α + ξ)/ξ ·
// dE/dx / W (§7). Fluctuations make the per-step recombination differ from
// the recombination of the mean; the issue allows ±5%. The §7 figure for a
// MIP is 62,900 e⁻/cm.
func TestMuonChargePerCm(t *testing.T) {
	dEdx, dQdx := stepMuons(300, muonT(390), 20)
	want := recombination(dEdx, 0.5) * dEdx / wIon
	t.Logf("dQ/dx %.0f e⁻/cm, box prediction %.0f at %.4f MeV/cm", dQdx, want, dEdx)
	if relErr(dQdx, want) > 0.05 {
		t.Errorf("charge per cm = %.0f e⁻, modified box at %.3f MeV/cm predicts %.0f ±5%%", dQdx, dEdx, want)
	}
	if relErr(want, 62900) > 0.05 {
		t.Errorf("box prediction %.0f e⁻/cm, §7 gives 62,900 for a MIP", want)
	}
}

// TestRecombinationBox checks the modified box model against the values of
// §7 at 0.5 kV/cm (computed from [ACC13]'s fit): tol ±1%.
func TestRecombinationBox(t *testing.T) {
	for _, c := range []struct{ dEdx, want float64 }{{2.105, 0.705}, {5, 0.590}, {10, 0.454}, {20, 0.320}} {
		if got := recombination(c.dEdx, 0.5); relErr(got, c.want) > 0.01 {
			t.Errorf("R(%g MeV/cm) = %.4f, want %.3f ±1%%", c.dEdx, got, c.want)
		}
	}
}

// TestCSDARanges checks the range tables against NIST PSTAR (protons in
// argon) and the PDG muon tables (§3), and that simulated protons stop at
// their CSDA range on average (mean path length; the issue asks ±3%).
func TestCSDARanges(t *testing.T) {
	rt := rangeTables()
	for _, c := range []struct {
		name string
		sp   species
		t    float64
		gcm2 float64
		tol  float64
	}{
		{"proton 50 MeV (PSTAR)", spProton, 50, 3.208, 0.03},
		{"proton 100 MeV (PSTAR)", spProton, 100, 10.92, 0.03},
		{"proton 200 MeV (PSTAR)", spProton, 200, 36.27, 0.03},
		{"proton 500 MeV (PSTAR)", spProton, 500, 161.4, 0.03},
		{"muon 100 MeV (PDG)", spMuon, 100, 42.47, 0.01},
		{"muon 300 MeV (PDG)", spMuon, 300, 172.4, 0.01},
		{"muon 1000 MeV (PDG)", spMuon, 1000, 616.2, 0.01},
	} {
		want := c.gcm2 / larDensity
		if got := rt[c.sp].Range(c.t); relErr(got, want) > c.tol {
			t.Errorf("%s: CSDA range %.3f cm, want %.3f ±%g%%", c.name, got, want, 100*c.tol)
		}
		if got := rt[c.sp].Energy(rt[c.sp].Range(c.t)); relErr(got, c.t) > 1e-6 {
			t.Errorf("%s: Energy(Range(T)) = %g", c.name, got)
		}
	}
	r := eventRand(12, 0)
	for _, c := range []struct{ t, gcm2 float64 }{{50, 3.208}, {100, 10.92}, {200, 36.27}} {
		var sum float64
		const n = 200
		for range n {
			tr := newTransport(r, unbounded(), 0.5)
			end := tr.heavy(spProton, vec{}, vec{0, 0, 1}, c.t, math.Inf(1))
			if !end.stopped {
				t.Fatalf("proton of %g MeV did not stop in an unbounded medium", c.t)
			}
			sum += end.length
		}
		want := c.gcm2 / larDensity
		t.Logf("proton %g MeV: mean range %.3f cm, PSTAR %.3f cm", c.t, sum/n, want)
		if got := sum / n; relErr(got, want) > 0.03 {
			t.Errorf("proton %g MeV: mean simulated range %.3f cm, PSTAR CSDA %.3f cm ±3%%", c.t, got, want)
		}
	}
}

// TestBraggPeak checks that a stopping proton's charge per step rises
// toward its end: the last 1 cm holds more than twice the charge per cm of
// its first 5 cm (Bethe: 200 MeV protons lose ~3.5 MeV/cm at the start and
// >10 MeV/cm in the last cm).
func TestBraggPeak(t *testing.T) {
	tr := newTransport(eventRand(13, 0), unbounded(), 0.5)
	end := tr.heavy(spProton, vec{}, vec{0, 0, 1}, 200, math.Inf(1))
	var first, last float64
	for _, d := range tr.deps {
		s := float64(d.a[2])
		switch {
		case s < 5:
			first += float64(d.q) / 5
		case s > end.pos[2]-1:
			last += float64(d.q)
		}
	}
	if !(last > 2*first) {
		t.Errorf("charge in the last cm %.0f, per cm in the first 5 cm %.0f: no Bragg peak", last, first)
	}
}

// TestHighland checks eq. 34.16 against the worked examples of §4
// (1 GeV/c and 300 MeV/c muons over 14 cm: 13.68 and 48.3 mrad), and that
// step-wise sampling reproduces it: the rms projected angle of 1 GeV/c
// muons after 14 cm within the formula's 11% accuracy ([LD91]).
func TestHighland(t *testing.T) {
	for _, c := range []struct{ p, want float64 }{{1000, 13.68e-3}, {300, 48.3e-3}} {
		beta := c.p / math.Hypot(c.p, massMu)
		if got := highlandTheta0(c.p, beta, 14); relErr(got, c.want) > 2e-3 {
			t.Errorf("θ0(p=%g MeV/c, 14 cm) = %.5f rad, want %.5f", c.p, got, c.want)
		}
	}
	r := eventRand(14, 0)
	vol := box{lo: vec{-1e3, -1e3, 0}, hi: vec{1e3, 1e3, 14}}
	var sum2 float64
	const n = 2000
	for range n {
		tr := newTransport(r, vol, 0.5)
		pos, dir := vec{}, vec{0, 0, 1}
		tt := muonT(1000)
		for vol.contains(pos) {
			p := momentum(tt, massMu)
			pos, dir = tr.scatter(pos, dir, stepCm, stepTheta0(p, p/(tt+massMu), stepCm))
		}
		sum2 += math.Pow(math.Atan2(dir[0], dir[2]), 2)
	}
	t.Logf("sampled θ0 %.5f rad", math.Sqrt(sum2/n))
	if got := math.Sqrt(sum2 / n); relErr(got, 13.68e-3) > 0.11 {
		t.Errorf("sampled θ0 after 14 cm = %.5f rad, Highland 0.01368 ±11%%", got)
	}
}

// TestPhotonConversionLength checks the photon mean free path: 9/7 X0 =
// 18.0 cm in the high-energy limit ([PDG34] eq. 34.32, §5, exact), and
// that sampled first-interaction distances follow it: over 10,000 photons
// the mean is within 3% of the λ used (the check). Below a few
// hundred MeV the generator uses a longer path (Compton from Klein–Nishina
// plus a pair cross section below its limit): ≈ 22 cm at 100 MeV, inside
// the 20–25 cm of §6 (from memory).
func TestPhotonConversionLength(t *testing.T) {
	if got := photonLambda(1e7); relErr(got, pairLambdaHigh) > 1e-3 || relErr(pairLambdaHigh, 18.0) > 0.002 {
		t.Errorf("λ(10 TeV) = %.3f cm, want 9/7 X0 = 18.0 cm", got)
	}
	if got := photonLambda(100); got < 20 || got > 25 {
		t.Errorf("λ(100 MeV) = %.2f cm, want 20–25 cm (§6, from memory)", got)
	}
	for _, e := range []float64{1e5, 300, 100} {
		lambda := photonLambda(e)
		r := eventRand(15, int(e))
		var sum float64
		const n = 10000
		for range n {
			tr := newTransport(r, unbounded(), 0.5)
			first, ok := tr.photon(vec{}, vec{0, 0, 1}, e)
			if !ok {
				t.Fatal("photon did not interact in an unbounded medium")
			}
			sum += first[2]
		}
		t.Logf("E=%g MeV: mean distance %.3f cm, λ %.3f cm", e, sum/n, lambda)
		if got := sum / n; relErr(got, lambda) > 0.03 {
			t.Errorf("E=%g MeV: mean first-interaction distance %.2f cm, λ used %.2f cm ±3%%", e, got, lambda)
		}
	}
}

// showerProfile grows n electron showers of energy e along +z and returns
// the mean longitudinal charge profile in bins of bw radiation lengths and
// the fraction of charge within one Molière radius of the axis.
func showerProfile(n int, e, bw float64) (prof []float64, inRM float64) {
	return showerProfileSeed(n, e, bw, 16)
}

func showerProfileSeed(n int, e, bw float64, seed int64) (prof []float64, inRM float64) {
	r := eventRand(seed, int(e))
	prof = make([]float64, int(30/bw))
	var in, tot float64
	for range n {
		tr := newTransport(r, unbounded(), 0.5)
		tr.electron(vec{}, vec{0, 0, 1}, e)
		tr.drain()
		for _, d := range tr.deps {
			q := float64(d.q)
			z := float64(d.a[2]+d.b[2]) / 2 / larX0
			if k := int(z / bw); z >= 0 && k < len(prof) {
				prof[k] += q / float64(n)
			}
			if math.Hypot(float64(d.a[0]+d.b[0])/2, float64(d.a[1]+d.b[1])/2) < larRM {
				in += q
			}
			tot += q
		}
	}
	return prof, in / tot
}

// TestShowerProfile checks the cascade against [PDG34] §34.5: the depth of
// the maximum of the mean longitudinal profile of 0.3 and 1 GeV electron
// showers against t_max = ln(E/Ec) − 0.5 (eq. 34.36; 1.71 and 2.92 X0)
// within 15%, and the fraction of the charge within one Molière radius
// against the PDG 90% (eq. 34.37) within ±10%. What is checked is the
// emergent mean profile of the simulated cascade (charge per 0.25 X0 of
// depth, 400 showers), not a sampled Gamma function; its maximum is found
// by a local parabola (profilePeak). A Gamma fit to the whole profile
// would put it lower: at 0.3 GeV the profile rises more slowly and falls
// faster than a Gamma function. The PDG fits were made above 1 GeV; §5
// suggests ±30% below.
func TestShowerProfile(t *testing.T) {
	for _, e := range []float64{300, 1000} {
		const bw = 0.25
		prof, inRM := showerProfile(400, e, bw)
		got := profilePeak(prof, bw)
		want := math.Log(e/larEc) - 0.5
		t.Logf("E=%g MeV: maximum at %.3f X0 (PDG %.3f), %.3f within R_M", e, got, want, inRM)
		if relErr(got, want) > 0.15 {
			t.Errorf("E=%g MeV: profile maximum at %.2f X0, PDG t_max %.2f X0 ±15%%", e, got, want)
		}
		if math.Abs(inRM-0.90) > 0.09 {
			t.Errorf("E=%g MeV: %.3f of the charge within R_M, PDG 0.90 ±10%%", e, inRM)
		}
	}
}

// profilePeak returns the depth of the maximum of a binned profile: the
// vertex of a parabola fitted by least squares to the seven bins around
// the highest bin (±0.75 X0 for 0.25 X0 bins), which averages out the
// bin-to-bin noise of the mean profile.
func profilePeak(prof []float64, bw float64) float64 {
	k := 0
	for i := range prof {
		if prof[i] > prof[k] {
			k = i
		}
	}
	var m [3][4]float64
	for i := max(0, k-3); i <= min(len(prof)-1, k+3); i++ {
		tt := (float64(i) + 0.5) * bw
		x := [3]float64{1, tt, tt * tt}
		for r := range 3 {
			for c := range 3 {
				m[r][c] += x[r] * x[c]
			}
			m[r][3] += x[r] * prof[i]
		}
	}
	c := solve3(m)
	return -c[1] / (2 * c[2])
}

// solve3 solves a 3×3 linear system given as an augmented matrix by
// Gaussian elimination with partial pivoting.
func solve3(m [3][4]float64) [3]float64 {
	for col := range 3 {
		piv := col
		for r := col + 1; r < 3; r++ {
			if math.Abs(m[r][col]) > math.Abs(m[piv][col]) {
				piv = r
			}
		}
		m[col], m[piv] = m[piv], m[col]
		for r := col + 1; r < 3; r++ {
			f := m[r][col] / m[col][col]
			for k := col; k < 4; k++ {
				m[r][k] -= f * m[col][k]
			}
		}
	}
	var x [3]float64
	for r := 2; r >= 0; r-- {
		s := m[r][3]
		for k := r + 1; k < 3; k++ {
			s -= m[r][k] * x[k]
		}
		x[r] = s / m[r][r]
	}
	return x
}

// TestProfilePeak checks the peak finder on a Gamma profile (eq. 34.35)
// with a = 2.5, b = 0.5, whose maximum is at (a − 1)/b = 3; the parabola
// through ±0.75 around it is good to 2% (the Gamma peak is skewed).
func TestProfilePeak(t *testing.T) {
	const bw = 0.25
	prof := make([]float64, 120)
	for k := range prof {
		tt := (float64(k) + 0.5) * bw
		prof[k] = math.Pow(tt, 1.5) * math.Exp(-0.5*tt)
	}
	if got := profilePeak(prof, bw); math.Abs(got-3) > 0.06 {
		t.Errorf("profilePeak = %g, want 3", got)
	}
}

// TestPi0Decay checks π0 → γγ kinematics (§6): the photon energies sum to
// the π0 energy, their invariant mass is m(π0) = 134.9768 MeV to 1e-6, and
// the opening angle is never below θ_min = 2 arcsin(m/E), whose values for
// E = 200/300/500/1000 MeV are 84.9°/53.5°/31.3°/15.5° (§6).
func TestPi0Decay(t *testing.T) {
	thetaMin := func(e float64) float64 { return 2 * math.Asin(massPi0/e) }
	for _, c := range []struct{ e, deg float64 }{{200, 84.9}, {300, 53.5}, {500, 31.3}, {1000, 15.5}} {
		if got := thetaMin(c.e) * 180 / math.Pi; math.Abs(got-c.deg) > 0.05 {
			t.Errorf("θ_min(%g MeV) = %.2f°, want %.1f°", c.e, got, c.deg)
		}
	}
	r := eventRand(17, 0)
	for i := range 20000 {
		tk := 10 + float64(i%50)*40
		dir := isotropic(r)
		g1, g2 := pi0Decay(r, tk, dir)
		e := tk + massPi0
		if relErr(g1.e+g2.e, e) > 1e-9 {
			t.Fatalf("T=%g: photon energies sum to %g, want %g", tk, g1.e+g2.e, e)
		}
		m2 := (g1.e+g2.e)*(g1.e+g2.e) - g1.p.add(g2.p).dot(g1.p.add(g2.p))
		if relErr(math.Sqrt(m2), massPi0) > 1e-6 {
			t.Fatalf("T=%g: γγ mass %g", tk, math.Sqrt(m2))
		}
		open := math.Acos(clamp(g1.p.unit().dot(g2.p.unit()), -1, 1))
		if open < thetaMin(e)-1e-6 {
			t.Fatalf("T=%g: opening angle %.4f below θ_min %.4f", tk, open, thetaMin(e))
		}
	}
}

// TestCosmicZenith checks sampled cosmic directions against the cos²θ
// zenith distribution of the PDG cosmic-ray review (§8): on a horizontal
// plane the density of c = cos θ is 4c³. A χ² test over 20 equiprobable
// bins with 10,000 samples (fixed seed) must stay below the 99.9% point
// of χ² with 19 degrees of freedom (43.8, from gonum's distuv), and the
// mean of c must be 4/5 within 3σ/√N (σ² = 2/3 − 16/25).
func TestCosmicZenith(t *testing.T) {
	const n, bins = 10000, 20
	r := eventRand(18, 0)
	counts := make([]float64, bins)
	var sum float64
	for range n {
		d := cosmicDirection(r)
		c := -d[1]
		if c <= 0 || c > 1 || math.Abs(d.norm()-1) > 1e-12 {
			t.Fatalf("direction %v is not a downward unit vector", d)
		}
		sum += c
		counts[min(bins-1, int(math.Pow(c, 4)*bins))]++ // CDF of 4c³ is c⁴
	}
	var chi2 float64
	for _, o := range counts {
		chi2 += (o - n/bins) * (o - n/bins) / (n / bins)
	}
	limit := distuv.ChiSquared{K: bins - 1}.Quantile(0.999)
	if math.Abs(limit-43.82) > 0.01 {
		t.Fatalf("χ² 99.9%% point for 19 dof = %.3f, tables give 43.82", limit)
	}
	t.Logf("χ² = %.2f (limit %.2f), mean cos θ %.4f", chi2, limit, sum/n)
	if chi2 > limit {
		t.Errorf("χ² = %.1f over %d bins exceeds %.1f: zenith angles are not cos²θ", chi2, bins, limit)
	}
	sigma := math.Sqrt(2.0/3 - 16.0/25)
	if mean := sum / n; math.Abs(mean-0.8) > 3*sigma/math.Sqrt(n) {
		t.Errorf("mean cos θ = %.4f, want 0.8 ± %.4f", mean, 3*sigma/math.Sqrt(n))
	}
}

// TestMoyal checks the Landau approximation's sampler: its mean is
// γ_E + ln 2 (Moyal 1955) and its mode is at 0. tol: 3σ/√N on the mean.
func TestMoyal(t *testing.T) {
	r := eventRand(19, 0)
	const n = 200000
	var sum float64
	hist := make([]int, 40) // bins of 0.25 on [−5, 5)
	for range n {
		x := moyal(r)
		sum += x
		if k := int(math.Floor((x + 5) / 0.25)); k >= 0 && k < len(hist) {
			hist[k]++
		}
	}
	// The Moyal variance is π²/2.
	if mean := sum / n; math.Abs(mean-moyalMean) > 3*math.Sqrt(math.Pi*math.Pi/2/n) {
		t.Errorf("Moyal mean %.4f, want %.4f", mean, moyalMean)
	}
	mode := 0
	for k := range hist {
		if hist[k] > hist[mode] {
			mode = k
		}
	}
	if x := -5 + (float64(mode)+0.5)*0.25; math.Abs(x) > 0.25 {
		t.Errorf("Moyal mode near %.2f, want 0", x)
	}
}

// TestCosmicRate checks the cosmic overlay's rate. The rate through a
// horizontal surface, I_v·π/2 with I_v = 70 m⁻² s⁻¹ sr⁻¹ above 1 GeV/c, is
// 0.66 cm⁻² min⁻¹ (§8, PDG cosmic-ray review, from memory). Over 100
// readout windows the mean number of muons entering through the top face
// must match that rate times the face's area and the window's time span
// within 3σ (Poisson).
func TestCosmicRate(t *testing.T) {
	if got := cosmicIv * math.Pi / 2 * 60; relErr(got, 0.66) > 0.01 {
		t.Errorf("rate through a horizontal surface %.4f cm⁻² min⁻¹, want 0.66", got)
	}
	det := detector.Tarn()
	vol := box{lo: vec{0, -det.HeightCm / 2, 0}, hi: vec{det.DriftLengthCm, det.HeightCm / 2, det.LengthCm}}
	const windows = 100
	var top int
	for i := range windows {
		r := eventRand(20, i)
		g := &generator{r: r, det: det, vol: vol, tr: newTransport(r, vol, 0.5), truth: &Truth{}}
		g.cosmicOverlay()
		for _, p := range g.truth.Particles {
			if p.Parent == 0 && math.Abs(p.Start[1]-det.HeightCm/2) < 1e-3 {
				top++
			}
		}
	}
	lo, hi := (&generator{det: det}).cosmicTimeWindow()
	want := cosmicIv * math.Pi / 2 * det.DriftLengthCm * det.LengthCm * (hi - lo) * 1e-6 * windows
	if math.Abs(float64(top)-want) > 3*math.Sqrt(want) {
		t.Errorf("%d muons through the top face in %d windows, want %.0f ± %.0f", top, windows, want, 3*math.Sqrt(want))
	}
	t.Logf("%d muons through the top face in %d windows (%.0f expected)", top, windows, want)
}
