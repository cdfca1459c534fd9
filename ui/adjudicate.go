package ui

import (
	"cmp"
	"context"
	"fmt"
	"image/color"
	"io"
	"log/slog"
	"math"
	"slices"
	"strings"
	"time"

	"github.com/charmbracelet/bubbles/cursor"
	"github.com/charmbracelet/bubbles/help"
	"github.com/charmbracelet/bubbles/key"
	"github.com/charmbracelet/bubbles/textinput"
	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/scan/detector"
	"github.com/tpcscan/tpcscan/store"
)

// MethodAdjudication is the consensus method of a coordinator's decision.
const MethodAdjudication = "adjudication"

// AdjudicateOptions configure one coordinator's adjudication session.
type AdjudicateOptions struct {
	Store      store.Store
	CampaignID int64
	// Dataset holds the campaign's events; Source, if set, is used instead.
	Dataset     *dataset.Dataset
	Source      Source
	Coordinator string // stored as the decision's By
	Tier        render.Tier
	// Renderer is this session's lipgloss renderer (over SSH, the
	// session's own); nil makes one that writes nowhere (tests).
	Renderer *lipgloss.Renderer
	// Keys are the station's display keys (zoom, pan, planes, scales);
	// zero value: DefaultKeyMap. The adjudicator's own keys are
	// DefaultAdjudicateKeyMap.
	Keys    KeyMap
	Numbers NumbersOptions
	Logger  *slog.Logger
	Now     func() time.Time // clock of the decisions; nil: time.Now
	Context context.Context  // bounds store calls; nil: context.Background
	// QuitHelp, if set, is what the help says the quit keys do (inside the
	// coordinator hub they return to the station rather than quit).
	QuitHelp string
}

// AdjudicateKeyMap are the adjudicator's own keys. Schema class hotkeys
// set the class directly; display keys come from KeyMap.
type AdjudicateKeyMap struct {
	Up, Down, PrevLabel, NextLabel key.Binding
	Accept, Merge, Note, Marks     key.Binding
	Page                           key.Binding
	Reload, Help, Cancel, Quit     key.Binding
}

// DefaultAdjudicateKeyMap returns the adjudicator's keys.
func DefaultAdjudicateKeyMap() AdjudicateKeyMap {
	return AdjudicateKeyMap{
		Up:        bind("previous dispute", "up", "k"),
		Down:      bind("next dispute", "down", "j"),
		PrevLabel: bind("previous label", "left", "h"),
		NextLabel: bind("next label", "right", "l"),
		Accept:    bind("accept label", "enter", "a"),
		Merge:     bind("merge labels of that class", "g"),
		Note:      bind("note", "n"),
		Marks:     bind("frame marks", "m"),
		Page:      bind("numbers", "s"),
		Reload:    bind("reload", "r"),
		Help:      bind("keys", "?"),
		Cancel:    bind("cancel / close", "esc"),
		Quit:      bind("quit", "ctrl+c", "q"),
	}
}

// vote is one scanner's submitted label for a disputed event.
type vote struct {
	Scanner string
	Label   scan.Label
}

// dispute is an event on which the scanners, or the scanners and the
// selection, do not all give the same class.
type dispute struct {
	Event     string
	Votes     []vote // by scanner name
	Selection *scan.Selection
	Share     float64 // share of the votes for the most chosen class
	Entropy   float64 // vote entropy in bits
	Decided   *scan.Consensus
}

// findDisputes lists the disputed events of a campaign: two or more
// scanner classes, or scanners agreeing on a class the selection (when it
// selected the event) does not call; plus every event already adjudicated.
// Undecided events come first, most contested first: lowest share of the
// top class, then highest vote entropy, then most votes.
func findDisputes(passes []scan.Pass, events []scan.CampaignEvent, decided []scan.Consensus) []dispute {
	sel := map[string]*scan.Selection{}
	for _, e := range events {
		sel[e.EventID] = e.Selection
	}
	dec := map[string]*scan.Consensus{}
	for i, c := range decided {
		if c.Method == MethodAdjudication {
			dec[c.EventID] = &decided[i]
		}
	}
	// Group the votes by event on a sorted copy: no map per event.
	var out []dispute
	var counts []classCount
	flush := func(id string, vs []vote) {
		if len(vs) == 0 {
			return
		}
		d := dispute{Event: id, Votes: vs, Selection: sel[id], Decided: dec[id]}
		counts = countClasses(counts[:0], vs)
		selDiffers := false
		if s := d.Selection; s != nil && s.Selected && s.Class != "" && countOf(counts, s.Class) < len(vs) {
			selDiffers = true
		}
		if len(counts) > 1 || selDiffers || d.Decided != nil {
			slices.SortStableFunc(d.Votes, func(a, b vote) int { return cmp.Compare(a.Scanner, b.Scanner) })
			d.Share, d.Entropy = voteSpread(counts, len(vs))
			out = append(out, d)
		}
	}
	byID := func(a, b scan.Pass) int { return cmp.Compare(a.EventID, b.EventID) }
	byEvent := passes // Store.Passes orders by event already
	if !slices.IsSortedFunc(byEvent, byID) {
		byEvent = slices.Clone(passes)
		slices.SortStableFunc(byEvent, byID)
	}
	var cur string
	var vs []vote
	for _, p := range byEvent {
		if p.State != scan.PassSubmitted || p.Label.Class == "" {
			continue
		}
		if p.EventID != cur {
			flush(cur, vs)
			cur, vs = p.EventID, nil
		}
		vs = append(vs, vote{Scanner: p.Scanner, Label: p.Label})
	}
	flush(cur, vs)
	sortDisputes(out)
	return out
}

// classCount is how many votes a class got.
type classCount struct {
	class string
	n     int
}

func countClasses(dst []classCount, vs []vote) []classCount {
	for _, v := range vs {
		i := slices.IndexFunc(dst, func(c classCount) bool { return c.class == v.Label.Class })
		if i < 0 {
			dst = append(dst, classCount{class: v.Label.Class})
			i = len(dst) - 1
		}
		dst[i].n++
	}
	return dst
}

func countOf(cs []classCount, class string) int {
	for _, c := range cs {
		if c.class == class {
			return c.n
		}
	}
	return 0
}

// voteSpread returns the top class's share and the entropy (bits) of the
// vote counts.
func voteSpread(counts []classCount, n int) (share, entropy float64) {
	top := 0
	for _, c := range counts {
		k := c.n
		top = max(top, k)
		p := float64(k) / float64(n)
		entropy -= p * math.Log2(p)
	}
	return float64(top) / float64(n), math.Abs(entropy)
}

