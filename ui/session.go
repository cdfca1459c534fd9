package ui

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
	"sync"
	"time"

	"github.com/charmbracelet/bubbles/cursor"
	"github.com/charmbracelet/bubbles/key"
	"github.com/charmbracelet/bubbles/textinput"
	"github.com/charmbracelet/bubbles/viewport"
	tea "github.com/charmbracelet/bubbletea"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
)

// session is the scanning mode: the scanner's current pass, its label
// under edit with undo and redo, and the saver that writes every change
// as a revision at once.
type session struct {
	m       *Model
	st      store.Store
	campID  int64
	scanner string

	camp    scan.Campaign
	started bool
	events  map[string]*scan.Selection // campaign events → selection output
	passes  []scan.Pass                // the scanner's passes, in assignment order
	pass    scan.Pass
	hasPass bool
	done    bool // no event left for this scanner
	loadErr error

	label      scan.Label
	closing    bool // a submit or skip is being saved: no more edits to this pass
	undo, redo []scan.Label
	lastMark   time.Time // when time was last counted toward the pass

	track    []point // track points placed so far
	boxStart *point  // first corner of a box mark

	input     textinput.Model
	inputMode inputMode
	instr     viewport.Model
	showInstr bool

	saver     *saver
	resume    *resumeSaver
	resumeWin *resumeState // view to restore when its event is shown

	w, h, screenW int
}

type inputMode int

const (
	inputNone inputMode = iota
	inputComment
	inputSkip
)

// idleCap bounds the time one interval adds to a pass: a scanner who
// leaves the station for lunch did not scan for an hour (common practice
// in time-on-task logging).
const idleCap = 10 * time.Minute

func newSession(m *Model, opts Options) *session {
	s := &session{m: m, st: opts.Store, campID: opts.CampaignID, scanner: opts.Scanner,
		events: map[string]*scan.Selection{}, saver: &saver{}, resume: &resumeSaver{}}
	s.input = textinput.New()
	s.input.CharLimit = 500
	// A steady cursor: blinking would redraw the line twice a second over
	// slow SSH links.
	s.input.Cursor.SetMode(cursor.CursorStatic)
	s.instr = viewport.New(0, 0)
	return s
}

// Typed results of the session's store calls.
type (
	startMsg struct {
		camp   scan.Campaign
		events []scan.CampaignEvent
		passes []scan.Pass
		resume *resumeState
		err    error
	}
	passMsg struct {
		pass   scan.Pass
		passes []scan.Pass
		resume *resumeState
		err    error
	}
	savedMsg struct {
		seq   int
		state scan.PassState
		rev   scan.Revision
		err   error
		then  tea.Cmd // what to do once saved (next pass after a submit)
	}
)

// resumeState is what Store.SaveResume keeps: the pass and the view.
type resumeState struct {
	Pass   int64  `json:"pass"`
	Event  string `json:"event"`
	Window window `json:"window"`
	Cursor point  `json:"cursor"`
	One    bool   `json:"one,omitempty"`
}

func (s *session) verify() bool { return s.camp.Mode == scan.ModeVerify }

// init loads the campaign and the scanner's resume point.
func (s *session) init() tea.Cmd {
	st, ctx, id, who := s.st, s.m.ctx, s.campID, s.scanner
	return func() tea.Msg {
		var msg startMsg
		var err error
		if msg.camp, err = st.Campaign(ctx, id); err != nil {
			return startMsg{err: fmt.Errorf("open campaign %d: %w", id, err)}
		}
		if msg.events, err = st.Events(ctx, id); err != nil {
			return startMsg{err: fmt.Errorf("read events of campaign %q: %w", msg.camp.Name, err)}
		}
		if msg.passes, err = st.ScannerPasses(ctx, id, who); err != nil {
			return startMsg{err: fmt.Errorf("read passes of %s: %w", who, err)}
		}
		if b, err := st.Resume(ctx, id, who); err == nil {
			var r resumeState
			if json.Unmarshal(b, &r) == nil {
				msg.resume = &r
			}
		}
		return msg
	}
}

