package agree

import (
	"math"
	"strconv"
	"testing"
)

func near(t *testing.T, name string, got, want, tol float64) {
	t.Helper()
	if math.IsNaN(got) || math.Abs(got-want) > tol {
		t.Errorf("%s = %.15g, want %.15g (±%g)", name, got, want, tol)
	}
}

// fleiss1971 is the worked example of Fleiss (1971), Psychological Bulletin
// 76(5):378–382: 30 subjects × 6 ratings, 5 categories.
var fleiss1971 = [][]float64{
	{0, 0, 0, 6, 0}, {0, 3, 0, 0, 3}, {0, 1, 4, 0, 1}, {0, 0, 0, 0, 6}, {0, 3, 0, 3, 0},
	{2, 0, 4, 0, 0}, {0, 0, 4, 0, 2}, {2, 0, 3, 1, 0}, {2, 0, 0, 4, 0}, {0, 0, 0, 0, 6},
	{1, 0, 0, 5, 0}, {1, 1, 0, 4, 0}, {0, 3, 3, 0, 0}, {1, 0, 0, 5, 0}, {0, 2, 0, 3, 1},
	{0, 0, 5, 0, 1}, {3, 0, 0, 1, 2}, {5, 1, 0, 0, 0}, {0, 2, 0, 4, 0}, {1, 0, 2, 0, 3},
	{0, 0, 0, 0, 6}, {0, 1, 0, 5, 0}, {0, 2, 0, 1, 3}, {2, 0, 0, 4, 0}, {1, 0, 0, 4, 1},
	{0, 5, 0, 1, 0}, {4, 0, 0, 0, 2}, {0, 2, 0, 4, 0}, {1, 0, 5, 0, 0}, {0, 0, 0, 0, 6},
}

// wikiFleiss is the worked example of the English Wikipedia article
// "Fleiss' kappa": 10 subjects × 14 ratings, 5 categories.
var wikiFleiss = [][]float64{
	{0, 0, 0, 0, 14}, {0, 2, 6, 4, 2}, {0, 0, 3, 5, 6}, {0, 3, 9, 2, 0}, {2, 2, 8, 1, 1},
	{7, 7, 0, 0, 0}, {3, 2, 6, 3, 0}, {2, 5, 3, 2, 2}, {6, 5, 2, 1, 0}, {0, 2, 2, 3, 7},
}

// tableFromCounts expands a subjects × categories count table into a label
// table with anonymous raters (rater j of subject i gives the j-th rating).
func tableFromCounts(t *testing.T, counts [][]float64) *Table {
	t.Helper()
	var rs []Rating
	for i, row := range counts {
		j := 0
		for c, n := range row {
			for range int(n) {
				rs = append(rs, Rating{Item: strconv.Itoa(i), Rater: "r" + strconv.Itoa(j), Label: strconv.Itoa(c + 1)})
				j++
			}
		}
	}
	tab, err := NewTable(rs, []string{"1", "2", "3", "4", "5"})
	if err != nil {
		t.Fatal(err)
	}
	return tab
}

func TestFleissKappa(t *testing.T) {
	for _, tc := range []struct {
		name   string
		counts [][]float64
		want   float64
		tol    float64
	}{
		// Fleiss (1971) p. 379: κ = 0.430 to the published digits.
		{"Fleiss 1971 published", fleiss1971, 0.430, 0.0005},
		// statsmodels 0.13.5 fleiss_kappa on the same table: 5437/12637.
		{"Fleiss 1971 vs statsmodels", fleiss1971, 5437.0 / 12637.0, 1e-12},
		// Wikipedia "Fleiss' kappa" worked example: κ = 0.210.
		{"Wikipedia published", wikiFleiss, 0.210, 0.0005},
		// statsmodels 0.13.5 on the Wikipedia table.
		{"Wikipedia vs statsmodels", wikiFleiss, 0.20993070442195522, 1e-12},
	} {
		t.Run(tc.name, func(t *testing.T) {
			near(t, "FleissKappa", FleissKappa(tc.counts), tc.want, tc.tol)
			// The same through a label table and Agree.
			a, err := Agree(tableFromCounts(t, tc.counts), Options{})
			if err != nil {
				t.Fatal(err)
			}
			near(t, "Agree.Fleiss", a.Fleiss, tc.want, tc.tol)
		})
	}
}

