// Package detector describes a LArTPC's wire planes and converts between
// detector coordinates (cm) and image coordinates (wire, tick).
//
// Coordinates: x is the drift direction (normal to the wire planes, x = 0 at
// the planes, growing toward the cathode), y is vertical (up) and z runs
// along the beam. A plane's wires lie in the (y, z) plane at an angle θ from
// +y toward +z; its pitch direction is n = (−sin θ, cos θ), so the wire
// coordinate of a point is u = −y sin θ + z cos θ and its continuous wire
// number is (u − offset)/pitch. Images of all planes share one drift-time
// axis: tick = TriggerTick + x/(v_d · sampling).
package detector

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"

	"github.com/BurntSushi/toml"
)

// Role is the job a wire plane does in the readout.
type Role string

// The three plane roles of a single-phase LArTPC.
const (
	Induction1 Role = "ind1"
	Induction2 Role = "ind2"
	Collection Role = "coll"
)

// Plane is one wire plane.
type Plane struct {
	Role     Role    `toml:"role"`
	AngleDeg float64 `toml:"angle_deg"` // wire direction from +y toward +z
	PitchCm  float64 `toml:"pitch_cm"`
	Wires    int     `toml:"wires"`
	OffsetCm float64 `toml:"offset_cm"` // wire coordinate u of wire 0
}

// Detector is a TPC description. The active volume is
// x ∈ [0, DriftLengthCm], y ∈ [−HeightCm/2, HeightCm/2], z ∈ [0, LengthCm].
type Detector struct {
	Name              string  `toml:"name"`
	DriftLengthCm     float64 `toml:"drift_length_cm"`
	HeightCm          float64 `toml:"height_cm"`
	LengthCm          float64 `toml:"length_cm"`
	DriftFieldKVcm    float64 `toml:"drift_field_kv_per_cm"`
	DriftVelocityCmUs float64 `toml:"drift_velocity_cm_per_us"`
	SamplingUs        float64 `toml:"sampling_us"`
	ReadoutTicks      int     `toml:"readout_ticks"`
	TriggerTick       float64 `toml:"trigger_tick"` // tick at which charge from x = 0 arrives
	Planes            []Plane `toml:"planes"`
}

// Point is a position in the detector, in cm.
type Point struct{ X, Y, Z float64 }

// Dist returns the distance between two points in cm.
func (p Point) Dist(q Point) float64 {
	return math.Sqrt((p.X-q.X)*(p.X-q.X) + (p.Y-q.Y)*(p.Y-q.Y) + (p.Z-q.Z)*(p.Z-q.Z))
}

// Tarn returns the built-in description of the invented Tarn test stand:
// 2.0 m drift × 2.0 m height × 6.0 m length, 500 V/cm, 1.6 mm/µs drift
// velocity (common practice at 500 V/cm), 0.5 µs sampling, three planes at
// 3 mm pitch (common practice): induction planes at ±60° to the vertical and
// a vertical collection plane. The readout window of 5600 ticks (2.8 ms)
// spans more than two full drifts so that cosmic muons arriving before and
// after the trigger are seen whole; three planes × 5600 ticks hold about 29
// million samples.
func Tarn() *Detector {
	d := &Detector{
		Name:              "Tarn",
		DriftLengthCm:     200,
		HeightCm:          200,
		LengthCm:          600,
		DriftFieldKVcm:    0.5,
		DriftVelocityCmUs: 0.16,
		SamplingUs:        0.5,
		ReadoutTicks:      5600,
		TriggerTick:       1600,
	}
	for _, p := range []struct {
		role  Role
		angle float64
	}{{Induction1, 60}, {Induction2, -60}, {Collection, 0}} {
		d.Planes = append(d.Planes, coveringPlane(d, p.role, p.angle, 0.3))
	}
	return d
}

// coveringPlane lays out a plane whose wires just cover the active (y, z)
// rectangle: wire 0 sits half a pitch inside the lowest u of the rectangle.
func coveringPlane(d *Detector, role Role, angleDeg, pitch float64) Plane {
	p := Plane{Role: role, AngleDeg: angleDeg, PitchCm: pitch}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, c := range d.corners() {
		u := p.U(c[0], c[1])
		lo, hi = math.Min(lo, u), math.Max(hi, u)
	}
	p.OffsetCm = lo + pitch/2
	p.Wires = int(math.Floor((hi-lo)/pitch + 1e-9))
	return p
}

// corners returns the (y, z) corners of the active rectangle.
func (d *Detector) corners() [4][2]float64 {
	h := d.HeightCm / 2
	return [4][2]float64{{-h, 0}, {h, 0}, {h, d.LengthCm}, {-h, d.LengthCm}}
}

