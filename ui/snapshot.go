package ui

import (
	"fmt"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
)

// Snapshot draws the display of one event (opts.Event, or the first) at
// w×h cells without a terminal: the title, the planes with the cursor at
// the centre, and the readout, as a canvas that can be written as PNG.
func Snapshot(opts Options, w, h int) (*render.Canvas, error) {
	if w < minWidth || h < minHeight {
		return nil, fmt.Errorf("snapshot size %d×%d: need at least %d×%d", w, h, minWidth, minHeight)
	}
	opts.Store = nil
	m := New(opts)
	if m.src == nil || len(m.ids) == 0 {
		return nil, fmt.Errorf("snapshot: %w", errNoEvents)
	}
	id := m.ids[0]
	if opts.Event != "" {
		if _, ok := m.index[opts.Event]; !ok {
			return nil, fmt.Errorf("snapshot: no event %q in the dataset", opts.Event)
		}
		id = opts.Event
	}
	p, err := loadEvent(m.src, id)
	if err != nil {
		return nil, err
	}
	m.resize(w, h)
	m.setEvent(p)
	d := m.computeLayout()
	c := render.NewCanvas(w, h)
	c.Text(0, 0, fmt.Sprintf(" tpcscan · event %s (%d/%d)", scan.CleanText(id), m.cur+1, len(m.ids)), nil, nil, render.AttrBold)
	m.pv.render()
	for y := 0; y < m.pv.work.H && y+1 < h; y++ {
		for x := 0; x < m.pv.work.W && x < w; x++ {
			c.Set(x, y+1, m.pv.work.At(x, y))
		}
	}
	c.Text(0, 1+d.bodyH, m.readout(), nil, nil, 0)
	return c, nil
}
