package agree

import (
	"math"
	"slices"
)

// Consensus methods.
const (
	Majority   = "majority"
	DawidSkene = "dawid-skene"
)

// ItemLabel is the consensus of one item. Label is a category index, or
// Missing when the vote is tied or nobody rated the item. Posterior is the
// probability of Label under the method (the vote share for majority; for a
// tie, the tied share).
type ItemLabel struct {
	Item      string
	Label     int
	Posterior float64
}

// RaterQuality is one rater measured against the consensus: Confusion[k][l]
// is the probability of answering l when the consensus is k (rows sum to 1),
// RowItems[k] the (expected) number of items of class k the rater rated, and
// Accuracy the probability of answering the consensus class.
type RaterQuality struct {
	Rater     string
	Accuracy  float64
	Confusion [][]float64
	RowItems  []float64
}

// ConsensusResult is a consensus of a whole table.
type ConsensusResult struct {
	Method     string
	Categories []string
	Items      []ItemLabel
	Raters     []RaterQuality
	Priors     []float64 // class prevalence (Dawid–Skene); nil for majority
	Iterations int       // EM iterations (Dawid–Skene)
	Converged  bool      // false if the EM stopped at MaxIter (Dawid–Skene)
	Change     float64   // the last parameter change (Dawid–Skene)
	Adjudicate []string  // tied items, most contested first, for a person to decide
}

// MajorityVote labels each item with its most frequent rating. Ties go to
// adjudication (Label = Missing). A rater's confusion is counted against the
// consensus of the items it rated, its own vote included.
func MajorityVote(t *Table) ConsensusResult {
	k := len(t.Categories)
	p := compress(t)
	post := make([][]float64, p.n())
	lab := make([]int, p.n())
	for q := range post {
		post[q] = make([]float64, k)
		lab[q] = Missing
		var n float64
		for _, c := range p.row(q) {
			if c != Missing {
				post[q][c]++
				n++
			}
		}
		if n == 0 {
			continue
		}
		best, tie := 0, false
		for c := 1; c < k; c++ {
			if post[q][c] > post[q][best] {
				best, tie = c, false
			} else if post[q][c] == post[q][best] {
				tie = true
			}
		}
		for c := range post[q] {
			post[q][c] /= n
		}
		if !tie {
			lab[q] = best
		}
	}
	res := ConsensusResult{Method: Majority, Categories: t.Categories}
	res.fill(t, p, post, lab)
	for q := range post { // a hard consensus: raters are scored against the label
		for c := range post[q] {
			post[q][c] = 0
		}
		if lab[q] != Missing {
			post[q][lab[q]] = 1
		}
	}
	res.Raters = raterQuality(t, p, post, 0)
	return res
}

// fill sets the per-item labels and the adjudication list.
func (res *ConsensusResult) fill(t *Table, p *patterns, post [][]float64, lab []int) {
	res.Items = make([]ItemLabel, len(t.Items))
	type contested struct {
		item  string
		share float64
	}
	var ties []contested
	for i, name := range t.Items {
		q := p.of[i]
		il := ItemLabel{Item: name, Label: lab[q], Posterior: math.NaN()}
		if lab[q] != Missing {
			il.Posterior = post[q][lab[q]]
		} else if top := maxOf(post[q]); top > 0 {
			il.Posterior = top
			ties = append(ties, contested{name, top})
		}
		res.Items[i] = il
	}
	// Most contested first: the smallest winning share.
	slices.SortStableFunc(ties, func(a, b contested) int { return cmpFloat(a.share, b.share) })
	for _, c := range ties {
		res.Adjudicate = append(res.Adjudicate, c.item)
	}
}

func maxOf(v []float64) float64 {
	m := 0.0
	for _, x := range v {
		m = max(m, x)
	}
	return m
}

// raterQuality estimates each rater's confusion from soft class
// memberships post (one row per pattern), adding smooth to every cell.
func raterQuality(t *Table, p *patterns, post [][]float64, smooth float64) []RaterQuality {
	k := len(t.Categories)
	out := make([]RaterQuality, len(t.Raters))
	for r := range t.Raters {
		conf := make([][]float64, k)
		rows := make([]float64, k)
		for c := range conf {
			conf[c] = make([]float64, k)
		}
		for q := 0; q < p.n(); q++ {
			l := p.at(q, r)
			if l == Missing {
				continue
			}
			for c, v := range post[q] {
				conf[c][l] += p.count[q] * v
				rows[c] += p.count[q] * v
			}
		}
		var acc, tot float64
		for c := range conf {
			acc += conf[c][c]
			tot += rows[c]
			for l := range conf[c] {
				conf[c][l] = (conf[c][l] + smooth) / (rows[c] + float64(k)*smooth)
				if rows[c]+float64(k)*smooth == 0 {
					conf[c][l] = math.NaN() // no item of this class: nothing to say
				}
			}
		}
		q := RaterQuality{Rater: t.Raters[r], Accuracy: math.NaN(), Confusion: conf, RowItems: rows}
		if tot > 0 {
			q.Accuracy = acc / tot
		}
		out[r] = q
	}
	return out
}

