package main

import (
	"context"
	"encoding/json"
	"fmt"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/scan/sim"
)

const demoDefaultMix = "numu-cc=0.4,nue-cc=0.15,nc-pi0=0.15,nc-other=0.15,cosmic=0.15"

func demoCommand() command {
	return command{
		name:    "demo",
		summary: "generate demo events of the invented Tarn detector, with truth",
		run:     runDemo,
	}
}

func runDemo(ctx context.Context, env *environ, args []string) error {
	fs := newFlags(env, "demo", "[FLAGS]", strings.Join([]string{
		"Generates a dataset of simulated events of the invented Tarn test stand: neutrino",
		"interactions (numu-cc, nue-cc, nc-pi0, nc-other) and cosmic-only windows, with cosmic",
		"muons overlaid on every window. Each event gets its three planes, a truth.json (class,",
		"vertex, particles) and per-pixel truth. The output is the same for the same seed.",
	}, "\n"))
	events := fs.Int("events", 200, "number of events `N`")
	seed := fs.Int64("seed", 1, "random seed `S`: the same seed gives the same dataset")
	out := fs.String("out", "tarn-demo", "dataset folder `DIR` to create")
	mix := fs.String("mix", demoDefaultMix, "class weights `LIST`: class=weight,… (classes: numu-cc, nue-cc, nc-pi0, nc-other, cosmic)")
	size := fs.String("size", sim.SizeDemo, "`SIZE`: demo (a 400-wire × 1200-tick crop around the interaction) or full (the whole readout, ~29 M samples and ~230 MB per event)")
	pngDir := fs.String("png", "", "also write a PNG of every plane of every event into folder `DIR`")
	compress := fs.Bool("compress", false, "write each event as one deflated .npz (several times smaller; slower to load)")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if fs.NArg() != 0 {
		return usageError{fmt.Sprintf("demo takes no arguments, got %q", fs.Args())}
	}
	m, err := sim.ParseMix(*mix)
	if err != nil {
		return usageError{err.Error()}
	}
	opt := sim.Options{Events: *events, Seed: *seed, Size: *size, Mix: m, Compress: *compress}
	if err := opt.Validate(); err != nil {
		return usageError{err.Error()}
	}
	bar := newProgress(env, "generating", opt.Events)
	err = sim.WriteDataset(ctx, *out, opt, func(int, int) { bar.Step(1) })
	bar.Finish()
	if err != nil {
		return err
	}
	counts, err := demoClasses(*out)
	if err != nil {
		return err
	}
	fmt.Fprintf(env.stdout, "wrote %d events to %s (%s)\n", opt.Events, *out, counts)
	if *pngDir != "" {
		return demoPNGs(ctx, env, *out, *pngDir)
	}
	return nil
}

// demoClasses summarises the classes of a generated dataset from its truth.
func demoClasses(dir string) (string, error) {
	ds, err := dataset.Open(dir)
	if err != nil {
		return "", err
	}
	n := map[string]int{}
	for _, e := range ds.Events() {
		js, err := ds.TruthJSON(e.ID)
		if err != nil {
			return "", err
		}
		var t sim.Truth
		if err := json.Unmarshal(js, &t); err != nil {
			return "", fmt.Errorf("event %s: read truth: %w", e.ID, err)
		}
		n[t.Class]++
	}
	var parts []string
	for _, c := range sim.Classes() {
		if n[c] > 0 {
			parts = append(parts, fmt.Sprintf("%s %d", c, n[c]))
		}
	}
	return strings.Join(parts, ", "), nil
}

// demoPNGs writes every plane of every event of the dataset in dir as a
// PNG in the default colour scale, on a logarithmic range from 4 ADC (two
// noise σ) to 400 ADC; each picture row holds the maximum of 4 ticks, so
// pixels are nearly square (3 mm × 3.2 mm).
func demoPNGs(ctx context.Context, env *environ, dir, pngDir string) error {
	ds, err := dataset.Open(dir)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(pngDir, 0o755); err != nil {
		return fmt.Errorf("png: %w", err)
	}
	evs := ds.Events()
	sort.Slice(evs, func(i, j int) bool { return evs[i].ID < evs[j].ID })
	bar := newProgress(env, "pictures", len(evs))
	defer bar.Finish()
	for _, e := range evs {
		if err := ctx.Err(); err != nil {
			return err
		}
		ev, err := ds.Load(e.ID)
		if err != nil {
			return err
		}
		for i, m := range ev.Planes {
			name := filepath.Join(pngDir, fmt.Sprintf("%s_%s.png", ev.ID, ds.Detector().Planes[i].Role))
			if err := writePlanePNG(name, m); err != nil {
				return err
			}
		}
		bar.Step(1)
	}
	return nil
}

func writePlanePNG(name string, m *scan.Image) error {
	const ticksPerRow = 4
	scale := render.Scales()[0]
	rng := render.Range{Lo: 4, Hi: 400, Log: true}
	rows := (m.Ticks + ticksPerRow - 1) / ticksPerRow
	pic := image.NewRGBA(image.Rect(0, 0, m.Wires, rows))
	for w := range m.Wires {
		row := m.Row(w)
		for y := range rows {
			v := row[y*ticksPerRow]
			for _, s := range row[y*ticksPerRow : min(len(row), (y+1)*ticksPerRow)] {
				v = max(v, s)
			}
			pic.SetRGBA(w, y, scale.Color(rng.Frac(float64(v))))
		}
	}
	f, err := os.Create(name)
	if err != nil {
		return fmt.Errorf("png: %w", err)
	}
	if err := png.Encode(f, pic); err != nil {
		f.Close()
		return fmt.Errorf("png %s: %w", name, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("png %s: %w", name, err)
	}
	return nil
}