// Load reads a detector description in TOML from r; name is used in errors.
func Load(r io.Reader, name string) (*Detector, error) {
	var d Detector
	md, err := toml.NewDecoder(r).Decode(&d)
	if err != nil {
		return nil, fmt.Errorf("read detector %s: %w", name, err)
	}
	if und := md.Undecoded(); len(und) > 0 {
		return nil, fmt.Errorf("read detector %s: unknown key %q", name, und[0].String())
	}
	if err := d.Validate(); err != nil {
		return nil, fmt.Errorf("read detector %s: %w", name, err)
	}
	return &d, nil
}

// LoadFile reads a detector description from a TOML file.
func LoadFile(path string) (*Detector, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("read detector: %w", err)
	}
	defer f.Close()
	return Load(f, path)
}

// WriteTOML writes the description as TOML.
func (d *Detector) WriteTOML(w io.Writer) error {
	return toml.NewEncoder(w).Encode(d)
}

// Validate checks that the description is physically usable.
func (d *Detector) Validate() error {
	var errs []error
	pos := func(name string, v float64) {
		if !(v > 0) || math.IsInf(v, 0) {
			errs = append(errs, fmt.Errorf("%s must be a positive number, got %g", name, v))
		}
	}
	pos("drift_length_cm", d.DriftLengthCm)
	pos("height_cm", d.HeightCm)
	pos("length_cm", d.LengthCm)
	pos("drift_velocity_cm_per_us", d.DriftVelocityCmUs)
	pos("sampling_us", d.SamplingUs)
	if d.ReadoutTicks <= 0 {
		errs = append(errs, fmt.Errorf("readout_ticks must be positive, got %d", d.ReadoutTicks))
	}
	if len(d.Planes) == 0 {
		errs = append(errs, errors.New("no planes"))
	}
	seen := map[Role]bool{}
	for i, p := range d.Planes {
		switch p.Role {
		case Induction1, Induction2, Collection:
		default:
			errs = append(errs, fmt.Errorf("plane %d: role %q is not ind1, ind2 or coll", i, p.Role))
		}
		if seen[p.Role] {
			errs = append(errs, fmt.Errorf("plane %d: role %q appears twice", i, p.Role))
		}
		seen[p.Role] = true
		pos(fmt.Sprintf("plane %d pitch_cm", i), p.PitchCm)
		if p.Wires <= 0 {
			errs = append(errs, fmt.Errorf("plane %d: wires must be positive, got %d", i, p.Wires))
		}
		if math.Abs(p.AngleDeg) >= 90 {
			errs = append(errs, fmt.Errorf("plane %d: angle_deg must lie in (−90, 90), got %g", i, p.AngleDeg))
		}
	}
	return errors.Join(errs...)
}

// PlaneIndex returns the index of the plane with the given role, or −1.
func (d *Detector) PlaneIndex(r Role) int {
	for i, p := range d.Planes {
		if p.Role == r {
			return i
		}
	}
	return -1
}

// TickCm is the drift distance covered in one tick.
func (d *Detector) TickCm() float64 { return d.DriftVelocityCmUs * d.SamplingUs }

// Tick returns the (continuous) tick at which charge from drift distance x arrives.
func (d *Detector) Tick(x float64) float64 { return d.TriggerTick + x/d.TickCm() }

// X returns the drift distance of charge arriving at the given tick, for an
// interaction at trigger time.
func (d *Detector) X(tick float64) float64 { return (tick - d.TriggerTick) * d.TickCm() }

// Contains reports whether p lies in the active volume.
func (d *Detector) Contains(p Point) bool {
	return p.X >= 0 && p.X <= d.DriftLengthCm && math.Abs(p.Y) <= d.HeightCm/2 && p.Z >= 0 && p.Z <= d.LengthCm
}

func (p Plane) sincos() (float64, float64) { return math.Sincos(p.AngleDeg * math.Pi / 180) }

// U returns the wire coordinate (cm) of the point (y, z).
func (p Plane) U(y, z float64) float64 {
	s, c := p.sincos()
	return -y*s + z*c
}

// Wire returns the continuous wire number of (y, z); the nearest wire is
// math.Round of it.
func (p Plane) Wire(y, z float64) float64 { return (p.U(y, z) - p.OffsetCm) / p.PitchCm }

// UOfWire returns the wire coordinate of a (continuous) wire number.
func (p Plane) UOfWire(w float64) float64 { return p.OffsetCm + w*p.PitchCm }

// ErrParallel is returned when two planes' wires are parallel and cannot be
// crossed to find a point.
var ErrParallel = errors.New("planes have parallel wires")

// Cross returns the (y, z) where wire wa of plane a crosses wire wb of plane b.
func Cross(a Plane, wa float64, b Plane, wb float64) (y, z float64, err error) {
	sa, ca := a.sincos()
	sb, cb := b.sincos()
	den := sb*ca - cb*sa // sin(θb − θa)
	if math.Abs(den) < 1e-9 {
		return 0, 0, ErrParallel
	}
	ua, ub := a.UOfWire(wa), b.UOfWire(wb)
	// Solve −y sa + z ca = ua, −y sb + z cb = ub.
	y = (ua*cb - ub*ca) / den
	z = (ua*sb - ub*sa) / den
	return y, z, nil
}

