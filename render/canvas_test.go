package render

import (
	"bytes"
	"fmt"
	"image/color"
	"image/png"
	"math"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/charmbracelet/x/exp/golden"
	"github.com/gdamore/tcell/v2"

	"github.com/tpcscan/tpcscan/render/rendertest"
)

var allTiers = []Tier{TierTrueColor, Tier256, Tier16, TierMono, TierBraille}

// smallScene paints a cols×rows canvas: a charge gradient, a diagonal
// track, a region outside the image (NaN) and a bold label.
func smallScene(t Tier, cols, rows int) *Canvas {
	px, py := PixelsPerCell(t)
	g := &Grid{W: cols * px, H: rows * py, Pix: make([]float32, cols*px*rows*py)}
	for y := range g.H {
		for x := range g.W {
			v := float32(0)
			switch fx, fy := float64(x)/float64(g.W), float64(y)/float64(g.H); {
			case fx > 0.85:
				v = float32(math.NaN())
			case math.Abs(fy-fx) < 0.08:
				v = 100
			case fy > 0.75:
				v = float32(fx * 100)
			}
			g.Pix[y*g.W+x] = v
		}
	}
	c := NewCanvas(cols, rows)
	Paint(c, 0, 0, g, Scales()[0], Range{Lo: 5, Hi: 100}, t)
	c.Text(1, 0, "U 12", color.RGBA{0xff, 0xff, 0xff, 0xff}, nil, AttrBold)
	return c
}

func TestLinesGolden(t *testing.T) {
	for _, size := range [][2]int{{16, 8}, {7, 3}, {40, 12}} {
		for _, tier := range allTiers {
			name := tier.String()
			if size != [2]int{16, 8} {
				name = fmt.Sprintf("%s-%dx%d", tier, size[0], size[1])
			}
			t.Run(name, func(t *testing.T) {
				golden.RequireEqual(t, smallScene(tier, size[0], size[1]).Frame(tier)+"\n")
			})
		}
	}
}

// shown is a cell's two pixel colours as a terminal displays them.
func shown(c rendertest.Cell) (top, bottom tcell.Color) {
	switch c.Rune {
	case upperHalf:
		return c.FG, c.BG
	case lowerHalf:
		return c.BG, c.FG
	}
	return c.BG, c.BG
}

// Lines must show on a terminal exactly what the canvas holds, whatever
// runs it coalesced and half blocks it flipped. tcell's simulation screen,
// fed through an SGR parser, plays the terminal.
func TestLinesAsATerminalShowsThem(t *testing.T) {
	img := synthPlane(300, 900, 9)
	rng := AutoRange(img, DefaultLoPct, DefaultHiPct)
	for _, tier := range allTiers {
		t.Run(tier.String(), func(t *testing.T) {
			px, py := PixelsPerCell(tier)
			c := NewCanvas(60, 20)
			g := Grid{W: 50 * px, H: 18 * py}
			NewPyramid(img).Sample(&g, Window{-20, -40, 300.0 / 40 / float64(px), 900.0 / 16 / float64(py)}, ReduceMax)
			Paint(c, 2, 1, &g, Scales()[1], rng, tier)
			c.Text(0, 0, "plane V · tick 4521", color.RGBA{200, 180, 40, 255}, NewSwatch(color.RGBA{10, 10, 60, 255}), AttrUnderline)
			c.Text(40, 19, "rev", nil, nil, AttrReverse|AttrBold)
			scr, err := rendertest.Show(c.Lines(tier), c.W, c.H)
			if err != nil {
				t.Fatal(err)
			}
			defer scr.Close()
			for y := range c.H {
				for x := range c.W {
					checkCell(t, tier, c.At(x, y), scr.At(x, y), x, y)
				}
			}
		})
	}
}

