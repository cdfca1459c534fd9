// Package ui is tpcscan's terminal station: the three linked wire-plane
// views, the event list, the status readout, help, and in scanning mode
// the tag panel that saves every change as a draft. The root model built
// by New serves one terminal, local or over SSH; it holds no global state.
package ui

import (
	"context"
	"io"
	"log/slog"
	"time"

	"github.com/charmbracelet/bubbles/help"
	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/store"
)

// Roles of a user.
const (
	RoleScanner     = "scanner"
	RoleCoordinator = "coordinator"
)

// Options configure one station session.
type Options struct {
	// Dataset is the opened dataset; Source, if set, is used instead (tests,
	// other event sources).
	Dataset *dataset.Dataset
	Source  Source
	// Store is the campaign database; nil opens the display only.
	Store      store.Store
	CampaignID int64
	Scanner    string
	Role       string // RoleScanner or RoleCoordinator
	Tier       render.Tier
	// Renderer is this session's lipgloss renderer (over SSH, the
	// session's own); nil makes one that writes nowhere (tests).
	Renderer *lipgloss.Renderer
	Keys     KeyMap // zero value: DefaultKeyMap
	Logger   *slog.Logger
	// Event is the event to show first (view mode); empty: the first.
	Event string
	// MeVPerADC is the user's energy calibration of one ADC count; when
	// set, the colour legend also reads in MeV. 0: ADC only.
	MeVPerADC float64
	// Now is the clock for time-per-pass; nil: time.Now.
	Now func() time.Time
	// Context bounds store calls; nil: context.Background.
	Context context.Context
}

// Messages the station understands from outside.
type (
	// SaveDraftMsg asks the station to save the current draft now.
	SaveDraftMsg struct{}
	// ShutdownMsg asks the station to save the current draft and quit; the
	// SSH server sends it when a session or the server ends. The program
	// quits once the save has finished (or failed: the error is logged).
	ShutdownMsg struct{}
)

// eventMsg carries a loaded and prepared event.
type eventMsg struct {
	id       string
	prep     *prepared
	err      error
	prefetch bool
}

// Model is the root model: it routes global keys, async results and the
// remaining keys to the pane that owns them.
type Model struct {
	opts   Options
	ctx    context.Context
	src    Source
	st     Styles
	keys   KeyMap
	help   help.Model
	log    *slog.Logger
	now    func() time.Time
	width  int
	height int

	pv      *planes
	ids     []string
	index   map[string]int
	cur     int // index of the shown event in ids, −1 before the first
	loading string
	cache   map[string]*prepared // shown, prefetched and previous events
	status  string
	err     error

	showHelp bool
	helpTop  int // first help line shown when help is taller than the window
	list     *eventList
	showList bool
	sess     *session // nil in view mode

	quitting bool
	frame    string // cached View output
	dirty    bool
}

// New builds the root model for one terminal session.
func New(opts Options) *Model {
	m := &Model{opts: opts, cur: -1, cache: map[string]*prepared{}, dirty: true}
	m.ctx = opts.Context
	if m.ctx == nil {
		m.ctx = context.Background()
	}
	m.src = opts.Source
	if m.src == nil && opts.Dataset != nil {
		m.src = DatasetSource{D: opts.Dataset}
	}
	r := opts.Renderer
	if r == nil {
		r = lipgloss.NewRenderer(io.Discard)
	}
	m.st = NewStyles(r, opts.Tier)
	m.keys = opts.Keys
	if len(m.keys.Quit.Keys()) == 0 {
		m.keys = DefaultKeyMap()
	}
	m.help = help.New()
	m.help.Styles = m.st.Help
	m.log = opts.Logger
	if m.log == nil {
		m.log = slog.New(slog.NewTextHandler(io.Discard, nil))
	}
	m.now = opts.Now
	if m.now == nil {
		m.now = time.Now
	}
	m.pv = newPlanes(opts.Tier)
	m.pv.mevPerADC = opts.MeVPerADC
	if m.src != nil {
		m.ids = m.src.EventIDs()
	}
	m.index = make(map[string]int, len(m.ids))
	for i, id := range m.ids {
		m.index[id] = i
	}
	m.list = newEventList(m.ids, &m.st)
	if opts.Store != nil {
		m.sess = newSession(m, opts)
	}
	m.setModeKeys()
	return m
}

// DatasetSource adapts a dataset to Source.
type DatasetSource struct{ D *dataset.Dataset }

// EventIDs returns the dataset's events in manifest order.
func (s DatasetSource) EventIDs() []string {
	evs := s.D.Events()
	ids := make([]string, len(evs))
	for i, e := range evs {
		ids[i] = e.ID
	}
	return ids
}

// Load reads one event's planes; the display never draws pixel truth.
func (s DatasetSource) Load(id string) (*scan.Event, error) { return s.D.LoadPlanes(id) }

