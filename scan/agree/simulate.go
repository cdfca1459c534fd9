package agree

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// SimRater is a simulated scanner: Confusion[k][l] is the probability of
// answering l when the truth is k (rows sum to 1), and Coverage the
// probability of looking at an event at all (1 = every event; below 1 some
// ratings are missing).
type SimRater struct {
	Name      string
	Coverage  float64
	Confusion [][]float64
}

// ScannerConfusion builds the confusion matrix of a scanner over k classes,
// one of which (absent, or −1 for none) means "no interaction": it finds a
// real interaction with probability eff (else answers absent) and, when it
// finds one, names its class right with probability acc (else one of the
// other interaction classes, uniformly). An event without an interaction is
// always answered absent: spurious finds are not modelled, so the
// capture–recapture efficiency of such a scanner is exactly eff.
func ScannerConfusion(k, absent int, eff, acc float64) ([][]float64, error) {
	if eff < 0 || eff > 1 || acc < 0 || acc > 1 {
		return nil, fmt.Errorf("efficiency %g and accuracy %g must lie in [0, 1]", eff, acc)
	}
	others := k - 1 // interaction classes other than the true one
	if absent >= 0 {
		others--
	}
	if others < 1 && acc < 1 {
		return nil, fmt.Errorf("accuracy %g < 1 needs at least two interaction classes", acc)
	}
	if absent < 0 {
		eff = 1 // nothing to miss without a "no interaction" class
	}
	m := make([][]float64, k)
	for c := range m {
		m[c] = make([]float64, k)
		if c == absent {
			m[c][c] = 1
			continue
		}
		if absent >= 0 {
			m[c][absent] = 1 - eff
		}
		for l := range m[c] {
			switch {
			case l == c:
				m[c][l] = eff * acc
			case l != absent:
				m[c][l] = eff * (1 - acc) / float64(others)
			}
		}
	}
	return m, nil
}

// SimulateRatings draws each rater's answer for each item from its
// confusion row for the item's true class. It returns codes[i][r] (Missing
// where the rater did not look). The same seed gives the same ratings.
func SimulateRatings(truth []int, raters []SimRater, seed uint64) ([][]int, error) {
	for _, r := range raters {
		for c, row := range r.Confusion {
			s := 0.0
			for _, v := range row {
				s += v
			}
			if math.Abs(s-1) > 1e-9 {
				return nil, fmt.Errorf("simulated rater %s: confusion row %d sums to %g, not 1", r.Name, c, s)
			}
		}
	}
	rng := rand.New(rand.NewPCG(seed, 0x5ca77e7))
	out := make([][]int, len(truth))
	for i, k := range truth {
		out[i] = make([]int, len(raters))
		for r, sr := range raters {
			out[i][r] = Missing
			if rng.Float64() >= sr.Coverage {
				continue
			}
			if k < 0 || k >= len(sr.Confusion) {
				return nil, fmt.Errorf("item %d: true class %d outside rater %s's %d classes", i, k, sr.Name, len(sr.Confusion))
			}
			out[i][r] = draw(rng, sr.Confusion[k])
		}
	}
	return out, nil
}

func draw(rng *rand.Rand, p []float64) int {
	u := rng.Float64()
	for l, v := range p {
		if u < v {
			return l
		}
		u -= v
	}
	return len(p) - 1
}

// TableFromCodes builds a table from codes[i][r] over the given names.
func TableFromCodes(items, raters, categories []string, codes [][]int) (*Table, error) {
	t := &Table{Items: items, Raters: raters, Categories: categories,
		Codes: make([]int32, len(items)*len(raters))}
	if len(codes) != len(items) {
		return nil, fmt.Errorf("%d rows of codes for %d items", len(codes), len(items))
	}
	for i, row := range codes {
		if len(row) != len(raters) {
			return nil, fmt.Errorf("item %s: %d codes for %d raters", items[i], len(row), len(raters))
		}
		for r, c := range row {
			if c != Missing && (c < 0 || c >= len(categories)) {
				return nil, fmt.Errorf("item %s: code %d outside %d categories", items[i], c, len(categories))
			}
			t.Codes[i*len(raters)+r] = int32(c)
		}
	}
	if err := t.setCategories(nil, categories); err != nil {
		return nil, err
	}
	return t, nil
}

// Answer returns the rater's answer for an item of true class truth, given
// a uniform random number u in [0, 1): the inverse of the cumulative
// confusion row. Callers seed u per (rater, item) to stay deterministic
// whatever the order in which items are scanned.
func (r SimRater) Answer(truth int, u float64) int {
	row := r.Confusion[truth]
	for l, v := range row {
		if u < v {
			return l
		}
		u -= v
	}
	return len(row) - 1
}