func checkCell(t *testing.T, tier Tier, want Cell, got rendertest.Cell, x, y int) {
	t.Helper()
	wantAttr := tcell.AttrNone
	if want.Attr&AttrBold != 0 {
		wantAttr |= tcell.AttrBold
	}
	if want.Attr&AttrUnderline != 0 {
		wantAttr |= tcell.AttrUnderline
	}
	if want.Attr&AttrReverse != 0 {
		wantAttr |= tcell.AttrReverse
	}
	if got.Attr != wantAttr {
		t.Fatalf("(%d,%d): attributes %v, want %v", x, y, got.Attr, wantAttr)
	}
	if !tier.HasColor() {
		if got.Rune != want.Rune {
			t.Fatalf("(%d,%d): rune %q, want %q", x, y, got.Rune, want.Rune)
		}
		if got.FG != tcell.ColorDefault || got.BG != tcell.ColorDefault {
			t.Fatalf("(%d,%d): colours %v/%v in a tier without colour", x, y, got.FG, got.BG)
		}
		return
	}
	fg, bg := termColor(want.FG, tier), termColor(want.BG, tier)
	plain := want.Attr&(AttrReverse|AttrUnderline) == 0 // fg of a space unseen
	if want.Rune == upperHalf && plain {
		top, bot := shown(got)
		if top != fg || bot != bg {
			t.Fatalf("(%d,%d): halves %v/%v, want %v/%v", x, y, top, bot, fg, bg)
		}
		return
	}
	if got.Rune != want.Rune || got.BG != bg || ((want.Rune != ' ' || !plain) && got.FG != fg) {
		t.Fatalf("(%d,%d): %q %v/%v, want %q %v/%v", x, y, got.Rune, got.FG, got.BG, want.Rune, fg, bg)
	}
}

// A full redraw of the three-plane view must fit a slow link (issue 4:
// ≤ 64 KB in the 256-colour tier for a typical event). The event is the
// full-size synthetic one: noise under the range's low end and a few
// tracks, like a demo neutrino event.
func TestFullRedrawBytes(t *testing.T) {
	if testing.Short() {
		t.Skip("builds a full-size event")
	}
	f := newFrame(synthEvent())
	for _, tier := range allTiers {
		for _, z := range benchZooms {
			n := linesBytes(f.draw(z.z, tier))
			t.Logf("%-9s %-8s %6d bytes", tier, z.name, n)
			if tier == Tier256 && n > 64<<10 {
				t.Errorf("256 colours, %s: full redraw %d bytes > 64 KB", z.name, n)
			}
		}
	}
}

// Runs of one colour cost one SGR sequence: a canvas in one background
// colour is one sequence and a reset per line.
func TestLinesCoalesce(t *testing.T) {
	c := NewCanvas(100, 3)
	sw := Scales()[0].Swatch(0)
	for i := range c.Cells {
		c.Cells[i] = Cell{Rune: upperHalf, FG: sw, BG: sw}
	}
	for _, l := range c.Lines(Tier256) {
		if want := "\x1b[48;5;" + itoa(sw.Index(Tier256)) + "m" + strings.Repeat(" ", 100) + "\x1b[m"; l != want {
			t.Fatalf("line %q, want %q", l, want)
		}
	}
	blank := NewCanvas(5, 2)
	for _, l := range blank.Lines(TierTrueColor) {
		if l != "     " {
			t.Errorf("blank line %q: default cells need no escapes", l)
		}
	}
}

func itoa(i int) string { return strconv.Itoa(i) }