// Init starts loading the first event (view mode) or the scanner's resume
// point or next pass (scanning mode).
func (m *Model) Init() tea.Cmd {
	if m.sess != nil {
		return m.sess.init()
	}
	if m.src == nil || len(m.ids) == 0 {
		m.err = errNoEvents
		return nil
	}
	first := 0
	if i, ok := m.index[m.opts.Event]; ok {
		first = i
	}
	return m.show(first)
}

// show starts loading event i of the list (or shows it at once when it is
// already prepared) and prefetches the next one.
func (m *Model) show(i int) tea.Cmd {
	if i < 0 || i >= len(m.ids) {
		return nil
	}
	id := m.ids[i]
	if p, ok := m.cache[id]; ok {
		m.setEvent(p)
		return m.prefetch()
	}
	m.loading = id
	m.dirty = true
	return m.loadCmd(id, false)
}

func (m *Model) loadCmd(id string, prefetch bool) tea.Cmd {
	src := m.src
	return func() tea.Msg {
		p, err := loadEvent(src, id)
		return eventMsg{id: id, prep: p, err: err, prefetch: prefetch}
	}
}

// prefetch loads the event after the shown one in the background.
func (m *Model) prefetch() tea.Cmd {
	next := m.nextIndex()
	if next < 0 {
		return nil
	}
	id := m.ids[next]
	if _, ok := m.cache[id]; ok || m.loading == id {
		return nil
	}
	return m.loadCmd(id, true)
}

// nextIndex is the event that will probably be shown next.
func (m *Model) nextIndex() int {
	if m.sess != nil {
		return m.sess.nextGuess()
	}
	if m.cur+1 < len(m.ids) {
		return m.cur + 1
	}
	return -1
}

// setEvent shows a prepared event and trims the cache to the shown event,
// its neighbours and the prefetched one.
func (m *Model) setEvent(p *prepared) {
	id := p.ev.ID
	m.cur = m.index[id]
	m.loading = ""
	m.err = nil
	m.pv.setEvent(p, true)
	m.list.setCurrent(m.cur)
	m.cache[id] = p
	keep := map[string]bool{id: true}
	for _, d := range []int{-1, 1} {
		if j := m.cur + d; j >= 0 && j < len(m.ids) {
			keep[m.ids[j]] = true
		}
	}
	if j := m.nextIndex(); j >= 0 {
		keep[m.ids[j]] = true
	}
	for k := range m.cache {
		if !keep[k] {
			delete(m.cache, k)
		}
	}
	m.dirty = true
}

// Update routes a message.
func (m *Model) Update(msg tea.Msg) (tea.Model, tea.Cmd) {
	cmd := m.update(msg)
	m.dirty = true
	return m, cmd
}

func (m *Model) update(msg tea.Msg) tea.Cmd {
	switch msg := msg.(type) {
	case tea.WindowSizeMsg:
		m.resize(msg.Width, msg.Height)
		return nil
	case eventMsg:
		return m.onEvent(msg)
	case SaveDraftMsg:
		if m.sess != nil {
			return m.sess.saveNow()
		}
		return nil
	case ShutdownMsg:
		return m.quit()
	case tea.MouseMsg:
		return m.onMouse(msg)
	case tea.KeyMsg:
		return m.onKey(msg)
	}
	if m.sess != nil {
		return m.sess.update(msg)
	}
	return nil
}

func (m *Model) onEvent(msg eventMsg) tea.Cmd {
	if msg.err != nil {
		if msg.prefetch {
			m.log.Warn("prefetch failed", "event", msg.id, "err", msg.err)
			return nil
		}
		m.loading = ""
		m.err = msg.err
		return nil
	}
	m.cache[msg.id] = msg.prep
	if msg.prefetch && msg.id != m.loading {
		return nil
	}
	m.setEvent(msg.prep)
	var cmds []tea.Cmd
	if m.sess != nil {
		cmds = append(cmds, m.sess.eventShown(msg.prep))
	}
	cmds = append(cmds, m.prefetch())
	return tea.Batch(cmds...)
}

// quit saves the draft (scanning mode) and ends the program.
func (m *Model) quit() tea.Cmd {
	m.quitting = true
	if m.sess != nil {
		return tea.Sequence(m.sess.saveOnQuit(), tea.Quit)
	}
	return tea.Quit
}

func (m *Model) resize(w, h int) {
	m.width, m.height = w, h
	m.help.Width = w
	m.layout()
}

// Minimum usable window.
const minWidth, minHeight = 60, 16

func (m *Model) tooSmall() bool { return m.width < minWidth || m.height < minHeight }

// layout sizes the panes for the window and the panels shown.
func (m *Model) layout() {
	if m.tooSmall() {
		return
	}
	l := m.computeLayout()
	m.pv.setSize(l.planesW, l.bodyH)
	m.list.setSize(l.listW, l.bodyH)
	if m.sess != nil {
		m.sess.setSize(l.tagW, l.bodyH, m.width)
	}
}

// errNoEvents is shown when there is nothing to display.
const errNoEvents = errorString("no events to show")

type errorString string

func (e errorString) Error() string { return string(e) }
