package campaign

import (
	"testing"

	"github.com/tpcscan/tpcscan/scan"
)

func TestProgress(t *testing.T) {
	c := scan.Campaign{PerEvent: 2, Mode: scan.ModeLabel}
	events := []scan.CampaignEvent{{EventID: "a"}, {EventID: "b"}, {EventID: "c"}}
	sub := func(ev, who, class string, round int, secs float64) scan.Pass {
		return scan.Pass{EventID: ev, Scanner: who, Round: round, State: scan.PassSubmitted, Label: scan.Label{Class: class}, Seconds: secs}
	}
	passes := []scan.Pass{
		sub("a", "ana", "numu-cc", 1, 10), sub("a", "ben", "nc-pi0", 1, 30), sub("a", "chidi", "numu-cc", 2, 20),
		sub("b", "ana", "cosmic", 1, 4),
		{EventID: "b", Scanner: "ben", Round: 1, State: scan.PassDraft, Seconds: 7},
	}
	st := Progress(c, events, passes)
	if st.Done != 1 || st.InProgress != 1 || st.NotStarted != 1 || st.Extra != 1 || st.Disagree != 1 {
		t.Errorf("status = %+v", st)
	}
	if e := st.Events[0]; e.Wanted != 3 || e.Submitted != 3 || len(e.Classes) != 3 {
		t.Errorf("event a = %+v", e)
	}
	if len(st.Scanners) != 3 || st.Scanners[0].Name != "ana" || st.Scanners[0].Submitted != 2 || st.Scanners[0].Median != 7 {
		t.Errorf("scanners = %+v", st.Scanners)
	}
	if b := st.Scanners[1]; b.Open != 1 || b.Seconds != 37 || b.Median != 30 {
		t.Errorf("ben = %+v", b)
	}
}
