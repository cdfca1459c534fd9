package render

import (
	"cmp"
	"image/color"
	"math"
	"slices"
	"sync"

	"github.com/gdamore/tcell/v2"
	"github.com/lucasb-eyer/go-colorful"
)

// Scale is a named colour scale: a perceptually uniform ramp from low to
// high charge. The zero Scale, or one with an unknown name, draws as the
// default scale.
type Scale struct {
	Name string
	tab  *scaleTable
}

// scaleSteps is how many colours a scale holds; Paint maps charge to one
// of them.
const scaleSteps = 256

type scaleTable struct {
	sw [scaleSteps]Swatch
}

// oklch is a control point of a scale in OKLCh (lightness 0–1, chroma,
// hue in degrees).
type oklch struct{ l, c, h float64 }

// scaleDesigns are our own ramps. Lightness rises strictly from point to
// point, so every scale reads dark→light without hue (colour-blind safe),
// and hue moves along the blue–yellow axis or within warm hues, never
// between red and green.
//
// ansi16 lists the 16-colour palette entries a scale may use in the 16
// tier: those along its hues, so that the coarse version keeps the scale's
// character (nearest-colour search over all 16 would borrow magenta or
// green for in-between steps).
var scaleDesigns = []struct {
	name   string
	pts    []oklch
	ansi16 []int
}{
	// loch: deep indigo water, through steel blue and teal, to pale straw.
	{"loch", []oklch{{0.17, 0.055, 285}, {0.37, 0.125, 272}, {0.57, 0.095, 228}, {0.75, 0.095, 188}, {0.89, 0.115, 108}, {0.975, 0.045, 98}},
		[]int{0, 4, 12, 6, 14, 11, 15}},
	// peat: near-black brown, through rust and amber, to cream.
	{"peat", []oklch{{0.16, 0.035, 25}, {0.36, 0.105, 30}, {0.56, 0.145, 45}, {0.74, 0.14, 68}, {0.88, 0.105, 90}, {0.975, 0.035, 95}},
		[]int{0, 1, 9, 11, 15}},
	// slate: a neutral grey ramp with the faintest blue cast.
	{"slate", []oklch{{0.17, 0.012, 255}, {0.975, 0.004, 255}}, []int{0, 8, 7, 15}},
}

// builtinScales computes the scale tables once; they are immutable after.
var builtinScales = sync.OnceValue(buildScales)

func buildScales() []Scale {
	pal256, _ := palettes()
	out := make([]Scale, len(scaleDesigns))
	for i, d := range scaleDesigns {
		t := &scaleTable{}
		var pal16 []tcell.Color
		for _, j := range d.ansi16 {
			pal16 = append(pal16, tcell.PaletteColor(j))
		}
		quantiseRamp(t.sw[:], rampOKLab(d.pts, scaleSteps), pal256, pal16)
		out[i] = Scale{Name: d.name, tab: t}
	}
	return out
}

// Scales returns the built-in colour scales, the default first.
func Scales() []Scale { return append([]Scale(nil), builtinScales()...) }

// ScaleByName returns the built-in scale with that name.
func ScaleByName(name string) (Scale, bool) {
	for _, s := range builtinScales() {
		if s.Name == name {
			return s, true
		}
	}
	return Scale{}, false
}

func (s Scale) table() *scaleTable {
	if s.tab != nil {
		return s.tab
	}
	if b, ok := ScaleByName(s.Name); ok {
		return b.tab
	}
	return builtinScales()[0].tab
}

// Color returns the scale's colour at f ∈ [0, 1] (clamped; NaN gives the
// low end).
func (s Scale) Color(f float64) color.RGBA { return s.Swatch(f).c }

// Swatch returns the scale's colour at f ∈ [0, 1] with its terminal
// quantisations.
func (s Scale) Swatch(f float64) *Swatch { return &s.table().sw[stepOf(f)] }

func stepOf(f float64) int {
	if !(f > 0) {
		return 0
	}
	if f >= 1 {
		return scaleSteps - 1
	}
	return int(f*(scaleSteps-1) + 0.5)
}

// rampOKLab turns control points into n colours equally spaced along the
// piecewise-straight OKLab path through them, so that neighbouring steps
// differ by the same ΔE_OK. Points outside sRGB are clamped.
func rampOKLab(pts []oklch, n int) []color.RGBA {
	type lab struct{ l, a, b float64 }
	ctrl := make([]lab, len(pts))
	for i, p := range pts {
		h := p.h * math.Pi / 180
		ctrl[i] = lab{p.l, p.c * math.Cos(h), p.c * math.Sin(h)}
	}
	// Cumulative arc length at each control point.
	cum := make([]float64, len(ctrl))
	for i := 1; i < len(ctrl); i++ {
		a, b := ctrl[i-1], ctrl[i]
		cum[i] = cum[i-1] + math.Sqrt((b.l-a.l)*(b.l-a.l)+(b.a-a.a)*(b.a-a.a)+(b.b-a.b)*(b.b-a.b))
	}
	total := cum[len(cum)-1]
	out := make([]color.RGBA, n)
	seg := 0
	for i := range out {
		d := total * float64(i) / float64(n-1)
		for seg < len(ctrl)-2 && d > cum[seg+1] {
			seg++
		}
		u := 0.0
		if span := cum[seg+1] - cum[seg]; span > 0 {
			u = (d - cum[seg]) / span
		}
		a, b := ctrl[seg], ctrl[seg+1]
		c := colorful.OkLab(a.l+u*(b.l-a.l), a.a+u*(b.a-a.a), a.b+u*(b.b-a.b)).Clamped()
		r, g, bl := c.RGB255()
		out[i] = color.RGBA{r, g, bl, 0xff}
	}
	return out
}

