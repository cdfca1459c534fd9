package sim

import (
	"math"
	"math/rand/v2"
)

// vec is a position (cm) or direction in detector coordinates: x drift, y
// up, z beam.
type vec [3]float64

func (a vec) add(b vec) vec             { return vec{a[0] + b[0], a[1] + b[1], a[2] + b[2]} }
func (a vec) sub(b vec) vec             { return vec{a[0] - b[0], a[1] - b[1], a[2] - b[2]} }
func (a vec) scale(s float64) vec       { return vec{a[0] * s, a[1] * s, a[2] * s} }
func (a vec) dot(b vec) float64         { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }
func (a vec) norm() float64             { return math.Sqrt(a.dot(a)) }
func (a vec) axpy(s float64, b vec) vec { return vec{a[0] + s*b[0], a[1] + s*b[1], a[2] + s*b[2]} }

func (a vec) cross(b vec) vec {
	return vec{a[1]*b[2] - a[2]*b[1], a[2]*b[0] - a[0]*b[2], a[0]*b[1] - a[1]*b[0]}
}

func (a vec) unit() vec {
	n := a.norm()
	if n == 0 {
		return vec{0, 0, 1}
	}
	return a.scale(1 / n)
}

// basis returns two unit vectors that complete the unit vector d to a
// right-handed orthonormal frame.
func basis(d vec) (u, v vec) {
	a := vec{1, 0, 0}
	if math.Abs(d[0]) > 0.9 {
		a = vec{0, 1, 0}
	}
	u = a.cross(d).unit()
	return u, d.cross(u)
}

// rotate turns the unit vector d by polar angle θ (given as cos θ) about
// itself at azimuth φ.
func rotate(d vec, cosT, phi float64) vec {
	u, v := basis(d)
	sinT := math.Sqrt(max(0, 1-cosT*cosT))
	sp, cp := math.Sincos(phi)
	return d.scale(cosT).axpy(sinT*cp, u).axpy(sinT*sp, v).unit()
}

// isotropic returns a uniformly distributed unit vector.
func isotropic(r *rand.Rand) vec {
	c := 2*r.Float64() - 1
	return rotate(vec{0, 0, 1}, c, 2*math.Pi*r.Float64())
}

// box is an axis-aligned volume.
type box struct{ lo, hi vec }

func (b box) contains(p vec) bool {
	return p[0] >= b.lo[0] && p[0] <= b.hi[0] && p[1] >= b.lo[1] && p[1] <= b.hi[1] && p[2] >= b.lo[2] && p[2] <= b.hi[2]
}

// clip returns the parameters at which the line p + s·d enters and leaves
// the box, and whether it meets the box at all.
func (b box) clip(p, d vec) (sIn, sOut float64, ok bool) {
	sIn, sOut = math.Inf(-1), math.Inf(1)
	for i := range 3 {
		if d[i] == 0 {
			if p[i] < b.lo[i] || p[i] > b.hi[i] {
				return 0, 0, false
			}
			continue
		}
		s1, s2 := (b.lo[i]-p[i])/d[i], (b.hi[i]-p[i])/d[i]
		if s1 > s2 {
			s1, s2 = s2, s1
		}
		sIn, sOut = max(sIn, s1), min(sOut, s2)
	}
	return sIn, sOut, sIn < sOut
}