func sortDisputes(ds []dispute) {
	slices.SortStableFunc(ds, func(a, b dispute) int {
		return cmp.Or(
			cmp.Compare(btoi(a.Decided != nil), btoi(b.Decided != nil)),
			cmp.Compare(a.Share, b.Share),
			-cmp.Compare(a.Entropy, b.Entropy),
			-cmp.Compare(len(a.Votes), len(b.Votes)),
			cmp.Compare(a.Event, b.Event))
	})
}

func btoi(b bool) int {
	if b {
		return 1
	}
	return 0
}

// markStyle tells one scanner's marks apart from another's by glyphs
// (box outline, vertex and track glyphs); the colour is a second cue only.
type markStyle struct {
	name                 string
	h, v, tl, tr, bl, br rune
	vertex, track        rune
	rgb                  color.RGBA
}

// markStyles are assigned to scanners in name order; the selection has its
// own. The glyphs are one cell wide in every terminal font we know.
func markStyles() []markStyle {
	return []markStyle{
		{"thin", '─', '│', '┌', '┐', '└', '┘', '●', '·', color.RGBA{0xff, 0xd8, 0x4a, 0xff}},
		{"double", '═', '║', '╔', '╗', '╚', '╝', '◆', 'o', color.RGBA{0x7c, 0xf0, 0xb0, 0xff}},
		{"heavy", '━', '┃', '┏', '┓', '┗', '┛', '■', 'x', color.RGBA{0xff, 0x9c, 0xf5, 0xff}},
		{"dashed", '┄', '┆', '╭', '╮', '╰', '╯', '▲', '+', color.RGBA{0x9e, 0xc9, 0xff, 0xff}},
		{"ascii", '-', '|', '+', '+', '+', '+', '★', '~', color.RGBA{0xff, 0x6e, 0x6e, 0xff}},
		{"dotted", '┈', '┊', '∙', '∙', '∙', '∙', '✖', ':', color.RGBA{0xe0, 0xe0, 0xe0, 0xff}},
	}
}

// selectionStyle draws the automated selection's box.
func selectionStyle() markStyle {
	return markStyle{"selection", '╍', '╏', '▪', '▪', '▪', '▪', '▪', '▪', color.RGBA{0xff, 0xb0, 0x50, 0xff}}
}

// sample is the style's legend sample: a box corner, edge and vertex.
func (s markStyle) sample() string { return string([]rune{s.tl, s.h, s.tr, s.vertex}) }

// adjPage is what the adjudicator's body shows.
type adjPage int

const (
	pageDisputes adjPage = iota
	pageNumbers
)

// Typed results of the adjudicator's I/O.
type (
	adjStartMsg struct {
		camp     scan.Campaign
		disputes []dispute
		scanners []string
		err      error
	}
	adjEventMsg struct {
		id   string
		prep *prepared
		err  error
	}
	adjDecidedMsg struct {
		cons scan.Consensus
		err  error
	}
)

// Adjudicator is the coordinator's model: the disputed events, most
// contested first; the chosen event's planes with every scanner's marks
// told apart by glyph and a legend; each scanner's tags; decisions stored
// as adjudication consensus. It holds no global state.
type Adjudicator struct {
	opts AdjudicateOptions
	ctx  context.Context
	src  Source
	st   Styles
	keys AdjudicateKeyMap
	disp KeyMap
	help help.Model
	log  *slog.Logger
	now  func() time.Time

	camp     scan.Campaign
	started  bool
	disputes []dispute
	styleOf  map[string]markStyle
	cur      int // index into disputes
	row      int // chosen vote of the current dispute

	pv      *planes
	shown   string // event ID the planes show
	loading string
	cache   map[string]*prepared

	note     string
	input    textinput.Model
	noting   bool
	showHelp bool
	page     adjPage
	numbers  numbersPane
	stale    bool // numbers need recomputing

	status string
	err    error
	saving bool
	w, h   int
}

// NewAdjudicator builds the adjudication model for one terminal session.
func NewAdjudicator(opts AdjudicateOptions) *Adjudicator {
	a := &Adjudicator{opts: opts, ctx: opts.Context, src: opts.Source, keys: DefaultAdjudicateKeyMap(),
		disp: opts.Keys, help: help.New(), log: opts.Logger, now: opts.Now, cache: map[string]*prepared{}, stale: true}
	if a.ctx == nil {
		a.ctx = context.Background()
	}
	if a.src == nil && opts.Dataset != nil {
		a.src = DatasetSource{opts.Dataset}
	}
	r := opts.Renderer
	if r == nil {
		r = lipgloss.NewRenderer(io.Discard)
	}
	a.st = NewStyles(r, opts.Tier)
	a.help.Styles = a.st.Help
	if len(a.disp.Quit.Keys()) == 0 {
		a.disp = DefaultKeyMap()
	}
	if a.log == nil {
		a.log = slog.New(slog.NewTextHandler(io.Discard, nil))
	}
	if a.now == nil {
		a.now = time.Now
	}
	if opts.QuitHelp != "" {
		a.keys.Quit.SetHelp(a.keys.Quit.Help().Key, opts.QuitHelp)
	}
	a.pv = newPlanes(opts.Tier)
	a.numbers = numbersPane{st: &a.st}
	a.input = textinput.New()
	a.input.CharLimit = 500
	a.input.Cursor.SetMode(cursor.CursorStatic)
	a.input.Prompt = "note: "
	return a
}

// Init reads the campaign and its disputes.
func (a *Adjudicator) Init() tea.Cmd {
	if a.opts.Store == nil {
		a.err = fmt.Errorf("no campaign database")
		return nil
	}
	return a.load()
}

func (a *Adjudicator) load() tea.Cmd {
	st, ctx, id := a.opts.Store, a.ctx, a.opts.CampaignID
	return func() tea.Msg {
		in, err := LoadNumbersInput(ctx, st, id)
		if err != nil {
			return adjStartMsg{err: err}
		}
		names := map[string]bool{}
		for _, p := range in.Passes {
			if p.Scanner != "" {
				names[p.Scanner] = true
			}
		}
		return adjStartMsg{camp: in.Campaign, disputes: findDisputes(in.Passes, in.Events, in.Consensus),
			scanners: slices.Sorted(mapKeysBool(names))}
	}
}

func mapKeysBool(m map[string]bool) func(func(string) bool) {
	return func(yield func(string) bool) {
		for k := range m {
			if !yield(k) {
				return
			}
		}
	}
}

