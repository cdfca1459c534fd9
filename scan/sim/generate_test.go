package sim

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// TestGenerateDeterministic checks that an event depends only on the seed
// and its index (so workers may generate events in any order).
func TestGenerateDeterministic(t *testing.T) {
	det := detector.Tarn()
	opt := Options{Seed: 7}
	a, ta := Generate(det, opt, 3)
	Generate(det, opt, 4) // an unrelated event in between changes nothing
	b, tb := Generate(det, opt, 3)
	ja, _ := json.Marshal(ta)
	jb, _ := json.Marshal(tb)
	if string(ja) != string(jb) {
		t.Fatal("truth differs between two generations of the same event")
	}
	for i := range a.Planes {
		if !slices.Equal(a.Planes[i].Pix, b.Planes[i].Pix) || !slices.Equal(a.Truth[i].Pix, b.Truth[i].Pix) {
			t.Fatalf("plane %d differs between two generations of the same event", i)
		}
	}
	c, _ := Generate(det, Options{Seed: 8}, 3)
	if slices.Equal(a.Planes[2].Pix, c.Planes[2].Pix) {
		t.Error("seeds 7 and 8 gave the same collection plane")
	}
}

// TestGenerateEvents checks the structure of generated events of every
// class: valid planes, the vertex inside the active volume and seen where
// the detector projects it, ADC counts that are integers, pixel-truth
// codes that name a particle, and the particles each class must contain.
func TestGenerateEvents(t *testing.T) {
	det := detector.Tarn()
	seen := map[string]int{}
	for i := range 40 {
		ev, tr := Generate(det, Options{Seed: 2}, i)
		if err := ev.Validate(); err != nil {
			t.Fatalf("event %d: %v", i, err)
		}
		seen[tr.Class]++
		checkClassContents(t, tr)
		if tr.Vertex != nil {
			v := tr.Vertex.Cm
			if !det.Contains(detector.Point{X: v[0], Y: v[1], Z: v[2]}) {
				t.Errorf("%s: vertex %v outside the active volume", tr.Event, v)
			}
			for pi, ph := range tr.Vertex.Planes {
				img := ev.Planes[pi]
				w, k := int(math.Round(ph.Wire))-img.Wire0, int(math.Round(ph.Tick))-img.Tick0
				if w < 0 || w >= img.Wires || k < 0 || k >= img.Ticks {
					t.Errorf("%s: vertex (wire %.0f, tick %.0f) outside the demo crop of plane %s", tr.Event, ph.Wire, ph.Tick, ph.Plane)
				}
			}
		}
		for pi, img := range ev.Planes {
			for _, v := range img.Pix[:1000] {
				if v != float32(math.Round(float64(v))) {
					t.Fatalf("%s plane %d: sample %g is not an ADC count", tr.Event, pi, v)
				}
			}
			var coded int
			for k, c := range ev.Truth[pi].Pix {
				if c < 0 || int(c) > len(tr.Particles) {
					t.Fatalf("%s plane %d: pixel code %d, only %d particles", tr.Event, pi, c, len(tr.Particles))
				}
				if c > 0 {
					coded++
				}
				// Noise is 2 ADC rms: 20 ADC is charge, and must be someone's.
				if c == 0 && img.Pix[k] >= 20 {
					t.Fatalf("%s plane %d: pixel %d holds %g ADC but no truth code", tr.Event, pi, k, img.Pix[k])
				}
			}
			if coded == 0 && tr.Class != ClassCosmic {
				t.Errorf("%s plane %d: no pixel has truth", tr.Event, pi)
			}
		}
	}
	for _, c := range Classes() {
		if seen[c] == 0 {
			t.Errorf("no %s event among 40 with the default mix", c)
		}
	}
}

