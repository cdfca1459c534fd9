package ui

import (
	"context"
	"math"
	"path/filepath"
	"strings"
	"testing"
	"time"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/sqlite"
)

// scanFixture is a campaign over synthetic events in a real SQLite file.
type scanFixture struct {
	src   *synthSource
	st    store.Store
	camp  int64
	clock time.Time
}

func newScanFixture(t *testing.T, mode string, n int) *scanFixture {
	t.Helper()
	ctx := context.Background()
	st, err := sqlite.Open(ctx, filepath.Join(t.TempDir(), "scan.db"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	f := &scanFixture{src: newSynthSource(n, 300), st: st, clock: time.Date(2026, 1, 5, 9, 0, 0, 0, time.UTC)}
	var evs []scan.CampaignEvent
	for _, id := range f.src.ids {
		evs = append(evs, scan.CampaignEvent{EventID: id, Selection: &scan.Selection{
			EventID: id, Selected: true, Class: "numu-cc", Score: 0.9,
			Box: &scan.Mark{Kind: scan.MarkBox, Plane: "coll", Points: nil}}})
	}
	c := scan.Campaign{Name: "trial", Dataset: "synthetic", Mode: mode, PerEvent: 1, Blind: mode == scan.ModeLabel,
		Seed: 7, Schema: scan.DefaultSchema(), Instructions: "# Rules\n\nTag **every** event.\x1b]0;pwned\x07"}
	if f.camp, err = st.CreateCampaign(ctx, c, evs); err != nil {
		t.Fatal(err)
	}
	return f
}

// open starts a scanning station for a scanner, with a clock that moves
// 5 s per message.
func (f *scanFixture) open(t *testing.T, who string, w, h int) *Model {
	t.Helper()
	m := New(Options{Source: f.src, Store: f.st, CampaignID: f.camp, Scanner: who, Tier: render.TierMono,
		Now: func() time.Time { f.clock = f.clock.Add(5 * time.Second); return f.clock }})
	send(t, m, tea.WindowSizeMsg{Width: w, Height: h})
	run(t, m, m.Init())
	if m.sess == nil || !m.sess.hasPass || m.pv.prep == nil {
		t.Fatalf("no pass open after Init: err %v, status %q", m.err, m.status)
	}
	return m
}

func (f *scanFixture) pass(t *testing.T, id int64) scan.Pass {
	t.Helper()
	p, err := f.st.Pass(context.Background(), id)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// putCursor places the cursor on a plane at the synthetic vertex.
func putCursor(m *Model, plane int) {
	v := m.pv
	w, tk := v.det.Project(plane, synthVertex)
	v.cur = point{Plane: plane, Wire: w, Tick: tk}
}

func TestScanSessionFlow(t *testing.T) {
	f := newScanFixture(t, scan.ModeLabel, 3)
	m := f.open(t, "ana", 160, 48)
	s := m.sess
	first := s.pass

	// Submit without a class says what is missing and saves nothing.
	keys(t, m, "ctrl+s")
	if !strings.Contains(m.status, "class") {
		t.Errorf("submit without a class: status %q does not name the class", m.status)
	}
	// A class key saves a draft at once.
	keys(t, m, "1")
	if p := f.pass(t, first.ID); p.State != scan.PassDraft || p.Label.Class != "numu-cc" {
		t.Fatalf("after the class key the pass is %s with class %q", p.State, p.Label.Class)
	}
	if !strings.Contains(m.View(), "saved ✓") {
		t.Error("no saved indicator after a save")
	}
	// Vertex on ind1 and coll triangulates to the synthetic vertex.
	putCursor(m, 0)
	keys(t, m, "v")
	putCursor(m, 2)
	keys(t, m, "v")
	p := f.pass(t, first.ID)
	if p.Label.Vertex3D == nil {
		t.Fatal("two vertex marks gave no 3-D vertex")
	}
	if d := p.Label.Vertex3D.Dist(synthVertex); d > 1e-6 {
		t.Errorf("3-D vertex %+v is %.3g cm from the true vertex %+v", *p.Label.Vertex3D, d, synthVertex)
	}
	for _, mk := range p.Label.Marks {
		if mk.Precision.Wires <= 0 || mk.Precision.Ticks <= 0 {
			t.Errorf("mark %+v has no precision", mk)
		}
	}
	// The predicted vertex is drawn on the third plane.
	m.dirty = true
	m.View()
	wp, tp := m.pv.det.Project(1, synthVertex)
	pn, _ := m.pv.paneOf(1)
	col, row := m.pv.cellOf(1, wp, tp)
	if r := m.pv.work.At(pn.x+col, pn.y+row).Rune; r != '◇' {
		t.Errorf("ind2 shows %q at the predicted vertex, want ◇", r)
	}
	// Undo removes the second vertex; redo restores it.
	keys(t, m, "u")
	if p := f.pass(t, first.ID); p.Label.Vertex3D != nil || len(p.Label.Marks) != 1 {
		t.Errorf("after undo: %d marks, vertex %v", len(p.Label.Marks), p.Label.Vertex3D)
	}
	keys(t, m, "ctrl+r")
	if p := f.pass(t, first.ID); p.Label.Vertex3D == nil {
		t.Error("redo did not restore the 3-D vertex")
	}
	// Flags and confidence toggle; a track ends with a particle key.
	keys(t, m, "V", "C", "t", "right", "right", "t", "M")
	p = f.pass(t, first.ID)
	if len(p.Label.Flags) != 1 || p.Label.Confidence != "3" {
		t.Errorf("flags %v confidence %q", p.Label.Flags, p.Label.Confidence)
	}
	if mk := p.Label.Marks[len(p.Label.Marks)-1]; mk.Kind != scan.MarkTrack || mk.Particle != "mu" || len(mk.Points) != 2 {
		t.Errorf("last mark %+v, want a two-point mu track", mk)
	}
	// A comment with an escape sequence is stored clean.
	keys(t, m, "c")
	send(t, m, tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("looks \x1b[31mred")})
	keys(t, m, "enter")
	if c := f.pass(t, first.ID).Label.Comment; strings.ContainsRune(c, 0x1b) || !strings.Contains(c, "looks") {
		t.Errorf("comment stored as %q", c)
	}
	// Submit moves on to the next event.
	keys(t, m, "ctrl+s")
	p = f.pass(t, first.ID)
	if p.State != scan.PassSubmitted {
		t.Fatalf("after submit the pass is %s", p.State)
	}
	if p.Seconds <= 0 {
		t.Errorf("time per pass %g s", p.Seconds)
	}
	if s.pass.ID == first.ID || m.pv.prep == nil || m.ids[m.cur] != s.pass.EventID {
		t.Fatalf("after submit the station shows pass %d event %v", s.pass.ID, s.pass.EventID)
	}
	second := s.pass
	// Back reopens the first pass with its label.
	keys(t, m, "ctrl+b")
	if s.pass.ID != first.ID || s.label.Class != "numu-cc" {
		t.Fatalf("back opened pass %d class %q, want pass %d", s.pass.ID, s.label.Class, first.ID)
	}
	// Going forward again: submit (already classed) returns to the open pass.
	keys(t, m, "ctrl+s")
	if s.pass.ID != second.ID {
		t.Fatalf("after resubmitting the first pass the station shows pass %d, want %d", s.pass.ID, second.ID)
	}
	// Skip needs a reason.
	keys(t, m, "ctrl+k", "enter")
	if f.pass(t, second.ID).State == scan.PassSkipped {
		t.Error("skip without a reason went through")
	}
	keys(t, m, "ctrl+k")
	send(t, m, tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("noisy")})
	keys(t, m, "enter")
	if p := f.pass(t, second.ID); p.State != scan.PassSkipped || !strings.Contains(p.Label.Comment, "skipped: noisy") {
		t.Errorf("after skip: %s %q", p.State, p.Label.Comment)
	}
}

// TestResumeExactly quits with a draft and a zoomed view, then opens a new
// session: the same pass, label and view come back.
func TestResumeExactly(t *testing.T) {
	f := newScanFixture(t, scan.ModeLabel, 3)
	m := f.open(t, "bo", 160, 48)
	keys(t, m, "2", "+", "+", "right", "tab")
	passID, win, cur := m.sess.pass.ID, m.pv.win.clone(), m.pv.cur
	if !send(t, m, ShutdownMsg{}) {
		t.Fatal("ShutdownMsg did not quit")
	}
	m2 := f.open(t, "bo", 160, 48)
	if m2.sess.pass.ID != passID || m2.sess.label.Class != "nue-cc" {
		t.Fatalf("resumed pass %d class %q, want pass %d nue-cc", m2.sess.pass.ID, m2.sess.label.Class, passID)
	}
	if m2.pv.cur != cur || math.Abs(m2.pv.win.TPP-win.TPP) > 1e-9 || math.Abs(m2.pv.win.Tick0-win.Tick0) > 1e-9 {
		t.Errorf("resumed view: cursor %+v tpp %g tick0 %g; was %+v %g %g", m2.pv.cur, m2.pv.win.TPP, m2.pv.win.Tick0, cur, win.TPP, win.Tick0)
	}
}

// TestVerifyMode: the selection's class is shown; agree takes it; a blind
// label campaign never shows it.
func TestVerifyMode(t *testing.T) {
	f := newScanFixture(t, scan.ModeVerify, 2)
	m := f.open(t, "cy", 160, 48)
	if out := ansi.Strip(m.View()); !strings.Contains(out, "selection: νμ CC") {
		t.Errorf("verify station does not show the selection:\n%s", out)
	}
	keys(t, m, "ctrl+s")
	if !strings.Contains(m.status, "agree") {
		t.Errorf("submit without a verdict: status %q", m.status)
	}
	first := m.sess.pass.ID
	keys(t, m, "y", "ctrl+s")
	if !strings.Contains(m.status, "confidence") {
		t.Errorf("submit without a confidence: status %q", m.status)
	}
	keys(t, m, "X", "ctrl+s")
	if p := f.pass(t, first); p.State != scan.PassSubmitted || p.Label.Verdict != "agree" || p.Label.Class != "numu-cc" {
		t.Errorf("after agree: %s verdict %q class %q", p.State, p.Label.Verdict, p.Label.Class)
	}
	second := m.sess.pass.ID
	keys(t, m, "n", "Z", "ctrl+s")
	if f.pass(t, second).State == scan.PassSubmitted {
		t.Error("disagree without a class was submitted")
	}
	keys(t, m, "3", "ctrl+s")
	if p := f.pass(t, second); p.Label.Verdict != "disagree" || p.Label.Class != "nc-pi0" {
		t.Errorf("after disagree: verdict %q class %q", p.Label.Verdict, p.Label.Class)
	}

	blind := newScanFixture(t, scan.ModeLabel, 1)
	mb := blind.open(t, "cy", 160, 48)
	if out := ansi.Strip(mb.View()); strings.Contains(out, "selection") {
		t.Errorf("blind station shows the selection:\n%s", out)
	}
}

// TestInstructionsClean: the campaign's Markdown opens with one key and
// an escape sequence in it never reaches the screen.
func TestInstructionsClean(t *testing.T) {
	f := newScanFixture(t, scan.ModeLabel, 1)
	m := f.open(t, "di", 120, 40)
	keys(t, m, "i")
	out := m.View()
	if !strings.Contains(ansi.Strip(out), "Rules") {
		t.Errorf("instructions not shown:\n%s", ansi.Strip(out))
	}
	if strings.Contains(out, "\x1b]0;") || strings.Contains(out, "pwned\x07") {
		t.Error("an OSC sequence from the instructions reached the screen")
	}
	keys(t, m, "esc")
	if m.sess.showInstr {
		t.Error("esc did not close the instructions")
	}
}

// TestNarrowScanLayout: at 80×24 the tag panel sits under the planes and
// the frame still fills the window.
func TestNarrowScanLayout(t *testing.T) {
	f := newScanFixture(t, scan.ModeLabel, 1)
	m := f.open(t, "ed", 80, 24)
	keys(t, m, "1")
	out := m.View()
	checkFrameSize(t, out, 80, 24)
	if !strings.Contains(ansi.Strip(out), "class νμ CC") {
		t.Errorf("compact tag panel lacks the class:\n%s", ansi.Strip(out))
	}
}

func TestDefaultKeysLeaveSchemaFree(t *testing.T) {
	km := DefaultKeyMap()
	if err := km.CheckSchema(scan.DefaultSchema()); err != nil {
		t.Errorf("default keys collide with the default schema: %v", err)
	}
	if err := km.checkUnique(); err != nil {
		t.Error(err)
	}
}

// TestScanHelpShowsSchemaKeys: the help overlay lists the schema's
// hotkeys with the scanning keys, even at 80 columns.
func TestScanHelpShowsSchemaKeys(t *testing.T) {
	f := newScanFixture(t, scan.ModeLabel, 1)
	for _, w := range []int{200, 100, 80} {
		h := 60
		if w == 80 {
			h = 24
		}
		m := f.open(t, "fay", w, h)
		keys(t, m, "?")
		out := ansi.Strip(m.View())
		if w == 80 { // taller than the window: scroll through it
			for range 60 {
				keys(t, m, "down")
				out += ansi.Strip(m.View())
			}
		}
		for _, want := range []string{"class νμ CC", "particle μ", "flag not contained", "confidence 3 certain", "submit", "vertex at cursor"} {
			if !strings.Contains(out, want) {
				t.Errorf("%d columns: help lacks %q", w, want)
			}
		}
		send(t, m, ShutdownMsg{})
	}
}

// TestMissingEvent: a campaign event the dataset lacks is named on screen
// and can be skipped; nothing is lost.
func TestMissingEvent(t *testing.T) {
	f := newScanFixture(t, scan.ModeLabel, 1)
	f.src.ids = nil // the dataset no longer has the campaign's event
	m := New(Options{Source: f.src, Store: f.st, CampaignID: f.camp, Scanner: "gil", Tier: render.TierMono})
	send(t, m, tea.WindowSizeMsg{Width: 120, Height: 40})
	run(t, m, m.Init())
	out := ansi.Strip(m.View())
	if !strings.Contains(out, "syn-001") || !strings.Contains(out, "missing from the dataset") {
		t.Fatalf("no message naming the missing event:\n%s", out)
	}
	passID := m.sess.pass.ID
	keys(t, m, "ctrl+k")
	send(t, m, tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("file gone")})
	keys(t, m, "enter")
	if p := f.pass(t, passID); p.State != scan.PassSkipped {
		t.Errorf("the pass of the missing event is %s, want skipped", p.State)
	}
}

