package ui

import (
	"fmt"
	"image/color"
	"math"

	"github.com/tpcscan/tpcscan/render"
)

// ink names the overlay colours. They sit outside the charge scales' hues
// as far as a shared palette allows and every overlay also has its own
// glyph, so nothing depends on colour alone (mono and braille tiers show
// glyphs only).
type ink int

const (
	inkCursor ink = iota
	inkLink       // the cursor's tick and wire range on the other planes
	inkRuler
	inkVertex
	inkBox
	inkTrack
	inkSelection // the automated selection's box in verify campaigns
)

func (k ink) color() color.Color {
	switch k {
	case inkCursor:
		return color.RGBA{0xff, 0xff, 0xff, 0xff}
	case inkLink:
		return color.RGBA{0x9e, 0xc9, 0xff, 0xff}
	case inkRuler:
		return color.RGBA{0xff, 0xd8, 0x4a, 0xff}
	case inkVertex:
		return color.RGBA{0xff, 0x6e, 0x6e, 0xff}
	case inkBox:
		return color.RGBA{0x7c, 0xf0, 0xb0, 0xff}
	case inkTrack:
		return color.RGBA{0xff, 0x9c, 0xf5, 0xff}
	default:
		return color.RGBA{0xff, 0xb0, 0x50, 0xff}
	}
}

// overlayPen draws glyphs on the plane area in plane coordinates.
type overlayPen struct {
	v *planes
	c *render.Canvas
}

// cell returns the canvas position of a point, if its plane is shown and
// the point is inside its pane.
func (o *overlayPen) cell(p point) (x, y int, ok bool) {
	pn, shown := o.v.paneOf(p.Plane)
	if !shown {
		return 0, 0, false
	}
	col, row := o.v.cellOf(p.Plane, p.Wire, p.Tick)
	if col < 0 || row < 0 || col >= pn.w || row >= pn.h {
		return 0, 0, false
	}
	return pn.x + col, pn.y + row, true
}

// glyph writes one overlay glyph over the image, keeping its background.
func (o *overlayPen) glyph(x, y int, r rune, k ink) {
	old := o.c.At(x, y)
	cell := render.Cell{Rune: r, BG: old.BG, Attr: render.AttrBold}
	if o.v.colour() {
		cell.FG = k.color()
	}
	o.c.Set(x, y, cell)
}

// Point draws a glyph at a point.
func (o *overlayPen) Point(p point, r rune, k ink) {
	if x, y, ok := o.cell(p); ok {
		o.glyph(x, y, r, k)
	}
}

// Line draws the cells between two points of one plane with a dotted rune.
func (o *overlayPen) Line(a, b point, r rune, k ink) {
	if a.Plane != b.Plane {
		return
	}
	ca, ra := o.v.cellOf(a.Plane, a.Wire, a.Tick)
	cb, rb := o.v.cellOf(b.Plane, b.Wire, b.Tick)
	pn, shown := o.v.paneOf(a.Plane)
	if !shown {
		return
	}
	n := max(abs(cb-ca), abs(rb-ra))
	if n > 4*(pn.w+pn.h) { // far off screen: clip cheaply by sampling
		n = 4 * (pn.w + pn.h)
	}
	for s := 1; s < n; s++ {
		t := float64(s) / float64(n)
		col := ca + int(math.Round(t*float64(cb-ca)))
		row := ra + int(math.Round(t*float64(rb-ra)))
		if col >= 0 && row >= 0 && col < pn.w && row < pn.h {
			o.glyph(pn.x+col, pn.y+row, r, k)
		}
	}
}

