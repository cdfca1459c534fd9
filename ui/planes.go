package ui

import (
	"fmt"
	"math"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// point is a position on one plane in detector wire and tick numbers
// (continuous).
type point struct {
	Plane int     `json:"plane"`
	Wire  float64 `json:"wire"`
	Tick  float64 `json:"tick"`
}

func (p point) planePoint() detector.PlanePoint {
	return detector.PlanePoint{Wire: p.Wire, Tick: p.Tick}
}

// window is what the planes show: the drift-time axis is shared by every
// plane (one tick0 and ticks-per-pixel), wires are per plane. Coordinates
// are detector wires and ticks, not image-local ones.
type window struct {
	Tick0 float64   `json:"tick0"`
	TPP   float64   `json:"tpp"` // ticks per pixel
	Wire0 []float64 `json:"wire0"`
	WPP   []float64 `json:"wpp"` // wires per pixel
}

func (w window) clone() window {
	w.Wire0 = append([]float64(nil), w.Wire0...)
	w.WPP = append([]float64(nil), w.WPP...)
	return w
}

// pane is where one plane's image sits in the plane area, in cells; its
// header row is at y−1, its wire axis row at y+h and its time gutter at x−1.
type pane struct {
	plane      int
	x, y, w, h int
}

// Zoom limits: at most four cells per wire or tick, at least half the
// whole plane per pane.
const (
	minPerPx   = 0.25
	zoomStep   = 2.0
	fastCells  = 8
	panDivisor = 4 // a pan moves a quarter of the pane
)

// planes is the plane-view pane: layout, window, cursor and the cached
// drawing of the images.
type planes struct {
	det  *detector.Detector
	prep *prepared
	tier render.Tier
	px   int // grid pixels per cell, horizontally
	py   int // and vertically

	scales []render.Scale
	// mevPerADC converts the legend's ADC to MeV with the user's
	// calibration; 0 shows ADC only.
	mevPerADC float64
	scaleIdx  int
	log       bool
	reduce    render.Reduce

	w, h int // size of the plane area in cells
	// lastPW and lastPH are the last pane size that held an image, to
	// rescale the window when panes come back after a resize.
	lastPW, lastPH int
	one            bool // one plane enlarged
	focus          int  // plane the cursor is on
	panes          []pane

	win window
	cur point
	// seen[i] is the last wire the cursor was on in plane i (NaN if never):
	// with the cursor's tick it gives y and z.
	seen []float64

	boxStart *point            // first corner of a zoom box
	ruler    [][]point         // per plane, up to two points
	cache    *render.Canvas    // images painted, no overlays
	keys     []paneKey         // what each cached pane shows
	grids    []render.Grid     // sample buffers, one per pane
	work     *render.Canvas    // cache + overlays
	lines    []string          // last output
	overlay  func(*overlayPen) // marks from the scanning session
	drag     *dragState
}

// dragState is where a mouse drag last was, in plane-area cells.
type dragState struct{ x, y int }

// paneKey identifies what a cached pane shows; when it changes, the pane
// is sampled and painted again.
type paneKey struct {
	pane       pane
	wire0, wpp float64
	tick0, tpp float64
	scale      int
	log        bool
	reduce     render.Reduce
	rng        render.Range
	prep       *prepared
}

func newPlanes(tier render.Tier) *planes {
	px, py := render.PixelsPerCell(tier)
	return &planes{tier: tier, px: px, py: py, scales: render.Scales()}
}

// setEvent shows a new event. The window and cursor stay when the new
// event covers the same wires and ticks as the last one (scanners compare
// events at the same zoom); otherwise, or when keep is false, the planes
// are shown whole with the cursor in the middle.
func (v *planes) setEvent(p *prepared, keep bool) {
	same := v.prep != nil && sameCoverage(v.prep, p)
	v.prep, v.det = p, p.ev.Detector
	n := len(v.det.Planes)
	if len(v.seen) != n {
		v.seen = make([]float64, n)
	}
	for i := range v.seen {
		v.seen[i] = math.NaN()
	}
	v.ruler = make([][]point, n)
	v.boxStart = nil
	v.focus = min(v.focus, n-1)
	v.layout()
	if !keep || !same || len(v.win.WPP) != n {
		v.cur = point{}
		v.fit()
	}
	v.clampCursor()
}

// sameCoverage reports whether two events' planes cover the same wires
// and ticks.
func sameCoverage(a, b *prepared) bool {
	if len(a.ev.Planes) != len(b.ev.Planes) {
		return false
	}
	for i, x := range a.ev.Planes {
		y := b.ev.Planes[i]
		if x.Wire0 != y.Wire0 || x.Tick0 != y.Tick0 || x.Wires != y.Wires || x.Ticks != y.Ticks {
			return false
		}
	}
	return true
}

// setSize lays the panes out in a w×h cell area. The window keeps what
// it shows, rescaled to the new pane size; while the area is too small
// for panes (the event list covers it) the window is left alone.
func (v *planes) setSize(w, h int) {
	if w == v.w && h == v.h {
		return
	}
	if pw, ph := v.paneSize(); pw > 0 && ph > 0 {
		v.lastPW, v.lastPH = pw, ph
	}
	v.w, v.h = w, h
	v.layout()
	if v.det == nil {
		return
	}
	newW, newH := v.paneSize()
	switch {
	case newW == 0 || newH == 0:
		return
	case v.lastPW > 0 && v.lastPH > 0 && len(v.win.WPP) > 0:
		v.win.TPP *= float64(v.lastPH) / float64(newH)
		for i := range v.win.WPP {
			v.win.WPP[i] *= float64(v.lastPW) / float64(newW)
		}
		v.clampZoom()
	default:
		v.fit()
	}
	v.clampCursor()
	v.follow()
}

func (v *planes) paneSize() (int, int) {
	if len(v.panes) == 0 {
		return 0, 0
	}
	return v.panes[0].w, v.panes[0].h
}

// layout places the panes: three side by side with a one-cell time gutter
// left of each, or the focused plane alone.
func (v *planes) layout() {
	v.panes = v.panes[:0]
	if v.det == nil || v.w < 8 || v.h < 4 {
		return
	}
	n := len(v.det.Planes)
	shown := make([]int, 0, n)
	if v.one {
		shown = append(shown, v.focus)
	} else {
		for i := range n {
			shown = append(shown, i)
		}
	}
	each := v.w / len(shown)
	for k, pl := range shown {
		x := k * each
		w := each
		if k == len(shown)-1 {
			w = v.w - x
		}
		v.panes = append(v.panes, pane{plane: pl, x: x + 1, y: 1, w: w - 1, h: v.h - 2 - v.legendRows()})
	}
	// Every pane gets the same width so the planes' pixels match.
	for i := range v.panes {
		v.panes[i].w = each - 1
	}
}

// legendRows is the height of the colour legend under the planes: a bar
// and its ADC labels, when the window is tall enough to spare them.
func (v *planes) legendRows() int {
	if v.h < 26 || v.w < 60 {
		return 0
	}
	if v.mevPerADC > 0 && v.h >= 30 {
		return 3 // a second label row in MeV
	}
	return 2
}

// paneOf returns the pane showing plane i.
func (v *planes) paneOf(i int) (pane, bool) {
	for _, p := range v.panes {
		if p.plane == i {
			return p, true
		}
	}
	return pane{}, false
}

// fit shows every plane whole.
func (v *planes) fit() {
	n := len(v.det.Planes)
	pw, ph := v.paneSize()
	pw, ph = max(pw, 1), max(ph, 1)
	v.win = window{Tick0: v.prep.tick0, TPP: (v.prep.tick1 - v.prep.tick0) / float64(ph*v.py),
		Wire0: make([]float64, n), WPP: make([]float64, n)}
	for i, img := range v.prep.ev.Planes {
		v.win.Wire0[i] = float64(img.Wire0)
		v.win.WPP[i] = math.Max(float64(img.Wires), 1) / float64(pw*v.px)
	}
	if v.cur == (point{}) || v.cur.Plane >= n {
		// Start on the brightest sample: usually the interaction.
		v.focus = min(v.focus, n-1)
		v.cur = v.prep.peak[v.focus]
	}
}

// maxPerPx is the coarsest zoom: the whole plane in half a pane.
func (v *planes) maxWPP(i int) float64 {
	pw, _ := v.paneSize()
	return 2 * math.Max(float64(v.prep.ev.Planes[i].Wires), 1) / float64(max(pw, 1)*v.px)
}

func (v *planes) maxTPP() float64 {
	_, ph := v.paneSize()
	return 2 * (v.prep.tick1 - v.prep.tick0) / float64(max(ph, 1)*v.py)
}

func (v *planes) clampZoom() {
	v.win.TPP = clamp(v.win.TPP, minPerPx, v.maxTPP())
	for i := range v.win.WPP {
		v.win.WPP[i] = clamp(v.win.WPP[i], minPerPx, v.maxWPP(i))
	}
}

func clamp(x, lo, hi float64) float64 { return math.Max(lo, math.Min(hi, x)) }

// cellWires and cellTicks are the extent of one cell: a mark's precision.
func (v *planes) cellWires(i int) float64 { return v.win.WPP[i] * float64(v.px) }
func (v *planes) cellTicks() float64      { return v.win.TPP * float64(v.py) }

// cellOf returns the pane cell showing (wire, tick) of plane i.
func (v *planes) cellOf(i int, wire, tick float64) (col, row int) {
	col = int(math.Floor((wire - v.win.Wire0[i]) / v.cellWires(i)))
	row = int(math.Floor((tick - v.win.Tick0) / v.cellTicks()))
	return col, row
}

// pointAt returns the centre of a pane cell in detector coordinates.
func (v *planes) pointAt(i, col, row int) point {
	return point{Plane: i,
		Wire: v.win.Wire0[i] + (float64(col)+0.5)*v.cellWires(i),
		Tick: v.win.Tick0 + (float64(row)+0.5)*v.cellTicks()}
}

// moveCursor moves the cursor by whole cells, panning by whole cells when
// it would leave the pane so unchanged rows stay byte-identical.
func (v *planes) moveCursor(dc, dr int) {
	i := v.cur.Plane
	v.cur.Wire += float64(dc) * v.cellWires(i)
	v.cur.Tick += float64(dr) * v.cellTicks()
	v.clampCursor()
	v.follow()
}

// follow pans so that the cursor's cell is inside its pane.
func (v *planes) follow() {
	p, ok := v.paneOf(v.cur.Plane)
	if !ok {
		return
	}
	i := v.cur.Plane
	col, row := v.cellOf(i, v.cur.Wire, v.cur.Tick)
	if col < 0 {
		v.win.Wire0[i] += float64(col) * v.cellWires(i)
	} else if col >= p.w {
		v.win.Wire0[i] += float64(col-p.w+1) * v.cellWires(i)
	}
	if row < 0 {
		v.win.Tick0 += float64(row) * v.cellTicks()
	} else if row >= p.h {
		v.win.Tick0 += float64(row-p.h+1) * v.cellTicks()
	}
}

// clampCursor keeps the cursor on its plane's image.
func (v *planes) clampCursor() {
	if v.prep == nil {
		return
	}
	img := v.prep.ev.Planes[v.cur.Plane]
	v.cur.Wire = clamp(v.cur.Wire, float64(img.Wire0), float64(img.Wire0+max(img.Wires, 1))-1e-6)
	v.cur.Tick = clamp(v.cur.Tick, v.prep.tick0, v.prep.tick1-1e-6)
}

// pan moves the window by whole cells: the time axis for every plane,
// wires for the cursor's plane only.
func (v *planes) pan(dc, dr int) {
	i := v.cur.Plane
	v.win.Wire0[i] += float64(dc) * v.cellWires(i)
	v.win.Tick0 += float64(dr) * v.cellTicks()
	// The cursor stays on the same screen cell.
	v.cur.Wire += float64(dc) * v.cellWires(i)
	v.cur.Tick += float64(dr) * v.cellTicks()
	v.clampCursor()
}

// panStep is a quarter of the pane, in cells.
func (v *planes) panStep() (cols, rows int) {
	pw, ph := v.paneSize()
	return max(pw/panDivisor, 1), max(ph/panDivisor, 1)
}

// zoom scales the window by f (< 1 zooms in) keeping the cursor where it
// is on screen; the time axis changes for every plane, and the other
// planes' wire scales follow, centred on the wires that can see the
// cursor's wire.
func (v *planes) zoom(f float64) {
	i := v.cur.Plane
	oldT, oldW := v.win.TPP, v.win.WPP[i]
	centres := v.centres()
	v.win.TPP *= f
	for k := range v.win.WPP {
		v.win.WPP[k] *= f
	}
	v.clampZoom()
	v.win.Tick0 = v.cur.Tick - (v.cur.Tick-v.win.Tick0)*v.win.TPP/oldT
	v.win.Wire0[i] = v.cur.Wire - (v.cur.Wire-v.win.Wire0[i])*v.win.WPP[i]/oldW
	v.centreOthers(centres)
}

// centres returns the wire in the middle of every plane's view.
func (v *planes) centres() []float64 {
	c := make([]float64, len(v.win.WPP))
	for k := range c {
		c[k] = v.centre(k)
	}
	return c
}

// centreOthers centres every other plane, from the centres it had, on the
// wires that can see the cursor's wire (see linkedWire).
func (v *planes) centreOthers(centres []float64) {
	i := v.cur.Plane
	pw, _ := v.paneSize()
	for k := range v.win.WPP {
		if k == i {
			continue
		}
		c, ok := v.linkedWireFrom(k, centres[k])
		if !ok {
			continue
		}
		v.win.Wire0[k] = c - float64(pw)*v.cellWires(k)/2
	}
}

// linkedWire is where plane k should look: the wire predicted from the
// cursor and a wire seen on a third plane; else the centre of plane k's
// view moved just inside the range of wires that can see the cursor's
// wire (that range spans the whole detector height, so its middle alone
// would often miss a small interaction the view already shows).
func (v *planes) linkedWire(k int) (float64, bool) {
	return v.linkedWireFrom(k, v.centre(k))
}

func (v *planes) linkedWireFrom(k int, centre float64) (float64, bool) {
	if w, ok := v.predicted(k); ok {
		return w, true
	}
	r, ok := v.det.CorrespondingWires(v.cur.Plane, v.cur.Wire, v.cur.Wire, k)
	if !ok {
		return 0, false
	}
	if w, ok := v.chargeAtTick(k, r); ok {
		return w, true
	}
	return clamp(centre, r.Lo, r.Hi), true
}

// chargeAtTick looks for the same deposit on plane k: the wire in range r
// with the most charge within a couple of cells of the cursor's tick (all
// planes see a deposit at the same drift time). It reports false when
// nothing there stands out of the plane's colour range.
func (v *planes) chargeAtTick(k int, r detector.WireRange) (float64, bool) {
	img := v.prep.ev.Planes[k]
	w0 := max(int(math.Floor(r.Lo))-img.Wire0, 0)
	w1 := min(int(math.Ceil(r.Hi))-img.Wire0, img.Wires-1)
	span := max(int(2*v.cellTicks()), 3)
	t := int(math.Floor(v.cur.Tick)) - img.Tick0
	t0, t1 := max(t-span, 0), min(t+span, img.Ticks-1)
	best, at := float32(math.Inf(-1)), -1
	for w := w0; w <= w1; w++ {
		row := img.Row(w)
		for tk := t0; tk <= t1; tk++ {
			if row[tk] > best {
				best, at = row[tk], w
			}
		}
	}
	rg := v.prep.rng[k]
	if at < 0 || float64(best) < rg.Lo+0.3*(rg.Hi-rg.Lo) {
		return 0, false
	}
	return float64(at+img.Wire0) + 0.5, true
}

// centre is the wire in the middle of plane k's view.
func (v *planes) centre(k int) float64 {
	pw, _ := v.paneSize()
	return v.win.Wire0[k] + float64(pw)*v.cellWires(k)/2
}

// predicted returns the wire on plane k where the cursor's wire crosses
// the last wire seen on another plane j ∉ {cursor, k}.
func (v *planes) predicted(k int) (float64, bool) {
	i := v.cur.Plane
	for j, w := range v.seen {
		if j == i || j == k || math.IsNaN(w) {
			continue
		}
		pw, err := v.det.PredictWire(i, v.cur.Wire, j, w, k)
		if err == nil {
			return pw, true
		}
	}
	return 0, false
}

// zoomBox zooms the cursor's plane onto the box between a and the cursor.
func (v *planes) zoomBox(a point) {
	i := v.cur.Plane
	if a.Plane != i {
		return
	}
	pw, ph := v.paneSize()
	w0, w1 := math.Min(a.Wire, v.cur.Wire), math.Max(a.Wire, v.cur.Wire)
	t0, t1 := math.Min(a.Tick, v.cur.Tick), math.Max(a.Tick, v.cur.Tick)
	w0, w1 = w0-v.cellWires(i)/2, w1+v.cellWires(i)/2
	t0, t1 = t0-v.cellTicks()/2, t1+v.cellTicks()/2
	f := (w1 - w0) / float64(pw*v.px) / v.win.WPP[i]
	centres := v.centres()
	v.win.TPP = (t1 - t0) / float64(ph*v.py)
	for k := range v.win.WPP {
		v.win.WPP[k] *= f
	}
	v.clampZoom()
	v.win.Wire0[i] = (w0+w1)/2 - float64(pw)*v.cellWires(i)/2
	v.win.Tick0 = (t0+t1)/2 - float64(ph)*v.cellTicks()/2
	v.cur = point{Plane: i, Wire: (w0 + w1) / 2, Tick: (t0 + t1) / 2}
	v.centreOthers(centres)
}

// setFocus moves the cursor to plane k, at the same tick and at the wire
// that sees the same place when it is known.
func (v *planes) setFocus(k int) {
	if k == v.cur.Plane {
		return
	}
	i := v.cur.Plane
	v.seen[i] = v.cur.Wire
	w, ok := v.linkedWire(k)
	if !ok {
		img := v.prep.ev.Planes[k]
		w = float64(img.Wire0) + float64(img.Wires)/2
	}
	v.cur = point{Plane: k, Wire: w, Tick: v.cur.Tick}
	v.focus = k
	if v.one {
		v.layout()
	}
	v.clampCursor()
	if p, ok := v.paneOf(k); ok {
		col, _ := v.cellOf(k, v.cur.Wire, v.cur.Tick)
		if col < 0 || col >= p.w {
			v.win.Wire0[k] = v.cur.Wire - float64(p.w)*v.cellWires(k)/2
		}
	}
	v.follow()
}

// toggleOne switches between three planes and the focused one enlarged.
func (v *planes) toggleOne() {
	oldW, _ := v.paneSize()
	v.one = !v.one
	v.layout()
	newW, _ := v.paneSize()
	if oldW > 0 && newW > 0 {
		for k := range v.win.WPP {
			c := v.win.Wire0[k] + float64(oldW)*v.cellWires(k)/2
			v.win.WPP[k] *= float64(oldW) / float64(newW)
			v.win.Wire0[k] = c - float64(newW)*v.cellWires(k)/2
		}
		v.clampZoom()
	}
	v.follow()
}

// charge is the full-resolution sample under a point.
func (v *planes) charge(p point) float32 {
	img := v.prep.ev.Planes[p.Plane]
	return img.At(int(math.Floor(p.Wire))-img.Wire0, int(math.Floor(p.Tick))-img.Tick0)
}

// yz returns the cursor's y and z when a wire on a second plane is known.
func (v *planes) yz() (y, z float64, other int, ok bool) {
	i := v.cur.Plane
	for j, w := range v.seen {
		if j == i || math.IsNaN(w) {
			continue
		}
		y, z, err := detector.Cross(v.det.Planes[i], v.cur.Wire, v.det.Planes[j], w)
		if err == nil {
			return y, z, j, true
		}
	}
	return 0, 0, 0, false
}

// addRulerPoint adds the cursor to its plane's ruler; a third point starts
// a new ruler on that plane.
func (v *planes) addRulerPoint() {
	i := v.cur.Plane
	if len(v.ruler[i]) >= 2 {
		v.ruler[i] = v.ruler[i][:0]
	}
	v.ruler[i] = append(v.ruler[i], v.cur)
}

// rulerText describes the ruler: projected length and angle on the
// cursor's plane, and the 3-D length when a second plane has two points.
func (v *planes) rulerText() string {
	i := v.cur.Plane
	r := v.ruler[i]
	if len(r) == 1 {
		return fmt.Sprintf("ruler: from w%.0f t%.0f", r[0].Wire, r[0].Tick)
	}
	if len(r) != 2 {
		return ""
	}
	a, b := r[0].planePoint(), r[1].planePoint()
	s := fmt.Sprintf("ruler: %.1f cm projected, %.0f° projected", v.det.ProjectedLength(i, a, b), v.det.ProjectedAngle(i, a, b))
	for j, rj := range v.ruler {
		if j == i || len(rj) != 2 {
			continue
		}
		c, d := rj[0].planePoint(), rj[1].planePoint()
		// Pair the endpoints by drift time: the same point has the same tick.
		if math.Abs(a.Tick-c.Tick)+math.Abs(b.Tick-d.Tick) > math.Abs(a.Tick-d.Tick)+math.Abs(b.Tick-c.Tick) {
			c, d = d, c
		}
		if l, err := v.det.Length3D(i, a, b, j, c, d); err == nil {
			s += fmt.Sprintf(" · 3-D %.1f cm (with %s)", l, v.det.Planes[j].Role)
			break
		}
	}
	return s
}

// hit finds the pane cell under plane-area position (x, y).
func (v *planes) hit(x, y int) (plane, col, row int, ok bool) {
	for _, p := range v.panes {
		if x >= p.x && x < p.x+p.w && y >= p.y && y < p.y+p.h {
			return p.plane, x - p.x, y - p.y, true
		}
	}
	return 0, 0, 0, false
}

// moveTo puts the cursor on a pane cell, switching planes if needed.
func (v *planes) moveTo(plane, col, row int) {
	if plane != v.cur.Plane {
		v.seen[v.cur.Plane] = v.cur.Wire
		v.focus = plane
	}
	v.cur = v.pointAt(plane, col, row)
	v.clampCursor()
}