// TestNoEditWhileSubmitting: keys pressed after a submit, before the next
// event arrives, cannot turn the submitted pass back into a draft.
func TestNoEditWhileSubmitting(t *testing.T) {
	f := newScanFixture(t, scan.ModeLabel, 2)
	m := f.open(t, "hal", 160, 48)
	keys(t, m, "1", "Z")
	first := m.sess.pass.ID
	// Submit, but hold its save: press more keys first.
	_, submitCmd := m.Update(keyMsg("ctrl+s"))
	_, editCmd := m.Update(keyMsg("2"))
	if editCmd != nil || m.sess.label.Class != "numu-cc" {
		t.Errorf("an edit went through while the submit was being saved (class %q)", m.sess.label.Class)
	}
	run(t, m, submitCmd)
	if p := f.pass(t, first); p.State != scan.PassSubmitted || p.Label.Class != "numu-cc" {
		t.Errorf("pass %s class %q, want submitted numu-cc", p.State, p.Label.Class)
	}
	if m.sess.pass.ID == first {
		t.Error("the station did not move on after the submit")
	}
}

// TestVerifyBoxAndSaveDraft: a verify campaign draws the selection's box
// on its plane; SaveDraftMsg writes the label at once.
func TestVerifyBoxAndSaveDraft(t *testing.T) {
	f := newScanFixture(t, scan.ModeVerify, 1)
	m := f.open(t, "ivy", 160, 48)
	v := m.pv
	w, tk := v.det.Project(2, synthVertex)
	box := &scan.Mark{Kind: scan.MarkBox, Plane: "coll", Points: []detector.PlanePoint{{Wire: w - 20, Tick: tk - 100}, {Wire: w + 20, Tick: tk + 100}}}
	m.sess.events[m.sess.pass.EventID].Box = box
	m.dirty = true
	m.View()
	p, _ := v.paneOf(2)
	col, row := v.cellOf(2, w-20, tk-100)
	if r := v.work.At(p.x+col, p.y+row).Rune; r != '┌' {
		t.Errorf("selection box corner shows %q, want ┌", r)
	}
	m.sess.label.Comment = "typed but not yet saved"
	send(t, m, SaveDraftMsg{})
	if c := f.pass(t, m.sess.pass.ID).Label.Comment; c != "typed but not yet saved" {
		t.Errorf("after SaveDraftMsg the stored comment is %q", c)
	}
}
