package campaign

import (
	"errors"
	"fmt"

	"github.com/tpcscan/tpcscan/scan"
)

// Check refuses a campaign that no scanner could work on. Every store
// calls it before storing a campaign, so the backends accept the same ones.
func Check(c scan.Campaign, events []scan.CampaignEvent) error {
	var errs []error
	if c.Name == "" || scan.CleanText(c.Name) != c.Name {
		errs = append(errs, errors.New("a campaign needs a name without control characters"))
	}
	if c.Mode != scan.ModeLabel && c.Mode != scan.ModeVerify {
		errs = append(errs, fmt.Errorf("mode must be %s or %s, got %q", scan.ModeLabel, scan.ModeVerify, c.Mode))
	}
	if c.PerEvent < 1 {
		errs = append(errs, fmt.Errorf("scanners per event must be 1 or more, got %d", c.PerEvent))
	}
	if err := c.Schema.Validate(); err != nil {
		errs = append(errs, fmt.Errorf("schema: %w", err))
	}
	if len(events) == 0 {
		errs = append(errs, errors.New("no events"))
	}
	seen := make(map[string]bool, len(events))
	for _, e := range events {
		if e.EventID == "" {
			errs = append(errs, errors.New("an event has an empty ID"))
		} else if seen[e.EventID] {
			errs = append(errs, fmt.Errorf("event %s appears twice", e.EventID))
		}
		seen[e.EventID] = true
		if c.Mode == scan.ModeVerify && e.Selection == nil {
			errs = append(errs, fmt.Errorf("event %s: a verify campaign needs the selection's output for every event", e.EventID))
		}
		if len(errs) > 10 {
			break
		}
	}
	for _, n := range c.Scanners {
		if err := CheckScanner(n); err != nil {
			errs = append(errs, err)
		}
	}
	return errors.Join(errs...)
}

// CheckScanner refuses scanner names that could not be shown or typed.
func CheckScanner(name string) error {
	if name == "" || len(name) > 64 || scan.CleanText(name) != name {
		return fmt.Errorf("scanner name %q: use 1 to 64 printable characters", name)
	}
	return nil
}

// CheckRevision refuses a revision no store may append: a state other than
// draft, submitted or skipped, or a negative or NaN time spent.
func CheckRevision(rev scan.Revision) error {
	switch rev.State {
	case scan.PassDraft, scan.PassSubmitted, scan.PassSkipped:
	default:
		return fmt.Errorf("a revision's state must be draft, submitted or skipped, got %q", rev.State)
	}
	if rev.Seconds < 0 || rev.Seconds != rev.Seconds {
		return fmt.Errorf("time spent must be zero or more, got %g", rev.Seconds)
	}
	return nil
}
