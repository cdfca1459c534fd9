package ui

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"github.com/BurntSushi/toml"
	"github.com/charmbracelet/bubbles/key"

	"github.com/tpcscan/tpcscan/scan"
)

// KeyMap holds every key binding of the station. Help is rendered from it,
// so it is the only list of keys; a TOML file can remap any binding by its
// config name (see bindings).
type KeyMap struct {
	// Display.
	Left, Right, Up, Down                     key.Binding
	FastLeft, FastRight, FastUp, FastDown     key.Binding
	PanLeft, PanRight, PanEarlier, PanLater   key.Binding
	ZoomIn, ZoomOut, ZoomBox, Fit             key.Binding
	NextPlane, PrevPlane, Enlarge             key.Binding
	Ruler, Reduction, LogScale, NextScale     key.Binding
	NextEvent, PrevEvent, EventList, ListPick key.Binding
	Help, Quit                                key.Binding

	// Scanning.
	Vertex, Box, Track, Comment key.Binding
	Undo, Redo, Submit, Skip    key.Binding
	Back, Instructions, Agree   key.Binding
	Disagree, Cancel            key.Binding
}

func bind(desc string, keys ...string) key.Binding {
	return key.NewBinding(key.WithKeys(keys...), key.WithHelp(helpKeys(keys), desc))
}

// helpKeys is the short key label shown in help: the first two keys.
func helpKeys(keys []string) string {
	if len(keys) > 2 {
		keys = keys[:2]
	}
	return strings.Join(keys, "/")
}

// DefaultKeyMap returns tpcscan's own key map. Display and scanning keys
// are arrows, punctuation, control keys and lower-case letters; schema
// hotkeys (digits for classes, capitals for particles, flags and
// confidence in the default schema) are bound from the schema itself and
// checked against this map (CheckSchema).
func DefaultKeyMap() KeyMap {
	return KeyMap{
		Left:       bind("cursor ←", "left"),
		Right:      bind("cursor →", "right"),
		Up:         bind("cursor earlier", "up"),
		Down:       bind("cursor later", "down"),
		FastLeft:   bind("cursor ← ×8", "shift+left"),
		FastRight:  bind("cursor → ×8", "shift+right"),
		FastUp:     bind("cursor ↑ ×8", "shift+up"),
		FastDown:   bind("cursor ↓ ×8", "shift+down"),
		PanLeft:    bind("pan to lower wires", "<", "ctrl+left"),
		PanRight:   bind("pan to higher wires", ">", "ctrl+right"),
		PanEarlier: bind("pan to earlier ticks", "pgup", "ctrl+up"),
		PanLater:   bind("pan to later ticks", "pgdown", "ctrl+down"),
		ZoomIn:     bind("zoom in at cursor", "+", "="),
		ZoomOut:    bind("zoom out at cursor", "-", "_"),
		ZoomBox:    bind("zoom to box (2 corners)", "z"),
		Fit:        bind("show whole planes", "0"),
		NextPlane:  bind("next plane", "tab"),
		PrevPlane:  bind("previous plane", "shift+tab"),
		Enlarge:    bind("one plane / three", "o"),
		Ruler:      bind("ruler point", "r"),
		Reduction:  bind("block max / sum", "#"),
		LogScale:   bind("linear / log charge", "*"),
		NextScale:  bind("next colour scale", "%"),
		NextEvent:  bind("next event", "]"),
		PrevEvent:  bind("previous event", "["),
		EventList:  bind("event list", "ctrl+o"),
		ListPick:   bind("open event", "enter"),
		Help:       bind("keys", "?"),
		Quit:       bind("quit (saves)", "ctrl+c", "ctrl+q"),

		Vertex:       bind("vertex at cursor", "v"),
		Box:          bind("box corner", "b"),
		Track:        bind("track point (end: particle key)", "t"),
		Comment:      bind("comment", "c"),
		Undo:         bind("undo", "u"),
		Redo:         bind("redo", "ctrl+r"),
		Submit:       bind("submit", "ctrl+s"),
		Skip:         bind("skip with reason", "ctrl+k"),
		Back:         bind("previous pass", "ctrl+b"),
		Instructions: bind("instructions", "i"),
		Agree:        bind("agree with selection", "y"),
		Disagree:     bind("disagree with selection", "n"),
		Cancel:       bind("cancel / close", "esc"),
	}
}