// Triangulate returns the 3-D point seen at wire wa on plane ia and wire wb
// on plane ib at a common tick.
func (d *Detector) Triangulate(ia int, wa float64, ib int, wb, tick float64) (Point, error) {
	y, z, err := Cross(d.Planes[ia], wa, d.Planes[ib], wb)
	if err != nil {
		return Point{}, err
	}
	return Point{X: d.X(tick), Y: y, Z: z}, nil
}

// PredictWire returns the wire on plane ic that sees the crossing of wire wa
// on plane ia and wire wb on plane ib.
func (d *Detector) PredictWire(ia int, wa float64, ib int, wb float64, ic int) (float64, error) {
	y, z, err := Cross(d.Planes[ia], wa, d.Planes[ib], wb)
	if err != nil {
		return 0, err
	}
	return d.Planes[ic].Wire(y, z), nil
}

// Project returns the continuous wire and tick at which plane i sees p.
func (d *Detector) Project(i int, p Point) (wire, tick float64) {
	return d.Planes[i].Wire(p.Y, p.Z), d.Tick(p.X)
}

// WireRange is an inclusive range of continuous wire numbers.
type WireRange struct{ Lo, Hi float64 }

// CorrespondingWires returns, for plane ib, the range of wires that can see
// charge that plane ia sees between wires wlo and whi: the extremes of u_b
// over the part of the active (y, z) rectangle inside plane a's wire strip.
// ok is false when the strip misses the active area. A box's tick range
// carries over unchanged, since all planes share the drift-time axis.
func (d *Detector) CorrespondingWires(ia int, wlo, whi float64, ib int) (r WireRange, ok bool) {
	a, b := d.Planes[ia], d.Planes[ib]
	if wlo > whi {
		wlo, whi = whi, wlo
	}
	ulo, uhi := a.UOfWire(wlo), a.UOfWire(whi)
	r = WireRange{Lo: math.Inf(1), Hi: math.Inf(-1)}
	add := func(y, z float64) {
		w := b.Wire(y, z)
		r.Lo, r.Hi = math.Min(r.Lo, w), math.Max(r.Hi, w)
		ok = true
	}
	cs := d.corners()
	const eps = 1e-9
	for _, c := range cs {
		if u := a.U(c[0], c[1]); u >= ulo-eps && u <= uhi+eps {
			add(c[0], c[1])
		}
	}
	// Where the strip's two boundary lines cross the rectangle's edges.
	for k := range cs {
		p, q := cs[k], cs[(k+1)%4]
		up, uq := a.U(p[0], p[1]), a.U(q[0], q[1])
		if up == uq {
			continue
		}
		for _, u := range []float64{ulo, uhi} {
			t := (u - up) / (uq - up)
			if t >= -eps && t <= 1+eps {
				add(p[0]+t*(q[0]-p[0]), p[1]+t*(q[1]-p[1]))
			}
		}
	}
	return r, ok
}

// PlanePoint is a point in one plane's image: a continuous wire and tick.
type PlanePoint struct{ Wire, Tick float64 }

// ProjectedLength returns the length in cm of the segment between two points
// of one plane's image. It is the length projected onto that plane's
// (pitch, drift) coordinates, not the 3-D length: a track running along the
// wires looks short.
func (d *Detector) ProjectedLength(plane int, a, b PlanePoint) float64 {
	dw := (b.Wire - a.Wire) * d.Planes[plane].PitchCm
	dx := (b.Tick - a.Tick) * d.TickCm()
	return math.Hypot(dw, dx)
}

// ProjectedAngle returns the angle in degrees of the segment a→b in one
// plane's image, measured from the wire-number axis toward the drift axis.
func (d *Detector) ProjectedAngle(plane int, a, b PlanePoint) float64 {
	dw := (b.Wire - a.Wire) * d.Planes[plane].PitchCm
	dx := (b.Tick - a.Tick) * d.TickCm()
	return math.Atan2(dx, dw) * 180 / math.Pi
}

// Length3D returns the 3-D length in cm of a segment whose endpoints are seen
// on plane ia (a1, a2) and on plane ib (b1, b2). Each endpoint is
// triangulated at the mean of its two ticks.
func (d *Detector) Length3D(ia int, a1, a2 PlanePoint, ib int, b1, b2 PlanePoint) (float64, error) {
	p1, err := d.Triangulate(ia, a1.Wire, ib, b1.Wire, (a1.Tick+b1.Tick)/2)
	if err != nil {
		return 0, err
	}
	p2, err := d.Triangulate(ia, a2.Wire, ib, b2.Wire, (a2.Tick+b2.Tick)/2)
	if err != nil {
		return 0, err
	}
	return p1.Dist(p2), nil
}
