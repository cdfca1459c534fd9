package agree

import (
	"cmp"
	"fmt"
	"math"
	"slices"

	"github.com/tpcscan/tpcscan/scan"
)

// Label fields that can be rated: the topology class (nominal) and the
// scanner's confidence (ordinal, in the schema's order).
const (
	FieldClass      = "class"
	FieldConfidence = "confidence"
)

// PassRatings turns a campaign's passes into ratings of the topology class:
// one per submitted pass (item = event, rater = scanner), ordered by
// scanner name and then event so that tables list scanners alphabetically.
// Assigned, draft and skipped passes are missing ratings. Callers that keep
// the last submitted revision of a reopened pass put it into Pass.Label and
// State.
func PassRatings(passes []scan.Pass) []Rating {
	rs, _ := PassFieldRatings(passes, FieldClass)
	return rs
}

// PassFieldRatings is PassRatings for a chosen label field.
func PassFieldRatings(passes []scan.Pass, field string) ([]Rating, error) {
	get := func(l scan.Label) string { return l.Class }
	switch field {
	case FieldClass:
	case FieldConfidence:
		get = func(l scan.Label) string { return l.Confidence }
	default:
		return nil, fmt.Errorf("unknown label field %q (want %s or %s)", field, FieldClass, FieldConfidence)
	}
	out := make([]Rating, 0, len(passes))
	for _, p := range passes {
		if v := get(p.Label); p.State == scan.PassSubmitted && v != "" {
			out = append(out, Rating{Item: p.EventID, Rater: p.Scanner, Label: v})
		}
	}
	slices.SortStableFunc(out, func(a, b Rating) int {
		return cmp.Or(cmp.Compare(a.Rater, b.Rater), cmp.Compare(a.Item, b.Item))
	})
	return out, nil
}

// PassLabels maps event → scanner → label for submitted passes (for
// Spatial).
func PassLabels(passes []scan.Pass) map[string]map[string]scan.Label {
	out := map[string]map[string]scan.Label{}
	for _, p := range passes {
		if p.State != scan.PassSubmitted {
			continue
		}
		if out[p.EventID] == nil {
			out[p.EventID] = map[string]scan.Label{}
		}
		out[p.EventID][p.Scanner] = p.Label
	}
	return out
}

// Summary is the handful of numbers a coordinator watches during a
// campaign: made for a terminal dashboard. NaN means undefined.
type Summary struct {
	Events, Scanners int
	PercentAgreement float64
	MeanKappa        float64 // mean of the defined pairwise Cohen's kappas
	Fleiss, Alpha    float64 // nominal alpha
	Pairs            []Pair
	Efficiency       []Recapture // empty without absent labels
	Contested        int         // events whose majority vote is tied
}

// Summarize computes a Summary of a table; absent names the labels meaning
// "no interaction" for scanning efficiency (may be empty). It does not fail
// on a table with a single category: the coefficients are then NaN.
func Summarize(t *Table, absent []string) Summary {
	s := Summary{Events: len(t.Items), Scanners: len(t.Raters), PercentAgreement: math.NaN(),
		MeanKappa: math.NaN(), Fleiss: math.NaN(), Alpha: math.NaN()}
	p := compress(t)
	a := agreeWeighted(t, p, p.weights(), Options{Metric: Nominal})
	s.PercentAgreement, s.Fleiss, s.Alpha, s.Pairs = a.PercentAgreement, a.Fleiss, a.Alpha, a.Pairs
	var sum float64
	var n int
	for _, pr := range a.Pairs {
		if !math.IsNaN(pr.Kappa) {
			sum += pr.Kappa
			n++
		}
	}
	if n > 0 {
		s.MeanKappa = sum / float64(n)
	}
	if len(absent) > 0 {
		s.Efficiency = Efficiencies(t, absent, 0.6826894921370859, ClopperPearson) // ±1σ
	}
	s.Contested = len(MajorityVote(t).Adjudicate)
	return s
}

// ClassOrder is the schema's class order restricted to the classes the
// ratings use, then any other labels alphabetically: the order tables and
// plots show a campaign's classes in.
func ClassOrder(s scan.Schema, rs []Rating) []string {
	used := map[string]bool{}
	for _, r := range rs {
		if r.Label != "" {
			used[r.Label] = true
		}
	}
	var out []string
	for _, c := range s.Classes {
		if used[c.Key] {
			out = append(out, c.Key)
			delete(used, c.Key)
		}
	}
	rest := make([]string, 0, len(used))
	for c := range used {
		rest = append(rest, c)
	}
	slices.Sort(rest)
	return append(out, rest...)
}