// bindings names every binding for the config file.
func (k *KeyMap) bindings() map[string]*key.Binding {
	return map[string]*key.Binding{
		"left": &k.Left, "right": &k.Right, "up": &k.Up, "down": &k.Down,
		"fast_left": &k.FastLeft, "fast_right": &k.FastRight, "fast_up": &k.FastUp, "fast_down": &k.FastDown,
		"pan_left": &k.PanLeft, "pan_right": &k.PanRight, "pan_earlier": &k.PanEarlier, "pan_later": &k.PanLater,
		"zoom_in": &k.ZoomIn, "zoom_out": &k.ZoomOut, "zoom_box": &k.ZoomBox, "fit": &k.Fit,
		"next_plane": &k.NextPlane, "prev_plane": &k.PrevPlane, "enlarge": &k.Enlarge,
		"ruler": &k.Ruler, "reduction": &k.Reduction, "log_scale": &k.LogScale, "next_scale": &k.NextScale,
		"next_event": &k.NextEvent, "prev_event": &k.PrevEvent, "event_list": &k.EventList, "list_pick": &k.ListPick,
		"help": &k.Help, "quit": &k.Quit,
		"vertex": &k.Vertex, "box": &k.Box, "track": &k.Track, "comment": &k.Comment,
		"undo": &k.Undo, "redo": &k.Redo, "submit": &k.Submit, "skip": &k.Skip,
		"back": &k.Back, "instructions": &k.Instructions, "agree": &k.Agree, "disagree": &k.Disagree,
		"cancel": &k.Cancel,
	}
}

// LoadKeyMap reads key overrides in TOML from r on top of the defaults:
// each line names a binding and its keys, e.g. `zoom_in = ["+", "i"]`.
// Unknown names, empty key lists and a key bound twice are errors; name is
// used in them.
func LoadKeyMap(r io.Reader, name string) (KeyMap, error) {
	km := DefaultKeyMap()
	var over map[string][]string
	if _, err := toml.NewDecoder(r).Decode(&over); err != nil {
		return km, fmt.Errorf("read key map %s: %w", name, err)
	}
	bs := km.bindings()
	for n, keys := range over {
		b, ok := bs[n]
		if !ok {
			return km, fmt.Errorf("read key map %s: unknown binding %q (known: %s)", name, n, strings.Join(bindingNames(bs), ", "))
		}
		if len(keys) == 0 {
			return km, fmt.Errorf("read key map %s: binding %q has no keys", name, n)
		}
		b.SetKeys(keys...)
		b.SetHelp(helpKeys(keys), b.Help().Desc)
	}
	if err := km.checkUnique(); err != nil {
		return km, fmt.Errorf("read key map %s: %w", name, err)
	}
	return km, nil
}

// LoadKeyMapFile reads a key map file; a missing file at the default
// location is not an error (optional reports whether the path was given
// explicitly).
func LoadKeyMapFile(path string, optional bool) (KeyMap, error) {
	f, err := os.Open(path)
	if err != nil {
		if optional && os.IsNotExist(err) {
			return DefaultKeyMap(), nil
		}
		return DefaultKeyMap(), fmt.Errorf("read key map: %w", err)
	}
	defer f.Close()
	return LoadKeyMap(f, path)
}

// DefaultKeyMapPath is $XDG_CONFIG_HOME/tpcscan/keys.toml (or the
// platform's config folder).
func DefaultKeyMapPath() string {
	dir, err := os.UserConfigDir()
	if err != nil {
		return ""
	}
	return filepath.Join(dir, "tpcscan", "keys.toml")
}

func bindingNames(bs map[string]*key.Binding) []string {
	names := make([]string, 0, len(bs))
	for n := range bs {
		names = append(names, n)
	}
	sort.Strings(names)
	return names
}

// checkUnique reports a key bound to two actions. Verify-mode keys and
// list keys share keys with no other mode-active binding, so all are
// checked together except the list's enter.
func (k *KeyMap) checkUnique() error {
	bs := k.bindings()
	owner := map[string]string{}
	for _, n := range bindingNames(bs) {
		if n == "list_pick" {
			continue
		}
		for _, key := range bs[n].Keys() {
			if o, dup := owner[key]; dup {
				return fmt.Errorf("key %q is bound to both %s and %s", key, o, n)
			}
			owner[key] = n
		}
	}
	return nil
}

// Collides returns the binding names that already use the key s, so that
// schema hotkeys can be checked against the station's keys.
func (k *KeyMap) Collides(s string) []string {
	bs := k.bindings()
	var out []string
	for _, n := range bindingNames(bs) {
		if n == "list_pick" {
			continue
		}
		for _, key := range bs[n].Keys() {
			if key == s {
				out = append(out, n)
			}
		}
	}
	return out
}

// CheckSchema reports schema hotkeys that the key map already uses, so a
// campaign's schema cannot shadow a display key (or the other way round).
func (k *KeyMap) CheckSchema(s scan.Schema) error {
	var errs []error
	for _, f := range [][]scan.Choice{s.Classes, s.Particles, s.Flags, s.Confidence} {
		for _, c := range f {
			if c.Hotkey == "" {
				continue
			}
			if names := k.Collides(c.Hotkey); len(names) > 0 {
				errs = append(errs, fmt.Errorf("schema hotkey %q (%s) is also the %s key; remap one of them", c.Hotkey, c.Name, strings.Join(names, ", ")))
			}
		}
	}
	return errors.Join(errs...)
}