func TestFleissUndefined(t *testing.T) {
	for _, tc := range []struct {
		name   string
		counts [][]float64
	}{
		{"ratings per item differ", [][]float64{{2, 1}, {1, 1}}}, // common practice: Fleiss needs equal n
		{"one category only", [][]float64{{3, 0}, {3, 0}}},       // p_e = 1: 0/0
		{"single rating per item", [][]float64{{1, 0}, {0, 1}}},  // n < 2
	} {
		t.Run(tc.name, func(t *testing.T) {
			if k := FleissKappa(tc.counts); !math.IsNaN(k) {
				t.Errorf("FleissKappa = %g, want NaN (undefined)", k)
			}
		})
	}
}

// krippendorff2011 is the worked example of Krippendorff (2011), "Computing
// Krippendorff's Alpha-Reliability": 4 observers × 12 units, "" missing.
var krippendorff2011 = [][4]string{
	{"1", "1", "", "1"}, {"2", "2", "3", "2"}, {"3", "3", "3", "3"}, {"3", "3", "3", "3"},
	{"2", "2", "2", "2"}, {"1", "2", "3", "4"}, {"4", "4", "4", "4"}, {"1", "1", "2", "1"},
	{"2", "2", "2", "2"}, {"", "5", "5", "5"}, {"", "", "1", "1"}, {"", "3", "", ""},
}

func krippendorffTable(t *testing.T) *Table {
	t.Helper()
	var rs []Rating
	for u, row := range krippendorff2011 {
		for o, v := range row {
			rs = append(rs, Rating{Item: strconv.Itoa(u + 1), Rater: string(rune('A' + o)), Label: v})
		}
	}
	tab, err := NewTable(rs, nil)
	if err != nil {
		t.Fatal(err)
	}
	return tab
}

func TestKrippendorffAlpha(t *testing.T) {
	tab := krippendorffTable(t)
	for _, tc := range []struct {
		metric    Metric
		published float64 // Krippendorff (2011), three digits
		exact     float64 // exact coincidence-matrix value (statistics reference)
	}{
		{Nominal, 0.743, 0.743421052631579},
		{Ordinal, 0.815, 0.8153875037548813},
		{Interval, 0.849, 0.8491071428571428},
		{Ratio, 0.797, 0.797402774711612},
	} {
		t.Run(string(tc.metric), func(t *testing.T) {
			a, err := Agree(tab, Options{Metric: tc.metric})
			if err != nil {
				t.Fatal(err)
			}
			near(t, "alpha (published)", a.Alpha, tc.published, 0.0005)
			near(t, "alpha (exact)", a.Alpha, tc.exact, 1e-9)
		})
	}
}

func TestKrippendorffCoincidences(t *testing.T) {
	// Krippendorff (2011): the worked example has n = 40 pairable values
	// (units 1–11; unit 12 has one value). The coincidence matrix is
	// symmetric and sums to n. Hand arithmetic for o_11: unit 1 (three 1s)
	// gives 3·2/2 = 3, unit 8 (three 1s and a 2) 3·2/3 = 2, unit 11 (two
	// 1s) 2·1/1 = 2, unit 6 (one 1) 0: o_11 = 7.
	o := Coincidences(krippendorffTable(t))
	var n float64
	for c := range o {
		for d := range o[c] {
			n += o[c][d]
			if math.Abs(o[c][d]-o[d][c]) > 1e-12 {
				t.Errorf("o[%d][%d] = %g ≠ o[%d][%d] = %g", c, d, o[c][d], d, c, o[d][c])
			}
		}
	}
	near(t, "n", n, 40, 1e-12)
	near(t, "o_11", o[0][0], 7, 1e-12)
}

