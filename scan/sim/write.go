package sim

import (
	"context"
	"encoding/json"
	"fmt"
	"runtime"
	"sync"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/scan/detector"
)

// maxFullInFlight bounds how many full-readout events (≈230 MB each with
// pixel truth) may be held in memory at once, whatever the core count.
const maxFullInFlight = 3

// WriteDataset generates opt.Events events of the Tarn detector and writes
// them as a dataset in dir, with a truth JSON and pixel truth per event.
// Events are generated on up to runtime.NumCPU() workers and written in
// index order, so the dataset is identical for a given seed whatever the
// core count. progress, if not nil, is called after each event is written.
// On error or cancellation no manifest is written.
func WriteDataset(ctx context.Context, dir string, opt Options, progress func(done, total int)) error {
	if err := opt.Validate(); err != nil {
		return fmt.Errorf("generate: %w", err)
	}
	det := detector.Tarn()
	w, err := dataset.Create(dir, det)
	if err != nil {
		return err
	}
	w.Compress = opt.Compress
	ctx, cancel := context.WithCancel(ctx)
	var wg sync.WaitGroup
	defer func() { // stop the feeder and the workers, then wait for them
		cancel()
		wg.Wait()
	}()

	n := opt.Events
	workers := max(1, min(runtime.NumCPU(), n))
	inflight := 2 * workers
	if opt.Size == SizeFull {
		workers, inflight = min(workers, maxFullInFlight), min(workers, maxFullInFlight)
	}
	type result struct {
		ev    *scan.Event
		truth []byte
		err   error
	}
	results := make([]chan result, n)
	for i := range results {
		results[i] = make(chan result, 1)
	}
	slots := make(chan struct{}, inflight) // events generated but not yet written
	next := make(chan int)
	wg.Add(1)
	go func() { // hand out indices in order, at most inflight ahead of the writer
		defer wg.Done()
		defer close(next)
		for i := range n {
			select {
			case slots <- struct{}{}:
			case <-ctx.Done():
				return
			}
			select {
			case next <- i:
			case <-ctx.Done():
				return
			}
		}
	}()
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				ev, tr := Generate(det, opt, i)
				js, err := json.MarshalIndent(tr, "", " ")
				results[i] <- result{ev: ev, truth: js, err: err}
			}
		}()
	}
	for i := range n {
		var res result
		select {
		case res = <-results[i]:
		case <-ctx.Done():
			return fmt.Errorf("generate %s: %w", dir, ctx.Err())
		}
		if res.err != nil {
			return fmt.Errorf("generate event %s: %w", EventID(i), res.err)
		}
		if err := w.Add(res.ev, res.truth); err != nil {
			return fmt.Errorf("generate %s: %w", dir, err)
		}
		<-slots
		if progress != nil {
			progress(i+1, n)
		}
	}
	if err := w.Close(); err != nil {
		return fmt.Errorf("generate %s: %w", dir, err)
	}
	return nil
}