// Update routes a message.
func (a *Adjudicator) Update(msg tea.Msg) (tea.Model, tea.Cmd) {
	switch msg := msg.(type) {
	case tea.WindowSizeMsg:
		a.w, a.h = msg.Width, msg.Height
		a.help.Width = msg.Width
		a.layout()
	case adjStartMsg:
		return a, a.onStart(msg)
	case adjEventMsg:
		a.onEvent(msg)
	case adjDecidedMsg:
		return a, a.onDecided(msg)
	case numbersMsg:
		a.numbers.loading = false
		a.numbers.err = msg.err
		if msg.err == nil {
			a.numbers.num = &msg.num
		}
	case ShutdownMsg:
		return a, tea.Quit
	case tea.KeyMsg:
		return a, a.onKey(msg)
	default:
		if a.noting {
			var cmd tea.Cmd
			a.input, cmd = a.input.Update(msg)
			return a, cmd
		}
	}
	return a, nil
}

func (a *Adjudicator) onStart(msg adjStartMsg) tea.Cmd {
	if msg.err != nil {
		a.err = msg.err
		return nil
	}
	a.err = nil
	keep := ""
	if a.cur < len(a.disputes) {
		keep = a.disputes[a.cur].Event
	}
	a.camp, a.started, a.disputes = msg.camp, true, msg.disputes
	a.styleOf = map[string]markStyle{}
	styles := markStyles()
	for i, s := range msg.scanners {
		a.styleOf[s] = styles[i%len(styles)]
	}
	if err := a.checkHotkeys(); err != nil {
		a.status = err.Error()
	}
	a.cur = max(0, slices.IndexFunc(a.disputes, func(d dispute) bool { return d.Event == keep }))
	a.stale = true
	cmds := []tea.Cmd{a.showCurrent()}
	if a.page == pageNumbers {
		cmds = append(cmds, a.refreshNumbers())
	}
	return tea.Batch(cmds...)
}

// checkHotkeys reports schema class hotkeys that shadow the adjudicator's
// own keys or the display keys.
func (a *Adjudicator) checkHotkeys() error {
	own := a.keys.bindings()
	for _, c := range a.camp.Schema.Classes {
		if c.Hotkey == "" {
			continue
		}
		for _, b := range own {
			if slices.Contains(b.Keys(), c.Hotkey) {
				return fmt.Errorf("class hotkey %q (%s) is also the %q key here: use the accept key instead", c.Hotkey, scan.CleanText(c.Name), b.Help().Desc)
			}
		}
		if names := a.disp.Collides(c.Hotkey); len(names) > 0 {
			return fmt.Errorf("class hotkey %q (%s) is also the %s key", c.Hotkey, scan.CleanText(c.Name), strings.Join(names, ", "))
		}
	}
	return nil
}

func (k *AdjudicateKeyMap) bindings() []*key.Binding {
	return []*key.Binding{&k.Up, &k.Down, &k.PrevLabel, &k.NextLabel, &k.Accept, &k.Merge, &k.Note, &k.Marks, &k.Page,
		&k.Reload, &k.Help, &k.Cancel, &k.Quit}
}

// current is the chosen dispute, if any.
func (a *Adjudicator) current() (*dispute, bool) {
	if a.cur < 0 || a.cur >= len(a.disputes) {
		return nil, false
	}
	return &a.disputes[a.cur], true
}

// showCurrent loads the chosen dispute's event, unless it is shown.
func (a *Adjudicator) showCurrent() tea.Cmd {
	d, ok := a.current()
	a.row = 0
	if !ok || a.src == nil {
		return nil
	}
	if d.Event == a.shown {
		return nil
	}
	if p, ok := a.cache[d.Event]; ok {
		a.setEvent(p)
		return nil
	}
	a.loading = d.Event
	src, id := a.src, d.Event
	return func() tea.Msg {
		p, err := loadEvent(src, id)
		return adjEventMsg{id: id, prep: p, err: err}
	}
}

func (a *Adjudicator) onEvent(msg adjEventMsg) {
	if msg.id != a.loading {
		return // the coordinator has moved on
	}
	a.loading = ""
	if msg.err != nil {
		a.err = msg.err
		return
	}
	a.err = nil
	for id := range a.cache {
		if len(a.cache) >= 4 && id != a.shown {
			delete(a.cache, id)
		}
	}
	a.cache[msg.id] = msg.prep
	a.setEvent(msg.prep)
}

func (a *Adjudicator) setEvent(p *prepared) {
	a.shown = p.ev.ID
	a.pv.setEvent(p, false)
	a.zoomToMarks()
}

// zoomToMarks frames every mark of the shown dispute (scanners' and the
// selection's box) with a margin, on a shared drift-time window; planes
// without marks show all their wires.
func (a *Adjudicator) zoomToMarks() {
	v := a.pv
	d, ok := a.current()
	if !ok || v.prep == nil || len(v.panes) == 0 {
		return
	}
	v.fit()
	n := len(v.det.Planes)
	wlo, whi := make([]float64, n), make([]float64, n)
	for i := range wlo {
		wlo[i], whi[i] = math.Inf(1), math.Inf(-1)
	}
	tlo, thi := math.Inf(1), math.Inf(-1)
	for _, mk := range a.marksOf(d) {
		i := v.det.PlaneIndex(mk.mark.Plane)
		if i < 0 {
			continue
		}
		for _, p := range mk.mark.Points {
			wlo[i], whi[i] = math.Min(wlo[i], p.Wire), math.Max(whi[i], p.Wire)
			tlo, thi = math.Min(tlo, p.Tick), math.Max(thi, p.Tick)
		}
	}
	if math.IsInf(tlo, 1) {
		return
	}
	pw, ph := v.paneSize()
	const margin, minWires, minTicks = 1.6, 48.0, 160.0
	span := math.Max((thi-tlo)*margin, minTicks)
	v.win.TPP = span / float64(ph*v.py)
	v.win.Tick0 = (tlo+thi)/2 - span/2
	focus := -1
	for i := range n {
		if math.IsInf(wlo[i], 1) {
			continue
		}
		if focus < 0 {
			focus = i
		}
		ws := math.Max((whi[i]-wlo[i])*margin, minWires)
		v.win.WPP[i] = ws / float64(pw*v.px)
		v.win.Wire0[i] = (wlo[i]+whi[i])/2 - ws/2
	}
	v.clampZoom()
	if focus >= 0 {
		v.focus = focus
		v.cur = point{Plane: focus, Wire: (wlo[focus] + whi[focus]) / 2, Tick: (tlo + thi) / 2}
		v.clampCursor()
	}
}