func TestTextStripsControls(t *testing.T) {
	c := NewCanvas(12, 1)
	end := c.Text(0, 0, "a\x1b[31mb\tc\u200bd\u0007", nil, nil, 0)
	if got := rowText(c, 0); got != "a[31mbcd    " {
		t.Errorf("row %q, want control characters and zero-width runes dropped", got)
	}
	if end != 8 {
		t.Errorf("Text returned column %d, want 8", end)
	}
	wide := NewCanvas(5, 1)
	wide.Text(0, 0, "事象x", nil, nil, 0)
	lines := wide.Lines(TierMono)
	if lines[0] != "事象x" {
		t.Errorf("wide runes: %q, want 事象x (two cells each)", lines[0])
	}
	edge := NewCanvas(3, 1)
	edge.Text(1, 0, "a事", nil, nil, 0)
	if got := edge.Lines(TierMono)[0]; got != " a " {
		t.Errorf("wide rune at the edge: %q, want it replaced by a space", got)
	}
	c.Text(-3, 0, "xyzw", nil, nil, 0) // starts left of the canvas
	c.Text(5, 7, "out", nil, nil, 0)   // below it
	if got := rowText(c, 0); got[0] != 'w' {
		t.Errorf("clipped text: row %q, want 'w' at column 0", got)
	}
}

func rowText(c *Canvas, y int) string {
	var b strings.Builder
	for x := range c.W {
		b.WriteRune(c.At(x, y).Rune)
	}
	return b.String()
}

func TestCanvasBadSizes(t *testing.T) {
	for _, size := range [][2]int{{0, 0}, {-3, 4}, {4, -3}} {
		c := NewCanvas(size[0], size[1])
		c.Set(0, 0, Cell{Rune: 'x'})
		c.Text(0, 0, "abc", nil, nil, 0)
		Paint(c, 0, 0, &Grid{W: 2, H: 2, Pix: make([]float32, 4)}, Scale{}, Range{0, 1, false}, Tier256)
		Legend(c, 0, 0, 10, Scale{}, Range{0, 1, false}, Tier256, 1)
		if lines := c.Lines(Tier256); len(lines) != max(size[1], 0) || (len(lines) > 0 && lines[0] != "") {
			t.Errorf("%v: lines %q", size, lines)
		}
		if (c.At(0, 0) != Cell{}) {
			t.Errorf("%v: At outside returned %v", size, c.At(0, 0))
		}
		if err := c.WritePNG(&bytes.Buffer{}); err == nil {
			t.Errorf("%v: WritePNG of an empty canvas did not fail", size)
		}
	}
	c := NewCanvas(4, 4)
	for _, g := range []*Grid{nil, {}, {W: 3, H: 3, Pix: make([]float32, 2)}, {W: 1, H: 1, Pix: []float32{1}}} {
		Paint(c, 0, 0, g, Scale{}, Range{0, 1, false}, Tier256) // must not panic
	}
	Paint(c, 10, 10, &Grid{W: 2, H: 4, Pix: make([]float32, 8)}, Scale{}, Range{0, 1, false}, Tier256)
	Paint(c, -10, -10, &Grid{W: 2, H: 4, Pix: make([]float32, 8)}, Scale{}, Range{0, 1, false}, Tier256)
	if got := rowText(c, 0); got != "    " {
		t.Errorf("painting off the canvas changed it: %q", got)
	}
}

// The braille dot numbering is Unicode's (Braille Patterns block,
// U+2800–U+28FF: dots 1–3 down the left column are bits 0–2, dots 4–6 down
// the right bits 3–5, dots 7 and 8 bits 6 and 7).
func TestBrailleDots(t *testing.T) {
	cases := []struct {
		dx, dy int
		want   rune
	}{{0, 0, '⠁'}, {0, 1, '⠂'}, {0, 2, '⠄'}, {1, 0, '⠈'}, {1, 1, '⠐'}, {1, 2, '⠠'}, {0, 3, '⡀'}, {1, 3, '⢀'}}
	for _, c := range cases {
		g := &Grid{W: 2, H: 4, Pix: make([]float32, 8)}
		g.Pix[c.dy*2+c.dx] = 10
		cv := NewCanvas(1, 1)
		Paint(cv, 0, 0, g, Scale{}, Range{Lo: 1, Hi: 10}, TierBraille)
		if got := cv.At(0, 0).Rune; got != c.want {
			t.Errorf("dot (%d,%d): %q, want %q", c.dx, c.dy, got, c.want)
		}
	}
	g := &Grid{W: 2, H: 4, Pix: []float32{9, 9, 9, 9, 9, 9, 9, 9}}
	cv := NewCanvas(1, 1)
	Paint(cv, 0, 0, g, Scale{}, Range{Lo: 1, Hi: 10}, TierBraille)
	if got := cv.At(0, 0).Rune; got != '⣿' {
		t.Errorf("all dots: %q, want ⣿", got)
	}
}