// checkClassContents checks the particle content each class promises.
func checkClassContents(t *testing.T, tr *Truth) {
	t.Helper()
	count := map[string]int{}
	for _, p := range tr.Particles {
		if p.Origin == "interaction" && p.Parent == 0 {
			count[p.Type]++
		}
		if p.ID < 1 || p.ID > len(tr.Particles) || p.Parent >= p.ID {
			t.Errorf("%s: particle %d has parent %d", tr.Event, p.ID, p.Parent)
		}
		if p.Parent > 0 {
			parent := tr.Particles[p.Parent-1]
			// Children: π0 photons, products of nuclear interactions, decay
			// muons of stopped π⁺ (4.12 MeV, PDG masses), Michel electrons
			// (≤ 52.83 MeV) of stopped muons.
			ok := parent.Type == "pi0" && p.Type == "photon" ||
				parent.Interacted && (p.Type == "proton" || p.Type == "pion" && parent.Type == "pion") && p.KEMeV < parent.KEMeV ||
				parent.Type == "pion" && parent.Stopped && p.Type == "muon" && math.Abs(p.KEMeV-4.12) < 0.01 ||
				parent.Type == "muon" && parent.Stopped && p.Type == "electron" && p.KEMeV <= 52.83
			if !ok {
				t.Errorf("%s: %s (%.2f MeV) cannot come from %s", tr.Event, p.Type, p.KEMeV, parent.Type)
			}
		}
	}
	want := map[string]map[string]int{
		ClassNumuCC:  {"muon": 1, "electron": 0, "pi0": 0},
		ClassNueCC:   {"electron": 1, "muon": 0, "pion": 0, "pi0": 0},
		ClassNCPi0:   {"pi0": 1, "muon": 0, "electron": 0},
		ClassNCOther: {"pi0": 0, "muon": 0, "electron": 0},
		ClassCosmic:  {"muon": 0, "electron": 0, "proton": 0, "pi0": 0, "pion": 0},
	}[tr.Class]
	for typ, n := range want {
		if count[typ] != n {
			t.Errorf("%s (%s): %d primary %s, want %d", tr.Event, tr.Class, count[typ], typ, n)
		}
	}
	if (tr.Vertex == nil) != (tr.Class == ClassCosmic) {
		t.Errorf("%s (%s): vertex %v", tr.Event, tr.Class, tr.Vertex)
	}
}

// TestFullSize checks that a full event covers every wire and tick.
func TestFullSize(t *testing.T) {
	if testing.Short() {
		t.Skip("full event is 230 MB")
	}
	det := detector.Tarn()
	ev, _ := Generate(det, Options{Seed: 1, Size: SizeFull, Mix: map[string]float64{ClassCosmic: 1}}, 0)
	var samples int
	for i, img := range ev.Planes {
		if img.Wires != det.Planes[i].Wires || img.Ticks != det.ReadoutTicks || img.Wire0 != 0 || img.Tick0 != 0 {
			t.Errorf("plane %d: %d×%d from (%d, %d)", i, img.Wires, img.Ticks, img.Wire0, img.Tick0)
		}
		samples += len(img.Pix)
	}
	if samples < 28e6 || samples > 30e6 {
		t.Errorf("%d samples, want about 29 million", samples)
	}
}

// TestResponseChargeConservation checks the readout chain without noise:
// the pulses of a deposit sum (over wires and ticks) to its charge after
// lifetime attenuation times σ_shaping·√(2π), the area of a pulse whose
// peak is the charge.
func TestResponseChargeConservation(t *testing.T) {
	det := detector.Tarn()
	r := eventRand(5, 0)
	vol := box{lo: vec{0, -100, 0}, hi: vec{200, 100, 600}}
	g := &generator{r: r, det: det, vol: vol, tr: newTransport(r, vol, 0.5), truth: &Truth{}}
	x := 120.0
	g.tr.code = 1
	g.tr.depositSeg(vec{x, 0, 300}, vec{x + 1, 0.5, 303}, 10, 2.1)
	q := float64(g.tr.deps[0].q)
	tUs := (x + 0.5) / det.DriftVelocityCmUs
	sigSh := shapingUs / det.SamplingUs
	want := q * math.Exp(-tUs/lifetimeUs) * sigSh * math.Sqrt(2*math.Pi)
	for i := range det.Planes {
		win := g.window(i, SizeDemo, vec{x, 0, 300})
		img := testImage(win)
		tru := testTruth(win)
		hits, start := bucketByWire(g.planeHits(i, win), win.wires)
		fill(img, tru, hits, start)
		var sum float64
		for _, v := range img.Pix {
			sum += float64(v)
		}
		// ±3σ pulses keep 99.7% of the area.
		if relErr(sum, want) > 0.005 {
			t.Errorf("plane %d: pulse area %.0f, want %.0f", i, sum, want)
		}
	}
}

func testImage(w window) *scan.Image {
	return &scan.Image{Wires: w.wires, Ticks: w.ticks, Wire0: w.wire0, Tick0: w.tick0, Pix: make([]float32, w.wires*w.ticks)}
}

func testTruth(w window) *scan.TruthImage {
	return &scan.TruthImage{Wires: w.wires, Ticks: w.ticks, Wire0: w.wire0, Tick0: w.tick0, Pix: make([]int32, w.wires*w.ticks)}
}

