package detector

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
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

// TestSumRule checks the identity of physics reference §9: with planes at
// +60°, −60° and 0° sharing one origin, u_ind1 + u_ind2 =
// (−y sin60 + z cos60) + (y sin60 + z cos60) = 2 z cos60 = z = u_coll.
// On Tarn, whose planes have their own wire-0 offsets, it becomes
// w_coll − w_ind1 − w_ind2 = const for every point.
func TestSumRule(t *testing.T) {
	ind1 := Plane{AngleDeg: 60, PitchCm: 0.3}
	ind2 := Plane{AngleDeg: -60, PitchCm: 0.3}
	coll := Plane{AngleDeg: 0, PitchCm: 0.3}
	d := Tarn()
	var first float64
	for i, pt := range [][2]float64{{0, 0}, {37, 120}, {-99.9, 599}, {50, 300}, {-12.3, 45.6}, {88, 0.5}} {
		y, z := pt[0], pt[1]
		if s := ind1.U(y, z) + ind2.U(y, z); math.Abs(s-coll.U(y, z)) > 1e-9 {
			t.Errorf("(%g, %g): u_ind1 + u_ind2 = %g, u_coll = %g", y, z, s, coll.U(y, z))
		}
		c := d.Planes[2].Wire(y, z) - d.Planes[0].Wire(y, z) - d.Planes[1].Wire(y, z)
		if i == 0 {
			first = c
		} else if math.Abs(c-first) > 1e-9 {
			t.Errorf("(%g, %g): w_coll − w_ind1 − w_ind2 = %g, at the origin %g", y, z, c, first)
		}
	}
}

// TestTarnFromDimensions derives Tarn's wire counts from its size and
// checks the common-practice readout values.
func TestTarnFromDimensions(t *testing.T) {
	d := Tarn()
	if err := d.Validate(); err != nil {
		t.Fatal(err)
	}
	// Collection (θ = 0): u = z ∈ [0, 600] cm → 600 / 0.3 = 2000 wires,
	// wire 0 at half a pitch, 0.15 cm.
	// Induction (θ = ±60°): u = ∓y sin60 + z cos60 over y ∈ [−100, 100],
	// z ∈ [0, 600] spans 2·100·0.8660 + 600·0.5 = 173.205 + 300 = 473.205 cm
	// → floor(473.205 / 0.3) = floor(1577.35) = 1577 wires; wire 0 at
	// −86.603 + 0.15 = −86.453 cm.
	for i, want := range []struct {
		role   Role
		angle  float64
		wires  int
		offset float64
	}{{Induction1, 60, 1577, -86.453}, {Induction2, -60, 1577, -86.453}, {Collection, 0, 2000, 0.15}} {
		p := d.Planes[i]
		if p.Role != want.role || p.AngleDeg != want.angle || p.Wires != want.wires || math.Abs(p.OffsetCm-want.offset) > 1e-3 {
			t.Errorf("plane %d = %+v, want %s at %g° with %d wires from %g cm", i, p, want.role, want.angle, want.wires, want.offset)
		}
		// 3 mm wire pitch: common practice (physics reference §7, "Readout").
		if p.PitchCm != 0.3 {
			t.Errorf("plane %s pitch %g cm, want 0.3 (common practice)", p.Role, p.PitchCm)
		}
	}
	// Drift velocity 1.6 mm/µs at 500 V/cm: common practice; the physics
	// reference §7 computes 1.601 mm/µs at 87 K from the Li et al. (2016)
	// mobility parametrisation and accepts 1.6 ± 5%.
	if d.DriftFieldKVcm != 0.5 || math.Abs(d.DriftVelocityCmUs-0.16) > 0.16*0.05 {
		t.Errorf("drift %g cm/µs at %g kV/cm, want 0.16 at 0.5", d.DriftVelocityCmUs, d.DriftFieldKVcm)
	}
	// 0.5 µs sampling at 1.6 mm/µs: one tick is 0.80 mm of drift
	// (physics reference §7); a full 200 cm drift takes 2500 ticks, 1.25 ms.
	if got := d.TickCm(); math.Abs(got-0.08) > 1e-12 {
		t.Errorf("tick = %g cm, want 0.08", got)
	}
	if got := d.Tick(200) - d.Tick(0); math.Abs(got-2500) > 1e-9 {
		t.Errorf("full drift = %g ticks, want 2500", got)
	}
}