func TestMonoRampIsMonotone(t *testing.T) {
	g := &Grid{W: 64, H: 1, Pix: make([]float32, 64)}
	for i := range g.Pix {
		g.Pix[i] = float32(i)
	}
	c := NewCanvas(64, 1)
	Paint(c, 0, 0, g, Scale{}, Range{Lo: 0, Hi: 63}, TierMono)
	prev := -1
	for x := range 64 {
		i := strings.IndexRune(monoRamp, c.At(x, 0).Rune)
		if i < prev {
			t.Fatalf("column %d: ramp step %d after %d", x, i, prev)
		}
		prev = i
	}
	if c.At(0, 0).Rune != ' ' || c.At(1, 0).Rune == ' ' || c.At(63, 0).Rune != '@' {
		t.Errorf("ramp ends %q %q %q: want blank at Lo, ink just above, densest at Hi", c.At(0, 0).Rune, c.At(1, 0).Rune, c.At(63, 0).Rune)
	}
}

func TestLegend(t *testing.T) {
	c := NewCanvas(40, 3)
	rows := Legend(c, 0, 0, 40, Scales()[0], Range{Lo: 15, Hi: 215}, Tier256, 0.005)
	if rows != 3 {
		t.Fatalf("legend drew %d rows, want bar, ADC and MeV", rows)
	}
	adc, mev := rowText(c, 1), rowText(c, 2)
	for _, want := range []string{"15", "100", "ADC"} {
		if !slices.Contains(strings.Fields(adc), want) {
			t.Errorf("ADC row %q lacks %q", adc, want)
		}
	}
	// 100 ADC × 0.005 MeV/ADC = 0.5 MeV.
	for _, want := range []string{"0.075", "0.5", "MeV"} {
		if !slices.Contains(strings.Fields(mev), want) {
			t.Errorf("MeV row %q lacks %q", mev, want)
		}
	}
	if c.At(0, 0).BG != Scales()[0].Swatch(0) || c.At(39, 0).BG != Scales()[0].Swatch(1) {
		t.Error("bar does not run from the scale's low to its high end")
	}
	if n := Legend(NewCanvas(40, 3), 0, 0, 40, Scale{}, Range{Lo: 0, Hi: 1000, Log: true}, TierMono, 0); n != 2 {
		t.Errorf("uncalibrated legend drew %d rows, want 2", n)
	}
	for _, c := range []struct {
		raw, want float64
	}{{0.13, 0.2}, {3, 5}, {7, 10}, {20, 20}, {0, 1}} {
		if got := niceStep(c.raw); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("niceStep(%g) = %g, want %g", c.raw, got, c.want)
		}
	}
}

func TestWritePNG(t *testing.T) {
	c := NewCanvas(3, 2)
	top, bot := color.RGBA{200, 30, 30, 255}, color.RGBA{20, 40, 220, 255}
	c.Set(0, 0, Cell{Rune: upperHalf, FG: top, BG: bot})
	c.Text(1, 1, "A", color.RGBA{255, 255, 0, 255}, nil, 0)
	c.Set(2, 0, Cell{Rune: '⣿', FG: top})
	var buf bytes.Buffer
	if err := c.WritePNG(&buf); err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(&buf)
	if err != nil {
		t.Fatal(err)
	}
	if b := img.Bounds(); b.Dx() != 3*pngCellW || b.Dy() != 2*pngCellH {
		t.Fatalf("size %v, want %d×%d", b, 3*pngCellW, 2*pngCellH)
	}
	same := func(c color.Color, want color.RGBA) bool { return color.RGBAModel.Convert(c) == want }
	if !same(img.At(3, 2), top) || !same(img.At(3, pngCellH-2), bot) {
		t.Errorf("half block drawn %v / %v, want %v / %v", img.At(3, 2), img.At(3, pngCellH-2), top, bot)
	}
	ink := 0
	for y := pngCellH; y < 2*pngCellH; y++ {
		for x := pngCellW; x < 2*pngCellW; x++ {
			if same(img.At(x, y), color.RGBA{255, 255, 0, 255}) {
				ink++
			}
		}
	}
	if ink < 10 {
		t.Errorf("glyph A drew %d pixels", ink)
	}
	if !same(img.At(2*pngCellW+1, 1), top) {
		t.Errorf("braille dot 1 not drawn: %v", img.At(2*pngCellW+1, 1))
	}
}

