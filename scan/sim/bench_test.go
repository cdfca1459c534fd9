package sim

import (
	"runtime"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// BenchmarkGenerateDemo measures one demo-size event (budget: 50 ms on one core).
func BenchmarkGenerateDemo(b *testing.B) { benchGenerate(b, SizeDemo) }

// BenchmarkGenerateFull measures one full-readout event (budget: 2 s, and
// at most twice the event's final size in memory). The "alloc/event"
// metric is the memory allocated per event over the final size of its
// planes and pixel truth: an upper bound on the generation's peak.
func BenchmarkGenerateFull(b *testing.B) { benchGenerate(b, SizeFull) }

func benchGenerate(b *testing.B, size string) {
	det := detector.Tarn()
	var before, after runtime.MemStats
	var final, n int
	runtime.ReadMemStats(&before)
	for b.Loop() {
		ev, _ := Generate(det, Options{Seed: 1, Size: size}, n%50)
		final += eventBytes(ev)
		n++
	}
	runtime.ReadMemStats(&after)
	b.ReportMetric(float64(after.TotalAlloc-before.TotalAlloc)/float64(final), "alloc/event")
	b.ReportMetric(float64(final)/float64(n)/1e6, "MB/event")
}

func eventBytes(ev *scan.Event) int {
	var s int
	for i := range ev.Planes {
		s += 4*len(ev.Planes[i].Pix) + 4*len(ev.Truth[i].Pix)
	}
	return s
}
