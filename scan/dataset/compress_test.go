package dataset

import (
	"path/filepath"
	"slices"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// A compressed dataset (one deflated .npz per event, as numpy's
// savez_compressed writes) loads to exactly the same event as the .npy
// layout, crops and pixel truth included, even when a truth plane is all
// zeros and so compresses near deflate's limit.
func TestWriterCompressRoundTrip(t *testing.T) {
	det := detector.Tarn()
	ev := &scan.Event{ID: "ev-1", Detector: det}
	for i := range det.Planes {
		img := scan.NewImage(300, 800)
		img.Wire0, img.Tick0 = 100*i, 1000
		for k := range img.Pix {
			img.Pix[k] = float32(k%7) - 3 // noise-like whole ADC counts
		}
		tr := &scan.TruthImage{Wires: 300, Ticks: 800, Wire0: img.Wire0, Tick0: img.Tick0, Pix: make([]int32, 300*800)}
		if i == 2 {
			for k := 5000; k < 5100; k++ {
				tr.Pix[k] = 3
			}
		}
		ev.Planes = append(ev.Planes, img)
		ev.Truth = append(ev.Truth, tr)
	}
	load := func(compress bool) *scan.Event {
		dir := filepath.Join(t.TempDir(), "ds")
		w, err := Create(dir, det)
		if err != nil {
			t.Fatal(err)
		}
		w.Compress = compress
		if err := w.Add(ev, []byte(`{"class":"cosmic"}`)); err != nil {
			t.Fatal(err)
		}
		if err := w.Close(); err != nil {
			t.Fatal(err)
		}
		if r := Check(t.Context(), dir, nil); len(r.Problems) > 0 {
			t.Fatalf("compress=%v: check found %v", compress, r.Problems)
		}
		d, err := Open(dir)
		if err != nil {
			t.Fatal(err)
		}
		got, err := d.Load("ev-1")
		if err != nil {
			t.Fatalf("compress=%v: %v", compress, err)
		}
		return got
	}
	plain, packed := load(false), load(true)
	for i := range ev.Planes {
		a, b := plain.Planes[i], packed.Planes[i]
		if a.Wire0 != b.Wire0 || a.Tick0 != b.Tick0 || !slices.Equal(a.Pix, b.Pix) || !slices.Equal(a.Pix, ev.Planes[i].Pix) {
			t.Errorf("plane %d differs between the .npy and .npz layouts", i)
		}
		if !slices.Equal(plain.Truth[i].Pix, packed.Truth[i].Pix) || !slices.Equal(packed.Truth[i].Pix, ev.Truth[i].Pix) {
			t.Errorf("pixel truth %d differs between the layouts", i)
		}
	}
}
