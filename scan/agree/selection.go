package agree

import (
	"cmp"
	"fmt"
	"math"
	"slices"

	"github.com/tpcscan/tpcscan/scan"
)

// ClassRow is the selection's performance for one consensus class.
type ClassRow struct {
	Class  string
	Signal bool
	// Selected is the fraction of events of this consensus class that the
	// selection kept (its efficiency for the class, or the rate at which it
	// lets that background in).
	Selected Proportion
	// Correct is the fraction of selected events the selection called this
	// class whose consensus agrees (the purity of its class call).
	Correct Proportion
}

// CurvePoint is the selection redefined as "score ≥ Threshold".
type CurvePoint struct {
	Threshold          float64
	Efficiency, Purity Proportion
}

// Validation is an automated selection measured against consensus labels.
type Validation struct {
	Signal []string
	CL     float64
	Method IntervalMethod
	Events int // events with both a selection output and a consensus
	// Efficiency: selected signal / all signal. Purity: selected signal /
	// all selected. Signal means a consensus class in Signal.
	Efficiency, Purity Proportion
	Classes            []ClassRow
	Curve              []CurvePoint
	// NoConsensus lists selection events left out because their consensus
	// is missing or tied.
	NoConsensus []string
}

// maxCurvePoints bounds the score thresholds of a curve.
const maxCurvePoints = 101

// Validate measures a selection against consensus classes (event → class)
// with binomial intervals at confidence level cl.
func Validate(sel []scan.Selection, consensus map[string]string, signal []string, cl float64, m IntervalMethod) (Validation, error) {
	if len(signal) == 0 {
		return Validation{}, fmt.Errorf("validate: no signal class given")
	}
	if !(cl > 0 && cl < 1) {
		return Validation{}, fmt.Errorf("validate: confidence level %g is not in (0, 1)", cl)
	}
	v := Validation{Signal: signal, CL: cl, Method: m}
	type ev struct {
		score       float64
		sig, picked bool
	}
	var evs []ev
	var nSig, nSel, nBoth int
	classes := map[string]*[4]int{} // true events, selected, called, called right
	row := func(c string) *[4]int {
		if classes[c] == nil {
			classes[c] = new([4]int)
		}
		return classes[c]
	}
	for _, s := range sel {
		truth, ok := consensus[s.EventID]
		if !ok || truth == "" {
			v.NoConsensus = append(v.NoConsensus, s.EventID)
			continue
		}
		isSig := slices.Contains(signal, truth)
		evs = append(evs, ev{s.Score, isSig, s.Selected})
		r := row(truth)
		r[0]++
		if s.Selected {
			r[1]++
			nSel++
			if s.Class != "" {
				row(s.Class)[2]++
				if s.Class == truth {
					row(s.Class)[3]++
				}
			}
		}
		if isSig {
			nSig++
			if s.Selected {
				nBoth++
			}
		}
	}
	if len(evs) == 0 {
		return Validation{}, fmt.Errorf("validate: no selection event has a consensus label")
	}
	v.Events = len(evs)
	v.Efficiency = NewProportion(nBoth, nSig, cl, m)
	v.Purity = NewProportion(nBoth, nSel, cl, m)
	names := make([]string, 0, len(classes))
	for c := range classes {
		names = append(names, c)
	}
	slices.Sort(names)
	for _, c := range names {
		r := classes[c]
		v.Classes = append(v.Classes, ClassRow{Class: c, Signal: slices.Contains(signal, c),
			Selected: NewProportion(r[1], r[0], cl, m), Correct: NewProportion(r[3], r[2], cl, m)})
	}
	scores := make([]float64, len(evs))
	sigs := make([]bool, len(evs))
	for i, e := range evs {
		scores[i], sigs[i] = e.score, e.sig
	}
	v.Curve = ThresholdCurve(scores, sigs, cl, m)
	return v, nil
}

// ThresholdCurve returns efficiency and purity of "score ≥ t" for up to
// maxCurvePoints thresholds t spread over the distinct scores by rank.
func ThresholdCurve(scores []float64, signal []bool, cl float64, m IntervalMethod) []CurvePoint {
	idx := make([]int, 0, len(scores))
	nSig := 0
	for i, s := range scores {
		if math.IsNaN(s) {
			continue
		}
		idx = append(idx, i)
		if signal[i] {
			nSig++
		}
	}
	if len(idx) == 0 {
		return nil
	}
	slices.SortFunc(idx, func(a, b int) int { return cmp.Compare(scores[b], scores[a]) }) // high first
	// Cumulative counts at the end of each run of equal scores.
	type step struct {
		t        float64
		sel, sig int
	}
	var steps []step
	sel, sig := 0, 0
	for j, i := range idx {
		sel++
		if signal[i] {
			sig++
		}
		if j == len(idx)-1 || scores[idx[j+1]] != scores[i] {
			steps = append(steps, step{scores[i], sel, sig})
		}
	}
	stride := max(1, (len(steps)+maxCurvePoints-2)/(maxCurvePoints-1))
	var out []CurvePoint
	for j := len(steps) - 1; j >= 0; j -= stride { // ascending thresholds
		s := steps[j]
		out = append(out, CurvePoint{Threshold: s.t,
			Efficiency: NewProportion(s.sig, nSig, cl, m), Purity: NewProportion(s.sig, s.sel, cl, m)})
	}
	if out[len(out)-1].Threshold != steps[0].t { // always end at the highest score
		s := steps[0]
		out = append(out, CurvePoint{Threshold: s.t,
			Efficiency: NewProportion(s.sig, nSig, cl, m), Purity: NewProportion(s.sig, s.sel, cl, m)})
	}
	return out
}

// Labels returns rater r's labels as item → category.
func (t *Table) Labels(r int) map[string]string {
	out := make(map[string]string)
	for i, item := range t.Items {
		if c := t.At(i, r); c != Missing {
			out[item] = t.Categories[c]
		}
	}
	return out
}

// CrossTab counts the items labelled in both a (rows) and b (columns). The
// categories are order first, then any other label in sorted order.
func CrossTab(a, b map[string]string, order []string) ([]string, [][]float64) {
	cats := slices.Clone(order)
	var extra []string
	for _, m := range []map[string]string{a, b} {
		for _, c := range m {
			if !slices.Contains(cats, c) && !slices.Contains(extra, c) {
				extra = append(extra, c)
			}
		}
	}
	slices.Sort(extra)
	cats = append(cats, extra...)
	ix := make(map[string]int, len(cats))
	for i, c := range cats {
		ix[c] = i
	}
	m := make([][]float64, len(cats))
	for i := range m {
		m[i] = make([]float64, len(cats))
	}
	for item, la := range a {
		if lb, ok := b[item]; ok {
			m[ix[la]][ix[lb]]++
		}
	}
	return cats, m
}

// NotSelected is the selection's "class" of an event it rejected, in
// SelectionCalls.
const NotSelected = "(not selected)"

// SelectionCalls returns the selection's call per event: its class for a
// selected event (or "selected" when it names none), NotSelected otherwise.
func SelectionCalls(sel []scan.Selection) map[string]string {
	out := make(map[string]string, len(sel))
	for _, s := range sel {
		switch {
		case !s.Selected:
			out[s.EventID] = NotSelected
		case s.Class != "":
			out[s.EventID] = s.Class
		default:
			out[s.EventID] = "selected"
		}
	}
	return out
}