func TestTickRoundTrip(t *testing.T) {
	d := Tarn()
	for _, x := range []float64{0, 0.08, 1, 37.5, 199.99, 200} {
		if got := d.X(d.Tick(x)); math.Abs(got-x) > 1e-9 {
			t.Errorf("X(Tick(%g)) = %g", x, got)
		}
	}
	// Hand case: x = 100 cm → 1600 + 100 / 0.08 = 2850.
	if got := d.Tick(100); math.Abs(got-2850) > 1e-9 {
		t.Errorf("Tick(100) = %g, want 2850", got)
	}
}

// TestTriangulatePredict triangulates points from two planes and predicts
// the third plane's wire, on Tarn.
func TestTriangulatePredict(t *testing.T) {
	d := Tarn()
	for _, p := range []Point{{10, 37, 120}, {150, -80, 20}, {199, 99, 590}} {
		w0, tick := d.Project(0, p)
		w1, _ := d.Project(1, p)
		w2, _ := d.Project(2, p)
		got, err := d.Triangulate(0, w0, 1, w1, tick)
		if err != nil {
			t.Fatal(err)
		}
		if got.Dist(p) > 1e-6 {
			t.Errorf("triangulated %+v, want %+v", got, p)
		}
		pw, err := d.PredictWire(0, w0, 1, w1, 2)
		if err != nil || math.Abs(pw-w2) > 1e-6 {
			t.Errorf("predicted coll wire %g, want %g (%v)", pw, w2, err)
		}
	}
}

func TestParallelPlanes(t *testing.T) {
	d := Tarn()
	if _, err := d.Triangulate(2, 10, 2, 20, 1700); !errors.Is(err, ErrParallel) {
		t.Errorf("same plane twice: err = %v, want ErrParallel", err)
	}
	a := Plane{AngleDeg: 30, PitchCm: 0.3}
	b := Plane{AngleDeg: 30, PitchCm: 0.5, OffsetCm: 4}
	if _, _, err := Cross(a, 1, b, 2); !errors.Is(err, ErrParallel) {
		t.Errorf("parallel planes: err = %v, want ErrParallel", err)
	}
	if _, err := d.Length3D(0, PlanePoint{1, 2}, PlanePoint{3, 4}, 0, PlanePoint{1, 2}, PlanePoint{3, 4}); !errors.Is(err, ErrParallel) {
		t.Errorf("Length3D on one plane: err = %v, want ErrParallel", err)
	}
}

// TestCorrespondingWiresHand: a box on collection wires 0–99 covers
// z ∈ [0.15, 29.85] cm. Over y ∈ [−100, 100], ind1's u = −y sin60 + z cos60
// runs from −86.603 + 0.075 = −86.528 to 86.603 + 14.925 = 101.528 cm,
// i.e. wires (u + 86.453) / 0.3 from −0.25 to 626.60.
func TestCorrespondingWiresHand(t *testing.T) {
	d := Tarn()
	r, ok := d.CorrespondingWires(2, 0, 99, 0)
	if !ok || math.Abs(r.Lo-(-0.25)) > 0.01 || math.Abs(r.Hi-626.60) > 0.01 {
		t.Errorf("range %+v (ok %v), want −0.25…626.60", r, ok)
	}
	if _, ok := d.CorrespondingWires(2, 3000, 3100, 0); ok {
		t.Error("a box beyond the last wire corresponds to wires")
	}
}

// TestCorrespondingWiresSampled checks CorrespondingWires against brute
// force: points sampled in the box's wire strip (y uniform over the height,
// u uniform over the strip, z = (u + y sin θ)/cos θ, kept if inside the
// active area) must land inside the returned range, and the extremes found
// by sampling must come within two wires of the range's ends (the
// extremes sit at corners of the strip, which samples approach slowly).
func TestCorrespondingWiresSampled(t *testing.T) {
	d := Tarn()
	rng := rand.New(rand.NewPCG(1, 2))
	for _, c := range []struct {
		from, to int
		lo, hi   float64
	}{{2, 0, 500, 560}, {2, 1, 0, 40}, {0, 2, 700, 720}, {1, 0, 1500, 1576}, {0, 1, 10, 30}} {
		r, ok := d.CorrespondingWires(c.from, c.lo, c.hi, c.to)
		if !ok {
			t.Fatalf("%+v: no correspondence", c)
		}
		minW, maxW := math.Inf(1), math.Inf(-1)
		from := d.Planes[c.from]
		sin, cos := math.Sincos(from.AngleDeg * math.Pi / 180)
		for range 100000 {
			y := (rng.Float64() - 0.5) * d.HeightCm
			u := from.UOfWire(c.lo + rng.Float64()*(c.hi-c.lo))
			z := (u + y*sin) / cos
			if z < 0 || z > d.LengthCm {
				continue
			}
			w := d.Planes[c.to].Wire(y, z)
			if w < r.Lo-1e-6 || w > r.Hi+1e-6 {
				t.Fatalf("%+v: point (%g, %g) sees wire %g outside %+v", c, y, z, w, r)
			}
			minW, maxW = math.Min(minW, w), math.Max(maxW, w)
		}
		if minW-r.Lo > 2 || r.Hi-maxW > 2 {
			t.Errorf("%+v: range %+v, sampled %g…%g", c, r, minW, maxW)
		}
	}
}