// Swatch is a colour with its nearest colours in the 256- and 16-colour
// terminal palettes worked out in advance, so that Lines never searches a
// palette for it. It implements color.Color.
type Swatch struct {
	c         color.RGBA
	i256, i16 uint8
}

// RGBA implements color.Color.
func (s *Swatch) RGBA() (r, g, b, a uint32) { return s.c.RGBA() }

// RGB returns the swatch's 24-bit colour.
func (s *Swatch) RGB() color.RGBA { return s.c }

// Index returns the palette index the swatch is drawn with in tier t (-1
// for tiers without a palette).
func (s *Swatch) Index(t Tier) int {
	switch t {
	case Tier256:
		return int(s.i256)
	case Tier16:
		return int(s.i16)
	}
	return -1
}

// NewSwatch quantises c for every tier. It costs a palette search: make
// the colours a session draws with once, not per frame.
func NewSwatch(c color.Color) *Swatch {
	p256, p16 := palettes()
	sw := quantise(toRGBA(c), p256, p16)
	return &sw
}

func toRGBA(c color.Color) color.RGBA {
	r, g, b, _ := c.RGBA()
	return color.RGBA{uint8(r >> 8), uint8(g >> 8), uint8(b >> 8), 0xff}
}

// palettes returns the palettes the 256 and 16 tiers quantise to. The 256
// tier uses only indices 16–255 (the 6×6×6 cube and the grey ramp), whose
// colours are fixed by convention; indices 0–15 follow the user's terminal
// theme, so a scale quantised to them would change with the theme.
func palettes() (p256, p16 []tcell.Color) {
	p256 = make([]tcell.Color, 0, 240)
	for i := 16; i < 256; i++ {
		p256 = append(p256, tcell.PaletteColor(i))
	}
	p16 = make([]tcell.Color, 16)
	for i := range p16 {
		p16[i] = tcell.PaletteColor(i)
	}
	return p256, p16
}

// quantise finds c's nearest palette entries with tcell's colour model
// (nearest in CIELAB).
func quantise(c color.RGBA, p256, p16 []tcell.Color) Swatch {
	tc := tcell.NewRGBColor(int32(c.R), int32(c.G), int32(c.B))
	return Swatch{
		c:    c,
		i256: uint8(tcell.FindColor(tc, p256) & 0xff),
		i16:  uint8(tcell.FindColor(tc, p16) & 0xff),
	}
}

// quantiseRamp quantises a ramp so that it stays a ramp. In the 256 tier
// each step takes tcell's nearest palette entry among those at least as
// light (OKLab L) as the previous step's: plain nearest-colour search over
// the coarse palette can step back to a darker neighbour. The 16 tier has
// too few colours to search: the scale's own entries, ordered by lightness,
// share the ramp in equal bands, the darkest kept for the low end alone so
// that any charge above it shows.
func quantiseRamp(out []Swatch, ramp []color.RGBA, p256, p16 []tcell.Color) {
	light := make(map[tcell.Color]float64, len(p256)+len(p16))
	for _, p := range slices.Concat(p256, p16) {
		light[p] = paletteLightness(p)
	}
	p16 = slices.Clone(p16)
	slices.SortStableFunc(p16, func(a, b tcell.Color) int { return cmp.Compare(light[a], light[b]) })
	floor := math.Inf(-1)
	var allowed []tcell.Color
	for i, c := range ramp {
		if allowed == nil { // the floor moved: palette entries at least as light
			for _, p := range p256 {
				if light[p] >= floor {
					allowed = append(allowed, p)
				}
			}
		}
		best := tcell.FindColor(tcell.NewRGBColor(int32(c.R), int32(c.G), int32(c.B)), allowed)
		if light[best] != floor {
			floor, allowed = light[best], nil
		}
		band := 0
		if i > 0 && len(p16) > 1 {
			band = 1 + (i-1)*(len(p16)-1)/(len(ramp)-1)
		}
		out[i] = Swatch{c: c, i256: uint8(best & 0xff), i16: uint8(p16[band] & 0xff)}
	}
}

func paletteLightness(p tcell.Color) float64 {
	r, g, b := p.RGB()
	l, _, _ := colorful.Color{R: float64(r) / 255, G: float64(g) / 255, B: float64(b) / 255}.OkLab()
	return l
}

// paletteRGB returns the conventional RGB of a palette index, as tcell
// defines it.
func paletteRGB(i int) color.RGBA {
	r, g, b := tcell.PaletteColor(i).RGB()
	return color.RGBA{uint8(r), uint8(g), uint8(b), 0xff}
}
