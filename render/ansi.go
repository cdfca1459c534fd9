package render

import (
	"image/color"
	"strconv"
	"strings"
	"unicode/utf8"

	"github.com/gdamore/tcell/v2"
)

// colorKey identifies a colour as a tier draws it: 0 is the terminal
// default; otherwise a palette index + 1 or, for 24-bit, 1<<24 | RGB.
type colorKey uint32

const keyRGB colorKey = 1 << 24

// pen is the terminal's drawing state while a line is written.
type pen struct {
	fg, bg colorKey
	attr   Attr
}

// Lines writes the canvas as one string per row for tier t: colours are
// quantised to the tier, runs of equal attributes are coalesced and only
// changed attributes are emitted; a line that changed any attribute ends
// with a reset. Half-block cells are written in whichever of their two
// equivalent forms (▀ or ▄ with the colours swapped) needs fewer changes,
// and as a plain space when both halves quantise to one colour. The mono
// and braille tiers emit attributes only.
func (c *Canvas) Lines(t Tier) []string {
	if c.quant == nil || len(c.quant) > maxQuantCache {
		c.quant = make(map[quantKey]colorKey)
	}
	q := quantiser{tier: t, cache: c.quant}
	h := c.rows()
	out := make([]string, h)
	ends := make([]int, h)
	// One buffer for every line: a frame is a handful of allocations, not
	// one per line or per escape sequence.
	buf := make([]byte, 0, max(c.W, 0)*h*4)
	for y := range h {
		var cur pen
		wide := false // the previous cell held a wide rune
		for _, cell := range c.Cells[y*c.W : (y+1)*c.W] {
			r := cell.Rune
			if r == wideTail {
				if wide {
					wide = false
					continue
				}
				r = ' ' // a zero Cell not after a wide rune is blank
			}
			wide = isWide(r)
			next := pen{attr: cell.Attr}
			if t.HasColor() {
				next.fg, next.bg = q.key(cell.FG), q.key(cell.BG)
				r, next = simplify(r, next, cur)
			}
			if next != cur {
				buf = appendSGR(buf, cur, next, t)
				cur = next
			}
			if r < utf8.RuneSelf && r >= ' ' {
				buf = append(buf, byte(r))
			} else {
				buf = utf8.AppendRune(buf, r)
			}
		}
		if cur != (pen{}) {
			buf = append(buf, "\x1b[m"...)
		}
		ends[y] = len(buf)
	}
	all := string(buf)
	start := 0
	for y, end := range ends {
		out[y] = all[start:end]
		start = end
	}
	return out
}

// Frame joins Lines with newlines: the whole canvas as one string.
func (c *Canvas) Frame(t Tier) string { return strings.Join(c.Lines(t), "\n") }

// simplify picks the cheapest equivalent of a cell given the pen: a space
// does not care about its foreground, and a half block can be flipped.
func simplify(r rune, next, cur pen) (rune, pen) {
	plain := next.attr&(AttrReverse|AttrUnderline) == 0
	if !plain {
		return r, next
	}
	if (r == upperHalf || r == lowerHalf) && next.fg == next.bg {
		r = ' '
	}
	switch r {
	case ' ':
		next.fg = cur.fg
	case upperHalf, lowerHalf:
		cost := func(p pen) int { return b2i(p.fg != cur.fg) + b2i(p.bg != cur.bg) }
		flipped := pen{fg: next.bg, bg: next.fg, attr: next.attr}
		if cost(flipped) < cost(next) {
			next = flipped
			if r == upperHalf {
				r = lowerHalf
			} else {
				r = upperHalf
			}
		}
	}
	return r, next
}

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}

