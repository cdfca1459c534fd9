// Package render turns wire-plane images into terminal cells: a
// multi-resolution pyramid per plane (so a frame costs O(visible cells) at
// any zoom), colour scales, terminal colour tiers and a cell canvas that is
// written out as coalesced ANSI text. It imports neither bubbletea nor ssh.
//
// CONTRACT (first draft, written before the implementation so that ui can be
// built in parallel): the exported names and signatures below are what ui
// uses. The implementation may add to them; changing one means changing ui.
package render

import (
	"image/color"
	"io"

	"github.com/tpcscan/tpcscan/scan"
)

// Reduce says how a block of samples becomes one pixel.
type Reduce int

// Block reductions.
const (
	ReduceMax Reduce = iota // keeps thin tracks visible at full zoom-out (default)
	ReduceSum               // charge-conserving
)

// Window is the part of a plane image shown: image-local wire and tick of
// the top-left pixel, and how many wires and ticks one pixel covers. Wires
// run left to right (columns), ticks top to bottom (rows), so planes placed
// side by side share the drift-time axis.
type Window struct {
	Wire0, Tick0           float64
	WiresPerPx, TicksPerPx float64
}

// Grid is a W×H block of pixel values (row-major, H rows of W).
type Grid struct {
	W, H int
	Pix  []float32
}

// Tier is the colour capability of a terminal.
type Tier int

// Terminal tiers, richest first.
const (
	TierTrueColor Tier = iota // 24-bit colour
	Tier256                   // xterm 256-colour palette
	Tier16                    // the 16 ANSI colours
	TierMono                  // no colour: a character density ramp
	TierBraille               // no colour: braille dots, 2×4 pixels per cell
)

// Attr is a cell attribute bit set.
type Attr uint8

// Cell attributes.
const (
	AttrBold Attr = 1 << iota
	AttrReverse
	AttrUnderline
)

// Cell is one terminal cell. A nil FG/BG means the terminal default.
type Cell struct {
	Rune   rune
	FG, BG color.Color
	Attr   Attr
}

// Canvas is a W×H grid of cells that ui draws overlays on before writing it
// out with Lines.
type Canvas struct {
	W, H  int
	Cells []Cell
}

// The functions below are the contract's signatures. Their bodies are
// placeholders until the implementation lands.

// Pyramid holds a plane image at successive 2× reductions (max and sum) so
// that Sample touches O(W·H) stored values at any zoom.
type Pyramid struct {
	img *scan.Image
}

// NewPyramid builds the pyramid of one plane image, once per event.
func NewPyramid(img *scan.Image) *Pyramid { panic("render: NewPyramid not implemented yet") }

// Image returns the full-resolution image the pyramid was built from.
func (p *Pyramid) Image() *scan.Image { return p.img }

// Sample fills dst (its W and H set by the caller; Pix resized as needed)
// with the window's pixels using reduction r.
func (p *Pyramid) Sample(dst *Grid, win Window, r Reduce) {
	panic("render: Sample not implemented yet")
}

// Range maps charge to the [0, 1] colour-scale coordinate.
type Range struct {
	Lo, Hi float64
	Log    bool // logarithmic between Lo and Hi; linear otherwise; values are clipped
}

// AutoRange picks a range from charge percentiles of the image (e.g. 50 and
// 99.5), ignoring samples at or below zero noise.
func AutoRange(img *scan.Image, loPct, hiPct float64) Range {
	panic("render: AutoRange not implemented yet")
}

// Scale is a named colour scale: a perceptually uniform ramp from low to
// high charge.
type Scale struct {
	Name string
}

// Scales returns the built-in colour scales, the default first.
func Scales() []Scale { panic("render: Scales not implemented yet") }

// Color returns the scale's colour at f ∈ [0, 1].
func (s Scale) Color(f float64) color.RGBA { panic("render: Color not implemented yet") }

// PixelsPerCell returns how many grid pixels one terminal cell shows in a
// tier: 1×2 (half blocks) in colour tiers, 1×1 for the density ramp, 2×4 for
// braille.
func PixelsPerCell(t Tier) (px, py int) { panic("render: PixelsPerCell not implemented yet") }

// NewCanvas returns a blank w×h canvas.
func NewCanvas(w, h int) *Canvas { panic("render: NewCanvas not implemented yet") }

// Set writes a cell; outside the canvas it does nothing.
func (c *Canvas) Set(x, y int, cell Cell) { panic("render: Set not implemented yet") }

// At returns a cell (zero Cell outside the canvas).
func (c *Canvas) At(x, y int) Cell { panic("render: At not implemented yet") }

// Text writes a string from (x, y) with the given colours, clipped to the
// canvas; control characters are never written.
func (c *Canvas) Text(x, y int, s string, fg, bg color.Color, a Attr) {
	panic("render: Text not implemented yet")
}

// Paint draws grid g into the canvas with its top-left cell at (x, y),
// using scale s and range r in tier t. g must hold cols·px × rows·py pixels
// for the tier (see PixelsPerCell).
func Paint(c *Canvas, x, y int, g *Grid, s Scale, r Range, t Tier) {
	panic("render: Paint not implemented yet")
}

// Lines writes the canvas as one string per row for tier t: colours are
// quantised to the tier, runs of equal attributes are coalesced and only
// changed attributes are emitted; each line ends with an attribute reset.
func (c *Canvas) Lines(t Tier) []string { panic("render: Lines not implemented yet") }

// WritePNG writes the canvas as a PNG image (each cell drawn as its pixels
// or glyph), for reports and snapshots.
func (c *Canvas) WritePNG(w io.Writer) error { panic("render: WritePNG not implemented yet") }