// styledMark is a mark with the style it is drawn in.
type styledMark struct {
	mark  scan.Mark
	style markStyle
	who   string
}

// marksOf lists the marks of a dispute: the selection's box first, then
// the scanners', the chosen scanner's last so that it is drawn on top.
func (a *Adjudicator) marksOf(d *dispute) []styledMark {
	var out, chosen []styledMark
	if s := d.Selection; s != nil && s.Box != nil {
		out = append(out, styledMark{mark: *s.Box, style: selectionStyle(), who: "selection"})
	}
	for k, v := range d.Votes {
		for _, mk := range v.Label.Marks {
			sm := styledMark{mark: mk, style: a.styleOf[v.Scanner], who: v.Scanner}
			if k == a.row {
				chosen = append(chosen, sm)
			} else {
				out = append(out, sm)
			}
		}
	}
	return append(out, chosen...)
}

// drawMarks is the planes' overlay.
func (a *Adjudicator) drawMarks(pen *overlayPen) {
	d, ok := a.current()
	if !ok || d.Event != a.shown {
		return
	}
	// Boxes under tracks under vertices, so that no outline hides a point.
	marks := a.marksOf(d)
	slices.SortStableFunc(marks, func(x, y styledMark) int { return cmp.Compare(kindLayer(x.mark.Kind), kindLayer(y.mark.Kind)) })
	for _, sm := range marks {
		i := pen.v.det.PlaneIndex(sm.mark.Plane)
		if i < 0 || len(sm.mark.Points) == 0 {
			continue
		}
		pts := make([]point, len(sm.mark.Points))
		for j, p := range sm.mark.Points {
			pts[j] = point{Plane: i, Wire: p.Wire, Tick: p.Tick}
		}
		s := sm.style
		switch sm.mark.Kind {
		case scan.MarkVertex:
			styledPoint(pen, pts[0], s.vertex, s)
		case scan.MarkBox:
			if len(pts) >= 2 {
				styledBox(pen, pts[0], pts[len(pts)-1], s)
			}
		default:
			for j := 1; j < len(pts); j++ {
				styledLine(pen, pts[j-1], pts[j], s)
			}
			for _, p := range pts {
				styledPoint(pen, p, s.track, s)
			}
		}
	}
}

func kindLayer(k scan.MarkKind) int {
	switch k {
	case scan.MarkBox:
		return 0
	case scan.MarkVertex:
		return 2
	}
	return 1
}

// stampCell writes a glyph over the image in a style's colour (colour
// tiers only), keeping the image's background.
func stampCell(pen *overlayPen, x, y int, r rune, s markStyle) {
	old := pen.c.At(x, y)
	cell := render.Cell{Rune: r, BG: old.BG, Attr: render.AttrBold}
	if pen.v.colour() {
		cell.FG = s.rgb
	}
	pen.c.Set(x, y, cell)
}

func styledPoint(pen *overlayPen, p point, r rune, s markStyle) {
	if x, y, ok := pen.cell(p); ok {
		stampCell(pen, x, y, r, s)
	}
}

// styledLine draws the cells between two points of one plane.
func styledLine(pen *overlayPen, a, b point, s markStyle) {
	pn, shown := pen.v.paneOf(a.Plane)
	if !shown || a.Plane != b.Plane {
		return
	}
	ca, ra := pen.v.cellOf(a.Plane, a.Wire, a.Tick)
	cb, rb := pen.v.cellOf(b.Plane, b.Wire, b.Tick)
	n := min(max(abs(cb-ca), abs(rb-ra)), 4*(pn.w+pn.h))
	for k := 1; k < n; k++ {
		t := float64(k) / float64(n)
		col := ca + int(math.Round(t*float64(cb-ca)))
		row := ra + int(math.Round(t*float64(rb-ra)))
		if col >= 0 && row >= 0 && col < pn.w && row < pn.h {
			stampCell(pen, pn.x+col, pn.y+row, s.track, s)
		}
	}
}

// styledBox draws a rectangle's outline in the style's box glyphs.
func styledBox(pen *overlayPen, a, b point, s markStyle) {
	pn, shown := pen.v.paneOf(a.Plane)
	if !shown {
		return
	}
	c0, r0 := pen.v.cellOf(a.Plane, math.Min(a.Wire, b.Wire), math.Min(a.Tick, b.Tick))
	c1, r1 := pen.v.cellOf(a.Plane, math.Max(a.Wire, b.Wire), math.Max(a.Tick, b.Tick))
	put := func(col, row int, r rune) {
		if col >= 0 && row >= 0 && col < pn.w && row < pn.h {
			stampCell(pen, pn.x+col, pn.y+row, r, s)
		}
	}
	for col := max(c0, -1); col <= min(c1, pn.w); col++ {
		put(col, r0, s.h)
		put(col, r1, s.h)
	}
	for row := max(r0, -1); row <= min(r1, pn.h); row++ {
		put(c0, row, s.v)
		put(c1, row, s.v)
	}
	put(c0, r0, s.tl)
	put(c1, r0, s.tr)
	put(c0, r1, s.bl)
	put(c1, r1, s.br)
}

// onKey handles a key: the note input first, then help, global keys,
// the page's keys and the display keys.
func (a *Adjudicator) onKey(msg tea.KeyMsg) tea.Cmd {
	if a.noting {
		return a.noteKey(msg)
	}
	k := a.keys
	switch {
	case key.Matches(msg, k.Quit):
		return tea.Quit
	case a.showHelp:
		if key.Matches(msg, k.Help, k.Cancel) {
			a.showHelp = false
		}
		return nil
	case key.Matches(msg, k.Help):
		a.showHelp = true
		return nil
	case key.Matches(msg, k.Page):
		if a.page == pageNumbers {
			a.page = pageDisputes
			return nil
		}
		a.page = pageNumbers
		if a.stale {
			return a.refreshNumbers()
		}
		return nil
	case key.Matches(msg, k.Reload):
		a.status = ""
		a.stale = true
		return a.load()
	}
	a.status = ""
	if a.page == pageNumbers {
		switch {
		case key.Matches(msg, k.Up):
			a.numbers.scroll--
		case key.Matches(msg, k.Down):
			a.numbers.scroll++
		case key.Matches(msg, k.Cancel):
			a.page = pageDisputes
		}
		return nil
	}
	return a.disputeKey(msg)
}

func (a *Adjudicator) refreshNumbers() tea.Cmd {
	a.stale = false
	a.numbers.loading = true
	return numbersCmd(a.ctx, a.opts.Store, a.opts.CampaignID, a.opts.Numbers)
}

