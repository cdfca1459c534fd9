package dataset

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// tiny returns a small detector so that test files stay a few KB:
// 5 cm drift × 6 cm × 6 cm at 3 mm pitch (common practice), 1.6 mm/µs
// (common practice at 500 V/cm), 0.5 µs sampling, 64 ticks.
func tiny() *detector.Detector {
	return &detector.Detector{
		Name: "tiny", DriftLengthCm: 5, HeightCm: 6, LengthCm: 6,
		DriftFieldKVcm: 0.5, DriftVelocityCmUs: 0.16, SamplingUs: 0.5,
		ReadoutTicks: 64, TriggerTick: 0,
		Planes: []detector.Plane{
			{Role: detector.Induction1, AngleDeg: 60, PitchCm: 0.3, Wires: 27, OffsetCm: -2.5},
			{Role: detector.Induction2, AngleDeg: -60, PitchCm: 0.3, Wires: 27, OffsetCm: -2.5},
			{Role: detector.Collection, AngleDeg: 0, PitchCm: 0.3, Wires: 20, OffsetCm: 0.15},
		},
	}
}

// testEvent fills each plane with a ramp that encodes plane, wire and tick.
func testEvent(det *detector.Detector, id string, ticks int) *scan.Event {
	ev := &scan.Event{ID: id, Detector: det, Meta: scan.EventMeta{Run: 7, Subrun: 1, Event: 42, Note: "ramp"}}
	for i, p := range det.Planes {
		m := scan.NewImage(p.Wires, ticks)
		for w := range m.Wires {
			for t := range m.Ticks {
				m.Set(w, t, float32(i*10000+w*100+t)-0.5)
			}
		}
		ev.Planes = append(ev.Planes, m)
	}
	return ev
}

func TestWriterRoundTrip(t *testing.T) {
	dir := t.TempDir()
	det := tiny()
	w, err := Create(dir, det)
	if err != nil {
		t.Fatal(err)
	}
	a := testEvent(det, "e0001", 32)
	a.Truth = make([]*scan.TruthImage, len(a.Planes))
	m := a.Planes[2]
	a.Truth[2] = &scan.TruthImage{Wires: m.Wires, Ticks: m.Ticks, Pix: make([]int32, len(m.Pix))}
	a.Truth[2].Pix[5] = 13
	if err := w.Add(a, []byte(`{"class":"numu_cc"}`)); err != nil {
		t.Fatal(err)
	}
	b := testEvent(det, "e0002", 16)
	for _, m := range b.Planes {
		m.Tick0 = 40
	}
	// Collection wires 5–14 only: the writer must record wire0 = 5.
	crop := scan.NewImage(10, 16)
	crop.Wire0, crop.Tick0 = 5, 40
	crop.Set(9, 15, 77)
	b.Planes[2] = crop
	if err := w.Add(b, nil); err != nil {
		t.Fatal(err)
	}
	if err := w.Add(testEvent(det, "e0001", 8), nil); err == nil || !strings.Contains(err.Error(), "duplicate") {
		t.Errorf("second e0001: err = %v, want duplicate", err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}

	d, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if got := len(d.Events()); got != 2 {
		t.Fatalf("%d events, want 2", got)
	}
	if d.Detector().Planes[2].Wires != 20 {
		t.Errorf("inline detector lost: %+v", d.Detector().Planes[2])
	}
	got, err := d.Load("e0001")
	if err != nil {
		t.Fatal(err)
	}
	if got.Meta != a.Meta {
		t.Errorf("meta %+v, want %+v", got.Meta, a.Meta)
	}
	for i := range a.Planes {
		if g, w := got.Planes[i].At(3, 7), a.Planes[i].At(3, 7); g != w {
			t.Errorf("plane %d (3,7) = %g, want %g", i, g, w)
		}
	}
	if got.Truth == nil || got.Truth[2] == nil || got.Truth[2].Pix[5] != 13 || got.Truth[0] != nil {
		t.Errorf("pixel truth not round-tripped: %+v", got.Truth)
	}
	js, err := d.TruthJSON("e0001")
	if err != nil || string(js) != `{"class":"numu_cc"}` {
		t.Errorf("TruthJSON = %q, %v", js, err)
	}
	if _, err := d.TruthJSON("e0002"); !errors.Is(err, ErrNoTruth) {
		t.Errorf("TruthJSON(e0002) err = %v, want ErrNoTruth", err)
	}
	g2, err := d.Load("e0002")
	if err != nil {
		t.Fatal(err)
	}
	if g2.Planes[1].Tick0 != 40 || g2.Planes[1].Ticks != 16 {
		t.Errorf("crop offsets lost: tick0 %d ticks %d", g2.Planes[1].Tick0, g2.Planes[1].Ticks)
	}
	if c := g2.Planes[2]; c.Wire0 != 5 || c.Wires != 10 || c.At(9, 15) != 77 {
		t.Errorf("wire crop lost: wire0 %d wires %d", c.Wire0, c.Wires)
	}
	if _, err := Create(dir, det); err == nil {
		t.Error("Create over an existing dataset succeeded")
	}
	if _, err := os.Stat(filepath.Join(dir, "e0002", "coll.npy")); err != nil {
		t.Error(err)
	}
}
