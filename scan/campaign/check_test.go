package campaign

import (
	"math"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
)

// Both stores append only what CheckRevision accepts.
func TestCheckRevision(t *testing.T) {
	for _, c := range []struct {
		name string
		rev  scan.Revision
		ok   bool
	}{
		{"draft", scan.Revision{State: scan.PassDraft}, true},
		{"submitted with time", scan.Revision{State: scan.PassSubmitted, Seconds: 12.5}, true},
		{"skipped", scan.Revision{State: scan.PassSkipped}, true},
		{"assigned is not a revision state", scan.Revision{State: scan.PassAssigned}, false},
		{"empty state", scan.Revision{}, false},
		{"negative time", scan.Revision{State: scan.PassDraft, Seconds: -1}, false},
		{"NaN time", scan.Revision{State: scan.PassDraft, Seconds: math.NaN()}, false},
	} {
		if err := CheckRevision(c.rev); (err == nil) != c.ok {
			t.Errorf("%s: CheckRevision = %v, want ok %v", c.name, err, c.ok)
		}
	}
}