func (a *Adjudicator) disputeKey(msg tea.KeyMsg) tea.Cmd {
	k := a.keys
	d, ok := a.current()
	switch {
	case key.Matches(msg, k.Up):
		return a.choose(a.cur - 1)
	case key.Matches(msg, k.Down):
		return a.choose(a.cur + 1)
	case !ok:
		return nil
	case key.Matches(msg, k.PrevLabel):
		a.row = (a.row - 1 + len(d.Votes)) % len(d.Votes)
	case key.Matches(msg, k.NextLabel):
		a.row = (a.row + 1) % len(d.Votes)
	case key.Matches(msg, k.Accept):
		return a.accept(d)
	case key.Matches(msg, k.Merge):
		return a.merge(d)
	case key.Matches(msg, k.Note):
		a.noting = true
		a.input.SetValue(a.note)
		a.input.CursorEnd()
		return a.input.Focus()
	case key.Matches(msg, k.Marks):
		a.zoomToMarks()
	case key.Matches(msg, k.Cancel):
		a.note = ""
	default:
		if c, ok := a.classHotkey(msg.String()); ok {
			return a.setClass(d, c)
		}
		a.displayKey(msg)
	}
	return nil
}

// choose moves to dispute i.
func (a *Adjudicator) choose(i int) tea.Cmd {
	if i < 0 || i >= len(a.disputes) || i == a.cur {
		return nil
	}
	a.cur = i
	return a.showCurrent()
}

func (a *Adjudicator) classHotkey(s string) (scan.Choice, bool) {
	for _, c := range a.camp.Schema.Classes {
		if c.Hotkey != "" && c.Hotkey == s {
			return c, true
		}
	}
	return scan.Choice{}, false
}

// displayKey handles the zoom, pan, plane and scale keys of the station.
func (a *Adjudicator) displayKey(msg tea.KeyMsg) {
	v, k := a.pv, a.disp
	if v.prep == nil || v.viewKey(msg, k) {
		return
	}
	switch {
	case key.Matches(msg, k.Fit):
		v.fit()
		v.clampCursor()
	case key.Matches(msg, k.NextScale):
		v.scaleIdx = (v.scaleIdx + 1) % len(v.scales)
	}
}

func (a *Adjudicator) noteKey(msg tea.KeyMsg) tea.Cmd {
	switch msg.Type {
	case tea.KeyEnter:
		a.note = strings.TrimSpace(scan.CleanText(a.input.Value()))
		a.noting = false
		a.input.Blur()
		return nil
	case tea.KeyEsc:
		a.noting = false
		a.input.Blur()
		return nil
	}
	var cmd tea.Cmd
	a.input, cmd = a.input.Update(msg)
	return cmd
}

// accept stores the chosen scanner's label as the event's consensus.
func (a *Adjudicator) accept(d *dispute) tea.Cmd {
	if a.row >= len(d.Votes) {
		return nil
	}
	v := d.Votes[a.row]
	l := cloneLabel(v.Label)
	l.Comment = joinNote("accepted from "+v.Scanner, a.note)
	return a.decide(d.Event, l)
}

// merge stores the chosen scanner's class with the labels of every
// scanner who gave that class combined (mergeLabels).
func (a *Adjudicator) merge(d *dispute) tea.Cmd {
	if a.row >= len(d.Votes) {
		return nil
	}
	chosen := d.Votes[a.row]
	var same []scan.Label
	var who []string
	for _, v := range d.Votes {
		if v.Label.Class == chosen.Label.Class {
			same = append(same, v.Label)
			who = append(who, v.Scanner)
		}
	}
	l := mergeLabels(a.pv.det, chosen.Label, same)
	l.Comment = joinNote("merged from "+strings.Join(who, ", "), a.note)
	return a.decide(d.Event, l)
}

// mergeLabels combines labels of one class: per plane the mean of their
// vertex marks and the box enclosing their boxes (each at the coarsest
// precision among them), the union of their flags, and the chosen label's
// class, confidence and tracks. With a detector, the merged vertices are
// triangulated again.
func mergeLabels(det *detector.Detector, chosen scan.Label, same []scan.Label) scan.Label {
	out := scan.Label{Class: chosen.Class, Confidence: chosen.Confidence}
	type acc struct {
		n          int
		wire, tick float64
		prec       scan.Precision
		lo, hi     detector.PlanePoint
		boxes      int
		boxPrec    scan.Precision
	}
	per := map[detector.Role]*acc{}
	var roles []detector.Role
	get := func(r detector.Role) *acc {
		if per[r] == nil {
			per[r] = &acc{lo: detector.PlanePoint{Wire: math.Inf(1), Tick: math.Inf(1)}, hi: detector.PlanePoint{Wire: math.Inf(-1), Tick: math.Inf(-1)}}
			roles = append(roles, r)
		}
		return per[r]
	}
	coarser := func(p, q scan.Precision) scan.Precision {
		return scan.Precision{Wires: math.Max(p.Wires, q.Wires), Ticks: math.Max(p.Ticks, q.Ticks)}
	}
	for _, l := range same {
		for _, f := range l.Flags {
			if !slices.Contains(out.Flags, f) {
				out.Flags = append(out.Flags, f)
			}
		}
		for _, mk := range l.Marks {
			switch {
			case mk.Kind == scan.MarkVertex && len(mk.Points) == 1:
				c := get(mk.Plane)
				c.n++
				c.wire += mk.Points[0].Wire
				c.tick += mk.Points[0].Tick
				c.prec = coarser(c.prec, mk.Precision)
			case mk.Kind == scan.MarkBox && len(mk.Points) >= 2:
				c := get(mk.Plane)
				c.boxes++
				for _, p := range mk.Points {
					c.lo = detector.PlanePoint{Wire: math.Min(c.lo.Wire, p.Wire), Tick: math.Min(c.lo.Tick, p.Tick)}
					c.hi = detector.PlanePoint{Wire: math.Max(c.hi.Wire, p.Wire), Tick: math.Max(c.hi.Tick, p.Tick)}
				}
				c.boxPrec = coarser(c.boxPrec, mk.Precision)
			}
		}
	}
	for _, r := range roles {
		c := per[r]
		if c.n > 0 {
			out.Marks = append(out.Marks, scan.Mark{Kind: scan.MarkVertex, Plane: r, Precision: c.prec,
				Points: []detector.PlanePoint{{Wire: c.wire / float64(c.n), Tick: c.tick / float64(c.n)}}})
		}
		if c.boxes > 0 {
			out.Marks = append(out.Marks, scan.Mark{Kind: scan.MarkBox, Plane: r, Precision: c.boxPrec, Points: []detector.PlanePoint{c.lo, c.hi}})
		}
	}
	for _, mk := range chosen.Marks {
		if mk.Kind == scan.MarkTrack {
			out.Marks = append(out.Marks, mk)
		}
	}
	out.Vertex3D = triangulate(det, out.Marks)
	return out
}

