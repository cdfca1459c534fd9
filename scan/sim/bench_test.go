package sim

import (
	"testing"

	"github.com/tpcscan/tpcscan/scan/detector"
)

// BenchmarkGenerateDemo measures one demo-size event (budget: 50 ms on one core).
func BenchmarkGenerateDemo(b *testing.B) {
	det := detector.Tarn()
	i := 0
	for b.Loop() {
		Generate(det, Options{Seed: 1, Size: SizeDemo}, i%50)
		i++
	}
}

// BenchmarkGenerateFull measures one full-readout event (budget: 2 s, and
// at most twice the event's final size in memory).
func BenchmarkGenerateFull(b *testing.B) {
	det := detector.Tarn()
	i := 0
	for b.Loop() {
		Generate(det, Options{Seed: 1, Size: SizeFull}, i%50)
		i++
	}
}