// update handles the session's own messages.
func (s *session) update(msg tea.Msg) tea.Cmd {
	switch msg := msg.(type) {
	case startMsg:
		return s.onStart(msg)
	case passMsg:
		return s.onPass(msg)
	case savedMsg:
		return s.onSaved(msg)
	}
	if s.inputMode != inputNone {
		var cmd tea.Cmd
		s.input, cmd = s.input.Update(msg)
		return cmd
	}
	return nil
}

func (s *session) onStart(msg startMsg) tea.Cmd {
	if msg.err != nil {
		s.loadErr = msg.err
		return nil
	}
	s.camp, s.started = msg.camp, true
	for _, e := range msg.events {
		s.events[e.EventID] = e.Selection
	}
	if err := s.m.keys.CheckSchema(s.camp.Schema); err != nil {
		s.m.status = "schema keys: " + err.Error()
	}
	s.m.setModeKeys()
	s.setPasses(msg.passes)
	if r := msg.resume; r != nil && r.Pass != 0 {
		return s.fetchPass(r.Pass, r)
	}
	return s.next()
}

// next asks the store for the scanner's next pass.
func (s *session) next() tea.Cmd {
	st, ctx, id, who := s.st, s.m.ctx, s.campID, s.scanner
	return func() tea.Msg {
		p, err := st.NextPass(ctx, id, who)
		if err != nil {
			return passMsg{err: err}
		}
		ps, err := st.ScannerPasses(ctx, id, who)
		return passMsg{pass: p, passes: ps, err: err}
	}
}

// fetchPass reopens one of the scanner's passes.
func (s *session) fetchPass(passID int64, r *resumeState) tea.Cmd {
	st, ctx, id, who := s.st, s.m.ctx, s.campID, s.scanner
	return func() tea.Msg {
		p, err := st.Pass(ctx, passID)
		if err == nil && (p.Scanner != who || p.CampaignID != id) {
			err = fmt.Errorf("pass %d is not %s's: %w", passID, who, store.ErrConflict)
		}
		if err != nil {
			return passMsg{err: err}
		}
		ps, err := st.ScannerPasses(ctx, id, who)
		return passMsg{pass: p, passes: ps, resume: r, err: err}
	}
}

func (s *session) onPass(msg passMsg) tea.Cmd {
	if errors.Is(msg.err, store.ErrNoWork) {
		s.done, s.hasPass = true, false
		s.m.pv.prep = nil
		s.m.cur = -1
		return nil
	}
	if msg.err != nil {
		s.m.err = msg.err
		return nil
	}
	s.setPasses(msg.passes)
	s.pass, s.hasPass, s.done, s.closing = msg.pass, true, false, false
	s.label = msg.pass.Label
	s.undo, s.redo, s.track, s.boxStart = nil, nil, nil, nil
	s.lastMark = s.m.now()
	s.resumeWin = msg.resume
	i, ok := s.m.index[msg.pass.EventID]
	if !ok {
		s.m.pv.prep = nil
		s.m.err = fmt.Errorf("event %s of campaign %q is missing from the dataset; skip it (%s) or check the dataset folder",
			scan.CleanText(msg.pass.EventID), scan.CleanText(s.camp.Name), s.m.keys.Skip.Help().Key)
		return nil
	}
	return s.m.show(i)
}

func (s *session) setPasses(ps []scan.Pass) {
	s.passes = ps
	for _, p := range ps {
		s.m.list.setStatus(p.EventID, string(displayState(p.State)))
	}
}

func displayState(p scan.PassState) scan.PassState {
	if p == scan.PassAssigned {
		return "assigned"
	}
	return p
}

// eventShown restores the resume view and installs the marks overlay.
func (s *session) eventShown(p *prepared) tea.Cmd {
	v := s.m.pv
	if r := s.resumeWin; r != nil && r.Event == p.ev.ID && len(r.Window.WPP) == len(v.det.Planes) && r.Cursor.Plane < len(v.det.Planes) {
		if r.One != v.one {
			v.toggleOne()
		}
		v.win = r.Window.clone()
		v.cur = r.Cursor
		v.focus = r.Cursor.Plane
		v.layout()
		v.clampZoom()
		v.clampCursor()
	}
	s.resumeWin = nil
	v.overlay = s.drawMarks
	return s.saveResume()
}

