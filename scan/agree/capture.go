package agree

import (
	"math"
	"slices"
)

// Recapture is the capture–recapture estimate for one pair of scanners who
// looked at the same events: A found N1 interactions, B found N2, both found
// M. It assumes the two find interactions independently; correlated misses
// (the same hard events missed by both) bias the estimated total low and
// the efficiencies high.
type Recapture struct {
	A, B      string
	Events    int // events both scanners looked at
	N1, N2, M int
	// LincolnPetersen is N1·N2/M (Petersen 1896, Lincoln 1930); NaN at M = 0.
	LincolnPetersen float64
	// Chapman is (N1+1)(N2+1)/(M+1) − 1 (Chapman 1951), and ChapmanSE the
	// square root of Seber's variance (N1+1)(N2+1)(N1−M)(N2−M)/((M+1)²(M+2))
	// (Seber 1982, The Estimation of Animal Abundance, 2nd ed.).
	Chapman, ChapmanSE float64
	// EffA = M/N2 and EffB = M/N1, each with a binomial interval on M of N2
	// (resp. N1), conditional on the other scanner's finds.
	EffA, EffB Proportion
	// Combined is the pair's efficiency (N1+N2−M)/N with the Lincoln–Petersen
	// N, which equals 1 − (1−EffA)(1−EffB).
	Combined float64
}

// CaptureRecapture computes the estimate for a pair of counts.
func CaptureRecapture(n1, n2, m int, cl float64, method IntervalMethod) Recapture {
	r := Recapture{N1: n1, N2: n2, M: m, LincolnPetersen: math.NaN(), Combined: math.NaN()}
	f1, f2, fm := float64(n1), float64(n2), float64(m)
	if m > 0 {
		r.LincolnPetersen = f1 * f2 / fm
		r.Combined = (f1 + f2 - fm) / r.LincolnPetersen
	}
	r.Chapman = (f1+1)*(f2+1)/(fm+1) - 1
	r.ChapmanSE = math.Sqrt((f1 + 1) * (f2 + 1) * (f1 - fm) * (f2 - fm) / ((fm + 1) * (fm + 1) * (fm + 2)))
	r.EffA = NewProportion(m, n2, cl, method)
	r.EffB = NewProportion(m, n1, cl, method)
	return r
}

// Efficiencies returns the capture–recapture estimate for every pair of
// raters over the items both rated. A rating in absent (e.g. "none", "no
// interaction") means the rater found nothing; any other label is a find.
func Efficiencies(t *Table, absent []string, cl float64, method IntervalMethod) []Recapture {
	isAbsent := make([]bool, len(t.Categories))
	for c, name := range t.Categories {
		isAbsent[c] = slices.Contains(absent, name)
	}
	p := compress(t)
	var out []Recapture
	for a := 0; a < len(t.Raters); a++ {
		for b := a + 1; b < len(t.Raters); b++ {
			var events, n1, n2, m float64
			for q := 0; q < p.n(); q++ {
				ca, cb := p.at(q, a), p.at(q, b)
				if ca == Missing || cb == Missing {
					continue
				}
				w := p.count[q]
				events += w
				fa, fb := !isAbsent[ca], !isAbsent[cb]
				if fa {
					n1 += w
				}
				if fb {
					n2 += w
				}
				if fa && fb {
					m += w
				}
			}
			r := CaptureRecapture(int(n1), int(n2), int(m), cl, method)
			r.A, r.B, r.Events = t.Raters[a], t.Raters[b], int(events)
			out = append(out, r)
		}
	}
	return out
}
