package render

import (
	"encoding/binary"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"testing"
	"time"
	"unsafe"

	"github.com/tpcscan/tpcscan/scan"
)

// A three-plane view: 240×70 cells, three panes of 80×68 cells (two rows
// left for a title and a status line), each pane one half-block grid.
const (
	viewW, viewH = 240, 70
	paneW, paneH = 80, 68
)

// frame is one redraw of the three-plane view.
type frame struct {
	pyr   []*Pyramid
	rng   []Range
	grids []Grid
	c     *Canvas
	scale Scale
}

func newFrame(planes []*scan.Image) *frame {
	f := &frame{c: NewCanvas(viewW, viewH), scale: Scales()[0]}
	for _, img := range planes {
		f.pyr = append(f.pyr, NewPyramid(img))
		f.rng = append(f.rng, AutoRange(img, DefaultLoPct, DefaultHiPct))
		f.grids = append(f.grids, Grid{})
	}
	return f
}

// zoom returns the window of plane p at zoom factor z (1 = whole plane in
// the pane), centred on the middle of the plane.
func (f *frame) window(p int, z float64, t Tier) Window {
	px, py := PixelsPerCell(t)
	img := f.pyr[p].Image()
	gw, gh := float64(paneW*px), float64(paneH*py)
	wpp, tpp := float64(img.Wires)/gw/z, float64(img.Ticks)/gh/z
	return Window{
		Wire0: float64(img.Wires)/2 - wpp*gw/2, Tick0: float64(img.Ticks)/2 - tpp*gh/2,
		WiresPerPx: wpp, TicksPerPx: tpp,
	}
}

// draw samples, paints and writes out one frame, returning the lines.
func (f *frame) draw(z float64, t Tier) []string {
	px, py := PixelsPerCell(t)
	for p := range f.pyr {
		g := &f.grids[p]
		g.W, g.H = paneW*px, paneH*py
		f.pyr[p].Sample(g, f.window(p, z, t), ReduceMax)
		Paint(f.c, p*paneW, 1, g, f.scale, f.rng[p], t)
	}
	return f.c.Lines(t)
}

func linesBytes(lines []string) int {
	n := 0
	for _, l := range lines {
		n += len(l) + 1 // and a newline
	}
	return n
}

// zooms are the benchmarked zoom levels: the whole plane, 8× in, and one
// sample per pixel along the ticks (beyond that Sample only repeats).
var benchZooms = []struct {
	name string
	z    float64
}{{"zoom-out", 1}, {"mid", 8}, {"full", tarnTicks / (2 * paneH)}}

func BenchmarkFrame(b *testing.B) {
	f := newFrame(synthEvent())
	for _, tier := range []Tier{Tier256, TierTrueColor, Tier16, TierMono, TierBraille} {
		for _, z := range benchZooms {
			b.Run(tier.String()+"/"+z.name, func(b *testing.B) {
				b.ReportAllocs()
				runtime.LockOSThread()
				defer runtime.UnlockOSThread()
				var n int
				var wall, cpu []time.Duration
				for b.Loop() {
					t0, c0 := time.Now(), threadCPU()
					n = linesBytes(f.draw(z.z, tier))
					wall, cpu = append(wall, time.Since(t0)), append(cpu, threadCPU()-c0)
				}
				b.ReportMetric(float64(median(wall).Microseconds()), "median-µs")
				b.ReportMetric(float64(median(cpu).Microseconds()), "median-cpu-µs")
				b.ReportMetric(float64(n), "bytes/frame")
			})
		}
	}
}

// BenchmarkLoadPyramid compares building the pyramids of a full-size event
// with reading the same raw float32 bytes back from the page cache.
func BenchmarkLoadPyramid(b *testing.B) {
	planes := synthEvent()
	path := filepath.Join(b.TempDir(), "event.f32")
	var raw []byte
	for _, img := range planes {
		raw = append(raw, unsafe.Slice((*byte)(unsafe.Pointer(&img.Pix[0])), 4*len(img.Pix))...)
	}
	if err := os.WriteFile(path, raw, 0o600); err != nil {
		b.Fatal(err)
	}
	raw = nil
	if _, err := os.ReadFile(path); err != nil { // into the page cache
		b.Fatal(err)
	}
	b.Run("read", func(b *testing.B) {
		b.SetBytes(int64(4 * totalSamples(planes)))
		for b.Loop() {
			data, err := os.ReadFile(path)
			if err != nil {
				b.Fatal(err)
			}
			_ = binary.LittleEndian.Uint32(data)
		}
	})
	b.Run("pyramid", func(b *testing.B) {
		b.SetBytes(int64(4 * totalSamples(planes)))
		var extra int
		for b.Loop() {
			extra = 0
			for _, img := range planes {
				extra += NewPyramid(img).Bytes()
			}
		}
		b.ReportMetric(float64(extra)/float64(4*totalSamples(planes)), "extra-mem/raw")
	})
	// Both in turn, so that the ratio compares like with like on a busy
	// machine: median pyramid time over median read time.
	b.Run("ratio", func(b *testing.B) {
		var reads, builds []time.Duration
		for b.Loop() {
			t0 := time.Now()
			if _, err := os.ReadFile(path); err != nil {
				b.Fatal(err)
			}
			t1 := time.Now()
			for _, img := range planes {
				NewPyramid(img)
			}
			reads, builds = append(reads, t1.Sub(t0)), append(builds, time.Since(t1))
		}
		b.ReportMetric(float64(median(builds))/float64(median(reads)), "pyramid/read")
		b.ReportMetric(float64(median(reads).Milliseconds()), "read-ms")
		b.ReportMetric(float64(median(builds).Milliseconds()), "pyramid-ms")
	})
}

func median(d []time.Duration) time.Duration {
	s := slices.Clone(d)
	slices.Sort(s)
	return s[len(s)/2]
}

func totalSamples(planes []*scan.Image) int {
	n := 0
	for _, img := range planes {
		n += len(img.Pix)
	}
	return n
}

// BenchmarkAutoRange is the per-plane cost of the automatic colour range,
// paid once per event beside the pyramid.
func BenchmarkAutoRange(b *testing.B) {
	img := synthPlane(2000, tarnTicks, 1)
	for b.Loop() {
		AutoRange(img, DefaultLoPct, DefaultHiPct)
	}
}