// TestCohenKappa: the two-rater example of the English Wikipedia article
// "Cohen's kappa" (from memory: 50 grant proposals, Yes/Yes 20, Yes/No 5,
// No/Yes 10, No/No 15; p_o = 0.7, p_e = 0.5·0.6 + 0.5·0.4 = 0.5, κ = 0.4),
// and a hand-computed 3-level example with the arithmetic written out.
func TestCohenKappa(t *testing.T) {
	// Hand computation for m below (n = 30, rows 12 13 5, columns 13 11 6):
	//   unweighted: p_o = 22/30, p_e = (12·13 + 13·11 + 5·6)/900 = 329/900,
	//     κ = (660 − 329)/(900 − 329) = 331/571.
	//   linear (weights 1, 1/2, 0): p_o = (22 + ½·8)/30 = 26/30,
	//     p_e = (329 + ½(12·11 + 13·13 + 13·6 + 5·11))/900 = 546/900,
	//     κ = (780 − 546)/(900 − 546) = 39/59.
	//   quadratic (weights 1, 3/4, 0): p_o = 28/30, p_e = (329 + ¾·434)/900
	//     = 654.5/900, κ = (840 − 654.5)/(900 − 654.5) = 371/491.
	m := [][]float64{{10, 2, 0}, {3, 8, 2}, {0, 1, 4}}
	for _, tc := range []struct {
		name string
		m    [][]float64
		w    Weighting
		want float64
	}{
		{"Wikipedia 2×2", [][]float64{{20, 5}, {10, 15}}, Unweighted, 0.4},
		{"Wikipedia 2×2 linear = unweighted", [][]float64{{20, 5}, {10, 15}}, Linear, 0.4},
		{"hand 3×3 unweighted", m, Unweighted, 331.0 / 571},
		{"hand 3×3 linear", m, Linear, 39.0 / 59},
		{"hand 3×3 quadratic", m, Quadratic, 371.0 / 491},
	} {
		t.Run(tc.name, func(t *testing.T) {
			near(t, "kappa", CohenKappa(tc.m, tc.w), tc.want, 1e-12)
		})
	}
}

func TestCohenKappaUndefined(t *testing.T) {
	// Both raters always say the same single category: p_o = p_e = 1, κ = 0/0.
	for _, w := range []Weighting{Unweighted, Linear, Quadratic} {
		if k := CohenKappa([][]float64{{7, 0}, {0, 0}}, w); !math.IsNaN(k) {
			t.Errorf("%q: kappa = %g, want NaN", w, k)
		}
	}
	if k := CohenKappa([][]float64{{0, 0}, {0, 0}}, Unweighted); !math.IsNaN(k) {
		t.Errorf("empty: kappa = %g, want NaN", k)
	}
}

func TestDeclaredScaleCountsUnusedLevels(t *testing.T) {
	// With --order 1,2,3,4 and nobody using 2, linear weights use the
	// declared positions (1 and 3 are two steps apart), not the used levels
	// 1,3,4 re-indexed: documented convention, hand-computed below.
	rs := []Rating{
		{"a", "x", "1"}, {"a", "y", "3"},
		{"b", "x", "3"}, {"b", "y", "3"},
		{"c", "x", "4"}, {"c", "y", "4"},
		{"d", "x", "1"}, {"d", "y", "1"},
	}
	full, err := NewTable(rs, []string{"1", "2", "3", "4"})
	if err != nil {
		t.Fatal(err)
	}
	used, err := NewTable(rs, []string{"1", "3", "4"})
	if err != nil {
		t.Fatal(err)
	}
	af, _ := Agree(full, Options{Weights: Linear})
	au, _ := Agree(used, Options{Weights: Linear})
	// K = 4, weights 1, 2/3, 1/3, 0; rows (x) 2,0,1,1; columns (y) 1,0,2,1.
	//   p_o = (3 + 1/3)/4 = 5/6.
	//   p_e·16 = diagonal 2·1 + 1·2 + 1·1 = 5, one step 2/3·(1·1 + 1·2) = 2,
	//   two steps 1/3·(2·2 + 1·1) = 5/3 → p_e = 13/24; κ = (20−13)/(24−13) = 7/11.
	near(t, "weighted kappa, full scale", af.Pairs[0].WeightedKappa, 7.0/11, 1e-12)
	// K = 3 on 1,3,4 (weights 1, 1/2, 0): p_o = 7/8; p_e·16 = 5 + ½·8 = 9;
	//   κ = (14 − 9)/(16 − 9) = 5/7.
	near(t, "weighted kappa, used levels", au.Pairs[0].WeightedKappa, 5.0/7, 1e-12)
}