// TestLengths: a segment from (10, 0, 100) to (40, 0, 140) cm has
// Δ = (30, 0, 40), a 3-4-5 triangle: 50 cm. On the collection plane the
// pitch axis is z, so its projected length is also 50. A vertical segment
// (Δy = 40 cm) runs along the collection wires: projected length 0 there,
// 3-D length 40 from the two induction planes.
func TestLengths(t *testing.T) {
	d := Tarn()
	view := func(i int, p Point) PlanePoint {
		w, tk := d.Project(i, p)
		return PlanePoint{Wire: w, Tick: tk}
	}
	p1, p2 := Point{10, 0, 100}, Point{40, 0, 140}
	l, err := d.Length3D(0, view(0, p1), view(0, p2), 2, view(2, p1), view(2, p2))
	if err != nil || math.Abs(l-50) > 1e-6 {
		t.Errorf("Length3D = %g (%v), want 50", l, err)
	}
	if got := d.ProjectedLength(2, view(2, p1), view(2, p2)); math.Abs(got-50) > 1e-6 {
		t.Errorf("projected on coll = %g, want 50", got)
	}
	// Angle on coll: atan2(Δx, Δz) = atan2(30, 40) = 36.87°.
	if got := d.ProjectedAngle(2, view(2, p1), view(2, p2)); math.Abs(got-36.8699) > 1e-3 {
		t.Errorf("projected angle = %g°, want 36.870", got)
	}
	q1, q2 := Point{50, -20, 300}, Point{50, 20, 300}
	if got := d.ProjectedLength(2, view(2, q1), view(2, q2)); math.Abs(got) > 1e-9 {
		t.Errorf("vertical track projected on coll = %g, want 0", got)
	}
	l, err = d.Length3D(0, view(0, q1), view(0, q2), 1, view(1, q1), view(1, q2))
	if err != nil || math.Abs(l-40) > 1e-6 {
		t.Errorf("vertical track Length3D = %g (%v), want 40", l, err)
	}
}

func TestLoadRejects(t *testing.T) {
	var good strings.Builder
	if err := Tarn().WriteTOML(&good); err != nil {
		t.Fatal(err)
	}
	if d, err := Load(strings.NewReader(good.String()), "tarn.toml"); err != nil || d.Planes[1].Wires != 1577 {
		t.Fatalf("round trip: %v", err)
	}
	for _, c := range []struct{ name, edit, with, want string }{
		{"unknown key", `name = "Tarn"`, "name = \"Tarn\"\ncolour = 1", `unknown key "colour"`},
		{"syntax", `name = "Tarn"`, `name = "Tarn`, "read detector tarn.toml"},
		{"negative pitch", "pitch_cm = 0.3", "pitch_cm = -0.3", "plane 0 pitch_cm must be a positive number"},
		{"zero drift velocity", "drift_velocity_cm_per_us = 0.16", "drift_velocity_cm_per_us = 0.0", "drift_velocity_cm_per_us must be a positive number"},
		{"bad role", `role = "coll"`, `role = "collection"`, `role "collection" is not ind1, ind2 or coll`},
		{"duplicate role", `role = "ind2"`, `role = "ind1"`, `role "ind1" appears twice`},
		{"vertical pitch", "angle_deg = 60.0", "angle_deg = 90.0", "angle_deg must lie in (−90, 90)"},
		{"no wires", "wires = 2000", "wires = 0", "wires must be positive"},
		{"no readout", "readout_ticks = 5600", "readout_ticks = -1", "readout_ticks must be positive"},
	} {
		t.Run(c.name, func(t *testing.T) {
			if !strings.Contains(good.String(), c.edit) {
				t.Fatalf("description has no %q", c.edit)
			}
			bad := strings.Replace(good.String(), c.edit, c.with, 1)
			_, err := Load(strings.NewReader(bad), "tarn.toml")
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("err = %v, want %q", err, c.want)
			}
		})
	}
	if _, err := Load(strings.NewReader(`name = "empty"`), "e.toml"); err == nil || !strings.Contains(err.Error(), "no planes") {
		t.Errorf("no planes: %v", err)
	}
}