// triangulate finds the 3-D vertex from vertex marks on two planes.
func triangulate(det *detector.Detector, marks []scan.Mark) *detector.Point {
	if det == nil {
		return nil
	}
	var vs []scan.Mark
	for _, mk := range marks {
		if mk.Kind == scan.MarkVertex && len(mk.Points) == 1 && det.PlaneIndex(mk.Plane) >= 0 {
			vs = append(vs, mk)
		}
	}
	for i := range vs {
		for j := i + 1; j < len(vs); j++ {
			a, b := vs[i].Points[0], vs[j].Points[0]
			if p, err := det.Triangulate(det.PlaneIndex(vs[i].Plane), a.Wire, det.PlaneIndex(vs[j].Plane), b.Wire, (a.Tick+b.Tick)/2); err == nil {
				return &p
			}
		}
	}
	return nil
}

// setClass stores a class chosen by the coordinator. The marks, flags and
// confidence come from the chosen scanner if they gave that class, else
// from the first scanner who did; with nobody, the label is the class only.
func (a *Adjudicator) setClass(d *dispute, c scan.Choice) tea.Cmd {
	l := scan.Label{Class: c.Key}
	from := ""
	idx := slices.IndexFunc(d.Votes, func(v vote) bool { return v.Label.Class == c.Key })
	if a.row < len(d.Votes) && d.Votes[a.row].Label.Class == c.Key {
		idx = a.row
	}
	if idx >= 0 {
		l = cloneLabel(d.Votes[idx].Label)
		from = "; marks from " + d.Votes[idx].Scanner
	}
	l.Comment = joinNote("class set by the coordinator"+from, a.note)
	return a.decide(d.Event, l)
}

func joinNote(what, note string) string {
	if note == "" {
		return what
	}
	return what + ": " + note
}

// decide stores a decision.
func (a *Adjudicator) decide(event string, l scan.Label) tea.Cmd {
	if a.saving {
		a.status = "still saving the previous decision"
		return nil
	}
	a.saving = true
	c := scan.Consensus{CampaignID: a.opts.CampaignID, EventID: event, Method: MethodAdjudication, Label: l,
		Posterior: 1, By: a.opts.Coordinator, At: a.now().UTC()}
	st, ctx := a.opts.Store, a.ctx
	return func() tea.Msg {
		if err := st.SetConsensus(ctx, c); err != nil {
			return adjDecidedMsg{cons: c, err: fmt.Errorf("store the decision on %s: %w", c.EventID, err)}
		}
		return adjDecidedMsg{cons: c}
	}
}

// onDecided marks the event decided, moves it down and goes to the most
// contested undecided event.
func (a *Adjudicator) onDecided(msg adjDecidedMsg) tea.Cmd {
	a.saving = false
	if msg.err != nil {
		a.status = msg.err.Error()
		a.log.Error("adjudication not stored", "event", msg.cons.EventID, "err", msg.err)
		return nil
	}
	i := slices.IndexFunc(a.disputes, func(d dispute) bool { return d.Event == msg.cons.EventID })
	if i < 0 {
		return nil
	}
	c := msg.cons
	a.disputes[i].Decided = &c
	a.note = ""
	a.stale = true
	sortDisputes(a.disputes)
	a.status = fmt.Sprintf("decided %s: %s", scan.CleanText(c.EventID), a.className(c.Label.Class))
	a.log.Info("adjudicated", "event", c.EventID, "class", c.Label.Class, "by", c.By)
	a.cur = 0
	return a.showCurrent()
}

func (a *Adjudicator) className(k string) string {
	for _, c := range a.camp.Schema.Classes {
		if c.Key == k {
			return scan.CleanText(c.Name)
		}
	}
	return scan.CleanText(k)
}

func (a *Adjudicator) choiceNames(cs []scan.Choice, keys []string) string {
	var out []string
	for _, k := range keys {
		name := k
		for _, c := range cs {
			if c.Key == k {
				name = c.Name
			}
		}
		out = append(out, scan.CleanText(name))
	}
	return strings.Join(out, ", ")
}

// Layout.
const (
	adjListMin   = 34
	adjListMax   = 44
	adjMinWidth  = 80
	adjMinHeight = 20
)

func (a *Adjudicator) sideWidth() int { return clampI(a.w/3, adjListMin, adjListMax) }

func clampI(x, lo, hi int) int { return max(lo, min(hi, x)) }

func (a *Adjudicator) bodyHeight() int { return a.h - 3 }

func (a *Adjudicator) layout() {
	if a.w < adjMinWidth || a.h < adjMinHeight {
		return
	}
	a.pv.setSize(a.w-a.sideWidth(), a.bodyHeight())
}

// View draws the adjudicator: title, body (disputes or numbers), legend
// and key help.
func (a *Adjudicator) View() string {
	if a.w == 0 {
		return ""
	}
	if a.w < adjMinWidth || a.h < adjMinHeight {
		msg := fmt.Sprintf("window %d×%d is too small: adjudication needs at least %d×%d", a.w, a.h, adjMinWidth, adjMinHeight)
		return strings.Join(block(strings.Join(wrap(msg, a.w), "\n"), a.w, a.h), "\n")
	}
	bh := a.bodyHeight()
	lines := []string{a.titleLine()}
	switch {
	case a.showHelp:
		lines = append(lines, block(a.helpView(), a.w, bh)...)
	case a.page == pageNumbers:
		lines = append(lines, block(a.numbers.view(a.w, bh), a.w, bh)...)
	default:
		lines = append(lines, a.disputeBody(bh)...)
	}
	lines = append(lines, a.legendLine(), a.statusLine())
	return strings.Join(lines, "\n")
}

func (a *Adjudicator) titleLine() string {
	s := " tpcscan · adjudication"
	if a.started {
		s += " · " + scan.CleanText(a.camp.Name)
	}
	s += " · " + scan.CleanText(a.opts.Coordinator)
	open := 0
	for _, d := range a.disputes {
		if d.Decided == nil {
			open++
		}
	}
	tabs := fmt.Sprintf("%d open  ", open)
	dis, num := " disputes ", " numbers "
	if a.page == pageDisputes {
		dis = "[disputes]"
	} else {
		num = "[numbers]"
	}
	right := tabs + dis + num + " "
	return a.st.Title.Render(pad(s, a.w-len([]rune(right))) + right)
}