func TestClopperPearson(t *testing.T) {
	// Exact identities from the definition (Clopper & Pearson 1934): at
	// k = 0 the upper limit solves (1−p)^n = α/2, at k = n the lower limit
	// solves p^n = α/2; and the interval of n−k mirrors that of k.
	for _, n := range []int{1, 5, 20, 263} {
		lo, hi := ClopperPearsonInterval(0, n, 0.95)
		near(t, "k=0 lower", lo, 0, 0)
		near(t, "k=0 upper", hi, 1-math.Pow(0.025, 1/float64(n)), 1e-10)
		lo, hi = ClopperPearsonInterval(n, n, 0.95)
		near(t, "k=n lower", lo, math.Pow(0.025, 1/float64(n)), 1e-10)
		near(t, "k=n upper", hi, 1, 0)
	}
	for _, k := range []int{1, 3, 7} {
		lo, hi := ClopperPearsonInterval(k, 10, 0.9)
		lo2, hi2 := ClopperPearsonInterval(10-k, 10, 0.9)
		near(t, "mirror low", lo, 1-hi2, 1e-10)
		near(t, "mirror high", hi, 1-lo2, 1e-10)
	}
	// The defining tail equations, checked by direct binomial summation:
	// P(X ≥ k | p_lo) = α/2 and P(X ≤ k | p_hi) = α/2.
	for _, c := range [][2]int{{5, 10}, {81, 263}, {1, 29}, {15, 148}} {
		k, n := c[0], c[1]
		lo, hi := ClopperPearsonInterval(k, n, 0.95)
		near(t, "upper tail at lower limit", binomTail(k, n, lo, true), 0.025, 1e-9)
		near(t, "lower tail at upper limit", binomTail(k, n, hi, false), 0.025, 1e-9)
	}
	// R binom.test(5, 10)$conf.int = 0.1870860 0.8129140 (from memory).
	lo, hi := ClopperPearsonInterval(5, 10, 0.95)
	near(t, "binom.test(5,10) lower", lo, 0.1870860, 5e-7)
	near(t, "binom.test(5,10) upper", hi, 0.8129140, 5e-7)
}

// binomTail is P(X ≥ k) (upper) or P(X ≤ k) for X ~ Binomial(n, p).
func binomTail(k, n int, p float64, upper bool) float64 {
	s := 0.0
	for x := 0; x <= n; x++ {
		if (upper && x < k) || (!upper && x > k) {
			continue
		}
		lg1, _ := math.Lgamma(float64(n + 1))
		lg2, _ := math.Lgamma(float64(x + 1))
		lg3, _ := math.Lgamma(float64(n - x + 1))
		s += math.Exp(lg1 - lg2 - lg3 + float64(x)*math.Log(p) + float64(n-x)*math.Log1p(-p))
	}
	return s
}