// Text is where names and comments from files reach the screen: whatever
// the string, the line written must hold no control character, C0 or C1
// (ECMA-48), so it cannot move the cursor or start an escape sequence.
func FuzzCanvasText(f *testing.F) {
	for _, s := range []string{"scanner ada", "\x1b]0;title\x07", "\x9b31m", "事象\u200d\u0301x", "\r\n\t", "\xff\xfe"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		c := NewCanvas(20, 1)
		c.Text(0, 0, s, nil, nil, 0)
		for _, line := range c.Lines(TierMono) {
			for _, r := range line {
				if r < ' ' || (r >= 0x7f && r < 0xa0) {
					t.Fatalf("Text(%q) wrote control %U: %q", s, r, line)
				}
			}
			if w := len([]rune(line)); w > 20 {
				t.Fatalf("Text(%q) wrote %d runes into 20 cells", s, w)
			}
		}
	})
}

// Overlay colours that are not Swatches are searched once per canvas and
// drawn the same every time.
func TestLinesOverlayColours(t *testing.T) {
	c := NewCanvas(4, 1)
	pink := color.RGBA{0xff, 0x9c, 0xf5, 0xff}
	c.Text(0, 0, "ab", pink, nil, 0)
	first := c.Lines(Tier256)[0]
	if want := "\x1b[38;5;" + itoa(NewSwatch(pink).Index(Tier256)) + "mab  \x1b[m"; first != want {
		t.Errorf("overlay line %q, want %q", first, want)
	}
	if again := c.Lines(Tier256)[0]; again != first {
		t.Errorf("second Lines %q differs from first %q", again, first)
	}
	if len(c.quant) != 1 {
		t.Errorf("canvas remembers %d quantised colours, want 1", len(c.quant))
	}
}

func TestASCIIGlyph(t *testing.T) {
	for in, want := range map[rune]string{'a': "a", '→': ">", '←': "<", '↑': "^", '↓': "v", '×': "x", 'ν': "v", '✗': "x", '事': "\ufffd"} {
		if got := asciiGlyph(in); got != want {
			t.Errorf("asciiGlyph(%q) = %q, want %q", in, got, want)
		}
	}
}

func TestHandBuiltCanvasTooFewCells(t *testing.T) {
	c := &Canvas{W: 4, H: 3, Cells: make([]Cell, 5)}
	c.Set(3, 2, Cell{Rune: 'x'})
	c.Text(0, 2, "abc", nil, nil, 0)
	Paint(c, 0, 0, &Grid{W: 4, H: 6, Pix: make([]float32, 24)}, Scale{}, Range{0, 1, false}, Tier256)
	if n := len(c.Lines(Tier256)); n != 1 {
		t.Errorf("Lines wrote %d rows from one whole row of cells", n)
	}
	if err := c.WritePNG(&bytes.Buffer{}); err != nil {
		t.Errorf("WritePNG: %v", err)
	}
	neg := &Canvas{W: -2, H: 3}
	if n := len(neg.Lines(Tier16)); n != 0 {
		t.Errorf("negative width: %d rows", n)
	}
}