func (a *Adjudicator) disputeBody(bh int) []string {
	sw := a.sideWidth()
	listH := clampI(bh*2/5, 5, max(5, len(a.disputes)+2))
	labels, chosen := a.labelsView(sw - 1)
	// Keep the chosen scanner's tags in view when the table is too long.
	if lh := bh - listH; len(labels) > lh && chosen >= 0 {
		from := min(max(0, chosen-2), len(labels)-lh)
		labels = labels[from:]
	}
	side := append(block(a.listView(sw-1, listH), sw-1, listH), block(strings.Join(labels, "\n"), sw-1, bh-listH)...)
	pl := a.planesLines(a.w-sw, bh)
	out := make([]string, bh)
	for r := range out {
		out[r] = side[r] + " " + pl[r]
	}
	return out
}

func (a *Adjudicator) planesLines(w, h int) []string {
	d, ok := a.current()
	switch {
	case !a.started && a.err != nil:
		return block(a.st.Error.Render("error: ")+scan.CleanText(a.err.Error()), w, h)
	case !a.started:
		return block("reading the campaign …", w, h)
	case !ok:
		return block("No disputes: on every event the scanners agree (and agree with the selection where it selected the event).", w, h)
	case a.src == nil:
		return block("no dataset: give --dataset to see the planes", w, h)
	case a.loading != "":
		return block("loading event "+scan.CleanText(a.loading)+" …", w, h)
	case a.shown != d.Event && a.err != nil:
		return block(a.st.Error.Render("cannot show the event: ")+scan.CleanText(a.err.Error()), w, h)
	case a.shown != d.Event:
		return block("", w, h)
	}
	lines := a.pv.render()
	// Marks go on top of the cursor and the plane links: they are what
	// is being judged.
	a.drawMarks(&overlayPen{v: a.pv, c: a.pv.work})
	lines = a.pv.work.Lines(a.pv.tier)
	if len(lines) != h {
		return block(strings.Join(lines, "\n"), w, h)
	}
	return lines
}

// listView is the dispute list: most contested first, decided at the end.
// Classes appear as their schema hotkeys, one per vote, so the list stays
// narrow and teaches the keys that set them.
func (a *Adjudicator) listView(w, h int) string {
	open := 0
	for _, d := range a.disputes {
		if d.Decided == nil {
			open++
		}
	}
	lines := []string{a.st.Heading.Render(fmt.Sprintf("Disputes: %d open, %d decided", open, len(a.disputes)-open)),
		a.st.Dim.Render(pad(fmt.Sprintf("  %-11s %4s  %-9s %s", "event", "top", "votes", "sel"), w))}
	rows := h - 2
	first := max(0, min(a.cur-rows/2, len(a.disputes)-rows))
	for i := first; i < len(a.disputes) && i < first+rows; i++ {
		d := a.disputes[i]
		mark := " "
		if i == a.cur {
			mark = "▸"
		}
		var s string
		if d.Decided != nil {
			s = fmt.Sprintf("%s✓%-11s  → %s", mark, trunc(scan.CleanText(d.Event), 11), a.className(d.Decided.Label.Class))
		} else {
			s = fmt.Sprintf("%s %-11s %3.0f%%  %-9s %s", mark, trunc(scan.CleanText(d.Event), 11), 100*d.Share, a.voteSummary(&d), a.selSummary(&d))
		}
		s = pad(s, w)
		if i == a.cur {
			s = a.st.Chosen.Render(s)
		} else if d.Decided != nil {
			s = a.st.Dim.Render(s)
		}
		lines = append(lines, s)
	}
	return strings.Join(lines, "\n")
}

// voteSummary lists one class key per vote, most chosen class first:
// "1 1 5".
func (a *Adjudicator) voteSummary(d *dispute) string {
	counts := map[string]int{}
	for _, v := range d.Votes {
		counts[v.Label.Class]++
	}
	keys := slices.Sorted(mapKeysInt(counts))
	slices.SortStableFunc(keys, func(x, y string) int {
		return cmp.Or(-cmp.Compare(counts[x], counts[y]), cmp.Compare(a.classIndex(x), a.classIndex(y)))
	})
	var parts []string
	for _, k := range keys {
		for range counts[k] {
			parts = append(parts, a.classShort(k))
		}
	}
	return strings.Join(parts, " ")
}

// selSummary is the selection's class when it selected the event.
func (a *Adjudicator) selSummary(d *dispute) string {
	s := d.Selection
	switch {
	case s == nil:
		return ""
	case !s.Selected:
		return "–"
	}
	return a.classShort(s.Class)
}

// classIndex is a class's place in the schema (unknown classes last).
func (a *Adjudicator) classIndex(k string) int {
	i := slices.IndexFunc(a.camp.Schema.Classes, func(c scan.Choice) bool { return c.Key == k })
	if i < 0 {
		return len(a.camp.Schema.Classes)
	}
	return i
}

// classShort is a class's hotkey, or its key when it has none.
func (a *Adjudicator) classShort(k string) string {
	for _, c := range a.camp.Schema.Classes {
		if c.Key == k && c.Hotkey != "" {
			return scan.CleanText(c.Hotkey)
		}
	}
	return scan.CleanText(k)
}

// labelsView is the side table of the chosen event: each scanner's tags,
// the selection's output and any decision. It returns the lines and the
// index of the chosen scanner's first line (−1 if none).
func (a *Adjudicator) labelsView(w int) ([]string, int) {
	d, ok := a.current()
	if !ok {
		return nil, -1
	}
	chosen := -1
	sch := a.camp.Schema
	var out []string
	add := func(s string) { out = append(out, pad(s, w)) }
	out = append(out, "", a.st.Heading.Render("Event "+scan.CleanText(d.Event)))
	if s := d.Selection; s != nil {
		what := "rejected"
		if s.Selected {
			what = a.className(s.Class)
		}
		add(fmt.Sprintf("selection: %s (score %.2f)", what, s.Score))
	}
	for k, v := range d.Votes {
		s := a.styleOf[v.Scanner]
		head := fmt.Sprintf("%s %s", s.sample(), scan.CleanText(v.Scanner))
		if k == a.row {
			chosen = len(out)
			out = append(out, a.st.Chosen.Render(pad("▸"+head, w)))
		} else {
			add(" " + head)
		}
		l := v.Label
		add("   class  " + a.className(l.Class))
		if len(l.Flags) > 0 {
			add("   flags  " + a.choiceNames(sch.Flags, l.Flags))
		}
		if l.Confidence != "" {
			add("   conf   " + a.choiceNames(sch.Confidence, []string{l.Confidence}))
		}
		if l.Comment != "" {
			for i, ln := range wrap("“"+scan.CleanText(l.Comment)+"”", max(w-10, 10)) {
				if i == 3 {
					break
				}
				add(fmt.Sprintf("   %-6s %s", map[bool]string{true: "note"}[i == 0], ln))
			}
		}
		if n := len(l.Marks); n > 0 {
			add(fmt.Sprintf("   marks  %s", markCounts(l.Marks)))
		}
	}
	if c := d.Decided; c != nil {
		out = append(out, "", a.st.Saved.Render(pad(fmt.Sprintf("decided: %s", a.className(c.Label.Class)), w)))
		add(fmt.Sprintf("  by %s, %s", scan.CleanText(c.By), c.At.UTC().Format("2006-01-02 15:04 MST")))
		if c.Label.Comment != "" {
			add("  " + scan.CleanText(c.Label.Comment))
		}
	}
	if a.note != "" {
		out = append(out, "", a.st.Warn.Render(pad("note: "+a.note, w)))
	}
	return out, chosen
}

