package dataset

import (
	"bytes"
	"context"
	"fmt"
	"sync"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// TestWriterConcurrent adds events from several goroutines (run with -race).
func TestWriterConcurrent(t *testing.T) {
	dir := t.TempDir()
	det := tiny()
	w, err := Create(dir, det)
	if err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	errs := make(chan error, 16)
	for i := range 16 {
		wg.Go(func() {
			errs <- w.Add(testEvent(det, fmt.Sprintf("e%02d", i), 4), []byte(`{}`))
		})
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		if err != nil {
			t.Error(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	var progress []int
	r := Check(context.Background(), dir, func(done, total int) {
		if total != 16 {
			t.Errorf("progress total %d", total)
		}
		progress = append(progress, done)
	})
	if !r.OK() || r.Events != 16 || r.Truth != 16 || len(progress) != 16 || progress[15] != 16 {
		t.Errorf("report %+v, progress %v", r, progress)
	}
}

func TestCheckCancelled(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	r := Check(ctx, "../../testdata/datasets/valid", nil)
	if r.OK() || r.Problems[len(r.Problems)-1].Msg[:17] != "check interrupted" {
		t.Errorf("problems %v", r.Problems)
	}
}

// tarnDataset writes one full-size Tarn event (1577 + 1577 + 2000 wires ×
// 5600 ticks, 28.9 million samples, 115 MB as float32).
func tarnDataset(b *testing.B) (*Dataset, string) {
	det := detector.Tarn()
	dir := b.TempDir()
	w, err := Create(dir, det)
	if err != nil {
		b.Fatal(err)
	}
	ev := &scan.Event{ID: "big", Detector: det}
	for _, p := range det.Planes {
		m := scan.NewImage(p.Wires, det.ReadoutTicks)
		for i := range m.Pix {
			m.Pix[i] = float32(i % 977)
		}
		ev.Planes = append(ev.Planes, m)
	}
	if err := w.Add(ev, nil); err != nil {
		b.Fatal(err)
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
	d, err := Open(dir)
	if err != nil {
		b.Fatal(err)
	}
	return d, dir
}

// BenchmarkLoadTarnEvent reads a full-size Tarn event from three .npy files.
func BenchmarkLoadTarnEvent(b *testing.B) {
	d, _ := tarnDataset(b)
	b.SetBytes(28_862_400 * 4)
	for b.Loop() {
		if _, err := d.Load("big"); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkDecodeCollPlane decodes one Tarn collection plane (2000 × 5600
// float32) from memory: the reader's cost without the disk.
func BenchmarkDecodeCollPlane(b *testing.B) {
	var buf bytes.Buffer
	pix := make([]float32, 2000*5600)
	if err := writeFloat32NPY(&buf, 2000, 5600, pix); err != nil {
		b.Fatal(err)
	}
	data := buf.Bytes()
	b.SetBytes(int64(len(data)))
	for b.Loop() {
		r := bytes.NewReader(data)
		h, err := readNPYHeader(r, int64(len(data)))
		if err != nil {
			b.Fatal(err)
		}
		if _, err := h.readFloat32(r); err != nil {
			b.Fatal(err)
		}
	}
}
