package detector

import (
	"math"
	"testing"
)

// The worked example of the physics reference §9 (standard linear algebra):
// (y, z) = (37, 120) cm gives u_ind1 = −37·sin60° + 120·cos60° = −32.04 + 60
// = 27.96, u_ind2 = 37·sin60° + 60 = 92.04, u_coll = 120 = u_ind1 + u_ind2.
func TestWireCoordinateWorkedExample(t *testing.T) {
	ind1 := Plane{AngleDeg: 60, PitchCm: 0.3}
	ind2 := Plane{AngleDeg: -60, PitchCm: 0.3}
	coll := Plane{AngleDeg: 0, PitchCm: 0.3}
	for _, c := range []struct {
		name string
		p    Plane
		want float64
	}{{"ind1", ind1, 27.957}, {"ind2", ind2, 92.043}, {"coll", coll, 120}} {
		if got := c.p.U(37, 120); math.Abs(got-c.want) > 1e-3 {
			t.Errorf("u_%s(37, 120) = %.4f, want %.3f", c.name, got, c.want)
		}
	}
	y, z, err := Cross(ind1, ind1.Wire(37, 120), ind2, ind2.Wire(37, 120))
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(y-37) > 1e-6 || math.Abs(z-120) > 1e-6 {
		t.Errorf("triangulated (%g, %g), want (37, 120)", y, z)
	}
}
