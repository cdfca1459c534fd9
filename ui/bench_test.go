package ui

import (
	"os"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/scan/detector"
	"github.com/tpcscan/tpcscan/scan/sim"
)

// BenchmarkFrameView times one full frame of the 240×70 three-plane view
// of a full-size synthetic event (1578 + 1578 + 2000 wires × 5600 ticks,
// about 29 million samples) at three zoom levels. Every iteration samples
// and paints all three panes again (as after a zoom or pan) and writes the
// whole frame; the target is ≤ 2 ms, independent of zoom.
func BenchmarkFrameView(b *testing.B) {
	ev := synthEvent(detector.Tarn(), "full", 0)
	for _, tc := range []struct {
		name  string
		zooms int
	}{{"zoom-out", 0}, {"mid", 3}, {"full-zoom", 7}} {
		b.Run(tc.name, func(b *testing.B) {
			m := newViewModel(b, &fixedSource{evs: []*scan.Event{ev}}, 240, 70, render.Tier256)
			v := m.pv
			w, tk := v.det.Project(0, synthVertex)
			v.cur = point{Plane: 0, Wire: w, Tick: tk}
			for range tc.zooms {
				keys(b, m, "+")
			}
			b.ReportAllocs()
			b.ResetTimer()
			cpu := cpuTime()
			for b.Loop() {
				v.keys = nil
				m.dirty = true
				_ = m.View()
			}
			reportCPU(b, cpu)
			b.ReportMetric(v.cellWires(0), "wires/cell")
		})
	}
}

// BenchmarkFrameViewCursor times a frame after a cursor step: the images
// are cached, only overlays and the text are redone.
func BenchmarkFrameViewCursor(b *testing.B) {
	ev := synthEvent(detector.Tarn(), "full", 0)
	m := newViewModel(b, &fixedSource{evs: []*scan.Event{ev}}, 240, 70, render.Tier256)
	b.ReportAllocs()
	cpu := cpuTime()
	for i := 0; b.Loop(); i++ {
		if i%2 == 0 {
			m.pv.moveCursor(1, 0)
		} else {
			m.pv.moveCursor(-1, 0)
		}
		m.dirty = true
		_ = m.View()
	}
	reportCPU(b, cpu)
}

// cpuTime is the process's user + system CPU time. On a machine shared by
// many jobs, wall-clock ns/op mostly measures waiting for a core; CPU
// time per op is the cost of the frame itself.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

func reportCPU(b *testing.B, start time.Duration) {
	if start == 0 || b.N == 0 {
		return
	}
	b.ReportMetric(float64(cpuTime()-start)/float64(b.N), "cpu-ns/op")
}

// BenchmarkPrepareEvent times building the pyramids and ranges of a
// full-size event (the loading half is the dataset package's benchmark).
func BenchmarkPrepareEvent(b *testing.B) {
	ev := synthEvent(detector.Tarn(), "full", 0)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := prepare(ev); err != nil {
			b.Fatal(err)
		}
	}
}

// TestFrameBytes measures a full redraw of the 240×70 view of a typical
// demo event per colour tier: in the 256-colour tier it must fit in
// 64 KB, so that a slow SSH link redraws in well under a second.
func TestFrameBytes(t *testing.T) {
	det := detector.Tarn()
	ev, _ := sim.Generate(det, sim.Options{Events: 1, Seed: 1, Size: sim.SizeDemo}, 0)
	src := &fixedSource{evs: []*scan.Event{ev}}
	for _, tier := range []render.Tier{render.TierTrueColor, render.Tier256, render.Tier16, render.TierMono, render.TierBraille} {
		m := newViewModel(t, src, 240, 70, tier)
		n := len(m.View())
		t.Logf("%-9s full frame %6d bytes", tier, n)
		if tier == render.Tier256 && n > 64<<10 {
			t.Errorf("256-colour full frame is %d bytes, over 64 KB", n)
		}
	}
}

// BenchmarkLoadPrepare compares, in one run, reading a full-size event's
// raw plane files from the page cache with loading it through the dataset
// package and building its pyramids (the target: at most twice the raw
// read). It also reports the prepared event's extra memory relative to
// the raw samples.
func BenchmarkLoadPrepare(b *testing.B) {
	det := detector.Tarn()
	dir := b.TempDir()
	w, err := dataset.Create(dir, det)
	if err != nil {
		b.Fatal(err)
	}
	ev := synthEvent(det, "full", 0)
	if err := w.Add(ev, nil); err != nil {
		b.Fatal(err)
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
	ds, err := dataset.Open(dir)
	if err != nil {
		b.Fatal(err)
	}
	info, _ := ds.Event("full")
	b.Run("read-raw", func(b *testing.B) {
		for b.Loop() {
			for _, f := range info.Files {
				if _, err := os.ReadFile(filepath.Join(dir, f)); err != nil {
					b.Fatal(err)
				}
			}
		}
	})
	b.Run("load+pyramid", func(b *testing.B) {
		var p *prepared
		for b.Loop() {
			if p, err = loadEvent(DatasetSource{D: ds}, "full"); err != nil {
				b.Fatal(err)
			}
		}
		raw, extra := 0, 0
		for i, img := range p.ev.Planes {
			raw += 4 * len(img.Pix)
			extra += p.pyr[i].Bytes()
		}
		b.ReportMetric(float64(raw+extra)/float64(raw), "mem/raw")
	})
}
