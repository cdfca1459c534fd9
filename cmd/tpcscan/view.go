package main

import (
	"context"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/ui"
)

func viewCommand() command {
	return command{
		name:    "view",
		summary: "open the event display on a dataset (or write a PNG snapshot)",
		run: func(ctx context.Context, env *environ, args []string) error {
			fs := newFlags(env, "view", "[FLAGS] DATASET", "Shows the dataset's events: three wire planes side by side sharing the drift-time axis.\nPress ? in the display for every key.")
			color := fs.String("color", "auto", "colour tier: auto, "+strings.Join(render.TierNames(), ", "))
			keys := fs.String("keys", "", "key map file (TOML; default "+ui.DefaultKeyMapPath()+" if it exists)")
			png := fs.String("png", "", "write a PNG snapshot of the view to this file instead of opening the display")
			event := fs.String("event", "", "event ID to show first (default: the first)")
			size := fs.String("size", "240x70", "snapshot size in cells, WIDTHxHEIGHT (with --png)")
			mev := mevFlag(fs)
			if err := fs.Parse(args); err != nil {
				return err
			}
			if err := checkMeV(*mev); err != nil {
				return err
			}
			if fs.NArg() != 1 {
				return usageError{"view needs one DATASET folder"}
			}
			ds, err := dataset.Open(fs.Arg(0))
			if err != nil {
				return err
			}
			tier, err := tierFlag(env, *color)
			if err != nil {
				return usageError{err.Error()}
			}
			opts := ui.Options{Dataset: ds, Tier: tier, Event: *event, MeVPerADC: *mev, Context: ctx}
			if *png != "" {
				w, h, err := parseSize(*size)
				if err != nil {
					return usageError{err.Error()}
				}
				return writeSnapshot(opts, w, h, *png)
			}
			if opts.Keys, err = keyMap(*keys); err != nil {
				return err
			}
			return runTUI(ctx, opts)
		},
	}
}

// mevFlag adds --mev-per-adc, the user's energy calibration for the legend.
func mevFlag(fs *flag.FlagSet) *float64 {
	return fs.Float64("mev-per-adc", 0, "energy calibration: MeV per ADC count of a sample; the colour legend then also reads in MeV (0: ADC only)")
}

func checkMeV(v float64) error {
	if v < 0 || math.IsNaN(v) || math.IsInf(v, 0) {
		return usageError{fmt.Sprintf("--mev-per-adc must be a finite number ≥ 0, got %g", v)}
	}
	return nil
}

// tierFlag resolves --color: "auto" detects the terminal's tier.
func tierFlag(env *environ, s string) (render.Tier, error) {
	if s == "" || s == "auto" {
		return render.DetectTier(env.getenv), nil
	}
	return render.ParseTier(s)
}

// keyMap reads --keys, or the default key file when it exists.
func keyMap(path string) (ui.KeyMap, error) {
	if path != "" {
		return ui.LoadKeyMapFile(path, false)
	}
	if def := ui.DefaultKeyMapPath(); def != "" {
		return ui.LoadKeyMapFile(def, true)
	}
	return ui.DefaultKeyMap(), nil
}

func parseSize(s string) (int, int, error) {
	ws, hs, ok := strings.Cut(strings.ToLower(s), "x")
	w, err1 := strconv.Atoi(ws)
	h, err2 := strconv.Atoi(hs)
	if !ok || err1 != nil || err2 != nil || w <= 0 || h <= 0 {
		return 0, 0, fmt.Errorf("size %q: want WIDTHxHEIGHT in cells, e.g. 240x70", s)
	}
	return w, h, nil
}

func writeSnapshot(opts ui.Options, w, h int, path string) error {
	c, err := ui.Snapshot(opts, w, h)
	if err != nil {
		return err
	}
	tmp, err := os.CreateTemp(filepath.Dir(path), ".snapshot-*.png")
	if err != nil {
		return fmt.Errorf("write snapshot: %w", err)
	}
	defer os.Remove(tmp.Name())
	if err := c.WritePNG(tmp); err != nil {
		tmp.Close()
		return fmt.Errorf("write snapshot %s: %w", path, err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("write snapshot %s: %w", path, err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("write snapshot: %w", err)
	}
	return nil
}

// runTUI runs the station on this terminal until the user quits or ctx
// ends (then the draft is saved first).
func runTUI(ctx context.Context, opts ui.Options) error {
	opts.Renderer = lipgloss.NewRenderer(os.Stdout)
	m := ui.New(opts)
	p := tea.NewProgram(m, tea.WithAltScreen(), tea.WithMouseCellMotion())
	done := make(chan struct{})
	defer close(done)
	go func() {
		// A signal saves the draft and quits through the model.
		select {
		case <-ctx.Done():
			p.Send(ui.ShutdownMsg{})
		case <-done:
		}
	}()
	if _, err := p.Run(); err != nil {
		return fmt.Errorf("display: %w", err)
	}
	return nil
}