// saveResume records the pass and view so a new session starts here.
func (s *session) saveResume() tea.Cmd {
	if !s.hasPass {
		return nil
	}
	v := s.m.pv
	r := resumeState{Pass: s.pass.ID, Event: s.pass.EventID, Cursor: v.cur, One: v.one}
	if v.prep != nil {
		r.Window = v.win.clone()
	}
	b, err := json.Marshal(r)
	if err != nil {
		return nil
	}
	st, ctx, id, who, log := s.st, s.m.ctx, s.campID, s.scanner, s.m.log
	rs, seq := s.resume, s.resume.take()
	return func() tea.Msg {
		if err := rs.write(seq, func() error { return st.SaveResume(ctx, id, who, b) }); err != nil {
			log.Warn("save resume point", "err", err)
		}
		return nil
	}
}

// resumeSaver writes resume points in the order they were taken: the
// commands run concurrently, and one that runs late must not overwrite a
// newer point (such as the one written on quitting).
type resumeSaver struct {
	mu    sync.Mutex
	taken uint64 // sequence number of the newest point taken
	wrote uint64 // sequence number of the newest point written
}

func (r *resumeSaver) take() uint64 {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.taken++
	return r.taken
}

func (r *resumeSaver) write(seq uint64, save func() error) error {
	r.mu.Lock()
	defer r.mu.Unlock()
	if seq <= r.wrote {
		return nil
	}
	r.wrote = seq
	return save()
}

// nextGuess is the event to prefetch: the next event in the campaign's
// list after the current one (a guess; the store decides).
func (s *session) nextGuess() int {
	if s.m.cur+1 < len(s.m.ids) && s.m.cur >= 0 {
		return s.m.cur + 1
	}
	return -1
}

// change applies an edit to the label: it is pushed on the undo stack and
// saved at once as a draft.
func (s *session) change(edit func(l *scan.Label)) tea.Cmd {
	if !s.hasPass || s.closing {
		return nil
	}
	s.undo = append(s.undo, cloneLabel(s.label))
	s.redo = nil
	next := cloneLabel(s.label)
	edit(&next)
	s.label = next
	s.updateVertex3D()
	return s.save(s.editState(), nil)
}

// editState is the state an edit is saved with: a submitted or skipped
// pass that the scanner went back to keeps its state.
func (s *session) editState() scan.PassState {
	if s.pass.State == scan.PassSubmitted || s.pass.State == scan.PassSkipped {
		return s.pass.State
	}
	return scan.PassDraft
}

func cloneLabel(l scan.Label) scan.Label {
	l.Flags = slices.Clone(l.Flags)
	l.Marks = slices.Clone(l.Marks)
	for i := range l.Marks {
		l.Marks[i].Points = slices.Clone(l.Marks[i].Points)
	}
	if l.Vertex3D != nil {
		v := *l.Vertex3D
		l.Vertex3D = &v
	}
	return l
}

// save writes the label as a revision in a tea.Cmd. The saver orders the
// writes: a save that finds a newer one already written is dropped, its
// time carried over, so the latest revision is always what the screen shows.
func (s *session) save(state scan.PassState, then tea.Cmd) tea.Cmd {
	now := s.m.now()
	secs := min(now.Sub(s.lastMark), idleCap).Seconds()
	s.lastMark = now
	seq := s.saver.begin(secs)
	rev := scan.Revision{State: state, Label: cloneLabel(s.label), Schema: s.camp.Schema.Version, At: now}
	st, ctx, passID, who := s.st, s.m.ctx, s.pass.ID, s.scanner
	sv := s.saver
	return func() tea.Msg {
		out, err := sv.write(seq, rev, func(r scan.Revision) (scan.Revision, error) {
			return st.SaveRevision(ctx, passID, who, r)
		})
		return savedMsg{seq: seq, state: state, rev: out, err: err, then: then}
	}
}

