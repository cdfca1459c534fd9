package dataset

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"sync"
)

// Problem is one thing wrong with a dataset.
type Problem struct {
	Event string // empty for problems of the whole dataset
	File  string // relative to the dataset folder; empty if none
	Msg   string
}

func (p Problem) String() string {
	s := p.Msg
	if p.File != "" {
		s = p.File + ": " + s
	}
	if p.Event != "" {
		s = "event " + p.Event + ": " + s
	}
	return s
}

// Report is the outcome of checking a whole dataset.
type Report struct {
	Dir      string
	Detector string
	// Planes lists the detector's planes as role and wire count.
	Planes []PlaneSummary
	// Events counts the manifest's events; Loaded those that read cleanly.
	Events, Loaded int
	Sources        map[Source]int
	Truth          int   // events with a truth JSON file
	PixelTruth     int   // events with pixel truth on at least one plane
	Samples        int64 // plane samples in the loaded events
	Bytes          int64 // bytes of the events' files on disk
	Problems       []Problem
}

// PlaneSummary describes one detector plane.
type PlaneSummary struct {
	Role  string
	Wires int
	Ticks int // readout ticks
}

// OK reports whether no problem was found.
func (r *Report) OK() bool { return len(r.Problems) == 0 }

// Check reads every event of the dataset in dir and reports each problem
// with the event and file it is in. progress, if not nil, is called after
// each event. Cancelling ctx stops the check and adds a problem saying so.
func Check(ctx context.Context, dir string, progress func(done, total int)) Report {
	r := Report{Dir: dir, Sources: map[Source]int{}}
	d, err := Open(dir)
	if err != nil {
		r.addErr(err)
		return r
	}
	det := d.Detector()
	r.Detector = det.Name
	for _, p := range det.Planes {
		r.Planes = append(r.Planes, PlaneSummary{Role: string(p.Role), Wires: p.Wires, Ticks: det.ReadoutTicks})
	}
	events := d.Events()
	r.Events = len(events)
	if len(events) == 0 {
		r.Problems = append(r.Problems, Problem{File: ManifestName, Msg: "the manifest lists no events"})
	}
	root, err := os.OpenRoot(dir)
	if err != nil {
		r.addErr(err)
		return r
	}
	defer root.Close()
	r.checkEvents(ctx, d, root, progress)
	return r
}

// checkEvents reads the events on a few goroutines (one per core, at most
// four: each holds a whole event in memory) and merges their results in
// manifest order, so that the report and the progress calls are
// deterministic.
func (r *Report) checkEvents(ctx context.Context, d *Dataset, root *os.Root, progress func(done, total int)) {
	events := d.Events()
	n := len(events)
	results := make([]eventResult, n)
	done := make([]chan struct{}, n)
	for i := range done {
		done[i] = make(chan struct{})
	}
	jobs := make(chan int)
	stop := make(chan struct{})
	var wg sync.WaitGroup
	defer wg.Wait()
	defer close(stop)
	go func() {
		defer close(jobs)
		for i := range n {
			select {
			case jobs <- i:
			case <-stop:
				return
			}
		}
	}()
	for range min(runtime.GOMAXPROCS(0), 4, max(n, 1)) {
		wg.Go(func() {
			for i := range jobs {
				results[i] = checkEvent(d, root, events[i])
				close(done[i])
			}
		})
	}
	for i := range n {
		if err := ctx.Err(); err != nil {
			r.Problems = append(r.Problems, Problem{Msg: fmt.Sprintf("check interrupted after %d of %d events: %v", i, n, err)})
			return
		}
		select {
		case <-done[i]:
		case <-ctx.Done():
			r.Problems = append(r.Problems, Problem{Msg: fmt.Sprintf("check interrupted after %d of %d events: %v", i, n, ctx.Err())})
			return
		}
		r.merge(events[i], &results[i])
		results[i] = eventResult{}
		if progress != nil {
			progress(i+1, n)
		}
	}
}

// eventResult is what checking one event found.
type eventResult struct {
	bytes, samples     int64
	loaded, pixelTruth bool
	problems           []Problem
}

func (r *Report) merge(info EventInfo, res *eventResult) {
	r.Sources[info.Source]++
	if info.HasTruth {
		r.Truth++
	}
	r.Bytes += res.bytes
	r.Samples += res.samples
	if res.loaded {
		r.Loaded++
	}
	if res.pixelTruth {
		r.PixelTruth++
	}
	r.Problems = append(r.Problems, res.problems...)
}

func checkEvent(d *Dataset, root *os.Root, info EventInfo) eventResult {
	var res eventResult
	for _, f := range info.Files {
		if st, err := root.Stat(filepath.FromSlash(f)); err == nil {
			res.bytes += st.Size()
		}
	}
	var sub Report
	ev, err := d.Load(info.ID)
	if err != nil {
		sub.addErr(err)
	} else {
		res.loaded = true
		for _, m := range ev.Planes {
			res.samples += int64(len(m.Pix))
		}
		for _, t := range ev.Truth {
			res.pixelTruth = res.pixelTruth || t != nil
		}
	}
	if info.HasTruth {
		js, err := d.TruthJSON(info.ID)
		switch {
		case err != nil:
			sub.addErr(err)
		case !json.Valid(js):
			sub.Problems = append(sub.Problems, Problem{Event: info.ID, File: info.entry.Truth, Msg: "truth file is not valid JSON"})
		}
	}
	res.problems = sub.Problems
	return res
}

// addErr turns an error into problems, one per manifest problem.
func (r *Report) addErr(err error) {
	var me *ManifestError
	if errors.As(err, &me) {
		for _, p := range me.Problems {
			r.addOne(p, ManifestName)
		}
		return
	}
	r.addOne(err, "")
}

func (r *Report) addOne(err error, file string) {
	var e *Error
	if errors.As(err, &e) {
		r.Problems = append(r.Problems, Problem{Event: e.Event, File: e.File, Msg: e.Err.Error()})
		return
	}
	r.Problems = append(r.Problems, Problem{File: file, Msg: err.Error()})
}

// SortedSources returns the source counts in a stable order.
func (r *Report) SortedSources() []Source {
	out := make([]Source, 0, len(r.Sources))
	for s := range r.Sources {
		out = append(out, s)
	}
	sort.Slice(out, func(i, j int) bool { return out[i] < out[j] })
	return out
}
