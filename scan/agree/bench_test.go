package agree

import (
	"context"
	"strconv"
	"testing"
)

// benchTable is 100,000 events × 3 scanners over k classes, each scanner
// right 85% of the time and missing 5% of the events.
func benchTable(b *testing.B, k int) *Table {
	b.Helper()
	var raters []SimRater
	for r := range 3 {
		m := make([][]float64, k)
		for c := range m {
			m[c] = make([]float64, k)
			for l := range m[c] {
				m[c][l] = 0.15 / float64(k-1)
			}
			m[c][c] = 0.85
		}
		raters = append(raters, SimRater{Name: "s" + strconv.Itoa(r), Coverage: 0.95, Confusion: m})
	}
	priors := make([]float64, k)
	for c := range priors {
		priors[c] = 1 / float64(k)
	}
	tab, _ := simTable(b, 100_000, priors, raters, 1)
	return tab
}

// BenchmarkAgree: every agreement statistic (percent and per-category
// agreement, pairwise Cohen's kappa unweighted and quadratic, Fleiss,
// ordinal Krippendorff's alpha) plus capture–recapture and the majority
// vote, from the label table. Target ≤ 300 ms.
func BenchmarkAgree(b *testing.B) {
	tab := benchTable(b, 8)
	for b.Loop() {
		if _, err := Agree(tab, Options{Weights: Quadratic, Metric: Ordinal}); err != nil {
			b.Fatal(err)
		}
		Efficiencies(tab, []string{"c0"}, 0.95, ClopperPearson)
		MajorityVote(tab)
	}
}

// BenchmarkAgreeFromRatings adds building the table from 300,000 rows.
func BenchmarkAgreeFromRatings(b *testing.B) {
	tab := benchTable(b, 8)
	var rs []Rating
	for i, it := range tab.Items {
		for r, name := range tab.Raters {
			if c := tab.At(i, r); c != Missing {
				rs = append(rs, Rating{it, name, tab.Categories[c]})
			}
		}
	}
	for b.Loop() {
		t, err := NewTable(rs, nil)
		if err != nil {
			b.Fatal(err)
		}
		if _, err := Agree(t, Options{Weights: Quadratic, Metric: Ordinal}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkDawidSkene: 8 classes. Target ≤ 2 s.
func BenchmarkDawidSkene(b *testing.B) {
	tab := benchTable(b, 8)
	for b.Loop() {
		if _, err := DawidSkeneEM(tab, DSOptions{}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkBootstrap1000: 1,000 resamples of all agreement statistics.
// Target ≤ 5 s on 2 cores.
func BenchmarkBootstrap1000(b *testing.B) {
	tab := benchTable(b, 8)
	for b.Loop() {
		if _, err := Bootstrap(context.Background(), tab, Options{Weights: Quadratic, Metric: Ordinal}, 1000, 1, 0.95); err != nil {
			b.Fatal(err)
		}
	}
}
