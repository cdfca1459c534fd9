package ui

import (
	"fmt"
	"math"
	"os"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// A small synthetic event source for the display's tests: straight
// segments in 3-D projected onto each plane with the detector geometry,
// Gaussian-ish noise of σ ≈ 2 ADC and about 20 ADC per tick on a track
// (noise and signal levels are common practice for baseline-subtracted
// wire data, not a measurement). It is test scaffolding, not the demo
// generator.

// synthVertex is where the synthetic interaction sits.
var synthVertex = detector.Point{X: 60, Y: 10, Z: 250}

type segment struct {
	a, b detector.Point
	q    float64 // ADC per tick at the peak
}

func synthSegments() []segment {
	v := synthVertex
	return []segment{
		{v, detector.Point{X: 140, Y: -40, Z: 420}, 20},                                      // muon-like
		{v, detector.Point{X: 52, Y: 22, Z: 262}, 60},                                        // short proton-like
		{detector.Point{X: 10, Y: 100, Z: 100}, detector.Point{X: 190, Y: -100, Z: 160}, 22}, // cosmic
	}
}

// synthEvent builds an event. crop > 0 keeps crop wires × 3·crop ticks
// around the vertex; crop == 0 is the full readout (about 29 million
// samples on the demo detector).
func synthEvent(det *detector.Detector, id string, crop int) *scan.Event {
	ev := &scan.Event{ID: id, Detector: det}
	for i, p := range det.Planes {
		img := scan.NewImage(p.Wires, det.ReadoutTicks)
		if crop > 0 {
			w, t := det.Project(i, synthVertex)
			img = scan.NewImage(min(crop, p.Wires), min(3*crop, det.ReadoutTicks))
			img.Wire0 = clampInt(int(w)-crop/2, 0, p.Wires-img.Wires)
			img.Tick0 = clampInt(int(t)-3*crop/2, 0, det.ReadoutTicks-img.Ticks)
		}
		fillNoise(img, uint64(i+1))
		for _, s := range synthSegments() {
			deposit(det, i, img, s)
		}
		ev.Planes = append(ev.Planes, img)
	}
	return ev
}

func clampInt(x, lo, hi int) int { return max(lo, min(hi, x)) }

func fillNoise(img *scan.Image, seed uint64) {
	x := seed*0x9E3779B97F4A7C15 | 1
	for i := range img.Pix {
		x ^= x << 13
		x ^= x >> 7
		x ^= x << 17
		// Sum of four uniforms: close enough to a Gaussian for a display test.
		u := float32(x&0xffff) + float32(x>>16&0xffff) + float32(x>>32&0xffff) + float32(x>>48&0xffff)
		img.Pix[i] = (u/65536 - 2) * 3.5
	}
}

// deposit draws a segment on plane i, one step per 0.1 cm, spreading each
// step's charge over ±3 ticks.
func deposit(det *detector.Detector, i int, img *scan.Image, s segment) {
	n := int(s.a.Dist(s.b)/0.1) + 1
	for k := range n {
		f := float64(k) / float64(max(n-1, 1))
		p := detector.Point{X: s.a.X + f*(s.b.X-s.a.X), Y: s.a.Y + f*(s.b.Y-s.a.Y), Z: s.a.Z + f*(s.b.Z-s.a.Z)}
		w, t := det.Project(i, p)
		wi := int(math.Round(w)) - img.Wire0
		for dt := -3; dt <= 3; dt++ {
			ti := int(math.Round(t)) + dt - img.Tick0
			v := img.At(wi, ti) + float32(s.q*0.4*math.Exp(-float64(dt*dt)/2))
			img.Set(wi, ti, v)
		}
	}
}

// synthSource serves synthetic events.
type synthSource struct {
	det  *detector.Detector
	ids  []string
	crop int
}

func newSynthSource(n, crop int) *synthSource {
	s := &synthSource{det: detector.Tarn(), crop: crop}
	for i := range n {
		s.ids = append(s.ids, fmt.Sprintf("syn-%03d", i+1))
	}
	return s
}

func (s *synthSource) EventIDs() []string { return s.ids }

func (s *synthSource) Load(id string) (*scan.Event, error) {
	for _, x := range s.ids {
		if x == id {
			return synthEvent(s.det, id, s.crop), nil
		}
	}
	return nil, fmt.Errorf("no event %s", id)
}

// TestWriteSynthDataset writes the synthetic events as a dataset folder
// for trying the display by hand: TPCSCAN_SYNTH_DIR=/tmp/x go test -run
// WriteSynth ./ui. It is skipped otherwise.
func TestWriteSynthDataset(t *testing.T) {
	dir := os.Getenv("TPCSCAN_SYNTH_DIR")
	if dir == "" {
		t.Skip("set TPCSCAN_SYNTH_DIR to write the synthetic dataset")
	}
	src := newSynthSource(4, 400)
	w, err := dataset.Create(dir, src.det)
	if err != nil {
		t.Fatal(err)
	}
	for _, id := range src.ids {
		ev, _ := src.Load(id)
		if err := w.Add(ev, nil); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
}