// appendSGR appends one Select Graphic Rendition sequence (ECMA-48) that
// takes the terminal from pen cur to pen next.
func appendSGR(p []byte, cur, next pen, t Tier) []byte {
	p = append(p, "\x1b["...)
	first := len(p)
	sep := func(p []byte) []byte {
		if len(p) > first {
			p = append(p, ';')
		}
		return p
	}
	// Attributes that switch off: 22 bold, 27 reverse, 24 underline.
	off := cur.attr &^ next.attr
	on := next.attr &^ cur.attr
	for _, a := range [...]struct {
		bit     Attr
		on, off string
	}{{AttrBold, "1", "22"}, {AttrReverse, "7", "27"}, {AttrUnderline, "4", "24"}} {
		if off&a.bit != 0 {
			p = append(sep(p), a.off...)
		}
		if on&a.bit != 0 {
			p = append(sep(p), a.on...)
		}
	}
	if next.fg != cur.fg {
		p = appendColor(sep(p), next.fg, t, false)
	}
	if next.bg != cur.bg {
		p = appendColor(sep(p), next.bg, t, true)
	}
	return append(p, 'm')
}

func appendColor(p []byte, k colorKey, t Tier, bg bool) []byte {
	switch {
	case k == 0:
		if bg {
			return append(p, "49"...)
		}
		return append(p, "39"...)
	case k&keyRGB != 0:
		if bg {
			p = append(p, "48;2;"...)
		} else {
			p = append(p, "38;2;"...)
		}
		p = strconv.AppendUint(p, uint64(k>>16&0xff), 10)
		p = append(p, ';')
		p = strconv.AppendUint(p, uint64(k>>8&0xff), 10)
		p = append(p, ';')
		return strconv.AppendUint(p, uint64(k&0xff), 10)
	case t == Tier16:
		i := int(k - 1)
		base := 30
		if bg {
			base = 40
		}
		if i >= 8 {
			base, i = base+60, i-8
		}
		return strconv.AppendInt(p, int64(base+i), 10)
	}
	if bg {
		p = append(p, "48;5;"...)
	} else {
		p = append(p, "38;5;"...)
	}
	return strconv.AppendUint(p, uint64(k-1), 10)
}

// quantKey is a colour as quantised for one tier.
type quantKey struct {
	tier Tier
	c    color.RGBA
}

// maxQuantCache bounds a canvas's colour memory; past it the memory starts
// over (a canvas draws a few overlay colours, not thousands).
const maxQuantCache = 1024

// quantiser maps cell colours to keys for one tier. Swatches carry their
// own quantisation; any other colour is searched once and remembered in
// cache.
type quantiser struct {
	tier  Tier
	cache map[quantKey]colorKey
}

func (q *quantiser) key(c color.Color) colorKey {
	switch v := c.(type) {
	case nil:
		return 0
	case *Swatch:
		return q.swatchKey(v)
	}
	rgba := toRGBA(c)
	if q.tier == TierTrueColor {
		return keyRGB | colorKey(rgba.R)<<16 | colorKey(rgba.G)<<8 | colorKey(rgba.B)
	}
	k := quantKey{q.tier, rgba}
	if v, ok := q.cache[k]; ok {
		return v
	}
	v := q.swatchKey(NewSwatch(rgba))
	if q.cache != nil {
		q.cache[k] = v
	}
	return v
}

func (q *quantiser) swatchKey(s *Swatch) colorKey {
	switch q.tier {
	case Tier256:
		return colorKey(s.i256) + 1
	case Tier16:
		return colorKey(s.i16) + 1
	}
	return keyRGB | colorKey(s.c.R)<<16 | colorKey(s.c.G)<<8 | colorKey(s.c.B)
}

// termColor returns colour c as tier t draws it, in tcell's colour model
// (tcell.ColorDefault for nil or a tier without colour).
func termColor(c color.Color, t Tier) tcell.Color {
	if !t.HasColor() {
		return tcell.ColorDefault
	}
	q := quantiser{tier: t}
	k := q.key(c)
	switch {
	case k == 0:
		return tcell.ColorDefault
	case k&keyRGB != 0:
		return tcell.NewHexColor(int32(k &^ keyRGB))
	}
	return tcell.PaletteColor(int(k - 1))
}

// isWide reports whether r takes two cells, skipping the width lookup for
// the runes a plane image is made of.
func isWide(r rune) bool {
	if r < 0x1100 || (r >= 0x2500 && r <= 0x28ff) { // box drawing, blocks, braille
		return false
	}
	return runeWidth(r) == 2
}