// A tier snapshot shows the palette colour the terminal would, in the
// palette's conventional RGB (xterm's table, as tcell holds it).
func TestWritePNGTier(t *testing.T) {
	c := NewCanvas(1, 1)
	sw := Scales()[0].Swatch(0.6)
	c.Set(0, 0, Cell{Rune: ' ', BG: sw})
	for _, tier := range []Tier{TierTrueColor, Tier256, Tier16, TierMono} {
		var buf bytes.Buffer
		if err := c.WritePNGTier(&buf, tier); err != nil {
			t.Fatal(err)
		}
		img, err := png.Decode(&buf)
		if err != nil {
			t.Fatal(err)
		}
		got := color.RGBAModel.Convert(img.At(4, 8)).(color.RGBA)
		want := sw.RGB()
		switch tier {
		case Tier256, Tier16:
			want = paletteRGB(sw.Index(tier))
		case TierMono:
			_, want = pngDefaults()
		}
		if got != want {
			t.Errorf("%s: cell drawn %v, want %v", tier, got, want)
		}
	}
}

func TestZeroCellsShowBlank(t *testing.T) {
	c := &Canvas{W: 4, H: 1, Cells: make([]Cell, 4)}
	c.Set(1, 0, Cell{Rune: 'x'})
	if got := c.Lines(TierMono)[0]; got != " x  " {
		t.Errorf("zero cells: %q, want blanks keeping the width", got)
	}
	c.Text(0, 0, "事", nil, nil, 0)
	if got := c.Lines(TierMono)[0]; got != "事  " {
		t.Errorf("wide rune: %q, want its tail skipped", got)
	}
}

// Random canvases (colours, attributes, half blocks, spaces, text) must
// also show exactly as built: coalescing must never carry a colour or an
// attribute into a cell that does not have it.
func TestLinesRandomCanvases(t *testing.T) {
	palette := []color.Color{nil, Scales()[0].Swatch(0), Scales()[0].Swatch(0.5), Scales()[1].Swatch(1),
		color.RGBA{255, 0, 0, 255}, color.RGBA{0, 0, 0, 255}, NewSwatch(color.RGBA{30, 200, 90, 255})}
	runes := []rune{upperHalf, upperHalf, upperHalf, ' ', 'a', '│', '⣿'}
	attrs := []Attr{0, 0, 0, AttrBold, AttrReverse, AttrUnderline, AttrBold | AttrUnderline}
	x := uint64(88172645463325252)
	next := func(n int) int { // xorshift, deterministic
		x ^= x << 13
		x ^= x >> 7
		x ^= x << 17
		return int(x % uint64(n))
	}
	for _, tier := range allTiers {
		for seed := range 5 {
			c := NewCanvas(37, 9)
			for i := range c.Cells {
				c.Cells[i] = Cell{Rune: runes[next(len(runes))], FG: palette[next(len(palette))],
					BG: palette[next(len(palette))], Attr: attrs[next(len(attrs))]}
			}
			scr, err := rendertest.Show(c.Lines(tier), c.W, c.H)
			if err != nil {
				t.Fatalf("%s seed %d: %v", tier, seed, err)
			}
			for y := range c.H {
				for x := range c.W {
					checkCell(t, tier, c.At(x, y), scr.At(x, y), x, y)
				}
			}
			scr.Close()
		}
	}
}

func TestLegendLogTicks(t *testing.T) {
	got := legendTicks(Range{Lo: 15, Hi: 600, Log: true}, 60)
	want := []float64{15, 20, 50, 100, 200, 500}
	if !slices.Equal(got, want) {
		t.Errorf("log ticks %v, want %v", got, want)
	}
	c := NewCanvas(60, 2)
	Legend(c, 0, 0, 60, Scale{}, Range{Lo: 15, Hi: 600, Log: true}, Tier256, 0)
	if f := strings.Fields(rowText(c, 1)); !slices.Contains(f, "100") || !slices.Contains(f, "ADC") {
		t.Errorf("log legend labels %q", f)
	}
}