// TestOptionsValidate checks the errors for bad options and mixes.
func TestOptionsValidate(t *testing.T) {
	for _, c := range []struct {
		name, mix, size string
		events          int
		want            string
	}{
		{"ok", "numu-cc=1,cosmic=0.5", "demo", 3, ""},
		{"unknown class", "numu=1", "demo", 3, `unknown class "numu"`},
		{"negative weight", "numu-cc=-1,cosmic=1", "demo", 3, "≥ 0"},
		{"zero sum", "numu-cc=0", "", 3, "sum to zero"},
		{"size", "", "huge", 3, `size "huge"`},
		{"events", "", "full", 0, "events must be at least 1"},
	} {
		t.Run(c.name, func(t *testing.T) {
			var mix map[string]float64
			if c.mix != "" {
				var err error
				if mix, err = ParseMix(c.mix); err != nil {
					t.Fatal(err)
				}
			}
			err := Options{Events: c.events, Size: c.size, Mix: mix}.Validate()
			if c.want == "" && err != nil || c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)) {
				t.Errorf("Validate() = %v, want %q", err, c.want)
			}
		})
	}
	for _, bad := range []string{"numu-cc", "numu-cc=x"} {
		if _, err := ParseMix(bad); err == nil {
			t.Errorf("ParseMix(%q) succeeded", bad)
		}
	}
}

// TestWriteDataset writes a small dataset, checks it with the dataset
// package and reads an event and its truth back.
func TestWriteDataset(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "demo")
	var calls int
	if err := WriteDataset(context.Background(), dir, Options{Events: 6, Seed: 4}, func(done, total int) {
		calls++
		if done != calls || total != 6 {
			t.Errorf("progress(%d, %d) at call %d", done, total, calls)
		}
	}); err != nil {
		t.Fatal(err)
	}
	rep := dataset.Check(context.Background(), dir, nil)
	if !rep.OK() {
		t.Fatalf("dataset check: %+v", rep.Problems)
	}
	ds, err := dataset.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(ds.Events()) != 6 || ds.Events()[0].ID != EventID(0) {
		t.Fatalf("events %v", ds.Events())
	}
	ev, err := ds.Load(EventID(2))
	if err != nil {
		t.Fatal(err)
	}
	want, _ := Generate(detector.Tarn(), Options{Seed: 4}, 2)
	if !slices.Equal(ev.Planes[2].Pix, want.Planes[2].Pix) || ev.Truth == nil || !slices.Equal(ev.Truth[2].Pix, want.Truth[2].Pix) {
		t.Error("event read back differs from the generated one")
	}
	js, err := ds.TruthJSON(EventID(2))
	if err != nil {
		t.Fatal(err)
	}
	var tr Truth
	if err := json.Unmarshal(js, &tr); err != nil || tr.Event != EventID(2) || !slices.Contains(Classes(), tr.Class) {
		t.Errorf("truth %s: %v", js, err)
	}
	if err := WriteDataset(context.Background(), dir, Options{Events: 1}, nil); err == nil {
		t.Error("writing over an existing dataset succeeded")
	}
	// A file where event 2's folder should go makes its Add fail: the
	// error must come back (not a hang) and no manifest be written.
	dir3 := filepath.Join(t.TempDir(), "blocked")
	if err := os.MkdirAll(dir3, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir3, EventID(2)), nil, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := WriteDataset(context.Background(), dir3, Options{Events: 12}, nil); err == nil || !strings.Contains(err.Error(), EventID(2)) {
		t.Errorf("write over a blocked event folder returned %v", err)
	}
	if _, err := dataset.Open(dir3); err == nil {
		t.Error("a failed write left a dataset that opens")
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	dir2 := filepath.Join(t.TempDir(), "cancelled")
	if err := WriteDataset(ctx, dir2, Options{Events: 50}, nil); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled write returned %v", err)
	}
	if _, err := dataset.Open(dir2); err == nil {
		t.Error("a cancelled write left a dataset that opens")
	}
}

