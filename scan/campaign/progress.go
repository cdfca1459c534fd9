package campaign

import (
	"slices"
	"sort"

	"github.com/tpcscan/tpcscan/scan"
)

// ScannerProgress is one scanner's work in a campaign.
type ScannerProgress struct {
	Name                     string
	Open, Submitted, Skipped int
	Seconds                  float64 // time spent on all passes
	Median                   float64 // median seconds per submitted pass
}

// EventProgress is where one event stands.
type EventProgress struct {
	EventID                  string
	Wanted                   int // K, plus one per extra round seen
	Submitted, Open, Skipped int
	Classes                  []string // effective classes of submitted passes, in pass order
}

// Status is a campaign's progress.
type Status struct {
	Scanners                     []ScannerProgress // by name
	Events                       []EventProgress   // in campaign order
	Done, InProgress, NotStarted int               // events with ≥ K submitted, some pass, none
	Extra                        int               // events given an extra round
	Disagree                     int               // events whose submitted classes differ
}

// Progress summarises a campaign from its events and passes.
func Progress(c scan.Campaign, events []scan.CampaignEvent, passes []scan.Pass) Status {
	var st Status
	idx := make(map[string]int, len(events))
	st.Events = make([]EventProgress, len(events))
	sel := make([]*scan.Selection, len(events))
	for i, e := range events {
		idx[e.EventID] = i
		st.Events[i] = EventProgress{EventID: e.EventID, Wanted: c.PerEvent}
		sel[i] = e.Selection
	}
	scanners := map[string]*ScannerProgress{}
	times := map[string][]float64{}
	extra := make([]bool, len(events))
	for _, p := range passes {
		s := scanners[p.Scanner]
		if s == nil {
			s = &ScannerProgress{Name: p.Scanner}
			scanners[p.Scanner] = s
		}
		s.Seconds += p.Seconds
		i, ok := idx[p.EventID]
		if !ok {
			continue
		}
		e := &st.Events[i]
		if p.Round > 1 && !extra[i] {
			extra[i] = true
			e.Wanted++
		}
		switch p.State {
		case scan.PassSubmitted:
			s.Submitted++
			e.Submitted++
			e.Classes = append(e.Classes, EffectiveClass(p.Label, sel[i]))
			times[p.Scanner] = append(times[p.Scanner], p.Seconds)
		case scan.PassSkipped:
			s.Skipped++
			e.Skipped++
		default:
			s.Open++
			e.Open++
		}
	}
	for i, e := range st.Events {
		switch {
		case e.Submitted >= c.PerEvent && e.Open == 0:
			st.Done++
		case e.Submitted+e.Open+e.Skipped > 0:
			st.InProgress++
		default:
			st.NotStarted++
		}
		if extra[i] {
			st.Extra++
		}
		if len(e.Classes) > 1 && slices.ContainsFunc(e.Classes, func(c string) bool { return c != e.Classes[0] }) {
			st.Disagree++
		}
	}
	for name, s := range scanners {
		s.Median = median(times[name])
		st.Scanners = append(st.Scanners, *s)
	}
	sort.Slice(st.Scanners, func(i, j int) bool { return st.Scanners[i].Name < st.Scanners[j].Name })
	return st
}

func median(xs []float64) float64 {
	if len(xs) == 0 {
		return 0
	}
	s := slices.Clone(xs)
	slices.Sort(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}
