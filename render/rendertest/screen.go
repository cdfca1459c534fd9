// Package rendertest shows render output on tcell's simulation screen, so
// tests can inspect cells and colours as a terminal would show them. It
// reads the ANSI text Lines produces (SGR colours and attributes, UTF-8
// runes), not the canvas, so what it checks is what goes over the wire.
package rendertest

import (
	"fmt"
	"strconv"
	"strings"
	"unicode/utf8"

	"github.com/gdamore/tcell/v2"
	"github.com/mattn/go-runewidth"
)

// Cell is one cell of the simulated terminal.
type Cell struct {
	Rune   rune
	FG, BG tcell.Color // tcell.ColorDefault for the terminal default
	Attr   tcell.AttrMask
}

// Screen is a simulated terminal holding some lines of ANSI text.
type Screen struct {
	sim  tcell.SimulationScreen
	W, H int
}

// Show writes lines (each one terminal row, as Canvas.Lines returns them)
// onto a w×h simulation screen. Each line starts with the default style;
// an escape sequence it does not understand is an error.
func Show(lines []string, w, h int) (*Screen, error) {
	sim := tcell.NewSimulationScreen("UTF-8")
	if err := sim.Init(); err != nil {
		return nil, fmt.Errorf("simulation screen: %w", err)
	}
	sim.SetSize(w, h)
	for y, line := range lines {
		if y >= h {
			break
		}
		if err := showLine(sim, y, line); err != nil {
			return nil, fmt.Errorf("line %d: %w", y, err)
		}
	}
	sim.Show()
	return &Screen{sim: sim, W: w, H: h}, nil
}

// Close releases the simulation screen.
func (s *Screen) Close() { s.sim.Fini() }

// At returns the cell at (x, y) as the terminal shows it.
func (s *Screen) At(x, y int) Cell {
	cells, w, _ := s.sim.GetContents()
	sc := cells[y*w+x]
	fg, bg, attr := sc.Style.Decompose()
	r := ' ' // a cell never written shows blank
	if len(sc.Bytes) > 0 {
		r, _ = utf8.DecodeRune(sc.Bytes)
	}
	return Cell{Rune: r, FG: fg, BG: bg, Attr: attr}
}

// Text returns row y's runes.
func (s *Screen) Text(y int) string {
	var b strings.Builder
	for x := range s.W {
		b.WriteRune(s.At(x, y).Rune)
	}
	return b.String()
}

func showLine(sim tcell.SimulationScreen, y int, line string) error {
	style := tcell.StyleDefault
	x := 0
	for i := 0; i < len(line); {
		if line[i] == 0x1b {
			end := strings.IndexByte(line[i:], 'm')
			if !strings.HasPrefix(line[i:], "\x1b[") || end < 0 {
				return fmt.Errorf("unsupported escape at byte %d: %q", i, line[i:min(len(line), i+12)])
			}
			var err error
			if style, err = applySGR(style, line[i+2:i+end]); err != nil {
				return fmt.Errorf("byte %d: %w", i, err)
			}
			i += end + 1
			continue
		}
		r, n := utf8.DecodeRuneInString(line[i:])
		if r < ' ' || r == 0x7f {
			return fmt.Errorf("control character %U at byte %d", r, i)
		}
		sim.SetContent(x, y, r, nil, style)
		x += max(runewidth.RuneWidth(r), 1)
		i += n
	}
	return nil
}

// applySGR applies one Select Graphic Rendition parameter list (ECMA-48;
// 38/48;5;n and 38/48;2;r;g;b as xterm defines them).
func applySGR(st tcell.Style, params string) (tcell.Style, error) {
	var ps []int
	for _, f := range strings.Split(params, ";") {
		if f == "" {
			ps = append(ps, 0)
			continue
		}
		n, err := strconv.Atoi(f)
		if err != nil {
			return st, fmt.Errorf("SGR %q: %w", params, err)
		}
		ps = append(ps, n)
	}
	for i := 0; i < len(ps); i++ {
		switch p := ps[i]; {
		case p == 0:
			st = tcell.StyleDefault
		case p == 1:
			st = st.Bold(true)
		case p == 4:
			st = st.Underline(true)
		case p == 7:
			st = st.Reverse(true)
		case p == 22:
			st = st.Bold(false)
		case p == 24:
			st = st.Underline(false)
		case p == 27:
			st = st.Reverse(false)
		case p >= 30 && p <= 37:
			st = st.Foreground(tcell.PaletteColor(p - 30))
		case p >= 90 && p <= 97:
			st = st.Foreground(tcell.PaletteColor(p - 90 + 8))
		case p >= 40 && p <= 47:
			st = st.Background(tcell.PaletteColor(p - 40))
		case p >= 100 && p <= 107:
			st = st.Background(tcell.PaletteColor(p - 100 + 8))
		case p == 39:
			st = st.Foreground(tcell.ColorDefault)
		case p == 49:
			st = st.Background(tcell.ColorDefault)
		case p == 38 || p == 48:
			c, used, err := extColor(ps[i+1:])
			if err != nil {
				return st, fmt.Errorf("SGR %q: %w", params, err)
			}
			if p == 38 {
				st = st.Foreground(c)
			} else {
				st = st.Background(c)
			}
			i += used
		default:
			return st, fmt.Errorf("SGR %q: parameter %d not supported", params, p)
		}
	}
	return st, nil
}

func extColor(ps []int) (tcell.Color, int, error) {
	switch {
	case len(ps) >= 2 && ps[0] == 5 && ps[1] >= 0 && ps[1] < 256:
		return tcell.PaletteColor(ps[1]), 2, nil
	case len(ps) >= 4 && ps[0] == 2:
		return tcell.NewRGBColor(int32(ps[1]), int32(ps[2]), int32(ps[3])), 4, nil
	}
	return tcell.ColorDefault, 0, fmt.Errorf("bad extended colour %v", ps)
}