func (s *session) onSaved(msg savedMsg) tea.Cmd {
	if msg.err != nil {
		s.m.log.Error("save revision", "pass", s.pass.ID, "err", msg.err)
		s.closing = false // the pass stays open: the scanner can try again
		return nil
	}
	if msg.rev.ID != 0 && msg.rev.PassID == s.pass.ID {
		s.pass.State = msg.state
		s.m.list.setStatus(s.pass.EventID, string(msg.state))
	}
	if msg.then != nil {
		return tea.Batch(msg.then, s.saveResume())
	}
	return nil
}

// saveNow saves the current label (SaveDraftMsg). A pass the scanner has
// not touched stays assigned rather than becoming an empty draft.
func (s *session) saveNow() tea.Cmd {
	if !s.hasPass || s.closing || (s.pass.State == scan.PassAssigned && emptyLabel(s.label)) {
		return nil
	}
	return s.save(s.editState(), nil)
}

// emptyLabel reports whether a label says nothing at all.
func emptyLabel(l scan.Label) bool {
	return l.Class == "" && len(l.Flags) == 0 && l.Confidence == "" && l.Comment == "" &&
		len(l.Marks) == 0 && l.Vertex3D == nil && l.Verdict == ""
}

// saveOnQuit saves what is unsaved and the resume point, synchronously
// inside the returned command, and waits for saves already under way, so
// the program quits only after all of them.
func (s *session) saveOnQuit() tea.Cmd {
	save := s.saveNow()
	resume := s.saveResume()
	sv := s.saver
	return func() tea.Msg {
		if save != nil {
			save()
		}
		if resume != nil {
			resume()
		}
		sv.wait(quitWait)
		return nil
	}
}

// quitWait bounds how long quitting waits for saves under way.
const quitWait = 10 * time.Second

// indicator is the title bar's save state.
func (s *session) indicator() string {
	st := s.m.st
	switch n, err := s.saver.status(); {
	case err != nil:
		return st.Error.Render(" NOT SAVED: " + scan.CleanText(err.Error()) + " ")
	case n > 0:
		return st.Saving.Render(" saving… ")
	case s.saver.written() > 0:
		return st.Saved.Render(" saved ✓ ")
	}
	return ""
}

func (s *session) title() string {
	name := scan.CleanText(s.camp.Name)
	if name == "" {
		name = fmt.Sprintf("campaign %d", s.campID)
	}
	t := fmt.Sprintf("%s · %s", name, scan.CleanText(s.scanner))
	if s.verify() {
		t += " · verify"
	}
	return t
}

func (s *session) emptyMessage() string {
	switch {
	case s.loadErr != nil:
		return "cannot open the campaign: " + scan.CleanText(s.loadErr.Error())
	case s.done:
		return fmt.Sprintf("all done: no event left for %s in %s. Thank you! (%s quits)",
			scan.CleanText(s.scanner), scan.CleanText(s.camp.Name), s.m.keys.Quit.Help().Key)
	case !s.started:
		return "opening the campaign …"
	}
	return "waiting for the next event …"
}

// saver serialises revision writes and remembers the outcome.
type saver struct {
	mu       sync.Mutex
	next     int     // last sequence number handed out
	done     int     // last sequence number written
	inFlight int     // begun, not finished
	pending  float64 // seconds not yet written
	err      error
	count    int
	pendingW sync.WaitGroup // saves begun and not yet written or dropped
}

func (sv *saver) begin(secs float64) int {
	sv.mu.Lock()
	defer sv.mu.Unlock()
	sv.next++
	sv.inFlight++
	sv.pending += secs
	sv.pendingW.Add(1)
	return sv.next
}

// wait blocks until every begun save has been written or dropped, or d
// has passed.
func (sv *saver) wait(d time.Duration) {
	done := make(chan struct{})
	go func() {
		sv.pendingW.Wait()
		close(done)
	}()
	select {
	case <-done:
	case <-time.After(d):
	}
}

