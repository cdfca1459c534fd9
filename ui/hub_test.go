package ui

import (
	"context"
	"reflect"
	"slices"
	"strings"
	"testing"

	"github.com/charmbracelet/bubbles/key"
	"github.com/charmbracelet/bubbles/textinput"
	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
)

func hubSend(t testing.TB, h *Hub, msg tea.Msg) bool {
	t.Helper()
	_, cmd := h.Update(msg)
	return run(t, h, cmd)
}

func hubKeys(t testing.TB, h *Hub, names ...string) (quit bool) {
	t.Helper()
	for _, n := range names {
		quit = hubSend(t, h, keyMsg(n)) || quit
	}
	return quit
}

// fakePage records what reaches it. Its key "x" starts a command whose
// result it counts, "q" quits, and ShutdownMsg quits after a "save".
type fakePage struct {
	name    string
	inits   int
	keys    []string
	sizes   []tea.WindowSizeMsg
	mice    []tea.MouseMsg
	results int
	saved   bool
	foreign int // results of other pages' commands
}

type fakeResult struct{ from string }

func (p *fakePage) Init() tea.Cmd { p.inits++; return nil }

func (p *fakePage) Update(msg tea.Msg) (tea.Model, tea.Cmd) {
	switch msg := msg.(type) {
	case tea.KeyMsg:
		p.keys = append(p.keys, msg.String())
		switch msg.String() {
		case "x":
			name := p.name
			return p, tea.Batch(func() tea.Msg { return fakeResult{from: name} }, nil)
		case "q":
			return p, tea.Quit
		}
	case tea.WindowSizeMsg:
		p.sizes = append(p.sizes, msg)
	case tea.MouseMsg:
		p.mice = append(p.mice, msg)
	case fakeResult:
		if msg.from == p.name {
			p.results++
		} else {
			p.foreign++
		}
	case ShutdownMsg:
		save := func() tea.Msg { p.saved = true; return nil }
		return p, tea.Sequence(save, tea.Quit)
	}
	return p, nil
}

func (p *fakePage) View() string { return "page " + p.name }

func newFakeHub() (*Hub, []*fakePage) {
	fs := []*fakePage{{name: "station"}, {name: "one"}, {name: "two"}}
	h := NewHub(HubOptions{Tier: render.TierMono}, HubPage{"scanning", fs[0]},
		HubPage{"adjudication", fs[1]}, HubPage{"dashboard", fs[2]})
	return h, fs
}

