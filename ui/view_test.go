package ui

import (
	"fmt"
	"math"
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"
	"github.com/charmbracelet/x/exp/golden"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// TestViewGolden pins the layout at several sizes and tiers (escape
// sequences stripped) and the exact bytes of one tier.
func TestViewGolden(t *testing.T) {
	for _, tc := range []struct {
		w, h  int
		tier  render.Tier
		plain bool
	}{
		{80, 24, render.TierMono, true},
		{120, 40, render.TierBraille, true},
		{200, 60, render.Tier16, true},
		{100, 30, render.Tier256, false},
	} {
		t.Run(fmt.Sprintf("%dx%d-%s", tc.w, tc.h, tc.tier), func(t *testing.T) {
			m := newViewModel(t, newSynthSource(2, 300), tc.w, tc.h, tc.tier)
			out := m.View()
			checkFrameSize(t, out, tc.w, tc.h)
			if tc.plain {
				golden.RequireEqual(t, ansi.Strip(out))
			} else {
				golden.RequireEqual(t, out)
			}
		})
	}
}

// checkFrameSize checks that a frame has h lines of exactly w cells.
func checkFrameSize(t *testing.T, out string, w, h int) {
	t.Helper()
	lines := strings.Split(out, "\n")
	if len(lines) != h {
		t.Fatalf("frame has %d lines, want %d", len(lines), h)
	}
	for i, l := range lines {
		if n := ansi.StringWidth(l); n != w {
			t.Errorf("line %d is %d cells wide, want %d: %q", i, n, w, ansi.Strip(l))
		}
	}
}

func TestTooSmall(t *testing.T) {
	m := newViewModel(t, newSynthSource(1, 200), 100, 30, render.TierMono)
	for _, sz := range [][2]int{{59, 30}, {100, 15}, {20, 5}} {
		send(t, m, teaSize(sz[0], sz[1]))
		out := ansi.Strip(m.View())
		if !strings.Contains(strings.ReplaceAll(out, "\n", " "), "too small") {
			t.Errorf("%dx%d: no too-small message in %q", sz[0], sz[1], out)
		}
	}
	// Growing again shows the planes.
	send(t, m, teaSize(100, 30))
	if out := ansi.Strip(m.View()); !strings.Contains(out, "ind1") {
		t.Errorf("after growing, no plane header:\n%s", out)
	}
}

// TestReflow resizes through the supported range: every frame fills the
// window exactly.
func TestReflow(t *testing.T) {
	m := newViewModel(t, newSynthSource(1, 200), 80, 24, render.Tier256)
	for _, sz := range [][2]int{{300, 90}, {60, 16}, {137, 41}, {80, 24}} {
		send(t, m, teaSize(sz[0], sz[1]))
		checkFrameSize(t, m.View(), sz[0], sz[1])
	}
}

// TestSharedTimeAxis zooms and pans on one plane and checks that every
// plane shows the same drift-time window and marks the cursor's tick on
// the same row.
func TestSharedTimeAxis(t *testing.T) {
	m := newViewModel(t, newSynthSource(1, 400), 160, 48, render.TierMono)
	keys(t, m, "+", "pgdown", "tab", "+", "up", "up", "-", "shift+tab", "pgup")
	v := m.pv
	m.View()
	if len(v.panes) != 3 {
		t.Fatalf("%d panes, want 3", len(v.panes))
	}
	k0 := v.paneKey(v.panes[0])
	for _, p := range v.panes[1:] {
		k := v.paneKey(p)
		if k.tick0 != k0.tick0 || k.tpp != k0.tpp {
			t.Errorf("plane %d shows ticks from %g at %g/px, plane 0 from %g at %g/px", p.plane, k.tick0, k.tpp, k0.tick0, k0.tpp)
		}
	}
	// The gutter marker row is the same in every pane.
	rows := map[int]bool{}
	for _, p := range v.panes {
		for row := 0; row < p.h; row++ {
			if v.work.At(p.x-1, p.y+row).Rune == '▶' {
				rows[row] = true
			}
		}
	}
	if len(rows) != 1 {
		t.Errorf("cursor tick marked on rows %v, want one row shared by all planes", rows)
	}
	// A zoom on another plane changed the time scale for all: the window
	// now covers fewer ticks than the fitted one.
	fitted := (v.prep.tick1 - v.prep.tick0) / float64(v.panes[0].h*v.py)
	if v.win.TPP >= fitted {
		t.Errorf("ticks per pixel %g after two zoom-ins and a zoom-out, fitted %g", v.win.TPP, fitted)
	}
}

// TestCrossPlanePrediction puts the cursor on the synthetic vertex's wire
// on two planes and checks the predicted wire on the third against the
// geometry package's projection of the vertex, and that the display marks
// it on that plane's wire axis.
func TestCrossPlanePrediction(t *testing.T) {
	m := newViewModel(t, newSynthSource(1, 400), 160, 48, render.TierMono)
	v := m.pv
	det := v.det
	w0, tick := det.Project(0, synthVertex)
	w1, _ := det.Project(1, synthVertex)
	w2, _ := det.Project(2, synthVertex)
	v.cur = point{Plane: 1, Wire: w1, Tick: tick}
	v.seen[0] = w0
	got, ok := v.predicted(2)
	if !ok {
		t.Fatal("no prediction on coll with wires known on ind1 and ind2")
	}
	if math.Abs(got-w2) > 1e-6 {
		t.Errorf("predicted coll wire %.6f, projection of the vertex %.6f", got, w2)
	}
	// The range of coll wires that can see the cursor's ind2 wire holds it.
	r, ok := det.CorrespondingWires(1, w1, w1, 2)
	if !ok || w2 < r.Lo || w2 > r.Hi {
		t.Errorf("corresponding coll wires %v (ok %v) miss the vertex wire %.1f", r, ok, w2)
	}
	// y and z in the readout come from the same crossing.
	y, z, _, ok := v.yz()
	if !ok || math.Abs(y-synthVertex.Y) > 1e-6 || math.Abs(z-synthVertex.Z) > 1e-6 {
		t.Errorf("readout y, z = %.3f, %.3f (ok %v), vertex at %.3f, %.3f", y, z, ok, synthVertex.Y, synthVertex.Z)
	}
	m.dirty = true
	m.View()
	p, _ := v.paneOf(2)
	col, _ := v.cellOf(2, w2, tick)
	if r := v.work.At(p.x+col, p.y+p.h).Rune; r != '◆' {
		t.Errorf("coll axis at the predicted wire shows %q, want ◆", r)
	}
	if !strings.Contains(ansi.Strip(m.View()), fmt.Sprintf("y %.1f z %.1f cm", synthVertex.Y, synthVertex.Z)) {
		t.Errorf("readout lacks y and z: %q", m.readout())
	}
}

// TestZoomKeepsCursor checks zoom in, zoom out and reset around the cursor.
func TestZoomKeepsCursor(t *testing.T) {
	m := newViewModel(t, newSynthSource(1, 400), 160, 48, render.TierMono)
	v := m.pv
	keys(t, m, "right", "right", "down")
	col0, row0 := v.cellOf(v.cur.Plane, v.cur.Wire, v.cur.Tick)
	wpp := v.win.WPP[0]
	keys(t, m, "+")
	if v.win.WPP[0] >= wpp {
		t.Fatalf("zoom in: %g wires per pixel, was %g", v.win.WPP[0], wpp)
	}
	col1, row1 := v.cellOf(v.cur.Plane, v.cur.Wire, v.cur.Tick)
	if abs(col1-col0) > 1 || abs(row1-row0) > 1 {
		t.Errorf("cursor moved on screen from (%d,%d) to (%d,%d) on zoom", col0, row0, col1, row1)
	}
	keys(t, m, "0")
	if math.Abs(v.win.WPP[0]-wpp) > 1e-9 {
		t.Errorf("reset: %g wires per pixel, want the fitted %g", v.win.WPP[0], wpp)
	}
}

// TestZoomBox zooms onto the box between two cursor positions.
func TestZoomBox(t *testing.T) {
	m := newViewModel(t, newSynthSource(1, 400), 160, 48, render.TierMono)
	v := m.pv
	keys(t, m, "z", "right", "right", "right", "right", "down", "down", "down", "down", "z")
	if v.boxStart != nil {
		t.Fatal("zoom box still open after the second corner")
	}
	pw, _ := v.paneSize()
	// Four cells (plus a half cell each side) now span the pane.
	shown := float64(pw) * v.cellWires(0)
	if shown > 6*7.7 || shown < 4 {
		t.Errorf("after zoom to a 4-cell box the pane shows %.1f wires", shown)
	}
}

// TestRuler measures a straight synthetic track on two planes: the 3-D
// length matches the segment's true length.
func TestRuler(t *testing.T) {
	m := newViewModel(t, newSynthSource(1, 400), 160, 48, render.TierMono)
	v := m.pv
	det := v.det
	seg := synthSegments()[0]
	a, b := seg.a, seg.b
	for _, i := range []int{0, 2} {
		wa, ta := det.Project(i, a)
		wb, tb := det.Project(i, b)
		v.cur = point{Plane: i, Wire: wa, Tick: ta}
		v.addRulerPoint()
		v.cur = point{Plane: i, Wire: wb, Tick: tb}
		v.addRulerPoint()
	}
	txt := v.rulerText()
	want := fmt.Sprintf("3-D %.1f cm", a.Dist(b))
	if !strings.Contains(txt, want) {
		t.Errorf("ruler %q lacks %q", txt, want)
	}
	wa, ta := det.Project(2, a)
	wb, tb := det.Project(2, b)
	proj := det.ProjectedLength(2, detector.PlanePoint{Wire: wa, Tick: ta}, detector.PlanePoint{Wire: wb, Tick: tb})
	if !strings.Contains(txt, fmt.Sprintf("%.1f cm projected", proj)) {
		t.Errorf("ruler %q lacks the projected length %.1f", txt, proj)
	}
}

// TestEmptyPlanes shows events whose planes hold no charge or no wires.
func TestEmptyPlanes(t *testing.T) {
	det := detector.Tarn()
	zero := &scan.Event{ID: "zero", Detector: det}
	none := &scan.Event{ID: "none", Detector: det}
	for range det.Planes {
		zero.Planes = append(zero.Planes, scan.NewImage(50, 100))
		none.Planes = append(none.Planes, scan.NewImage(0, 0))
	}
	src := &fixedSource{evs: []*scan.Event{zero, none}}
	m := newViewModel(t, src, 100, 30, render.Tier256)
	checkFrameSize(t, m.View(), 100, 30)
	keys(t, m, "+", "right", "tab", "r", "r")
	keys(t, m, "]")
	if m.err != nil {
		t.Fatalf("event with empty planes: %v", m.err)
	}
	keys(t, m, "+", "left", "pgdown", "0")
	checkFrameSize(t, m.View(), 100, 30)
}

type fixedSource struct{ evs []*scan.Event }

func (s *fixedSource) EventIDs() []string {
	var ids []string
	for _, e := range s.evs {
		ids = append(ids, e.ID)
	}
	return ids
}

func (s *fixedSource) Load(id string) (*scan.Event, error) {
	for _, e := range s.evs {
		if e.ID == id {
			return e, nil
		}
	}
	return nil, fmt.Errorf("no event %s", id)
}

// TestThinTrackVisible: a track one wire wide stays visible when the whole
// plane is shown, thanks to the max reduction.
func TestThinTrackVisible(t *testing.T) {
	det := detector.Tarn()
	ev := &scan.Event{ID: "thin", Detector: det}
	for _, p := range det.Planes {
		img := scan.NewImage(p.Wires, 1200)
		for tk := 0; tk < img.Ticks; tk++ {
			img.Set(p.Wires/3, tk, 40) // one wire, the whole window
		}
		img.Set(0, 0, 1) // a little noise floor for the range
		ev.Planes = append(ev.Planes, img)
	}
	m := newViewModel(t, &fixedSource{evs: []*scan.Event{ev}}, 80, 24, render.TierMono)
	m.View()
	v := m.pv
	p, _ := v.paneOf(0)
	col, _ := v.cellOf(0, float64(det.Planes[0].Wires/3), 0)
	blank := 0
	for row := 0; row < p.h; row++ {
		if r := v.cache.At(p.x+col, p.y+row).Rune; r == ' ' || r == 0 {
			blank++
		}
	}
	if blank > 0 {
		t.Errorf("thin track blank on %d of %d rows at %.1f wires per cell", blank, p.h, v.cellWires(0))
	}
}

func TestHelpListsEveryKey(t *testing.T) {
	m := newViewModel(t, newSynthSource(1, 200), 200, 60, render.TierMono)
	keys(t, m, "?")
	out := ansi.Strip(m.View())
	for _, b := range []string{"zoom in at cursor", "pan to later ticks", "ruler point", "next event", "quit"} {
		if !strings.Contains(out, b) {
			t.Errorf("help overlay lacks %q", b)
		}
	}
	keys(t, m, "esc")
	if m.showHelp {
		t.Error("esc did not close help")
	}
}

// TestBatchedRunes: several keys arriving in one message (fast typing, a
// slow link) act one by one.
func TestBatchedRunes(t *testing.T) {
	m := newViewModel(t, newSynthSource(1, 400), 160, 48, render.TierMono)
	wpp := m.pv.win.WPP[0]
	send(t, m, tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("++")})
	if got := m.pv.win.WPP[0]; math.Abs(got-wpp/4) > 1e-9 {
		t.Errorf("after \"++\" in one message: %g wires per pixel, want %g", got, wpp/4)
	}
}