// write stores rev unless a later save was already written; it holds the
// lock across the store call so revisions land in sequence order.
func (sv *saver) write(seq int, rev scan.Revision, store func(scan.Revision) (scan.Revision, error)) (scan.Revision, error) {
	sv.mu.Lock()
	defer sv.mu.Unlock()
	defer sv.pendingW.Done()
	sv.inFlight--
	if seq <= sv.done {
		return scan.Revision{}, nil
	}
	rev.Seconds = sv.pending
	out, err := store(rev)
	if err != nil {
		sv.err = err
		return out, err
	}
	sv.pending, sv.done, sv.err = 0, seq, nil
	sv.count++
	return out, nil
}

func (sv *saver) status() (int, error) {
	sv.mu.Lock()
	defer sv.mu.Unlock()
	return sv.inFlight, sv.err
}

func (sv *saver) written() int {
	sv.mu.Lock()
	defer sv.mu.Unlock()
	return sv.count
}

// Undo and redo swap whole labels.
func (s *session) doUndo() tea.Cmd {
	if s.closing {
		return nil
	}
	if len(s.undo) == 0 {
		s.m.status = "nothing to undo"
		return nil
	}
	s.redo = append(s.redo, s.label)
	s.label = s.undo[len(s.undo)-1]
	s.undo = s.undo[:len(s.undo)-1]
	return s.save(s.editState(), nil)
}

func (s *session) doRedo() tea.Cmd {
	if s.closing {
		return nil
	}
	if len(s.redo) == 0 {
		s.m.status = "nothing to redo"
		return nil
	}
	s.undo = append(s.undo, s.label)
	s.label = s.redo[len(s.redo)-1]
	s.redo = s.redo[:len(s.redo)-1]
	return s.save(s.editState(), nil)
}

// missing lists what the schema requires before a submit, in the
// scanner's terms (scan.Schema.CheckLabel has the final word).
func (s *session) missing() []string {
	var out []string
	sc := s.camp.Schema
	if s.verify() {
		switch s.label.Verdict {
		case "":
			out = append(out, fmt.Sprintf("agree (%s) or disagree (%s)", s.m.keys.Agree.Help().Key, s.m.keys.Disagree.Help().Key))
		case "disagree":
			if s.label.Class == "" {
				out = append(out, "the correct class ("+hotkeyList(sc.Classes)+")")
			}
		}
	} else if s.label.Class == "" {
		out = append(out, "a class ("+hotkeyList(sc.Classes)+")")
	}
	if len(sc.Confidence) > 0 && s.label.Confidence == "" {
		out = append(out, "a confidence ("+hotkeyList(sc.Confidence)+")")
	}
	return out
}

func hotkeyList(cs []scan.Choice) string {
	var ks []string
	for _, c := range cs {
		if c.Hotkey != "" {
			ks = append(ks, c.Hotkey)
		}
	}
	return strings.Join(ks, " ")
}

func (s *session) submit() tea.Cmd {
	if !s.hasPass || s.closing {
		return nil
	}
	if miss := s.missing(); len(miss) > 0 {
		s.m.status = "cannot submit yet: choose " + strings.Join(miss, " and ")
		return nil
	}
	if err := s.camp.Schema.CheckLabel(s.label, true); err != nil {
		s.m.status = "cannot submit: " + scan.CleanText(err.Error())
		return nil
	}
	s.m.status = ""
	s.closing = true
	return s.save(scan.PassSubmitted, s.next())
}

func (s *session) skip(reason string) tea.Cmd {
	if s.closing {
		return nil
	}
	reason = strings.TrimSpace(scan.CleanText(reason))
	if reason == "" {
		s.m.status = "a skip needs a reason"
		return nil
	}
	s.undo = append(s.undo, cloneLabel(s.label))
	if s.label.Comment != "" {
		s.label.Comment += " · "
	}
	s.label.Comment += "skipped: " + reason
	s.closing = true
	return s.save(scan.PassSkipped, s.next())
}

// back reopens the pass before the current one in the scanner's order.
func (s *session) back() tea.Cmd {
	i := slices.IndexFunc(s.passes, func(p scan.Pass) bool { return p.ID == s.pass.ID })
	if i <= 0 {
		s.m.status = "no earlier pass"
		return nil
	}
	return tea.Batch(s.saveNow(), s.fetchPass(s.passes[i-1].ID, nil))
}