// Box draws a rectangle's outline between two corners of one plane.
func (o *overlayPen) Box(a, b point, k ink) {
	if a.Plane != b.Plane {
		return
	}
	pn, shown := o.v.paneOf(a.Plane)
	if !shown {
		return
	}
	c0, r0 := o.v.cellOf(a.Plane, math.Min(a.Wire, b.Wire), math.Min(a.Tick, b.Tick))
	c1, r1 := o.v.cellOf(a.Plane, math.Max(a.Wire, b.Wire), math.Max(a.Tick, b.Tick))
	put := func(col, row int, r rune) {
		if col >= 0 && row >= 0 && col < pn.w && row < pn.h {
			o.glyph(pn.x+col, pn.y+row, r, k)
		}
	}
	for col := max(c0, -1); col <= min(c1, pn.w); col++ {
		put(col, r0, '─')
		put(col, r1, '─')
	}
	for row := max(r0, -1); row <= min(r1, pn.h); row++ {
		put(c0, row, '│')
		put(c1, row, '│')
	}
	put(c0, r0, '┌')
	put(c1, r0, '┐')
	put(c0, r1, '└')
	put(c1, r1, '┘')
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

func (v *planes) colour() bool { return v.tier != render.TierMono && v.tier != render.TierBraille }

// render draws the plane area and returns its lines. Panes whose window
// has not changed are not sampled or painted again; overlays are drawn on
// a copy of the painted images.
func (v *planes) render() []string {
	if v.w <= 0 || v.h <= 0 {
		return nil
	}
	if v.cache == nil || v.cache.W != v.w || v.cache.H != v.h {
		v.cache, v.work = render.NewCanvas(v.w, v.h), render.NewCanvas(v.w, v.h)
		v.keys = nil
	}
	blank := render.Cell{Rune: ' '}
	if v.prep == nil || len(v.panes) == 0 {
		v.cache.Fill(0, 0, v.w, v.h, blank)
		copy(v.work.Cells, v.cache.Cells)
		v.lines = v.work.Lines(v.tier)
		return v.lines
	}
	if len(v.keys) != len(v.panes) {
		v.keys = make([]paneKey, len(v.panes))
		v.grids = make([]render.Grid, len(v.panes))
		v.cache.Fill(0, 0, v.w, v.h, blank)
	}
	for k, p := range v.panes {
		key := v.paneKey(p)
		if key != v.keys[k] {
			v.paint(k, p)
			v.keys[k] = key
		}
	}
	copy(v.work.Cells, v.cache.Cells)
	v.drawFrame()
	v.drawLegend()
	pen := &overlayPen{v: v, c: v.work}
	if v.overlay != nil {
		v.overlay(pen)
	}
	v.drawLinks(pen)
	v.drawRuler(pen)
	if v.boxStart != nil {
		pen.Box(*v.boxStart, v.cur, inkRuler)
	}
	pen.Point(v.cur, '✚', inkCursor)
	v.lines = v.work.Lines(v.tier)
	return v.lines
}

func (v *planes) paneKey(p pane) paneKey {
	i := p.plane
	return paneKey{pane: p, wire0: v.win.Wire0[i], wpp: v.win.WPP[i], tick0: v.win.Tick0, tpp: v.win.TPP,
		scale: v.scaleIdx, log: v.log, reduce: v.reduce, rng: v.rangeOf(i), prep: v.prep}
}

func (v *planes) rangeOf(i int) render.Range {
	r := v.prep.rng[i]
	r.Log = v.log
	if v.reduce == render.ReduceSum {
		// The auto range is per sample; a summed pixel adds many samples.
		r = r.ForSum(v.imageWindow(i))
	}
	return r
}

// imageWindow is plane i's view window in its image's own wire and tick
// indices (images may be crops of the readout).
func (v *planes) imageWindow(i int) render.Window {
	img := v.prep.ev.Planes[i]
	return render.Window{
		Wire0: v.win.Wire0[i] - float64(img.Wire0), Tick0: v.win.Tick0 - float64(img.Tick0),
		WiresPerPx: v.win.WPP[i], TicksPerPx: v.win.TPP,
	}
}

// paint samples the pane's window from the plane's pyramid and paints it
// into the cache.
func (v *planes) paint(k int, p pane) {
	i := p.plane
	g := &v.grids[k]
	g.W, g.H = p.w*v.px, p.h*v.py
	v.prep.pyr[i].Sample(g, v.imageWindow(i), v.reduce)
	render.Paint(v.cache, p.x, p.y, g, v.scales[v.scaleIdx], v.rangeOf(i), v.tier)
}

// drawFrame writes each pane's header (plane and wire range), its time
// gutter with the cursor's tick and its wire axis.
func (v *planes) drawFrame() {
	c := v.work
	for _, p := range v.panes {
		i := p.plane
		role := v.det.Planes[i].Role
		lo := v.win.Wire0[i]
		hi := lo + float64(p.w)*v.cellWires(i)
		head := fmt.Sprintf(" %s  wires %.0f–%.0f ", role, lo, hi)
		var a render.Attr
		if i == v.cur.Plane {
			head = fmt.Sprintf("▸%s  wires %.0f–%.0f ", role, lo, hi)
			a = render.AttrBold | render.AttrReverse
		}
		for x := p.x - 1; x < p.x+p.w; x++ {
			c.Set(x, 0, render.Cell{Rune: ' '})
		}
		c.Text(p.x-1, 0, truncRunes(head, p.w+1), nil, nil, a)
		_, curRow := v.cellOf(i, v.cur.Wire, v.cur.Tick)
		for row := 0; row < p.h; row++ {
			r := '│'
			if row == curRow {
				r = '▶'
			}
			c.Set(p.x-1, p.y+row, render.Cell{Rune: r, FG: v.inkIf(row == curRow, inkLink)})
		}
		for col := -1; col < p.w; col++ {
			c.Set(p.x+col, p.y+p.h, render.Cell{Rune: '─'})
		}
		c.Set(p.x-1, p.y+p.h, render.Cell{Rune: '└'})
	}
}

// drawLegend writes the colour scale of the cursor's plane under the
// panes, with its range in ADC.
func (v *planes) drawLegend() {
	rows := v.legendRows()
	if rows == 0 {
		return
	}
	y := v.h - rows
	i := v.cur.Plane
	lin := "linear"
	if v.log {
		lin = "log"
	}
	label := fmt.Sprintf(" %s charge (%s, %s, %s) ", v.det.Planes[i].Role, lin, reduceShort(v.reduce), v.scales[v.scaleIdx].Name)
	c := v.work
	c.Fill(0, y, v.w, rows, render.Cell{Rune: ' '})
	n := c.Text(0, y, truncRunes(label, v.w/2), nil, nil, 0)
	w := min(v.w-n-2, 72)
	render.Legend(c, n, y, w, v.scales[v.scaleIdx], v.rangeOf(i), v.tier, v.legendMeV(rows))
}

// legendMeV is the calibration the legend shows, when it has the row for it.
func (v *planes) legendMeV(rows int) float64 {
	if rows < 3 {
		return 0
	}
	return v.mevPerADC
}

func reduceShort(r render.Reduce) string {
	if r == render.ReduceSum {
		return "block sum"
	}
	return "block max"
}

func (v *planes) inkIf(on bool, k ink) color.Color {
	if on && v.colour() {
		return k.color()
	}
	return nil
}

// drawLinks marks, on the wire axis of every pane, where the cursor is
// (its own plane) or which wires can see it (other planes), and the
// predicted crossing when a wire is known on a second plane.
func (v *planes) drawLinks(pen *overlayPen) {
	c := v.work
	i := v.cur.Plane
	for _, p := range v.panes {
		k := p.plane
		axis := func(col int, r rune) {
			if col >= 0 && col < p.w {
				c.Set(p.x+col, p.y+p.h, render.Cell{Rune: r, FG: v.inkIf(true, inkLink), Attr: render.AttrBold})
			}
		}
		if k == i {
			col, _ := v.cellOf(k, v.cur.Wire, v.cur.Tick)
			axis(col, '▲')
			continue
		}
		if r, ok := v.det.CorrespondingWires(i, v.cur.Wire, v.cur.Wire, k); ok {
			c0, _ := v.cellOf(k, r.Lo, 0)
			c1, _ := v.cellOf(k, r.Hi, 0)
			for col := max(c0, 0); col <= min(c1, p.w-1); col++ {
				axis(col, '━')
			}
		}
		if w, ok := v.predicted(k); ok {
			col, _ := v.cellOf(k, w, 0)
			axis(col, '◆')
			pen.Point(point{Plane: k, Wire: w, Tick: v.cur.Tick}, '◇', inkLink)
		}
	}
}

func (v *planes) drawRuler(pen *overlayPen) {
	for _, r := range v.ruler {
		for _, p := range r {
			pen.Point(p, '◎', inkRuler)
		}
		if len(r) == 2 {
			pen.Line(r[0], r[1], '·', inkRuler)
		}
	}
}

// truncRunes cuts s to at most n runes.
func truncRunes(s string, n int) string {
	if n <= 0 {
		return ""
	}
	r := []rune(s)
	if len(r) > n {
		r = r[:n]
	}
	return string(r)
}