func TestHubRouting(t *testing.T) {
	h, fs := newFakeHub()
	run(t, h, h.Init())
	if fs[0].inits != 1 || fs[1].inits != 0 {
		t.Fatalf("inits %d %d: only the station starts at once", fs[0].inits, fs[1].inits)
	}
	// Sizes reach every page, less the tab bar's line.
	hubSend(t, h, tea.WindowSizeMsg{Width: 100, Height: 30})
	for _, f := range fs {
		if len(f.sizes) != 1 || f.sizes[0] != (tea.WindowSizeMsg{Width: 100, Height: 29}) {
			t.Errorf("%s got sizes %v, want one 100×29", f.name, f.sizes)
		}
	}
	// Keys reach the shown page only; the page key goes to none and
	// starts a page once, on its first showing.
	hubKeys(t, h, "a", "ctrl+g", "b", "f2", "c", "ctrl+g", "d", "ctrl+g")
	for i, want := range [][]string{{"a", "d"}, {"b"}, {"c"}} {
		if !slices.Equal(fs[i].keys, want) {
			t.Errorf("%s got keys %v, want %v", fs[i].name, fs[i].keys, want)
		}
	}
	if fs[1].inits != 1 || fs[2].inits != 1 {
		t.Errorf("inits %d %d, want 1 each", fs[1].inits, fs[2].inits)
	}
	// A command's result goes back to the page that started it.
	if h.Active() != 1 {
		t.Fatalf("active page %d, want 1", h.Active())
	}
	hubKeys(t, h, "x")
	if fs[1].results != 1 || fs[0].foreign+fs[1].foreign+fs[2].foreign != 0 {
		t.Errorf("results: page one %d (want 1), foreign %d %d %d (want 0)", fs[1].results, fs[0].foreign, fs[1].foreign, fs[2].foreign)
	}
	// The mouse reaches the shown page, in its own coordinates; the tab
	// bar's line is the hub's.
	hubSend(t, h, tea.MouseMsg{X: 5, Y: 0, Action: tea.MouseActionPress, Button: tea.MouseButtonLeft})
	hubSend(t, h, tea.MouseMsg{X: 5, Y: 7, Action: tea.MouseActionPress, Button: tea.MouseButtonLeft})
	if len(fs[1].mice) != 1 || fs[1].mice[0].Y != 6 || len(fs[0].mice) != 0 {
		t.Errorf("mouse: page one got %v (want one at row 6), station %v", fs[1].mice, fs[0].mice)
	}
	// Quitting a page returns to the station and does not end the hub.
	if hubKeys(t, h, "q") {
		t.Fatal("a page's quit ended the hub")
	}
	if h.Active() != 0 || !strings.Contains(h.View(), "page station") {
		t.Errorf("after a page quit the hub shows page %d: %q", h.Active(), h.View())
	}
	// The station's quit ends it.
	if !hubKeys(t, h, "q") {
		t.Fatal("the station's quit did not end the hub")
	}
	if h.View() != "" {
		t.Errorf("view after quitting %q, want empty", h.View())
	}
}

func TestHubShutdown(t *testing.T) {
	h, fs := newFakeHub()
	run(t, h, h.Init())
	hubSend(t, h, tea.WindowSizeMsg{Width: 80, Height: 20})
	hubKeys(t, h, "ctrl+g")
	if !hubSend(t, h, ShutdownMsg{}) {
		t.Fatal("shutdown did not quit the hub")
	}
	for _, f := range fs {
		if !f.saved {
			t.Errorf("%s did not get the shutdown", f.name)
		}
	}
}

// TestHubKeyIsFree checks the page key against every binding it could
// shadow: the station's, the adjudicator's, the dashboard's, the text
// inputs' and the default schema's hotkeys.
func TestHubKeyIsFree(t *testing.T) {
	var taken []key.Binding
	collect := func(v any) {
		rv := reflect.ValueOf(v)
		for i := range rv.NumField() {
			if b, ok := rv.Field(i).Interface().(key.Binding); ok {
				taken = append(taken, b)
			}
		}
	}
	collect(DefaultKeyMap())
	collect(DefaultAdjudicateKeyMap())
	collect(DefaultDashboardKeyMap())
	collect(textinput.DefaultKeyMap)
	if len(taken) < 60 {
		t.Fatalf("only %d bindings collected", len(taken))
	}
	s := scan.DefaultSchema()
	var hot []string
	for _, f := range [][]scan.Choice{s.Classes, s.Particles, s.Flags, s.Confidence} {
		for _, c := range f {
			hot = append(hot, c.Hotkey)
		}
	}
	for _, k := range DefaultHubKeyMap().NextPage.Keys() {
		for _, b := range taken {
			if slices.Contains(b.Keys(), k) {
				t.Errorf("page key %q is also %q", k, b.Help().Desc)
			}
		}
		if slices.Contains(hot, k) {
			t.Errorf("page key %q is a schema hotkey", k)
		}
	}
}