func TestWilson(t *testing.T) {
	// 68.27% is ±1σ: z = 1 exactly for cl = erf(1/√2).
	cl1 := math.Erf(1 / math.Sqrt2)
	// Hand arithmetic, k = 5, n = 10, z = 1: p̂ = 0.5, z²/n = 0.1,
	// centre (0.5 + 0.05)/1.1 = 0.5, half-width √(0.025 + 0.0025)/1.1.
	half := math.Sqrt(0.0275) / 1.1
	lo, hi := WilsonInterval(5, 10, cl1)
	near(t, "z=1 lower", lo, 0.5-half, 1e-12)
	near(t, "z=1 upper", hi, 0.5+half, 1e-12)
	// k = 0, n = 4, z = 1: centre 0.125/1.25 = 0.1, half √(1/64)/1.25 = 0.1.
	lo, hi = WilsonZ(0, 4, 1)
	near(t, "k=0 lower", lo, 0, 1e-15)
	near(t, "k=0 upper", hi, 0.2, 1e-12)
	// Newcombe (1998), Statistics in Medicine 17:857, Table I, method 3
	// (Wilson score without continuity correction), from memory.
	for _, c := range []struct {
		k, n   int
		lo, hi float64
	}{{81, 263, 0.2553, 0.3662}, {15, 148, 0.0624, 0.1605}, {0, 20, 0, 0.1611}, {1, 29, 0.0061, 0.1718}} {
		lo, hi := WilsonInterval(c.k, c.n, 0.95)
		near(t, "Newcombe lower", lo, c.lo, 6e-5)
		near(t, "Newcombe upper", hi, c.hi, 6e-5)
	}
}

func TestCaptureRecapture(t *testing.T) {
	// Hand arithmetic: n1 = 60, n2 = 50, m = 40.
	//   Lincoln–Petersen N = 60·50/40 = 75.
	//   Chapman N = 61·51/41 − 1 = 3111/41 − 1 = 3070/41.
	//   Seber variance = 61·51·20·10/(41²·42) = 622200/70602.
	//   efficiency A = 40/50, B = 40/60; combined = (60+50−40)/75 = 14/15.
	r := CaptureRecapture(60, 50, 40, 0.95, ClopperPearson)
	near(t, "Lincoln–Petersen", r.LincolnPetersen, 75, 1e-12)
	near(t, "Chapman", r.Chapman, 3070.0/41, 1e-12)
	near(t, "Chapman SE", r.ChapmanSE, math.Sqrt(622200.0/70602), 1e-12)
	near(t, "efficiency A", r.EffA.Value, 0.8, 1e-15)
	near(t, "efficiency B", r.EffB.Value, 40.0/60, 1e-15)
	near(t, "combined", r.Combined, 14.0/15, 1e-12)
	if !(r.EffA.Low < 0.8 && r.EffA.High > 0.8) {
		t.Errorf("efficiency A interval [%g, %g] misses 0.8", r.EffA.Low, r.EffA.High)
	}
	// m = 0: Lincoln–Petersen undefined, Chapman finite: (11·11)/1 − 1 = 120.
	r = CaptureRecapture(10, 10, 0, 0.95, Wilson)
	if !math.IsNaN(r.LincolnPetersen) || !math.IsNaN(r.Combined) {
		t.Errorf("m = 0: Lincoln–Petersen %g, combined %g, want NaN", r.LincolnPetersen, r.Combined)
	}
	near(t, "Chapman m=0", r.Chapman, 120, 1e-12)
}

func TestEfficienciesFromTable(t *testing.T) {
	// a finds items 1–4, b finds 3–6 of items 1–7 (7 found by neither; 8
	// seen by a only): n1 = 4, n2 = 4, m = 2 over the 7 events both saw.
	var rs []Rating
	for i := 1; i <= 8; i++ {
		la, lb := "none", "none"
		if i <= 4 {
			la = "cc"
		}
		if i >= 3 && i <= 6 {
			lb = "nc"
		}
		rs = append(rs, Rating{strconv.Itoa(i), "a", la})
		if i <= 7 {
			rs = append(rs, Rating{strconv.Itoa(i), "b", lb})
		}
	}
	tab, err := NewTable(rs, nil)
	if err != nil {
		t.Fatal(err)
	}
	e := Efficiencies(tab, []string{"none"}, 0.95, ClopperPearson)
	if len(e) != 1 {
		t.Fatalf("got %d pairs", len(e))
	}
	if e[0].Events != 7 || e[0].N1 != 4 || e[0].N2 != 4 || e[0].M != 2 {
		t.Errorf("counts = events %d, n1 %d, n2 %d, m %d; want 7, 4, 4, 2", e[0].Events, e[0].N1, e[0].N2, e[0].M)
	}
	near(t, "Lincoln–Petersen", e[0].LincolnPetersen, 8, 1e-12)
}
