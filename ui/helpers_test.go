package ui

import (
	"reflect"
	"testing"

	tea "github.com/charmbracelet/bubbletea"

	"github.com/tpcscan/tpcscan/render"
)

// run executes a command and feeds its messages back into the model,
// depth first, the way the bubbletea runtime would (without concurrency).
// Quit commands are recorded, not obeyed.
func run(t testing.TB, m tea.Model, cmd tea.Cmd) (quit bool) {
	t.Helper()
	if cmd == nil {
		return false
	}
	msg := cmd()
	switch msg := msg.(type) {
	case nil:
		return false
	case tea.QuitMsg:
		return true
	case tea.BatchMsg:
		for _, c := range msg {
			quit = run(t, m, c) || quit
		}
		return quit
	}
	// tea.Sequence's message type is unexported: run its commands in order.
	if v := reflect.ValueOf(msg); v.Kind() == reflect.Slice && v.Type().Elem() == reflect.TypeOf(tea.Cmd(nil)) {
		for i := range v.Len() {
			c, _ := v.Index(i).Interface().(tea.Cmd)
			quit = run(t, m, c) || quit
		}
		return quit
	}
	_, next := m.Update(msg)
	return run(t, m, next) || quit
}

// send delivers one message and runs what it starts.
func send(t testing.TB, m *Model, msg tea.Msg) bool {
	t.Helper()
	_, cmd := m.Update(msg)
	return run(t, m, cmd)
}

// keys sends key presses given as bubbletea key names.
func keys(t testing.TB, m *Model, names ...string) {
	t.Helper()
	for _, n := range names {
		send(t, m, keyMsg(n))
	}
}

func keyMsg(name string) tea.KeyMsg {
	for kt, s := range keyNames() {
		if s == name {
			return tea.KeyMsg{Type: kt}
		}
	}
	return tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune(name)}
}

// keyNames maps the special key types the tests use to their names.
func keyNames() map[tea.KeyType]string {
	out := map[tea.KeyType]string{}
	for _, kt := range []tea.KeyType{tea.KeyLeft, tea.KeyRight, tea.KeyUp, tea.KeyDown, tea.KeyShiftLeft,
		tea.KeyShiftRight, tea.KeyShiftUp, tea.KeyShiftDown, tea.KeyCtrlLeft, tea.KeyCtrlRight, tea.KeyPgUp,
		tea.KeyPgDown, tea.KeyTab, tea.KeyShiftTab, tea.KeyEnter, tea.KeyEsc, tea.KeyCtrlC, tea.KeyCtrlS,
		tea.KeyCtrlK, tea.KeyCtrlB, tea.KeyCtrlO, tea.KeyCtrlR, tea.KeyBackspace} {
		out[kt] = tea.Key{Type: kt}.String()
	}
	return out
}

// newViewModel opens the display on synthetic events at w×h.
func newViewModel(t testing.TB, src Source, w, h int, tier render.Tier) *Model {
	t.Helper()
	m := New(Options{Source: src, Tier: tier})
	send(t, m, tea.WindowSizeMsg{Width: w, Height: h})
	run(t, m, m.Init())
	if m.pv.prep == nil {
		t.Fatalf("no event shown after Init (err %v)", m.err)
	}
	return m
}

func teaSize(w, h int) tea.WindowSizeMsg { return tea.WindowSizeMsg{Width: w, Height: h} }