// DSOptions tune the Dawid–Skene EM.
type DSOptions struct {
	// Smooth is a pseudo-count added to every confusion cell and class
	// count in the M-step, so that a class a rater never saw gets a uniform
	// row rather than 0/0, and no probability is exactly 0. Default 0.01.
	Smooth float64
	// Tol stops the EM when no prior or confusion entry changes by more
	// than Tol between iterations. Default 1e-7.
	Tol float64
	// MaxIter bounds the iterations. Default 10000: EM is slow near the
	// boundary (a class nearly absent), e.g. on small tables.
	MaxIter int
}

// DawidSkeneEM is the maximum-likelihood consensus of Dawid & Skene (1979,
// Applied Statistics 28:20): each rater has a confusion matrix π_r[k][l],
// the classes have priors p_k, and the EM alternates posterior class
// memberships (E) with counts-based estimates of π and p (M). It starts
// from the soft majority vote (each item's vote shares), so it needs no
// random start and is deterministic: the same table gives the same answer.
// Items whose top posteriors tie exactly go to adjudication. If the EM has
// not converged after MaxIter iterations (slow EM on small, nearly
// unidentifiable tables), the result says so in Converged and Change.
func DawidSkeneEM(t *Table, opt DSOptions) (ConsensusResult, error) {
	if opt.Smooth <= 0 {
		opt.Smooth = 0.01
	}
	if opt.Tol <= 0 {
		opt.Tol = 1e-7
	}
	if opt.MaxIter <= 0 {
		opt.MaxIter = 10000
	}
	k := len(t.Categories)
	if k < 2 {
		return ConsensusResult{}, ErrSingleCategory
	}
	p := compress(t)
	post := make([][]float64, p.n())
	for q := range post {
		post[q] = make([]float64, k)
		var n float64
		for _, c := range p.row(q) {
			if c != Missing {
				post[q][c]++
				n++
			}
		}
		for c := range post[q] {
			if n == 0 {
				post[q][c] = 1 / float64(k)
			} else {
				post[q][c] /= n
			}
		}
	}
	var priors []float64
	var quality []RaterQuality
	iter, delta := 0, math.Inf(1)
	for iter < opt.MaxIter && delta >= opt.Tol {
		iter++
		newPriors := classPriors(p, post, opt.Smooth)
		newQuality := raterQuality(t, p, post, opt.Smooth)
		delta = change(priors, newPriors, quality, newQuality)
		priors, quality = newPriors, newQuality
		expectation(p, priors, quality, post)
	}
	lab := make([]int, p.n())
	for q := range post {
		lab[q] = argmaxUnique(post[q])
	}
	res := ConsensusResult{Method: DawidSkene, Categories: t.Categories, Priors: priors,
		Iterations: iter, Converged: delta < opt.Tol, Change: delta}
	res.fill(t, p, post, lab)
	res.Raters = raterQuality(t, p, post, opt.Smooth)
	for r := range res.Raters { // expected accuracy under the model
		acc := 0.0
		for c := range priors {
			acc += priors[c] * res.Raters[r].Confusion[c][c]
		}
		res.Raters[r].Accuracy = acc
	}
	return res, nil
}

func classPriors(p *patterns, post [][]float64, smooth float64) []float64 {
	k := len(post[0])
	pr := make([]float64, k)
	var n float64
	for q := range post {
		for c, v := range post[q] {
			pr[c] += p.count[q] * v
		}
		n += p.count[q]
	}
	for c := range pr {
		pr[c] = (pr[c] + smooth) / (n + float64(k)*smooth)
	}
	return pr
}

// expectation sets each pattern's posterior class probabilities, in logs to
// stay finite with many raters.
func expectation(p *patterns, priors []float64, quality []RaterQuality, post [][]float64) {
	for q := range post {
		top := math.Inf(-1)
		for c := range post[q] {
			lp := math.Log(priors[c])
			for r, l := range p.row(q) {
				if l != Missing {
					lp += math.Log(quality[r].Confusion[c][l])
				}
			}
			post[q][c] = lp
			top = max(top, lp)
		}
		var s float64
		for c := range post[q] {
			post[q][c] = math.Exp(post[q][c] - top)
			s += post[q][c]
		}
		for c := range post[q] {
			post[q][c] /= s
		}
	}
}

// change is the largest absolute change of any parameter (+Inf on the
// first iteration).
func change(p0, p1 []float64, q0, q1 []RaterQuality) float64 {
	if p0 == nil {
		return math.Inf(1)
	}
	d := 0.0
	for c := range p0 {
		d = max(d, math.Abs(p1[c]-p0[c]))
	}
	for r := range q0 {
		for c := range q0[r].Confusion {
			for l, v := range q0[r].Confusion[c] {
				d = max(d, math.Abs(q1[r].Confusion[c][l]-v))
			}
		}
	}
	return d
}

func argmaxUnique(v []float64) int {
	best, tie := 0, false
	for c := 1; c < len(v); c++ {
		if v[c] > v[best] {
			best, tie = c, false
		} else if v[c] == v[best] {
			tie = true
		}
	}
	if tie {
		return Missing
	}
	return best
}