// open reopens the scanner's pass of an event (from the event list).
func (s *session) open(eventID string) tea.Cmd {
	for _, p := range s.passes {
		if p.EventID == eventID {
			return tea.Batch(s.saveNow(), s.fetchPass(p.ID, nil))
		}
	}
	s.m.status = fmt.Sprintf("event %s is not assigned to you", scan.CleanText(eventID))
	return nil
}

// schemaAction finds the schema choice bound to a key.
func (s *session) schemaAction(k string) (field string, c scan.Choice, ok bool) {
	sc := s.camp.Schema
	for _, f := range []struct {
		name string
		cs   []scan.Choice
	}{{"class", sc.Classes}, {"particle", sc.Particles}, {"flag", sc.Flags}, {"confidence", sc.Confidence}} {
		for _, c := range f.cs {
			if c.Hotkey != "" && c.Hotkey == k {
				return f.name, c, true
			}
		}
	}
	return "", scan.Choice{}, false
}

// schemaBindings are the schema's hotkeys as bindings, for help.
func (s *session) schemaBindings() [][]key.Binding {
	sc := s.camp.Schema
	var out [][]key.Binding
	for _, f := range []struct {
		name string
		cs   []scan.Choice
	}{{"class", sc.Classes}, {"particle", sc.Particles}, {"flag", sc.Flags}, {"confidence", sc.Confidence}} {
		var g []key.Binding
		for _, c := range f.cs {
			if c.Hotkey != "" {
				g = append(g, key.NewBinding(key.WithKeys(c.Hotkey), key.WithHelp(c.Hotkey, f.name+" "+scan.CleanText(c.Name))))
			}
		}
		if len(g) > 0 {
			out = append(out, g)
		}
	}
	return out
}

func (s *session) shortHelp() []key.Binding {
	k := s.m.keys
	if s.verify() {
		return []key.Binding{k.Agree, k.Disagree, k.Submit, k.Skip, k.Back}
	}
	return []key.Binding{k.Vertex, k.Box, k.Track, k.Submit, k.Skip, k.Undo}
}

// capturing reports whether keys go to a text input or the instructions.
func (s *session) capturing() bool { return s.inputMode != inputNone || s.showInstr }

// key handles a scanning key; ok is false when the display should have it.
func (s *session) key(msg tea.KeyMsg) (tea.Cmd, bool) {
	k := s.m.keys
	if s.showInstr {
		return s.instrKey(msg), true
	}
	if s.inputMode != inputNone {
		return s.inputKey(msg), true
	}
	v := s.m.pv
	switch {
	case key.Matches(msg, k.Submit):
		return s.submit(), true
	case key.Matches(msg, k.Skip):
		return s.startInput(inputSkip, "skip reason: ", ""), true
	case key.Matches(msg, k.Back):
		return s.back(), true
	case key.Matches(msg, k.Instructions):
		s.openInstructions()
		return nil, true
	case key.Matches(msg, k.Comment):
		return s.startInput(inputComment, "comment: ", s.label.Comment), true
	case key.Matches(msg, k.Undo):
		return s.doUndo(), true
	case key.Matches(msg, k.Redo):
		return s.doRedo(), true
	case key.Matches(msg, k.Agree):
		return s.verdict("agree"), true
	case key.Matches(msg, k.Disagree):
		return s.verdict("disagree"), true
	case key.Matches(msg, k.Cancel) && (len(s.track) > 0 || s.boxStart != nil):
		s.track, s.boxStart = nil, nil
		return nil, true
	}
	if v.prep == nil {
		return nil, false
	}
	switch {
	case key.Matches(msg, k.Vertex):
		return s.placeVertex(), true
	case key.Matches(msg, k.Box):
		return s.placeBox(), true
	case key.Matches(msg, k.Track):
		s.addTrackPoint()
		return nil, true
	}
	if field, c, ok := s.schemaAction(msg.String()); ok {
		return s.tag(field, c), true
	}
	return nil, false
}

