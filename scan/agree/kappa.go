package agree

import (
	"fmt"
	"math"
)

// Weighting selects Cohen's kappa weights for ordinal labels.
type Weighting string

// Weightings. Linear and quadratic agreement weights over K levels in
// order are w_ij = 1 − |i−j|/(K−1) and 1 − (i−j)²/(K−1)² (Cohen 1968,
// Psychological Bulletin 70:213). K counts every level of the declared
// scale, used or not.
const (
	Unweighted Weighting = ""
	Linear     Weighting = "linear"
	Quadratic  Weighting = "quadratic"
)

// ParseWeighting reads "none", "linear" or "quadratic".
func ParseWeighting(s string) (Weighting, error) {
	switch s {
	case "", "none":
		return Unweighted, nil
	case "linear":
		return Linear, nil
	case "quadratic":
		return Quadratic, nil
	}
	return "", fmt.Errorf("unknown kappa weighting %q (want none, linear or quadratic)", s)
}

func (w Weighting) weight(i, j, k int) float64 {
	if i == j {
		return 1
	}
	if w == Unweighted || k < 2 {
		return 0
	}
	d := math.Abs(float64(i-j)) / float64(k-1)
	if w == Quadratic {
		return 1 - d*d
	}
	return 1 - d
}

// CohenKappa returns Cohen's kappa (Cohen 1960, Educational and
// Psychological Measurement 20:37) of a K×K confusion matrix of counts
// (rows: first rater, columns: second), with agreement weights w. It is NaN
// when the matrix is empty or the chance agreement p_e is 1 (both raters
// used one and the same category): kappa is then 0/0.
func CohenKappa(m [][]float64, w Weighting) float64 {
	k := len(m)
	rows, cols := make([]float64, k), make([]float64, k)
	var n float64
	for i := range m {
		for j, c := range m[i] {
			rows[i] += c
			cols[j] += c
			n += c
		}
	}
	if n == 0 {
		return math.NaN()
	}
	var po, pe float64
	for i := range m {
		for j, c := range m[i] {
			wt := w.weight(i, j, k)
			po += wt * c / n
			pe += wt * rows[i] / n * cols[j] / n
		}
	}
	if 1-pe < 1e-12 {
		return math.NaN()
	}
	return (po - pe) / (1 - pe)
}

// PercentAgreement of a confusion matrix: the fraction of items on its
// diagonal; NaN when empty.
func PercentAgreement(m [][]float64) float64 {
	var n, d float64
	for i := range m {
		for j, c := range m[i] {
			n += c
			if i == j {
				d += c
			}
		}
	}
	if n == 0 {
		return math.NaN()
	}
	return d / n
}

// FleissKappa returns Fleiss' kappa (Fleiss 1971, Psychological Bulletin
// 76:378) of an items × categories table of rating counts. Every item must
// have the same number n ≥ 2 of ratings; otherwise, or when the chance
// agreement is 1, it is NaN.
func FleissKappa(counts [][]float64) float64 {
	w := make([]float64, len(counts))
	for i := range w {
		w[i] = 1
	}
	return fleiss(counts, w)
}

// fleiss is FleissKappa with a weight (multiplicity) per row.
func fleiss(counts [][]float64, w []float64) float64 {
	if len(counts) == 0 {
		return math.NaN()
	}
	k := len(counts[0])
	var n float64 = -1
	var items, pbar float64
	pj := make([]float64, k)
	for i, row := range counts {
		if w[i] == 0 {
			continue
		}
		var ni, sq float64
		for _, c := range row {
			ni += c
			sq += c * c
		}
		if ni == 0 {
			continue // an item nobody rated is not part of the design
		}
		if n < 0 {
			n = ni
		} else if ni != n {
			return math.NaN()
		}
		items += w[i]
		pbar += w[i] * (sq - ni) / (ni * (ni - 1))
		for j, c := range row {
			pj[j] += w[i] * c
		}
	}
	if n < 2 || items == 0 {
		return math.NaN()
	}
	pbar /= items
	var pe float64
	for j := range pj {
		p := pj[j] / (items * n)
		pe += p * p
	}
	if 1-pe < 1e-12 {
		return math.NaN()
	}
	return (pbar - pe) / (1 - pe)
}