// TestMIPWireCharge follows minimum-ionising muons through the whole
// readout chain and back, as a scanner's dE/dx tool would: 1 GeV/c muons
// crossing the collection wires at right angles (3 mm per wire), parallel
// to the wire planes, at several drift distances. Each wire's pulse area
// is turned into charge (area·gain/(σ_shaping·√2π)), corrected for the
// electron lifetime, and converted to dE/dx by inverting the modified box
// model (§7). The most probable value must lie in the 1.6–1.75 MeV/cm of
// §9. It sits above the thin-layer MPV for 3 mm at 1 GeV/c, 1.607 MeV/cm
// ([PDG34] eq. 34.12), because a wire's charge mixes parts of two steps and
// diffusion shares charge with the neighbours: the effective layer is
// thicker, and the MPV grows with thickness (§2: 1.66 at 5 mm).
func TestMIPWireCharge(t *testing.T) {
	det := detector.Tarn()
	r := eventRand(21, 0)
	vol := box{lo: vec{0, -det.HeightCm / 2, 0}, hi: vec{det.DriftLengthCm, det.HeightCm / 2, det.LengthCm}}
	g := &generator{r: r, det: det, vol: vol, tr: newTransport(r, vol, det.DriftFieldKVcm), truth: &Truth{}}
	g.tr.code = 1
	var xs []float64
	for k := range 40 {
		x := 20 + 2*float64(k) // 25 ticks apart: pulses of σ ≈ 2.5 ticks do not overlap
		xs = append(xs, x)
		g.tr.heavy(spMuon, vec{x, 0, 100.2}, vec{0, 0, 1}, muonT(1000), math.Inf(1))
	}
	planes, _ := g.readout(SizeDemo, vec{60, 0, 100})
	ci := det.PlaneIndex(detector.Collection)
	img := planes[ci]
	sigSh := shapingUs / det.SamplingUs
	var dedx []float64
	for _, x := range xs {
		tick := int(math.Round(det.Tick(x))) - img.Tick0
		att := math.Exp(-x / det.DriftVelocityCmUs / lifetimeUs)
		for z := 105.0; z < 180; z += det.Planes[ci].PitchCm {
			w := int(math.Round(det.Planes[ci].Wire(0, z))) - img.Wire0
			var area float64
			for k := tick - 12; k <= tick+12; k++ {
				area += float64(img.At(w, k))
			}
			q := area * electronsADC / (sigSh * math.Sqrt(2*math.Pi)) / att // electrons on the wire
			dQdx := q * wIon / det.Planes[ci].PitchCm                       // MeV/cm after recombination
			rhoE := larDensity * det.DriftFieldKVcm
			dedx = append(dedx, rhoE/boxBeta*(math.Exp(boxBeta*dQdx/rhoE)-boxAlpha))
		}
	}
	got := histMode(dedx, 1.0, 3.0, 0.04)
	t.Logf("MPV %.3f MeV/cm from %d wires", got, len(dedx))
	if got < 1.60 || got > 1.75 {
		t.Errorf("MPV of reconstructed dE/dx %.3f MeV/cm, want 1.60–1.75", got)
	}
}

// histMode returns the mode of the values in [lo, hi): the vertex of a
// parabola fitted to the seven bins of width bw around the highest one
// (profilePeak).
func histMode(v []float64, lo, hi, bw float64) float64 {
	h := make([]float64, int((hi-lo)/bw))
	for _, x := range v {
		if k := int((x - lo) / bw); x >= lo && k < len(h) {
			h[k]++
		}
	}
	return lo + profilePeak(h, bw)
}

// TestNoise checks the digitised noise of an empty plane: 400 e⁻ rms at
// 200 e⁻ per count is 2 ADC, plus the rounding's 1/12 in quadrature,
// within 3% (§7: cold-electronics ENC < 400 e⁻). Neighbouring ticks are
// correlated as white noise smoothed by a Gaussian of σ = 1 tick:
// ρ(1) = exp(−1/(4σ²)) = 0.779 before rounding, within 0.03.
func TestNoise(t *testing.T) {
	r := eventRand(22, 0)
	img := testImage(window{wires: 300, ticks: 1200})
	digitise(r, img, noiseTable(r, 1200))
	var s2, s11 float64
	for w := range img.Wires {
		row := img.Row(w)
		for k := range row {
			v := float64(row[k])
			s2 += v * v
			if k > 0 {
				s11 += v * float64(row[k-1])
			}
		}
	}
	n := float64(len(img.Pix))
	rms := math.Sqrt(s2 / n)
	want := math.Sqrt(4 + 1.0/12)
	if relErr(rms, want) > 0.03 {
		t.Errorf("noise rms %.3f ADC, want %.3f", rms, want)
	}
	rho := s11 / (n - float64(img.Wires)) / (s2 / n)
	if math.Abs(rho-math.Exp(-0.25)*4/(4+1.0/12)) > 0.03 {
		t.Errorf("lag-1 correlation %.3f, want %.3f", rho, math.Exp(-0.25))
	}
}