// verdict answers a verify campaign's question.
func (s *session) verdict(v string) tea.Cmd {
	sel := s.events[s.pass.EventID]
	return s.change(func(l *scan.Label) {
		l.Verdict = v
		if v == "agree" && sel != nil {
			l.Class = sel.Class
		} else if v == "disagree" && sel != nil && l.Class == sel.Class {
			l.Class = ""
		}
	})
}

// tag applies a schema hotkey.
func (s *session) tag(field string, c scan.Choice) tea.Cmd {
	switch field {
	case "class":
		return s.change(func(l *scan.Label) { l.Class = c.Key })
	case "flag":
		return s.change(func(l *scan.Label) {
			if i := slices.Index(l.Flags, c.Key); i >= 0 {
				l.Flags = slices.Delete(l.Flags, i, i+1)
			} else {
				l.Flags = append(l.Flags, c.Key)
			}
		})
	case "confidence":
		return s.change(func(l *scan.Label) {
			if l.Confidence == c.Key {
				l.Confidence = ""
			} else {
				l.Confidence = c.Key
			}
		})
	case "particle":
		return s.endTrack(c)
	}
	return nil
}

// markAt makes a mark from points on the cursor's plane with the cell's
// extent as its precision.
func (s *session) markAt(kind scan.MarkKind, pts []point) scan.Mark {
	v := s.m.pv
	i := pts[0].Plane
	mk := scan.Mark{Kind: kind, Plane: v.det.Planes[i].Role,
		Precision: scan.Precision{Wires: v.cellWires(i), Ticks: v.cellTicks()}}
	for _, p := range pts {
		mk.Points = append(mk.Points, p.planePoint())
	}
	return mk
}

// placeVertex sets the vertex on the cursor's plane (one per plane).
func (s *session) placeVertex() tea.Cmd {
	mk := s.markAt(scan.MarkVertex, []point{s.m.pv.cur})
	return s.change(func(l *scan.Label) {
		l.Marks = slices.DeleteFunc(l.Marks, func(o scan.Mark) bool { return o.Kind == scan.MarkVertex && o.Plane == mk.Plane })
		l.Marks = append(l.Marks, mk)
	})
}

// placeBox takes the first corner, then makes the box (one per plane).
func (s *session) placeBox() tea.Cmd {
	cur := s.m.pv.cur
	if s.boxStart == nil || s.boxStart.Plane != cur.Plane {
		s.boxStart = &cur
		s.m.status = "box: move to the opposite corner and press " + s.m.keys.Box.Help().Key
		return nil
	}
	mk := s.markAt(scan.MarkBox, []point{*s.boxStart, cur})
	s.boxStart = nil
	return s.change(func(l *scan.Label) {
		l.Marks = slices.DeleteFunc(l.Marks, func(o scan.Mark) bool { return o.Kind == scan.MarkBox && o.Plane == mk.Plane })
		l.Marks = append(l.Marks, mk)
	})
}

func (s *session) addTrackPoint() {
	cur := s.m.pv.cur
	if len(s.track) > 0 && s.track[0].Plane != cur.Plane {
		s.track = nil
	}
	s.track = append(s.track, cur)
	if len(s.track) == 1 {
		s.m.status = "track: add points with " + s.m.keys.Track.Help().Key + ", then press a particle key (" + hotkeyList(s.camp.Schema.Particles) + ")"
	}
}

func (s *session) endTrack(c scan.Choice) tea.Cmd {
	if len(s.track) < 2 {
		s.m.status = fmt.Sprintf("a %s track needs two or more points: place them with %s first", scan.CleanText(c.Name), s.m.keys.Track.Help().Key)
		return nil
	}
	mk := s.markAt(scan.MarkTrack, s.track)
	mk.Particle = c.Key
	s.track = nil
	return s.change(func(l *scan.Label) { l.Marks = append(l.Marks, mk) })
}

