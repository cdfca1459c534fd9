package render

import (
	"image/color"
	"math"
	"unicode"

	"github.com/mattn/go-runewidth"
)

// Runes Paint draws with.
const (
	upperHalf = '▀' // FG is the top pixel, BG the bottom one
	lowerHalf = '▄'
	// wideTail marks the cell covered by the right half of a wide rune;
	// Lines writes nothing for it.
	wideTail = rune(0)
)

// monoRamp is the density ramp of the mono tier, lightest first: ten steps
// whose ink grows evenly in common terminal fonts (our own choice).
const monoRamp = " .,:;=+*%#@"

// PixelsPerCell returns how many grid pixels one terminal cell shows in a
// tier: 1×2 (half blocks) in colour tiers, 1×1 for the density ramp, 2×4 for
// braille.
func PixelsPerCell(t Tier) (px, py int) {
	switch t {
	case TierMono:
		return 1, 1
	case TierBraille:
		return 2, 4
	}
	return 1, 2
}

// NewCanvas returns a blank w×h canvas: spaces in the terminal's default
// colours. Negative sizes give an empty canvas.
func NewCanvas(w, h int) *Canvas {
	w, h = max(w, 0), max(h, 0)
	c := &Canvas{W: w, H: h, Cells: make([]Cell, w*h)}
	c.Clear()
	return c
}

// Clear blanks every cell.
func (c *Canvas) Clear() {
	for i := range c.Cells {
		c.Cells[i] = Cell{Rune: ' '}
	}
}

func (c *Canvas) in(x, y int) bool {
	return x >= 0 && y >= 0 && x < c.W && y < c.H && y*c.W+x < len(c.Cells)
}

// rows is how many whole rows Cells holds (H, unless a caller built a
// Canvas by hand with too few cells).
func (c *Canvas) rows() int {
	switch {
	case c.W < 0:
		return 0
	case c.W == 0:
		return max(c.H, 0)
	}
	return max(min(c.H, len(c.Cells)/c.W), 0)
}

// Set writes a cell; outside the canvas it does nothing.
func (c *Canvas) Set(x, y int, cell Cell) {
	if c.in(x, y) {
		c.Cells[y*c.W+x] = cell
	}
}

// At returns a cell (zero Cell outside the canvas).
func (c *Canvas) At(x, y int) Cell {
	if !c.in(x, y) {
		return Cell{}
	}
	return c.Cells[y*c.W+x]
}

// Text writes a string from (x, y) with the given colours, clipped to the
// canvas, and returns the column after it. Control characters (escape
// sequences included) and zero-width runes are never written; a wide rune
// takes two cells, or is replaced by a space where only one is left.
func (c *Canvas) Text(x, y int, s string, fg, bg color.Color, a Attr) int {
	for _, r := range s {
		if unicode.IsControl(r) {
			continue
		}
		w := runewidth.RuneWidth(r)
		if w == 0 {
			continue
		}
		if w == 2 && x+1 >= c.W {
			r, w = ' ', 1
		}
		c.Set(x, y, Cell{Rune: r, FG: fg, BG: bg, Attr: a})
		if w == 2 {
			c.Set(x+1, y, Cell{Rune: wideTail, FG: fg, BG: bg, Attr: a})
		}
		x += w
	}
	return x
}

// Fill sets every cell of the w×h box at (x, y) to cell, clipped.
func (c *Canvas) Fill(x, y, w, h int, cell Cell) {
	for j := max(y, 0); j < min(y+h, c.rows()); j++ {
		for i := max(x, 0); i < min(x+w, c.W); i++ {
			c.Cells[j*c.W+i] = cell
		}
	}
}

