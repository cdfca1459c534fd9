package campaign

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"

	"github.com/tpcscan/tpcscan/scan"
)

// Spec is what a coordinator asks for when making a campaign.
type Spec struct {
	Campaign scan.Campaign // name, dataset, mode, K, blind, adaptive, seed, schema, instructions, roster
	// Selection is the automated selection's output (optional in label
	// mode, required in verify mode).
	Selection []scan.Selection
	// IncludeUnselected is the fraction of events the selection did not
	// select that join the campaign beside every selected event, sampled
	// with the campaign's seed, so that scanners cannot tell from being
	// shown an event whether the algorithm picked it.
	IncludeUnselected float64
}

// Summary says what went into a campaign.
type Summary struct {
	Events             int // in the campaign
	Selected           int // selected events (all included)
	Unselected         int // unselected events in the selection file
	UnselectedIncluded int
	NotInSelection     int // dataset events the selection file does not mention (left out)
}

func (s Summary) String() string {
	if s.Selected+s.Unselected == 0 {
		return fmt.Sprintf("%d events", s.Events)
	}
	msg := fmt.Sprintf("%d events: %d selected, %d of %d unselected", s.Events, s.Selected, s.UnselectedIncluded, s.Unselected)
	if s.NotInSelection > 0 {
		msg += fmt.Sprintf("; %d dataset events not in the selection were left out", s.NotInSelection)
	}
	return msg
}

// Build chooses the campaign's events from the dataset's event IDs (in
// dataset order) and the spec. Every event the selection names must be in
// the dataset; every class it predicts must be in the campaign's schema.
func Build(spec Spec, datasetEvents []string) (scan.Campaign, []scan.CampaignEvent, Summary, error) {
	c := spec.Campaign
	var sum Summary
	if err := checkSpec(spec); err != nil {
		return c, nil, sum, err
	}
	if len(spec.Selection) == 0 {
		evs := make([]scan.CampaignEvent, len(datasetEvents))
		for i, id := range datasetEvents {
			evs[i].EventID = id
		}
		sum.Events = len(evs)
		return c, evs, sum, nil
	}
	inDataset := make(map[string]bool, len(datasetEvents))
	for _, id := range datasetEvents {
		inDataset[id] = true
	}
	bySel := make(map[string]*scan.Selection, len(spec.Selection))
	var missing []string
	var unselected []string
	for i := range spec.Selection {
		s := &spec.Selection[i]
		if !inDataset[s.EventID] {
			missing = append(missing, s.EventID)
			continue
		}
		bySel[s.EventID] = s
		if s.Selected {
			sum.Selected++
		} else {
			sum.Unselected++
			unselected = append(unselected, s.EventID)
		}
	}
	if len(missing) > 0 {
		return c, nil, sum, fmt.Errorf("%d selection events are not in dataset %s: %s", len(missing), c.Dataset, abbreviate(missing, 5))
	}
	keep := sampleUnselected(c.Seed, unselected, spec.IncludeUnselected)
	sum.UnselectedIncluded = len(keep)
	var evs []scan.CampaignEvent
	for _, id := range datasetEvents {
		s, ok := bySel[id]
		switch {
		case !ok:
			sum.NotInSelection++
		case s.Selected || keep[id]:
			evs = append(evs, scan.CampaignEvent{EventID: id, Selection: s})
		}
	}
	sum.Events = len(evs)
	if len(evs) == 0 {
		return c, nil, sum, errors.New("no events: the selection selected none and no unselected ones were included (see --include-unselected)")
	}
	return c, evs, sum, nil
}

func checkSpec(spec Spec) error {
	c := spec.Campaign
	f := spec.IncludeUnselected
	if math.IsNaN(f) || f < 0 || f > 1 {
		return fmt.Errorf("the fraction of unselected events must lie in [0, 1], got %g", f)
	}
	if len(spec.Selection) == 0 {
		if c.Mode == scan.ModeVerify {
			return errors.New("a verify campaign needs the selection's output (--selection)")
		}
		if f > 0 {
			return errors.New("including unselected events needs a selection (--selection)")
		}
		return nil
	}
	var bad []string
	for _, s := range spec.Selection {
		if s.Class == "" {
			continue
		}
		if _, ok := c.Schema.Class(s.Class); !ok && !contains(bad, s.Class) {
			bad = append(bad, s.Class)
		}
	}
	if len(bad) > 0 {
		return fmt.Errorf("the selection predicts classes that schema %s lacks: %s", c.Schema.Name, strings.Join(bad, ", "))
	}
	return nil
}

// sampleUnselected picks round(f·n) of the unselected events with the seed.
func sampleUnselected(seed int64, ids []string, f float64) map[string]bool {
	n := int(math.Round(f * float64(len(ids))))
	r := rand.New(rand.NewPCG(uint64(seed), 0x756e73656c)) // "unsel"
	keep := make(map[string]bool, n)
	for _, i := range r.Perm(len(ids))[:n] {
		keep[ids[i]] = true
	}
	return keep
}

func contains(xs []string, x string) bool {
	for _, y := range xs {
		if y == x {
			return true
		}
	}
	return false
}

func abbreviate(xs []string, n int) string {
	if len(xs) <= n {
		return strings.Join(xs, ", ")
	}
	return strings.Join(xs[:n], ", ") + fmt.Sprintf(" and %d more", len(xs)-n)
}
