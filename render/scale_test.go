package render

import (
	"math"
	"testing"

	"github.com/gdamore/tcell/v2"
	"github.com/lucasb-eyer/go-colorful"
)

func okLab(c interface{ RGBA() (r, g, b, a uint32) }) (l, a, b float64) {
	cc, _ := colorful.MakeColor(c)
	return cc.OkLab()
}

// The OKLab reference values are those of the model's definition (B.
// Ottosson, "A perceptual color space for image processing", 2020) as the
// CSS Color Module Level 4 examples quote them: sRGB white is L = 1,
// a = b = 0; sRGB red is oklab(0.62796 0.22486 0.12585) (from memory).
// They check the library we measure our scales with.
func TestOKLabReference(t *testing.T) {
	cases := []struct {
		name    string
		c       colorful.Color
		l, a, b float64
	}{
		{"white", colorful.Color{R: 1, G: 1, B: 1}, 1, 0, 0},
		{"red", colorful.Color{R: 1, G: 0, B: 0}, 0.62796, 0.22486, 0.12585},
		{"black", colorful.Color{}, 0, 0, 0},
	}
	for _, c := range cases {
		l, a, b := c.c.OkLab()
		if math.Abs(l-c.l) > 2e-3 || math.Abs(a-c.a) > 2e-3 || math.Abs(b-c.b) > 2e-3 {
			t.Errorf("%s: OKLab (%.5f %.5f %.5f), want (%.5f %.5f %.5f)", c.name, l, a, b, c.l, c.a, c.b)
		}
	}
}

// Every scale must read dark→light by lightness alone: OKLab L strictly
// rises along it (design.md: perceptually uniform, colour-blind safe).
func TestScalesLightnessMonotone(t *testing.T) {
	for _, s := range Scales() {
		prev := -1.0
		for i := range 64 {
			l, _, _ := okLab(s.Color(float64(i) / 63))
			if l <= prev {
				t.Errorf("%s: lightness %.4f at step %d/63 not above %.4f", s.Name, l, i, prev)
			}
			prev = l
		}
		lo, _, _ := okLab(s.Color(0))
		hi, _, _ := okLab(s.Color(1))
		if hi-lo < 0.7 { // a wide lightness span is what makes a ramp readable
			t.Errorf("%s: lightness spans only %.2f", s.Name, hi-lo)
		}
	}
}

// Equal steps along a scale must look equally different: ΔE_OK (Euclidean
// distance in OKLab) between neighbours of 16 equal steps stays within 10%
// of its mean. The tolerance covers 8-bit rounding and sRGB clamping
// (common practice for "perceptually uniform").
func TestScalesUniformDeltaE(t *testing.T) {
	const n = 16
	for _, s := range Scales() {
		var d [n]float64
		mean := 0.0
		for i := range n {
			l0, a0, b0 := okLab(s.Color(float64(i) / n))
			l1, a1, b1 := okLab(s.Color(float64(i+1) / n))
			d[i] = math.Sqrt((l1-l0)*(l1-l0) + (a1-a0)*(a1-a0) + (b1-b0)*(b1-b0))
			mean += d[i] / n
		}
		for i, v := range d {
			if math.Abs(v-mean) > 0.10*mean {
				t.Errorf("%s: step %d ΔE_OK %.4f, mean %.4f (more than 10%% off)", s.Name, i, v, mean)
			}
		}
	}
}

// Red–green is the contrast most colour-vision deficiencies lose. No scale
// may rely on it: its OKLab a (green–red) coordinate never spans both a
// clear green (a < −0.05) and a clear red (a > +0.05).
func TestScalesAvoidRedGreen(t *testing.T) {
	for _, s := range Scales() {
		lo, hi := math.Inf(1), math.Inf(-1)
		for i := range 256 {
			_, a, _ := okLab(s.Color(float64(i) / 255))
			lo, hi = math.Min(lo, a), math.Max(hi, a)
		}
		if lo < -0.05 && hi > 0.05 {
			t.Errorf("%s: OKLab a spans %.3f…%.3f, a red–green contrast", s.Name, lo, hi)
		}
	}
}

func TestScalesNamesAndLookup(t *testing.T) {
	seen := map[string]bool{}
	for _, s := range Scales() {
		if s.Name == "" || seen[s.Name] {
			t.Errorf("scale name %q empty or repeated", s.Name)
		}
		seen[s.Name] = true
		if got, ok := ScaleByName(s.Name); !ok || got.Color(0.5) != s.Color(0.5) {
			t.Errorf("ScaleByName(%q) = %v, %v", s.Name, got.Name, ok)
		}
	}
	if len(seen) < 3 {
		t.Errorf("want at least a cool, a warm and a grey scale, have %d", len(seen))
	}
	def := Scales()[0]
	if (Scale{}).Color(0.3) != def.Color(0.3) || (Scale{Name: "no such"}).Color(0.3) != def.Color(0.3) {
		t.Error("zero or unknown scale does not draw as the default")
	}
	if def.Color(math.NaN()) != def.Color(0) || def.Color(-3) != def.Color(0) || def.Color(7) != def.Color(1) {
		t.Error("out-of-range f not clamped")
	}
}

// The 256- and 16-colour versions of a scale must still read dark→light:
// the OKLab lightness of the palette colours drawn (tcell's RGB values for
// them) never falls along the scale; the 256 tier uses only the fixed
// indices 16–255. The lowest step, with no constraint yet, must be tcell's
// plain nearest colour (FindColor).
func TestSwatchQuantisationMonotone(t *testing.T) {
	var p256 []tcell.Color
	for i := 16; i < 256; i++ {
		p256 = append(p256, tcell.PaletteColor(i))
	}
	for _, s := range Scales() {
		for _, tier := range []Tier{Tier256, Tier16} {
			prev := -1.0
			distinct := map[int]bool{}
			for i := range 256 {
				sw := s.Swatch(float64(i) / 255)
				idx := sw.Index(tier)
				distinct[idx] = true
				if tier == Tier256 && idx < 16 {
					t.Fatalf("%s step %d: 256 index %d is a theme colour", s.Name, i, idx)
				}
				l, _, _ := okLab(paletteRGB(idx))
				if l < prev-1e-9 {
					t.Errorf("%s %s step %d: palette %d lightness %.3f below previous %.3f", s.Name, tier, i, idx, l, prev)
				}
				prev = l
			}
			if len(distinct) < 4 {
				t.Errorf("%s %s: only %d distinct colours", s.Name, tier, len(distinct))
			}
		}
		c := s.Color(0)
		want := tcell.FindColor(tcell.NewRGBColor(int32(c.R), int32(c.G), int32(c.B)), p256)
		if got := tcell.PaletteColor(s.Swatch(0).Index(Tier256)); got != want {
			t.Errorf("%s: lowest step drawn as %v, FindColor gives %v", s.Name, got, want)
		}
	}
	if sw := NewSwatch(colorfulRGBA(1, 0, 0)); sw.Index(Tier16) != 9 && sw.Index(Tier16) != 1 {
		t.Errorf("pure red quantised to 16-colour index %d, want red (1) or bright red (9)", sw.Index(Tier16))
	}
	if sw := NewSwatch(colorfulRGBA(1, 0, 0)); sw.Index(Tier256) != 196 {
		t.Errorf("pure red quantised to 256-colour index %d, want 196 (cube 5,0,0 in xterm's table)", sw.Index(Tier256))
	}
}

func colorfulRGBA(r, g, b float64) colorful.Color { return colorful.Color{R: r, G: g, B: b} }