// TestZoomKeepsInteractionOnAllPlanes zooms onto the synthetic vertex on
// the collection plane: the other planes still show the vertex.
func TestZoomKeepsInteractionOnAllPlanes(t *testing.T) {
	m := newViewModel(t, newSynthSource(1, 400), 160, 48, render.TierMono)
	v := m.pv
	putCursor(m, 2)
	keys(t, m, "+", "+", "+")
	for i := range v.det.Planes {
		p, _ := v.paneOf(i)
		w, tk := v.det.Project(i, synthVertex)
		col, row := v.cellOf(i, w, tk)
		if col < 0 || col >= p.w || row < 0 || row >= p.h {
			t.Errorf("plane %s: the vertex is at cell (%d,%d), outside the %d×%d pane", v.det.Planes[i].Role, col, row, p.w, p.h)
		}
	}
}

// TestCursorStartsOnPeak: a new event puts the cursor on the brightest
// sample of the focused plane.
func TestCursorStartsOnPeak(t *testing.T) {
	det := detector.Tarn()
	ev := &scan.Event{ID: "peak", Detector: det}
	for i := range det.Planes {
		img := scan.NewImage(300, 900)
		img.Wire0, img.Tick0 = 100, 2000
		img.Set(123+i, 456, 99)
		ev.Planes = append(ev.Planes, img)
	}
	m := newViewModel(t, &fixedSource{evs: []*scan.Event{ev}}, 100, 30, render.TierMono)
	if c := m.pv.cur; c.Plane != 0 || c.Wire != 223.5 || c.Tick != 2456.5 {
		t.Errorf("cursor starts at %+v, want plane 0 wire 223.5 tick 2456.5", c)
	}
}
