package ui

import "testing"

// Inside the coordinator hub the quit keys of the adjudicator and the
// dashboard return to the station; their help must say so.
func TestQuitHelpOverride(t *testing.T) {
	a := NewAdjudicator(AdjudicateOptions{QuitHelp: "back to scanning"})
	d := NewDashboard(DashboardOptions{QuitHelp: "back to scanning"})
	for name, got := range map[string]string{"adjudicator": a.keys.Quit.Help().Desc, "dashboard": d.keys.Quit.Help().Desc} {
		if got != "back to scanning" {
			t.Errorf("%s quit help %q, want %q", name, got, "back to scanning")
		}
	}
	if got := NewAdjudicator(AdjudicateOptions{}).keys.Quit.Help().Desc; got != "quit" {
		t.Errorf("stand-alone adjudicator quit help %q, want %q", got, "quit")
	}
}
