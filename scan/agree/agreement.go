package agree

import (
	"fmt"
	"math"
)

// Options choose the variants of the agreement statistics.
type Options struct {
	Weights Weighting // for the weighted Cohen's kappa; Unweighted skips it
	Metric  Metric    // for Krippendorff's alpha; "" means nominal
}

// Pair is the agreement of two raters over the items both rated.
type Pair struct {
	A, B             string
	Items            int
	PercentAgreement float64
	Kappa            float64 // Cohen's kappa, unweighted
	WeightedKappa    float64 // NaN unless Options.Weights is set
}

// Agreement is every agreement statistic of a table. NaN means undefined.
type Agreement struct {
	Items            int
	Raters           []string
	Categories       []string
	Metric           Metric
	Weights          Weighting
	PercentAgreement float64   // mean over items of the agreeing fraction of rater pairs
	PerCategory      []float64 // specific agreement per category
	Pairs            []Pair
	Fleiss           float64 // NaN when items have different numbers of ratings
	Alpha            float64 // Krippendorff's alpha under Metric
}

// Agree computes all agreement statistics of a table.
func Agree(t *Table, opt Options) (Agreement, error) {
	if opt.Metric == "" {
		opt.Metric = Nominal
	}
	if (opt.Metric == Interval || opt.Metric == Ratio) && !t.Numeric() {
		return Agreement{}, fmt.Errorf("the %s metric needs numeric labels; got %s", opt.Metric, firstNonNumeric(t))
	}
	if err := t.CheckVariation(); err != nil {
		return Agreement{}, err
	}
	p := compress(t)
	return agreeWeighted(t, p, p.weights(), opt), nil
}

func firstNonNumeric(t *Table) string {
	for _, c := range t.Categories {
		if _, err := fmt.Sscan(c, new(float64)); err != nil {
			return fmt.Sprintf("%q", c)
		}
	}
	return "non-numeric labels"
}

// agreeWeighted computes the statistics with weight w[q] per pattern q: the
// pattern counts for the table itself, resampled counts for the bootstrap.
func agreeWeighted(t *Table, p *patterns, w []float64, opt Options) Agreement {
	k := len(t.Categories)
	a := Agreement{
		Raters: t.Raters, Categories: t.Categories,
		Metric: opt.Metric, Weights: opt.Weights,
	}
	counts := make([][]float64, p.n())
	flat := make([]float64, p.n()*k)
	var items float64
	for q := range counts {
		counts[q] = flat[q*k : (q+1)*k]
		for _, c := range p.row(q) {
			if c != Missing {
				counts[q][c]++
			}
		}
		items += w[q]
	}
	a.Items = int(items)
	a.PercentAgreement, a.PerCategory = multiAgreement(counts, w)
	a.Fleiss = fleiss(counts, w)
	a.Alpha, _ = KrippendorffAlpha(coincidences(p, k, w), t.Values, opt.Metric)
	for i := 0; i < len(t.Raters); i++ {
		for j := i + 1; j < len(t.Raters); j++ {
			m := pairConfusion(p, w, i, j, k)
			pr := Pair{A: t.Raters[i], B: t.Raters[j], PercentAgreement: PercentAgreement(m),
				Kappa: CohenKappa(m, Unweighted), WeightedKappa: math.NaN()}
			for _, row := range m {
				for _, c := range row {
					pr.Items += int(c)
				}
			}
			if opt.Weights != Unweighted {
				pr.WeightedKappa = CohenKappa(m, opt.Weights)
			}
			a.Pairs = append(a.Pairs, pr)
		}
	}
	return a
}

// multiAgreement returns the mean over items (with ≥ 2 ratings) of the
// fraction of agreeing rater pairs, Fleiss' (1971) P̄, and per category the
// proportion of specific agreement Σ n_ik(n_ik−1) / Σ n_ik(n_i−1), which
// for two raters is 2a/(2a+b+c) (Cicchetti & Feinstein 1990, J. Clin.
// Epidemiol. 43:551; from memory).
func multiAgreement(counts [][]float64, w []float64) (float64, []float64) {
	k := 0
	if len(counts) > 0 {
		k = len(counts[0])
	}
	num, den := make([]float64, k), make([]float64, k)
	var sum, items float64
	for q, row := range counts {
		var n, agree float64
		for _, c := range row {
			n += c
			agree += c * (c - 1)
		}
		if n < 2 || w[q] == 0 {
			continue
		}
		sum += w[q] * agree / (n * (n - 1))
		items += w[q]
		for c, v := range row {
			num[c] += w[q] * v * (v - 1)
			den[c] += w[q] * v * (n - 1)
		}
	}
	per := make([]float64, k)
	for c := range per {
		per[c] = math.NaN()
		if den[c] > 0 {
			per[c] = num[c] / den[c]
		}
	}
	if items == 0 {
		return math.NaN(), per
	}
	return sum / items, per
}

// Confusion returns the K×K matrix of counts of items rated by both raters
// a (rows) and b (columns).
func Confusion(t *Table, a, b int) [][]float64 {
	p := compress(t)
	return pairConfusion(p, p.weights(), a, b, len(t.Categories))
}

func pairConfusion(p *patterns, w []float64, a, b, k int) [][]float64 {
	m := make([][]float64, k)
	for i := range m {
		m[i] = make([]float64, k)
	}
	for q := 0; q < p.n(); q++ {
		ca, cb := p.at(q, a), p.at(q, b)
		if ca != Missing && cb != Missing {
			m[ca][cb] += w[q]
		}
	}
	return m
}
