package campaign

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

func TestNoiseRMS(t *testing.T) {
	// MAD of 1…9 is 2 (median 5, deviations 4 3 2 1 0 1 2 3 4), so the
	// estimate is 1.4826 × 2 (Rousseeuw & Croux 1993, eq. 1.1).
	img := &scan.Image{Wires: 3, Ticks: 3, Pix: []float32{1, 2, 3, 4, 5, 6, 7, 8, 9}}
	if got := NoiseRMS(img); math.Abs(got-2*1.4826) > 1e-6 {
		t.Errorf("NoiseRMS(1..9) = %g, want %g", got, 2*1.4826)
	}
	// Gaussian noise of σ = 4 with 2 % signal pixels: the estimate stays
	// within 5 % of σ (the MAD's efficiency gives ≈ 0.3 % spread here).
	r := rand.New(rand.NewPCG(1, 2))
	big := scan.NewImage(200, 500)
	for i := range big.Pix {
		big.Pix[i] = float32(4 * r.NormFloat64())
		if i%50 == 0 {
			big.Pix[i] = 500
		}
	}
	if got := NoiseRMS(big); math.Abs(got-4)/4 > 0.05 {
		t.Errorf("NoiseRMS of σ=4 noise = %g", got)
	}
}

func TestMask(t *testing.T) {
	img := &scan.Image{Wires: 10, Ticks: 40, Wire0: 100, Tick0: 1000, Pix: make([]float32, 400)}
	// A straight charge trail along wire 104 (local 4), ticks 5–30, and a
	// lone charged pixel far from any mark.
	for tk := 5; tk <= 30; tk++ {
		img.Set(4, tk, 50)
	}
	img.Set(9, 39, 50)
	img.Set(5, 15, 50) // one wire off the trail: inside the 2-wire ellipse
	track := func(part string, w0, t0, w1, t1 float64) scan.Mark {
		return scan.Mark{Kind: scan.MarkTrack, Plane: detector.Collection, Particle: part, Points: []detector.PlanePoint{{Wire: w0, Tick: t0}, {Wire: w1, Tick: t1}}}
	}
	codes := ParticleCodes(scan.DefaultSchema())
	marks := []scan.Mark{
		track("mu", 104, 1005, 104, 1020),
		track("p", 104, 1021, 104, 1030),
		track("mu", 104, 1005, 104, 1030), // on another plane: ignored
	}
	marks[2].Plane = detector.Induction1
	m := Mask(img, "coll", marks, codes, 1, DefaultMaskOptions())
	at := func(w, t int) uint8 { return m[w*img.Ticks+t] }
	if at(4, 10) != codes["mu"] || at(4, 28) != codes["p"] || at(5, 15) != codes["mu"] {
		t.Errorf("trail codes: %d %d %d", at(4, 10), at(4, 28), at(5, 15))
	}
	if at(9, 39) != 0 {
		t.Error("charge far from every mark was labelled")
	}
	if at(4, 2) != 0 {
		t.Error("a pixel below threshold was labelled")
	}
	// The boundary between the two tracks goes to the nearer one.
	if at(4, 20) != codes["mu"] || at(4, 21) != codes["p"] {
		t.Errorf("boundary: %d %d", at(4, 20), at(4, 21))
	}
	if codes["mu"] != 1 || codes["other"] != 6 {
		t.Errorf("codes = %v", codes)
	}
}

func TestSafeName(t *testing.T) {
	for in, want := range map[string]string{"tarn-00001": "tarn-00001", "../../etc": "_.._etc", "a/b": "a_b", "": "_", "..": "_"} {
		if got := safeName(in); got != want {
			t.Errorf("safeName(%q) = %q, want %q", in, got, want)
		}
	}
}

func TestSample(t *testing.T) {
	x := []float32{0, 1, 2, 3, 4, 5, 6, 7, 8, 9}
	if got := sample(x, 3); len(got) != 3 || got[1] != 4 || got[2] != 8 {
		t.Errorf("sample(0..9, 3) = %v, want [0 4 8]", got)
	}
	if got := sample(x, 20); len(got) != 10 || &got[0] == &x[0] {
		t.Errorf("short input must be copied whole, got %v", got)
	}
}
