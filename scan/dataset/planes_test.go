package dataset

import (
	"math"
	"path/filepath"
	"slices"
	"testing"
)

// LoadPlanes gives the same planes as Load and leaves the pixel truth out.
func TestLoadPlanesSkipsTruth(t *testing.T) {
	d, err := Open(filepath.Join(fixtureRoot, "valid"))
	if err != nil {
		t.Fatal(err)
	}
	var sawTruth bool
	for _, e := range d.Events() {
		full, err := d.Load(e.ID)
		if err != nil {
			t.Fatal(err)
		}
		planes, err := d.LoadPlanes(e.ID)
		if err != nil {
			t.Fatal(err)
		}
		sawTruth = sawTruth || full.Truth != nil
		if planes.Truth != nil {
			t.Errorf("%s: LoadPlanes returned pixel truth", e.ID)
		}
		for i := range full.Planes {
			a, b := full.Planes[i], planes.Planes[i]
			if a.Wires != b.Wires || a.Ticks != b.Ticks || a.Wire0 != b.Wire0 || a.Tick0 != b.Tick0 || !slices.Equal(a.Pix, b.Pix) {
				t.Errorf("%s plane %d differs between Load and LoadPlanes", e.ID, i)
			}
		}
	}
	if !sawTruth {
		t.Fatal("the valid fixture should hold an event with pixel truth")
	}
}

// allFinite must flag exactly the IEEE 754 binary32 patterns whose exponent
// field is all ones (NaN and ±Inf; IEEE 754-2008 §3.4).
func TestAllFinite(t *testing.T) {
	for _, c := range []struct {
		name string
		v    float32
		want bool
	}{
		{"zero", 0, true},
		{"negative zero", float32(math.Copysign(0, -1)), true},
		{"smallest subnormal", math.SmallestNonzeroFloat32, true},
		{"largest finite", math.MaxFloat32, true},
		{"negative largest finite", -math.MaxFloat32, true},
		{"+Inf", float32(math.Inf(1)), false},
		{"-Inf", float32(math.Inf(-1)), false},
		{"NaN", float32(math.NaN()), false},
	} {
		bits := []uint32{math.Float32bits(1), math.Float32bits(c.v), math.Float32bits(-2)}
		if got := allFinite(bits); got != c.want {
			t.Errorf("%s: allFinite = %v, want %v", c.name, got, c.want)
		}
	}
}
