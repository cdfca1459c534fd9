package rendertest

import (
	"strings"
	"testing"

	"github.com/gdamore/tcell/v2"
)

// SGR parameters as ECMA-48 and xterm's ctlseqs define them: 1 bold, 4
// underline, 7 reverse, 22/24/27 their resets, 30–37/90–97 and 40–47/
// 100–107 the 16 colours, 38;5;n / 48;5;n the 256 palette, 38;2;r;g;b the
// 24-bit colours, 39/49 the defaults, 0 (or empty) reset all.
func TestShowSGR(t *testing.T) {
	lines := []string{
		"\x1b[1;31;42mA\x1b[22;39;49mB\x1b[38;5;196;48;5;21mC\x1b[mD",
		"\x1b[38;2;1;2;3;7mE\x1b[27;4;95;103mF\x1b[0mG",
	}
	s, err := Show(lines, 5, 2)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	cases := []struct {
		x, y   int
		r      rune
		fg, bg tcell.Color
		attr   tcell.AttrMask
	}{
		{0, 0, 'A', tcell.PaletteColor(1), tcell.PaletteColor(2), tcell.AttrBold},
		{1, 0, 'B', tcell.ColorDefault, tcell.ColorDefault, 0},
		{2, 0, 'C', tcell.PaletteColor(196), tcell.PaletteColor(21), 0},
		{3, 0, 'D', tcell.ColorDefault, tcell.ColorDefault, 0},
		{0, 1, 'E', tcell.NewRGBColor(1, 2, 3), tcell.ColorDefault, tcell.AttrReverse},
		{1, 1, 'F', tcell.PaletteColor(13), tcell.PaletteColor(11), tcell.AttrUnderline},
		{2, 1, 'G', tcell.ColorDefault, tcell.ColorDefault, 0},
	}
	for _, c := range cases {
		got := s.At(c.x, c.y)
		if got.Rune != c.r || got.FG != c.fg || got.BG != c.bg || got.Attr != c.attr {
			t.Errorf("(%d,%d) = %+v, want %q %v/%v attr %v", c.x, c.y, got, c.r, c.fg, c.bg, c.attr)
		}
	}
	if got := s.Text(0); got != "ABCD " {
		t.Errorf("row 0 text %q", got)
	}
}

func TestShowRejects(t *testing.T) {
	for _, bad := range []string{"a\x1b[5mb", "\x1b]0;x\x07", "a\tb", "\x1b[38;5mx", "\x1b[31"} {
		if _, err := Show([]string{bad}, 10, 1); err == nil {
			t.Errorf("Show(%q) accepted it", bad)
		}
	}
}

func FuzzShow(f *testing.F) {
	for _, s := range []string{"\x1b[1;38;5;200mx\x1b[m", "\x1b[38;2;1;2;3m▀", "plain", "\x1b[", "\x1b[;;m"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		scr, err := Show(strings.Split(s, "\n"), 8, 3)
		if err == nil {
			scr.Close()
		}
	})
}