// markCounts says how many marks of each kind a label has.
func markCounts(ms []scan.Mark) string {
	n := map[scan.MarkKind]int{}
	for _, m := range ms {
		n[m.Kind]++
	}
	var parts []string
	for _, k := range []scan.MarkKind{scan.MarkVertex, scan.MarkBox, scan.MarkTrack} {
		if n[k] > 0 {
			parts = append(parts, fmt.Sprintf("%d %s", n[k], k))
		}
	}
	return strings.Join(parts, ", ")
}

// legendLine names each scanner's mark style on the chosen event.
func (a *Adjudicator) legendLine() string {
	d, ok := a.current()
	if !ok || a.page != pageDisputes || a.showHelp {
		return pad("", a.w)
	}
	parts := []string{" marks:"}
	for _, v := range d.Votes {
		s := a.styleOf[v.Scanner]
		parts = append(parts, fmt.Sprintf("%s %s (track %c)", a.ink(s, s.sample()), scan.CleanText(v.Scanner), s.track))
	}
	if s := d.Selection; s != nil && s.Box != nil {
		ss := selectionStyle()
		parts = append(parts, a.ink(ss, string([]rune{ss.tl, ss.h, ss.h}))+" selection box")
	}
	parts = append(parts, "✚ zoom centre")
	return pad(strings.Join(parts, "  "), a.w)
}

// ink colours a legend sample like the marks (colour tiers only).
func (a *Adjudicator) ink(s markStyle, text string) string {
	if !a.pv.colour() {
		return text
	}
	hex := fmt.Sprintf("#%02x%02x%02x", s.rgb.R, s.rgb.G, s.rgb.B)
	return a.st.Readout.Foreground(lipgloss.Color(hex)).Bold(true).Render(text)
}

func (a *Adjudicator) statusLine() string {
	switch {
	case a.noting:
		return pad(" "+a.input.View()+"   (enter keeps it for the next decision, esc cancels)", a.w)
	case a.status != "":
		return a.st.Warn.Render(pad(" "+scan.CleanText(a.status), a.w))
	case a.err != nil && a.pv.prep != nil:
		return a.st.Error.Render(pad(" "+scan.CleanText(a.err.Error()), a.w))
	}
	return pad(" "+a.help.ShortHelpView(a.shortHelp()), a.w)
}

func (a *Adjudicator) shortHelp() []key.Binding {
	k := a.keys
	if a.page == pageNumbers {
		back := key.NewBinding(key.WithKeys(k.Page.Keys()...), key.WithHelp(k.Page.Help().Key, "disputes"))
		up := key.NewBinding(key.WithKeys(k.Up.Keys()...), key.WithHelp(k.Up.Help().Key, "scroll up"))
		down := key.NewBinding(key.WithKeys(k.Down.Keys()...), key.WithHelp(k.Down.Help().Key, "scroll down"))
		return []key.Binding{back, up, down, k.Reload, k.Help, k.Quit}
	}
	return []key.Binding{k.Down, k.NextLabel, k.Accept, a.classBinding(), k.Note, k.Page, k.Help, k.Quit, k.Marks}
}

// classBinding describes the schema's class hotkeys in one help entry.
func (a *Adjudicator) classBinding() key.Binding {
	var ks []string
	for _, c := range a.camp.Schema.Classes {
		if c.Hotkey != "" {
			ks = append(ks, c.Hotkey)
		}
	}
	label := strings.Join(ks, "")
	if len(ks) > 2 {
		label = ks[0] + "–" + ks[len(ks)-1]
	}
	return key.NewBinding(key.WithKeys(ks...), key.WithHelp(scan.CleanText(label), "set class"))
}

func (a *Adjudicator) helpView() string {
	k, d := a.keys, a.disp
	var cls []string
	for _, c := range a.camp.Schema.Classes {
		if c.Hotkey != "" {
			cls = append(cls, fmt.Sprintf("%s %s", scan.CleanText(c.Hotkey), scan.CleanText(c.Name)))
		}
	}
	h := a.help
	h.ShowAll = true
	groups := [][]key.Binding{
		{k.Up, k.Down, k.PrevLabel, k.NextLabel, k.Accept, k.Merge, k.Note, k.Cancel},
		{k.Marks, d.ZoomIn, d.ZoomOut, d.Fit, d.PanLeft, d.PanRight, d.PanEarlier, d.PanLater},
		{d.NextPlane, d.PrevPlane, d.Enlarge, d.NextScale, d.LogScale, k.Page, k.Reload, k.Help, k.Quit},
	}
	text := "Accepting a scanner's label stores it whole (class, flags, confidence, marks) as the event's " +
		"consensus; setting a class keeps the marks of a scanner who gave that class. Merging takes the chosen " +
		"scanner's class and combines the labels of everyone who gave it: the mean vertex on each plane, the box " +
		"enclosing their boxes, all their flags, the chosen scanner's tracks. A note typed with " +
		k.Note.Help().Key + " goes with the next decision, stored with your name and the time; the latest decision wins."
	w := max(a.w-2, 20)
	lines := []string{a.st.Heading.Render("Adjudication keys"), "", h.FullHelpView(groups), ""}
	lines = append(lines, wrap("Set the class directly: "+strings.Join(cls, " · "), w)...)
	lines = append(lines, "")
	lines = append(lines, wrap(text, w)...)
	return strings.Join(lines, "\n")
}
