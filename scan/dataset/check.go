package dataset

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sort"
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
	for i, info := range events {
		if err := ctx.Err(); err != nil {
			r.Problems = append(r.Problems, Problem{Msg: fmt.Sprintf("check interrupted after %d of %d events: %v", i, len(events), err)})
			return r
		}
		r.checkEvent(d, root, info)
		if progress != nil {
			progress(i+1, len(events))
		}
	}
	return r
}

func (r *Report) checkEvent(d *Dataset, root *os.Root, info EventInfo) {
	r.Sources[info.Source]++
	for _, f := range info.Files {
		if st, err := root.Stat(filepath.FromSlash(f)); err == nil {
			r.Bytes += st.Size()
		}
	}
	ev, err := d.Load(info.ID)
	if err != nil {
		r.addErr(err)
	} else {
		r.Loaded++
		for _, m := range ev.Planes {
			r.Samples += int64(len(m.Pix))
		}
		for _, t := range ev.Truth {
			if t != nil {
				r.PixelTruth++
				break
			}
		}
	}
	if !info.HasTruth {
		return
	}
	r.Truth++
	js, err := d.TruthJSON(info.ID)
	switch {
	case err != nil:
		r.addErr(err)
	case !json.Valid(js):
		r.Problems = append(r.Problems, Problem{Event: info.ID, File: info.entry.Truth, Msg: "truth file is not valid JSON"})
	}
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