// Paint draws grid g into the canvas with its top-left cell at (x, y),
// using scale s and range r in tier t. g must hold cols·px × rows·py pixels
// for the tier (see PixelsPerCell); a ragged edge is dropped. NaN pixels
// (outside the image) are left in the default colours, so ui can draw its
// own background. In the colour tiers the cells hold *Swatch colours.
func Paint(c *Canvas, x, y int, g *Grid, s Scale, r Range, t Tier) {
	if g == nil || g.W <= 0 || g.H <= 0 || len(g.Pix) < g.W*g.H {
		return
	}
	px, py := PixelsPerCell(t)
	cols, rows := g.W/px, g.H/py
	x0, y0 := max(x, 0), max(y, 0)
	x1, y1 := min(x+cols, c.W), min(y+rows, c.rows())
	if x0 >= x1 || y0 >= y1 {
		return
	}
	m := newMapper(r)
	switch t {
	case TierMono:
		paintMono(c, x, y, x0, y0, x1, y1, g, m)
	case TierBraille:
		paintBraille(c, x, y, x0, y0, x1, y1, g, r)
	default:
		paintHalves(c, x, y, x0, y0, x1, y1, g, s.table(), m)
	}
}

// mapper turns charge into a scale step quickly: linear ranges need one
// multiply, log ranges a Log1p only above the low end.
type mapper struct {
	lo, hi, k float32
	log       bool
}

func newMapper(r Range) mapper {
	m := mapper{lo: float32(r.Lo), hi: float32(r.Hi), log: r.Log}
	if r.Hi > r.Lo {
		if r.Log {
			m.k = float32((scaleSteps - 1) / math.Log1p(r.Hi-r.Lo))
		} else {
			m.k = float32((scaleSteps - 1) / (r.Hi - r.Lo))
		}
	}
	return m
}

// step returns the scale step of v, or -1 for NaN.
func (m mapper) step(v float32) int {
	switch {
	case v != v:
		return -1
	case v <= m.lo:
		return 0
	case v >= m.hi:
		return scaleSteps - 1
	case m.log:
		return int(float32(math.Log1p(float64(v-m.lo)))*m.k + 0.5)
	}
	return int((v-m.lo)*m.k + 0.5)
}

func paintHalves(c *Canvas, x, y, x0, y0, x1, y1 int, g *Grid, tab *scaleTable, m mapper) {
	for cy := y0; cy < y1; cy++ {
		top := g.Pix[2*(cy-y)*g.W:]
		bot := g.Pix[(2*(cy-y)+1)*g.W:]
		row := c.Cells[cy*c.W : (cy+1)*c.W]
		for cx := x0; cx < x1; cx++ {
			i := cx - x
			cell := Cell{Rune: upperHalf}
			if s := m.step(top[i]); s >= 0 {
				cell.FG = &tab.sw[s]
			}
			if s := m.step(bot[i]); s >= 0 {
				cell.BG = &tab.sw[s]
			}
			row[cx] = cell
		}
	}
}

func paintMono(c *Canvas, x, y, x0, y0, x1, y1 int, g *Grid, m mapper) {
	n := len(monoRamp) - 1
	for cy := y0; cy < y1; cy++ {
		src := g.Pix[(cy-y)*g.W:]
		for cx := x0; cx < x1; cx++ {
			ch := byte(' ')
			if s := m.step(src[cx-x]); s > 0 {
				ch = monoRamp[1+(s-1)*n/scaleSteps] // any charge above Lo inks
			}
			c.Cells[cy*c.W+cx] = Cell{Rune: rune(ch)}
		}
	}
}

// brailleBit is the Unicode braille dot bit of sub-pixel (dx, dy) in a 2×4
// cell: dots 1–3 and 4–6 run down the left and right columns, dots 7 and 8
// sit below them (the braille patterns block, U+2800).
func brailleBit(dx, dy int) rune {
	if dy == 3 {
		return 0x40 << dx
	}
	return 1 << (dy + 3*dx)
}

// paintBraille raises a dot for every pixel above the range's low end.
func paintBraille(c *Canvas, x, y, x0, y0, x1, y1 int, g *Grid, r Range) {
	lo := float32(r.Lo)
	for cy := y0; cy < y1; cy++ {
		for cx := x0; cx < x1; cx++ {
			var dots rune
			for dy := range 4 {
				src := g.Pix[(4*(cy-y)+dy)*g.W:]
				for dx := range 2 {
					if v := src[2*(cx-x)+dx]; v > lo {
						dots |= brailleBit(dx, dy)
					}
				}
			}
			ch := rune(' ')
			if dots != 0 {
				ch = 0x2800 + dots
			}
			c.Cells[cy*c.W+cx] = Cell{Rune: ch}
		}
	}
}

func runeWidth(r rune) int { return runewidth.RuneWidth(r) }
