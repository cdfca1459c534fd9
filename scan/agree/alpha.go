package agree

import (
	"fmt"
	"math"
)

// Metric is the level of measurement for Krippendorff's alpha.
type Metric string

// Metrics of Krippendorff (2011), "Computing Krippendorff's
// Alpha-Reliability".
const (
	Nominal  Metric = "nominal"
	Ordinal  Metric = "ordinal"
	Interval Metric = "interval"
	Ratio    Metric = "ratio"
)

// ParseMetric reads a metric name.
func ParseMetric(s string) (Metric, error) {
	switch m := Metric(s); m {
	case Nominal, Ordinal, Interval, Ratio:
		return m, nil
	}
	return "", fmt.Errorf("unknown metric %q (want nominal, ordinal, interval or ratio)", s)
}

// Coincidences returns Krippendorff's coincidence matrix o_ck of a table:
// each unit with m ≥ 2 values adds every ordered pair of its values from
// different coders with weight 1/(m−1); units with fewer values are not
// pairable and add nothing.
func Coincidences(t *Table) [][]float64 {
	p := compress(t)
	return coincidences(p, len(t.Categories), p.weights())
}

func coincidences(p *patterns, k int, w []float64) [][]float64 {
	o := make([][]float64, k)
	for i := range o {
		o[i] = make([]float64, k)
	}
	cnt := make([]float64, k)
	var used []int
	for q := 0; q < p.n(); q++ {
		if w[q] == 0 {
			continue
		}
		used = used[:0]
		m := 0.0
		for _, c := range p.row(q) {
			if c == Missing {
				continue
			}
			if cnt[c] == 0 {
				used = append(used, int(c))
			}
			cnt[c]++
			m++
		}
		if m >= 2 {
			for _, c := range used {
				for _, d := range used {
					v := cnt[c] * cnt[d]
					if c == d {
						v = cnt[c] * (cnt[c] - 1)
					}
					o[c][d] += w[q] * v / (m - 1)
				}
			}
		}
		for _, c := range used {
			cnt[c] = 0
		}
	}
	return o
}

// KrippendorffAlpha returns α = 1 − D_o/D_e from a coincidence matrix over
// categories in level order with numeric values (needed for interval and
// ratio; may be nil otherwise). It is NaN when no pairable values exist or
// the expected disagreement is 0 (a single category used).
func KrippendorffAlpha(o [][]float64, values []float64, m Metric) (float64, error) {
	k := len(o)
	if (m == Interval || m == Ratio) && len(values) != k {
		return math.NaN(), fmt.Errorf("the %s metric needs numeric labels", m)
	}
	nc := make([]float64, k)
	var n float64
	for c := range o {
		for _, v := range o[c] {
			nc[c] += v
		}
		n += nc[c]
	}
	if n <= 1 {
		return math.NaN(), nil
	}
	var do, de float64
	for c := 0; c < k; c++ {
		for d := 0; d < k; d++ {
			if c == d {
				continue
			}
			delta := deltaSquared(m, c, d, nc, values)
			do += o[c][d] * delta
			de += nc[c] * nc[d] * delta
		}
	}
	if de == 0 {
		return math.NaN(), nil
	}
	return 1 - (n-1)*do/de, nil
}

// deltaSquared is the metric difference δ²_cd of Krippendorff (2011).
func deltaSquared(m Metric, c, d int, nc, values []float64) float64 {
	switch m {
	case Ordinal:
		lo, hi := min(c, d), max(c, d)
		var s float64
		for g := lo; g <= hi; g++ {
			s += nc[g]
		}
		s -= (nc[c] + nc[d]) / 2
		return s * s
	case Interval:
		x := values[c] - values[d]
		return x * x
	case Ratio:
		if values[c]+values[d] == 0 {
			return 0
		}
		x := (values[c] - values[d]) / (values[c] + values[d])
		return x * x
	}
	return 1
}
