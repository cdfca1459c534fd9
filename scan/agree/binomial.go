package agree

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// IntervalMethod names a binomial confidence interval.
type IntervalMethod string

// Binomial interval methods.
const (
	ClopperPearson IntervalMethod = "clopper-pearson"
	Wilson         IntervalMethod = "wilson"
)

// ParseIntervalMethod reads "clopper-pearson" or "wilson".
func ParseIntervalMethod(s string) (IntervalMethod, error) {
	switch m := IntervalMethod(s); m {
	case ClopperPearson, Wilson:
		return m, nil
	}
	return "", fmt.Errorf("unknown interval %q (want clopper-pearson or wilson)", s)
}

// Proportion is k successes in n trials with an interval on k/n. With n = 0
// the value and bounds are NaN.
type Proportion struct {
	K, N      int
	Value     float64
	Low, High float64
}

// NewProportion returns k/n with its interval at confidence level cl.
func NewProportion(k, n int, cl float64, m IntervalMethod) Proportion {
	p := Proportion{K: k, N: n, Value: math.NaN()}
	if n > 0 {
		p.Value = float64(k) / float64(n)
	}
	if m == Wilson {
		p.Low, p.High = WilsonInterval(k, n, cl)
	} else {
		p.Low, p.High = ClopperPearsonInterval(k, n, cl)
	}
	return p
}

// ClopperPearsonInterval is the exact binomial interval (Clopper & Pearson
// 1934, Biometrika 26:404): lower = B(α/2; k, n−k+1), upper = B(1−α/2; k+1,
// n−k) with B the Beta quantile, lower 0 at k = 0 and upper 1 at k = n.
// NaN for n = 0 or k outside [0, n].
func ClopperPearsonInterval(k, n int, cl float64) (lo, hi float64) {
	if n <= 0 || k < 0 || k > n || !(cl > 0 && cl < 1) {
		return math.NaN(), math.NaN()
	}
	alpha := 1 - cl
	lo, hi = 0, 1
	if k > 0 {
		lo = distuv.Beta{Alpha: float64(k), Beta: float64(n - k + 1)}.Quantile(alpha / 2)
	}
	if k < n {
		hi = distuv.Beta{Alpha: float64(k + 1), Beta: float64(n - k)}.Quantile(1 - alpha/2)
	}
	return lo, hi
}

// WilsonInterval is the score interval (Wilson 1927, JASA 22:209) at
// confidence level cl, with z the two-sided normal quantile.
func WilsonInterval(k, n int, cl float64) (lo, hi float64) {
	if !(cl > 0 && cl < 1) {
		return math.NaN(), math.NaN()
	}
	return WilsonZ(k, n, distuv.UnitNormal.Quantile(1-(1-cl)/2))
}

// WilsonZ is the Wilson score interval for a given z:
// (p̂ + z²/2n ± z√(p̂(1−p̂)/n + z²/4n²)) / (1 + z²/n).
func WilsonZ(k, n int, z float64) (lo, hi float64) {
	if n <= 0 || k < 0 || k > n {
		return math.NaN(), math.NaN()
	}
	nf := float64(n)
	p := float64(k) / nf
	c := p + z*z/(2*nf)
	h := z * math.Sqrt(p*(1-p)/nf+z*z/(4*nf*nf))
	d := 1 + z*z/nf
	return max(0, (c-h)/d), min(1, (c+h)/d)
}
