package ui

import (
	"io"
	"reflect"
	"strings"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"

	"github.com/tpcscan/tpcscan/render"
)

// HubPage is one page of a hub: a name for the tab bar and its model.
type HubPage struct {
	Name  string
	Model tea.Model
}

// HubKeyMap are the hub's own keys. The defaults are control and function
// keys that no station, adjudicator or dashboard binding, text input or
// schema hotkey (one printable character) uses.
type HubKeyMap struct {
	NextPage key.Binding
}

// DefaultHubKeyMap returns the hub's keys.
func DefaultHubKeyMap() HubKeyMap {
	return HubKeyMap{NextPage: bind("next page", "ctrl+g", "f2")}
}

// HubOptions configure a hub.
type HubOptions struct {
	Tier render.Tier
	// Renderer is this session's lipgloss renderer; nil writes nowhere.
	Renderer *lipgloss.Renderer
	Keys     HubKeyMap // zero value: DefaultHubKeyMap
}

// Hub holds several pages in one terminal, a coordinator's: the scanning
// station first, then pages such as the adjudicator and the dashboard. One
// key cycles the pages and a tab bar on the top line names them. Keys and
// mouse go to the shown page; window sizes and the station's outside
// messages (ShutdownMsg, SaveDraftMsg) to every page; the result of a
// page's command only to that page. A page that quits returns to the
// station; the hub quits when the station does.
type Hub struct {
	pages   []HubPage
	started []bool
	active  int
	keys    HubKeyMap
	st      Styles
	w, h    int
	done    bool // the station has quit
}

// NewHub builds a hub of the station and further pages. Pages other than
// the station start (Init) when first shown, so a coordinator who never
// opens them costs the store nothing.
func NewHub(opts HubOptions, station HubPage, pages ...HubPage) *Hub {
	r := opts.Renderer
	if r == nil {
		r = lipgloss.NewRenderer(io.Discard)
	}
	h := &Hub{pages: append([]HubPage{station}, pages...), keys: opts.Keys, st: NewStyles(r, opts.Tier)}
	if len(h.keys.NextPage.Keys()) == 0 {
		h.keys = DefaultHubKeyMap()
	}
	h.started = make([]bool, len(h.pages))
	return h
}

// pageMsg is a page's command result, addressed to that page.
type pageMsg struct {
	page int
	msg  tea.Msg
}

// pageQuitMsg replaces a page's tea.Quit.
type pageQuitMsg struct{ page int }

// Init starts the station.
func (h *Hub) Init() tea.Cmd { return h.start(0) }

func (h *Hub) start(i int) tea.Cmd {
	if h.started[i] {
		return nil
	}
	h.started[i] = true
	return h.tag(i, h.pages[i].Model.Init())
}

// Active returns the index of the shown page (0: the station).
func (h *Hub) Active() int { return h.active }

// Update routes a message.
func (h *Hub) Update(msg tea.Msg) (tea.Model, tea.Cmd) {
	switch msg := msg.(type) {
	case pageMsg:
		return h, h.updatePage(msg.page, msg.msg)
	case pageQuitMsg:
		return h, h.pageQuit(msg.page)
	case tea.WindowSizeMsg:
		h.w, h.h = msg.Width, msg.Height
		return h, h.broadcast(tea.WindowSizeMsg{Width: msg.Width, Height: max(0, msg.Height-1)})
	case tea.KeyMsg:
		if key.Matches(msg, h.keys.NextPage) && !h.done {
			return h, h.show((h.active + 1) % len(h.pages))
		}
		return h, h.updatePage(h.active, msg)
	case tea.MouseMsg:
		if msg.Y == 0 { // the tab bar
			return h, nil
		}
		msg.Y--
		return h, h.updatePage(h.active, msg)
	}
	return h, h.broadcast(msg)
}

// show makes page i the shown one, starting it on its first showing.
func (h *Hub) show(i int) tea.Cmd {
	h.active = i
	return h.start(i)
}

func (h *Hub) updatePage(i int, msg tea.Msg) tea.Cmd {
	m, cmd := h.pages[i].Model.Update(msg)
	h.pages[i].Model = m
	return h.tag(i, cmd)
}

func (h *Hub) broadcast(msg tea.Msg) tea.Cmd {
	cmds := make([]tea.Cmd, len(h.pages))
	for i := range h.pages {
		cmds[i] = h.updatePage(i, msg)
	}
	return tea.Batch(cmds...)
}

// pageQuit ends the session when the station quits; any other page
// hands the screen back to the station.
func (h *Hub) pageQuit(i int) tea.Cmd {
	if i == 0 {
		h.done = true
		return tea.Quit
	}
	if h.active == i {
		h.active = 0
	}
	return nil
}

// tag makes cmd's messages reach page i only. The runtime's own messages
// pass through untouched, so that batches, sequences, screen and exec
// commands still work; tea.Quit becomes pageQuitMsg.
func (h *Hub) tag(i int, cmd tea.Cmd) tea.Cmd {
	if cmd == nil {
		return nil
	}
	return func() tea.Msg { return h.tagMsg(i, cmd()) }
}

func (h *Hub) tagMsg(i int, msg tea.Msg) tea.Msg {
	switch msg := msg.(type) {
	case nil:
		return nil
	case tea.QuitMsg:
		return pageQuitMsg{page: i}
	case tea.BatchMsg:
		out := make(tea.BatchMsg, len(msg))
		for j, c := range msg {
			out[j] = h.tag(i, c)
		}
		return out
	}
	// Messages of bubbletea's own package are the runtime's.
	t := reflect.TypeOf(msg)
	if t.PkgPath() != reflect.TypeFor[tea.QuitMsg]().PkgPath() {
		return pageMsg{page: i, msg: msg}
	}
	// tea.Sequence's message is an unexported []tea.Cmd: tag its
	// commands and sequence them again, keeping their order.
	if t.Kind() == reflect.Slice && t.Elem() == reflect.TypeFor[tea.Cmd]() {
		v := reflect.ValueOf(msg)
		cmds := make([]tea.Cmd, v.Len())
		for j := range cmds {
			c, _ := v.Index(j).Interface().(tea.Cmd)
			cmds[j] = h.tag(i, c)
		}
		if seq := tea.Sequence(cmds...); seq != nil {
			return seq()
		}
		return nil
	}
	return msg
}

// View draws the tab bar and the shown page.
func (h *Hub) View() string {
	if h.done || h.w == 0 {
		return ""
	}
	return h.tabBar() + "\n" + h.pages[h.active].Model.View()
}

// tabBar names the pages, the shown one highlighted, and the page key.
func (h *Hub) tabBar() string {
	var b strings.Builder
	for i, p := range h.pages {
		if i == h.active { // brackets too: the mono tier has no reverse video
			b.WriteString(h.st.Chosen.Render("[" + p.Name + "]"))
		} else {
			b.WriteString(h.st.Dim.Render(" " + p.Name + " "))
		}
	}
	k := h.keys.NextPage.Help()
	hint := "  " + k.Key + ": " + k.Desc
	if h.active != 0 {
		hint += " · its quit key: back to " + h.pages[0].Name
	}
	b.WriteString(h.st.Dim.Render(hint))
	return pad(b.String(), h.w)
}
