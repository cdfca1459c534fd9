package main

import (
	"strings"
	"testing"

	"github.com/tpcscan/tpcscan/ui/serve/servetest"
)

// TestServeCoordinatorPages: over SSH a coordinator's page key (ctrl+g)
// brings the adjudicator and the dashboard, and their quit key comes back
// to the station; a scanner's page key does nothing.
func TestServeCoordinatorPages(t *testing.T) {
	s := startStation(t, "ana", "dana:coordinator")
	dana := s.connect(t, "dana")
	dana.expect("[scanning]")
	dana.expect("ind1 wire ")
	dana.send("\x07") // ctrl+g
	dana.expect("[adjudication]")
	dana.expect("tpcscan · adjudication · shift · dana")
	dana.send("q")
	dana.expect("[scanning]")
	dana.expect("ind1 wire ")
	dana.send("\x07\x07")
	dana.expect("[dashboard]")
	dana.expect("tpcscan · campaign numbers")

	ana := s.connect(t, "ana")
	ana.expect("ind1 wire ")
	ana.send("\x07")
	ana.send("1") // a key whose effect shows: the page key's would be on screen before it
	ana.expect("νμ CC ✓")
	var strip servetest.Stripper
	out := string(strip.Strip([]byte(ana.tm.Out.String())))
	for _, no := range []string{"[scanning]", "adjudication", "campaign numbers"} {
		if strings.Contains(out, no) {
			t.Errorf("a scanner's screen shows %q", no)
		}
	}
}
