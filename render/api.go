// Package render turns wire-plane images into terminal cells: a
// multi-resolution pyramid per plane (so a frame costs O(visible cells) at
// any zoom), colour scales, terminal colour tiers and a cell canvas that is
// written out as coalesced ANSI text. It imports neither bubbletea nor ssh.
//
// The contract ui codes against: Pyramid (pyramid.go), Range and AutoRange
// (charge.go), Scale and Swatch (scale.go), Tier (tier.go), Canvas, Paint and
// Legend (canvas.go, legend.go), Lines (ansi.go) and WritePNG (png.go).
//
// A frame is: Pyramid.Sample into a Grid per pane, Paint into one Canvas,
// overlays with Set/Text, then Lines. Colours that ui draws often should be
// made once with NewSwatch: a *Swatch carries its 256- and 16-colour
// quantisation, so Lines never searches a palette for it.
package render

import "image/color"

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

// Cell is one terminal cell. A nil FG/BG means the terminal default. A
// wide rune (two columns) is followed by a cell with Rune 0, which Lines
// skips; a Rune 0 anywhere else shows as a space.
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

	// quant remembers how Lines quantised colours that are not Swatches,
	// so that overlay colours cost a palette search once per canvas.
	quant map[quantKey]colorKey
}
