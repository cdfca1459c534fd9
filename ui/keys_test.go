package ui

import (
	"math"
	"strings"
	"testing"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
)

func TestLoadKeyMap(t *testing.T) {
	for _, tc := range []struct {
		name, toml, err string
		check           func(KeyMap) bool
	}{
		{"remap", `zoom_in = ["+", "i"]` + "\ninstructions = [\"F1\"]", "", func(k KeyMap) bool {
			return key.Matches(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("i")}, k.ZoomIn) && k.ZoomIn.Help().Key == "+/i"
		}},
		{"empty file", "", "", func(k KeyMap) bool { return k.Submit.Keys()[0] == "ctrl+s" }},
		{"unknown name", `zoom = ["+"]`, `unknown binding "zoom"`, nil},
		{"no keys", `quit = []`, "has no keys", nil},
		{"bound twice", `undo = ["v"]`, `key "v" is bound to both`, nil},
		{"not toml", `zoom_in = [`, "read key map", nil},
		{"wrong type", `zoom_in = "+"`, "read key map", nil},
	} {
		t.Run(tc.name, func(t *testing.T) {
			km, err := LoadKeyMap(strings.NewReader(tc.toml), "keys.toml")
			if tc.err != "" {
				if err == nil || !strings.Contains(err.Error(), tc.err) || !strings.Contains(err.Error(), "keys.toml") {
					t.Fatalf("error %v, want one naming keys.toml and %q", err, tc.err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if !tc.check(km) {
				t.Errorf("key map not as expected")
			}
		})
	}
}

func TestSchemaCollision(t *testing.T) {
	km := DefaultKeyMap()
	s := scan.DefaultSchema()
	s.Classes[0].Hotkey = "v" // the vertex key
	err := km.CheckSchema(s)
	if err == nil || !strings.Contains(err.Error(), `"v"`) || !strings.Contains(err.Error(), "vertex") {
		t.Errorf("collision error %v, want one naming the key and the binding", err)
	}
}

func FuzzLoadKeyMap(f *testing.F) {
	for _, s := range []string{`zoom_in = ["+"]`, ``, `quit = []`, `[x]`, "left = [\"\x1b\"]", `help = ["?", "?"]`} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		km, err := LoadKeyMap(strings.NewReader(s), "fuzz")
		if err != nil {
			return
		}
		if err := km.checkUnique(); err != nil {
			t.Errorf("accepted a key map with a duplicate: %v", err)
		}
	})
}

// TestMouse: a click moves the cursor to the clicked plane and cell, the
// wheel zooms there, a drag pans.
func TestMouse(t *testing.T) {
	m := newViewModel(t, newSynthSource(1, 400), 160, 48, render.TierMono)
	v := m.pv
	p, _ := v.paneOf(2)
	x, y := p.x+5, 1+p.y+7 // screen: the plane area starts below the title
	send(t, m, tea.MouseMsg{X: x, Y: y, Action: tea.MouseActionPress, Button: tea.MouseButtonLeft})
	if col, row := v.cellOf(2, v.cur.Wire, v.cur.Tick); v.cur.Plane != 2 || col != 5 || row != 7 {
		t.Fatalf("click put the cursor on plane %d cell (%d,%d), want plane 2 (5,7)", v.cur.Plane, col, row)
	}
	tick0 := v.win.Tick0
	send(t, m, tea.MouseMsg{X: x, Y: y + 3, Action: tea.MouseActionMotion, Button: tea.MouseButtonLeft})
	send(t, m, tea.MouseMsg{X: x, Y: y + 3, Action: tea.MouseActionRelease})
	if v.win.Tick0 >= tick0 {
		t.Errorf("dragging down did not pan to earlier ticks: tick0 %g, was %g", v.win.Tick0, tick0)
	}
	wpp := v.win.WPP[2]
	send(t, m, tea.MouseMsg{X: x, Y: y, Action: tea.MouseActionPress, Button: tea.MouseButtonWheelUp})
	if v.win.WPP[2] >= wpp {
		t.Errorf("wheel up did not zoom in: %g wires per pixel, was %g", v.win.WPP[2], wpp)
	}
}

// TestPrefetch: showing an event loads the next one in the background.
func TestPrefetch(t *testing.T) {
	src := newSynthSource(3, 200)
	m := newViewModel(t, src, 100, 30, render.TierMono)
	if _, ok := m.cache[src.ids[1]]; !ok {
		t.Fatal("the next event was not prefetched")
	}
	keys(t, m, "]")
	if m.ids[m.cur] != src.ids[1] {
		t.Fatalf("showing %s after ], want %s", m.ids[m.cur], src.ids[1])
	}
	if _, ok := m.cache[src.ids[2]]; !ok {
		t.Error("the event after the next was not prefetched")
	}
}

// TestEventList opens the list, moves down twice and opens that event.
func TestEventList(t *testing.T) {
	src := newSynthSource(4, 200)
	m := newViewModel(t, src, 120, 40, render.TierMono)
	keys(t, m, "ctrl+o", "down", "down", "enter")
	if m.showList || m.ids[m.cur] != src.ids[2] {
		t.Errorf("list open %v, showing %s; want the list closed and %s shown", m.showList, m.ids[m.cur], src.ids[2])
	}
}

// TestListKeepsZoom: opening the list over the planes (narrow window) and
// closing it again keeps the zoom.
func TestListKeepsZoom(t *testing.T) {
	m := newViewModel(t, newSynthSource(2, 300), 80, 24, render.TierMono)
	keys(t, m, "+", "+")
	wpp := m.pv.win.WPP[0]
	keys(t, m, "ctrl+o", "esc")
	if got := m.pv.win.WPP[0]; math.Abs(got-wpp) > 1e-9 {
		t.Errorf("after the list: %g wires per pixel, was %g", got, wpp)
	}
}
