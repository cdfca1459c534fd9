// Package scan holds tpcscan's domain types: events and their wire-plane
// images, label schemas, marks, labels, campaigns and passes. It imports no
// UI and no database driver.
package scan

import (
	"fmt"

	"github.com/tpcscan/tpcscan/scan/detector"
)

// Image is one wire plane's readout: charge (ADC counts, baseline
// subtracted) on a grid of wires × ticks, stored wire-major like a NumPy
// array of shape [wires, ticks] in C order: sample (w, t) is
// Pix[w*Ticks+t]. An image may be a crop of the full readout: its sample
// (0, 0) is wire Wire0 and tick Tick0 of the detector. At and Set take
// image-local indices; add Wire0/Tick0 to get detector wires and ticks.
type Image struct {
	Wires, Ticks int
	Wire0, Tick0 int
	Pix          []float32
}

// NewImage allocates a zeroed image.
func NewImage(wires, ticks int) *Image {
	return &Image{Wires: wires, Ticks: ticks, Pix: make([]float32, wires*ticks)}
}

// At returns the charge at (wire, tick), or 0 outside the image.
func (m *Image) At(wire, tick int) float32 {
	if wire < 0 || wire >= m.Wires || tick < 0 || tick >= m.Ticks {
		return 0
	}
	return m.Pix[wire*m.Ticks+tick]
}

// Set stores the charge at (wire, tick); outside the image it does nothing.
func (m *Image) Set(wire, tick int, v float32) {
	if wire < 0 || wire >= m.Wires || tick < 0 || tick >= m.Ticks {
		return
	}
	m.Pix[wire*m.Ticks+tick] = v
}

// Row returns the samples of one wire.
func (m *Image) Row(wire int) []float32 { return m.Pix[wire*m.Ticks : (wire+1)*m.Ticks] }

// EventMeta is the optional bookkeeping an analyser attaches to an event.
type EventMeta struct {
	Run    int64  `json:"run,omitempty" toml:"run,omitempty"`
	Subrun int64  `json:"subrun,omitempty" toml:"subrun,omitempty"`
	Event  int64  `json:"event,omitempty" toml:"event,omitempty"`
	Note   string `json:"note,omitempty" toml:"note,omitempty"`
}

// Event is one readout window: an image per wire plane, in the order of the
// detector's planes, plus where it came from.
type Event struct {
	ID       string
	Meta     EventMeta
	Detector *detector.Detector
	Planes   []*Image // Planes[i] belongs to Detector.Planes[i]
	// Truth, when the dataset has it, holds per-plane pixel truth: the
	// particle code that deposited most charge in each pixel (0 = none).
	Truth []*TruthImage
}

// TruthImage is a per-pixel integer label on a plane's grid.
type TruthImage struct {
	Wires, Ticks int
	Wire0, Tick0 int
	Pix          []int32
}

// Validate checks the event's planes against its detector.
func (e *Event) Validate() error {
	if e.Detector == nil {
		return fmt.Errorf("event %s: no detector", e.ID)
	}
	if len(e.Planes) != len(e.Detector.Planes) {
		return fmt.Errorf("event %s: %d plane images for %d detector planes", e.ID, len(e.Planes), len(e.Detector.Planes))
	}
	for i, m := range e.Planes {
		p := e.Detector.Planes[i]
		if m == nil {
			return fmt.Errorf("event %s: plane %s has no image", e.ID, p.Role)
		}
		if m.Wire0 < 0 || m.Wire0+m.Wires > p.Wires {
			return fmt.Errorf("event %s: plane %s covers wires %d–%d, detector has 0–%d", e.ID, p.Role, m.Wire0, m.Wire0+m.Wires-1, p.Wires-1)
		}
		if m.Tick0 < 0 || m.Tick0+m.Ticks > e.Detector.ReadoutTicks {
			return fmt.Errorf("event %s: plane %s covers ticks %d–%d, readout has 0–%d", e.ID, p.Role, m.Tick0, m.Tick0+m.Ticks-1, e.Detector.ReadoutTicks-1)
		}
		if len(m.Pix) != m.Wires*m.Ticks {
			return fmt.Errorf("event %s: plane %s holds %d samples for %d×%d", e.ID, p.Role, len(m.Pix), m.Wires, m.Ticks)
		}
	}
	return nil
}