// TestHubCoordinatorPages runs the real pages: the station, the
// adjudicator and the dashboard on one campaign.
func TestHubCoordinatorPages(t *testing.T) {
	st, id, src := adjCampaign(t)
	ctx := context.Background()
	station := New(Options{Source: src, Store: st, CampaignID: id, Scanner: "dana", Role: RoleCoordinator,
		Tier: render.TierMono, Context: ctx})
	h := NewHub(HubOptions{Tier: render.TierMono},
		HubPage{"scanning", station},
		HubPage{"adjudication", newTestAdjudicator(t, st, id, src, render.TierMono)},
		HubPage{"dashboard", NewDashboard(DashboardOptions{Store: st, CampaignID: id, Tier: render.TierMono,
			Numbers: NumbersOptions{Bootstrap: 20}})})
	const w, hgt = 140, 45
	hubSend(t, h, tea.WindowSizeMsg{Width: w, Height: hgt})
	run(t, h, h.Init())
	screen := func() (bar, body string) {
		t.Helper()
		out := h.View()
		checkFrameSize(t, out, w, hgt)
		bar, body, _ = strings.Cut(ansi.Strip(out), "\n")
		return bar, body
	}
	tests := []struct {
		keys      []string
		tab, body string
	}{
		{nil, "[scanning]", " tpcscan · "},
		{[]string{"ctrl+g"}, "[adjudication]", "tpcscan · adjudication · trial · dana"},
		{[]string{"?"}, "[adjudication]", "Adjudication keys"}, // the page's own help
		{[]string{"?", "q"}, "[scanning]", " tpcscan · "},      // its quit returns to the station
		{[]string{"f2", "f2"}, "[dashboard]", "tpcscan · campaign numbers"},
		{[]string{"q"}, "[scanning]", " tpcscan · "},
		{[]string{"f2"}, "[adjudication]", "open  [disputes]"}, // kept its state
	}
	for _, tc := range tests {
		if hubKeys(t, h, tc.keys...) {
			t.Fatalf("keys %v ended the hub", tc.keys)
		}
		bar, body := screen()
		if !strings.Contains(bar, tc.tab) || !strings.Contains(bar, "ctrl+g/f2: next page") {
			t.Errorf("after %v the tab bar is %q, want %q and the page key", tc.keys, bar, tc.tab)
		}
		if back := strings.Contains(bar, "quit key: back to scanning"); back != (tc.tab != "[scanning]") {
			t.Errorf("after %v the tab bar is %q: the way back belongs on other pages only", tc.keys, bar)
		}
		if !strings.Contains(body, tc.body) {
			t.Errorf("after %v the page does not show %q:\n%s", tc.keys, tc.body, body)
		}
	}
	hubKeys(t, h, "ctrl+g", "ctrl+g") // back to the station
	if !hubKeys(t, h, "ctrl+c") {
		t.Error("the station's quit key did not end the hub")
	}
}

// TestHubShutdownSavesDraft: the session's stop message reaches the
// station through the hub, which saves the open draft before quitting.
func TestHubShutdownSavesDraft(t *testing.T) {
	f := newScanFixture(t, scan.ModeLabel, 2)
	m := New(Options{Source: f.src, Store: f.st, CampaignID: f.camp, Scanner: "ana", Tier: render.TierMono})
	d := NewDashboard(DashboardOptions{Store: f.st, CampaignID: f.camp, Numbers: NumbersOptions{Bootstrap: -1}})
	h := NewHub(HubOptions{}, HubPage{"scanning", m}, HubPage{"dashboard", d})
	hubSend(t, h, tea.WindowSizeMsg{Width: 160, Height: 48})
	run(t, h, h.Init())
	if m.sess == nil || !m.sess.hasPass {
		t.Fatalf("no pass open: err %v", m.err)
	}
	pass := m.sess.pass.ID
	hubKeys(t, h, "ctrl+g", "ctrl+g", "2") // to the dashboard and back, then a class
	if !hubSend(t, h, ShutdownMsg{}) {
		t.Fatal("shutdown did not end the hub")
	}
	if p := f.pass(t, pass); p.State != scan.PassDraft || p.Label.Class != "nue-cc" {
		t.Errorf("after shutdown the pass is %s with class %q, want a nue-cc draft", p.State, p.Label.Class)
	}
}