// updateVertex3D triangulates vertex marks on two planes.
func (s *session) updateVertex3D() {
	s.label.Vertex3D = nil
	v := s.m.pv
	if v.det == nil {
		return
	}
	var idx []int
	var pts []scan.Mark
	for _, mk := range s.label.Marks {
		if mk.Kind == scan.MarkVertex && len(mk.Points) == 1 {
			if i := v.det.PlaneIndex(mk.Plane); i >= 0 {
				idx, pts = append(idx, i), append(pts, mk)
			}
		}
	}
	for a := 0; a < len(idx); a++ {
		for b := a + 1; b < len(idx); b++ {
			pa, pb := pts[a].Points[0], pts[b].Points[0]
			p, err := v.det.Triangulate(idx[a], pa.Wire, idx[b], pb.Wire, (pa.Tick+pb.Tick)/2)
			if err == nil {
				s.label.Vertex3D = &p
				return
			}
		}
	}
}

// drawMarks is the planes' overlay: the label's marks, marks in progress,
// the predicted vertex on planes without one and, in verify campaigns,
// the selection's box.
func (s *session) drawMarks(pen *overlayPen) {
	v := s.m.pv
	if s.verify() {
		if sel := s.events[s.pass.EventID]; sel != nil && sel.Box != nil {
			s.drawMark(pen, *sel.Box, inkSelection)
		}
	}
	has := map[int]bool{}
	for _, mk := range s.label.Marks {
		if mk.Kind == scan.MarkVertex {
			has[v.det.PlaneIndex(mk.Plane)] = true
		}
		s.drawMark(pen, mk, inkOf(mk.Kind))
	}
	if p := s.label.Vertex3D; p != nil {
		for i := range v.det.Planes {
			if !has[i] {
				w, t := v.det.Project(i, *p)
				pen.Point(point{Plane: i, Wire: w, Tick: t}, '◇', inkVertex)
			}
		}
	}
	for k, p := range s.track {
		pen.Point(p, '•', inkTrack)
		if k > 0 {
			pen.Line(s.track[k-1], p, '·', inkTrack)
		}
	}
	if s.boxStart != nil {
		pen.Box(*s.boxStart, v.cur, inkBox)
	}
}

func inkOf(k scan.MarkKind) ink {
	switch k {
	case scan.MarkVertex:
		return inkVertex
	case scan.MarkBox:
		return inkBox
	}
	return inkTrack
}

func (s *session) drawMark(pen *overlayPen, mk scan.Mark, k ink) {
	v := s.m.pv
	i := v.det.PlaneIndex(mk.Plane)
	if i < 0 || len(mk.Points) == 0 {
		return
	}
	pts := make([]point, len(mk.Points))
	for j, p := range mk.Points {
		pts[j] = point{Plane: i, Wire: p.Wire, Tick: p.Tick}
	}
	switch mk.Kind {
	case scan.MarkVertex:
		pen.Point(pts[0], '✱', k)
	case scan.MarkBox:
		if len(pts) == 2 {
			pen.Box(pts[0], pts[1], k)
		}
	default:
		for j := 1; j < len(pts); j++ {
			pen.Line(pts[j-1], pts[j], '·', k)
		}
		for _, p := range pts {
			pen.Point(p, '•', k)
		}
	}
}

// describeMark is one line of the tag panel.
func (s *session) describeMark(mk scan.Mark) string {
	p := mk.Points[0]
	prec := fmt.Sprintf("±%s", perCell(math.Max(mk.Precision.Wires, mk.Precision.Ticks*0), "w"))
	switch mk.Kind {
	case scan.MarkVertex:
		return fmt.Sprintf("vertex %s w%.0f t%.0f %s", mk.Plane, p.Wire, p.Tick, prec)
	case scan.MarkBox:
		q := mk.Points[len(mk.Points)-1]
		return fmt.Sprintf("box %s w%.0f–%.0f", mk.Plane, math.Min(p.Wire, q.Wire), math.Max(p.Wire, q.Wire))
	}
	return fmt.Sprintf("track %s %s %d pts", s.choiceName(s.camp.Schema.Particles, mk.Particle), mk.Plane, len(mk.Points))
}

func (s *session) choiceName(cs []scan.Choice, k string) string {
	for _, c := range cs {
		if c.Key == k {
			return scan.CleanText(c.Name)
		}
	}
	return scan.CleanText(k)
}
