package render

import (
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"image/png"
	"io"
	"strings"
	"unicode/utf8"

	"golang.org/x/image/font"
	"golang.org/x/image/font/basicfont"
	"golang.org/x/image/math/fixed"
)

// Cell size in a PNG snapshot: two 8×8 half-block pixels per cell, and room
// for a 7×13 bitmap glyph.
const (
	pngCellW = 8
	pngCellH = 16
)

// Colours of the terminal defaults in a snapshot (a dark terminal theme).
func pngDefaults() (fg, bg color.RGBA) {
	return color.RGBA{0xd0, 0xd0, 0xd0, 0xff}, color.RGBA{0x12, 0x12, 0x14, 0xff}
}

// WritePNG writes the canvas as a PNG image (each cell drawn as its pixels
// or glyph), for reports and snapshots. Colours are the cells' own 24-bit
// colours; half blocks, full blocks, braille and box-drawing lines are
// drawn as shapes, other text with a small bitmap font.
func (c *Canvas) WritePNG(w io.Writer) error { return c.WritePNGTier(w, TierTrueColor) }

// WritePNGTier is WritePNG with colours as tier t shows them: the palette
// colours of the 256 and 16 tiers (in their conventional RGB), or the
// default colours only in the mono and braille tiers.
func (c *Canvas) WritePNGTier(w io.Writer, t Tier) error {
	if c.W <= 0 || c.rows() <= 0 {
		return fmt.Errorf("write png: empty %d×%d canvas", c.W, c.H)
	}
	if err := png.Encode(w, c.Image(t)); err != nil {
		return fmt.Errorf("write png: %w", err)
	}
	return nil
}

// Image draws the canvas as an RGBA image, 8×16 pixels per cell, in the
// colours of tier t.
func (c *Canvas) Image(t Tier) *image.RGBA {
	h := c.rows()
	img := image.NewRGBA(image.Rect(0, 0, max(c.W, 0)*pngCellW, h*pngCellH))
	d := &font.Drawer{Dst: img, Face: basicfont.Face7x13}
	for y := range h {
		wide := false
		for x := range c.W {
			cell := c.Cells[y*c.W+x]
			if cell.Rune == wideTail && wide {
				wide = false
				continue
			}
			wide = isWide(cell.Rune)
			fg, bg := cellColors(cell, t)
			r := image.Rect(x*pngCellW, y*pngCellH, (x+1)*pngCellW, (y+1)*pngCellH)
			if wide {
				r.Max.X += pngCellW
			}
			draw.Draw(img, r, image.NewUniform(bg), image.Point{}, draw.Src)
			drawGlyph(img, d, r, cell, fg)
		}
	}
	return img
}

func cellColors(cell Cell, t Tier) (fg, bg color.Color) {
	fg, bg = pngDefaults()
	if c := tierRGB(cell.FG, t); c != nil {
		fg = c
	}
	if c := tierRGB(cell.BG, t); c != nil {
		bg = c
	}
	if cell.Attr&AttrReverse != 0 {
		fg, bg = bg, fg
	}
	return fg, bg
}

// tierRGB is colour c as tier t draws it, nil for the terminal default.
func tierRGB(c color.Color, t Tier) color.Color {
	if c == nil || !t.HasColor() {
		return nil
	}
	if t == TierTrueColor {
		return toRGBA(c)
	}
	sw, ok := c.(*Swatch)
	if !ok {
		sw = NewSwatch(c)
	}
	return paletteRGB(sw.Index(t))
}

func drawGlyph(img *image.RGBA, d *font.Drawer, r image.Rectangle, cell Cell, fg color.Color) {
	ink := image.NewUniform(fg)
	fill := func(x0, y0, x1, y1 int) {
		draw.Draw(img, image.Rect(r.Min.X+x0, r.Min.Y+y0, r.Min.X+x1, r.Min.Y+y1), ink, image.Point{}, draw.Src)
	}
	switch ch := cell.Rune; {
	case ch == ' ':
	case ch == upperHalf:
		fill(0, 0, pngCellW, pngCellH/2)
	case ch == lowerHalf:
		fill(0, pngCellH/2, pngCellW, pngCellH)
	case ch == '█':
		fill(0, 0, pngCellW, pngCellH)
	case ch >= 0x2800 && ch <= 0x28ff:
		for dy := range 4 {
			for dx := range 2 {
				if (ch-0x2800)&brailleBit(dx, dy) != 0 {
					fill(1+4*dx, 1+4*dy, 3+4*dx, 3+4*dy)
				}
			}
		}
	case boxArms(ch) != 0:
		arms := boxArms(ch)
		mx, my := pngCellW/2, pngCellH/2
		if arms&armLeft != 0 {
			fill(0, my, mx+1, my+1)
		}
		if arms&armRight != 0 {
			fill(mx, my, pngCellW, my+1)
		}
		if arms&armUp != 0 {
			fill(mx, 0, mx+1, my+1)
		}
		if arms&armDown != 0 {
			fill(mx, my, mx+1, pngCellH)
		}
	default:
		g := asciiGlyph(ch)
		d.Src = ink
		d.Dot = fixed.P(r.Min.X+1, r.Min.Y+12)
		d.DrawString(g)
		if cell.Attr&AttrBold != 0 { // overstrike one pixel right
			d.Dot = fixed.P(r.Min.X+2, r.Min.Y+12)
			d.DrawString(g)
		}
	}
	if cell.Attr&AttrUnderline != 0 {
		fill(0, pngCellH-2, r.Dx(), pngCellH-1)
	}
}

// Arms of a light box-drawing character.
const (
	armLeft = 1 << iota
	armRight
	armUp
	armDown
)

// boxArms returns which arms the common light (and heavy, drawn light)
// box-drawing characters have, 0 for anything else.
func boxArms(r rune) int {
	switch r {
	case '─', '━', '╌', '┄':
		return armLeft | armRight
	case '│', '┃', '╎', '┆':
		return armUp | armDown
	case '┌', '┏', '╭':
		return armRight | armDown
	case '┐', '┓', '╮':
		return armLeft | armDown
	case '└', '┗', '╰':
		return armRight | armUp
	case '┘', '┛', '╯':
		return armLeft | armUp
	case '├', '┣':
		return armUp | armDown | armRight
	case '┤', '┫':
		return armUp | armDown | armLeft
	case '┬', '┳':
		return armLeft | armRight | armDown
	case '┴', '┻':
		return armLeft | armRight | armUp
	case '┼', '╋':
		return armLeft | armRight | armUp | armDown
	}
	return 0
}

// asciiGlyph returns what the snapshot font (ASCII only) draws for a rune:
// the rune itself, a look-alike for common symbols, or U+FFFD.
func asciiGlyph(r rune) string {
	if r >= ' ' && r < 0x7f {
		return string(r)
	}
	if i := strings.IndexRune(glyphFrom, r); i >= 0 {
		return string(glyphTo[utf8.RuneCountInString(glyphFrom[:i])])
	}
	return "\ufffd"
}

// Look-alikes for symbols a scanning screen uses, position by position.
const (
	glyphFrom = "·•●○◆◇×°μνπ±–—→←↑↓▸▶◂◀≤≥…✓✗"
	glyphTo   = "..oo**xouvp+--><^v>><<<>~vx"
)
