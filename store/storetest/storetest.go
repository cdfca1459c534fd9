// Package storetest is the contract every store.Store backend must keep.
// A backend's tests call Run with a function that opens a fresh, empty
// store; the same cases then run against SQLite and PostgreSQL alike.
package storetest

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"sync"
	"testing"
	"time"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
	"github.com/tpcscan/tpcscan/store"
)

// Run runs the contract suite. open must return a new, empty store for
// each call and arrange for it to be closed when the test ends.
func Run(t *testing.T, open func(t *testing.T) store.Store) {
	tests := []struct {
		name string
		fn   func(t *testing.T, s store.Store)
	}{
		{"CampaignRoundTrip", testCampaignRoundTrip},
		{"CampaignRefused", testCampaignRefused},
		{"NotFound", testNotFound},
		{"NextPassResumesOpenPass", testNextPassResumes},
		{"KPerEventNeverTwice", testKPerEvent},
		{"OrderShuffledPerScanner", testOrderShuffled},
		{"RevisionsAppendOnly", testRevisionsAppendOnly},
		{"SaveRevisionRefused", testSaveRevisionRefused},
		{"SkipAsksForAnotherScanner", testSkipReplacement},
		{"AdaptiveExtraPass", testAdaptive},
		{"AddPass", testAddPass},
		{"VerifyMode", testVerifyMode},
		{"Roster", testRoster},
		{"ConsensusLatestWins", testConsensus},
		{"Resume", testResume},
		{"ConcurrentScanners", testConcurrent},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) { tt.fn(t, open(t)) })
	}
}

// Campaign returns a valid label campaign for tests.
func Campaign(name string, k int) scan.Campaign {
	return scan.Campaign{Name: name, Dataset: "/data/demo", Mode: scan.ModeLabel, PerEvent: k, Blind: true, Seed: 7, Schema: scan.DefaultSchema()}
}

// Events returns n events named ev-000, ev-001, ….
func Events(n int) []scan.CampaignEvent {
	evs := make([]scan.CampaignEvent, n)
	for i := range evs {
		evs[i].EventID = fmt.Sprintf("ev-%03d", i)
	}
	return evs
}

func create(t *testing.T, s store.Store, c scan.Campaign, evs []scan.CampaignEvent) int64 {
	t.Helper()
	id, err := s.CreateCampaign(context.Background(), c, evs)
	if err != nil {
		t.Fatalf("CreateCampaign: %v", err)
	}
	return id
}

func next(t *testing.T, s store.Store, id int64, scanner string) scan.Pass {
	t.Helper()
	p, err := s.NextPass(context.Background(), id, scanner)
	if err != nil {
		t.Fatalf("NextPass(%s): %v", scanner, err)
	}
	return p
}

func submit(t *testing.T, s store.Store, p scan.Pass, class string) scan.Revision {
	t.Helper()
	r, err := s.SaveRevision(context.Background(), p.ID, p.Scanner, scan.Revision{State: scan.PassSubmitted, Label: scan.Label{Class: class, Confidence: "3"}, Seconds: 1})
	if err != nil {
		t.Fatalf("submit pass %d: %v", p.ID, err)
	}
	return r
}

// drain has the scanner submit class for every event it is given and
// returns the events in the order given.
func drain(t *testing.T, s store.Store, id int64, scanner, class string) []string {
	t.Helper()
	var got []string
	for {
		p, err := s.NextPass(context.Background(), id, scanner)
		if errors.Is(err, store.ErrNoWork) {
			return got
		}
		if err != nil {
			t.Fatalf("NextPass(%s): %v", scanner, err)
		}
		if slices.Contains(got, p.EventID) {
			t.Fatalf("%s got event %s twice", scanner, p.EventID)
		}
		got = append(got, p.EventID)
		submit(t, s, p, class)
	}
}

func testCampaignRoundTrip(t *testing.T, s store.Store) {
	ctx := context.Background()
	c := Campaign("round-trip", 2)
	c.Instructions = "# Rules\nTag the vertex."
	c.Scanners = []string{"ana", "ben"}
	c.Adaptive = true
	c.Created = time.Date(2026, 1, 2, 3, 4, 5, 6000, time.UTC)
	evs := Events(3)
	box := scan.Mark{Kind: scan.MarkBox, Plane: detector.Collection, Points: []detector.PlanePoint{{Wire: 10, Tick: 2000}, {Wire: 40, Tick: 2300}}}
	evs[1].Selection = &scan.Selection{EventID: evs[1].EventID, Selected: true, Class: "numu-cc", Score: 0.93, Box: &box}
	id := create(t, s, c, evs)
	for _, get := range []func() (scan.Campaign, error){
		func() (scan.Campaign, error) { return s.Campaign(ctx, id) },
		func() (scan.Campaign, error) { return s.CampaignByName(ctx, "round-trip") },
	} {
		got, err := get()
		if err != nil {
			t.Fatal(err)
		}
		if got.ID != id || got.Name != c.Name || got.Dataset != c.Dataset || got.Mode != c.Mode || got.PerEvent != 2 ||
			!got.Blind || !got.Adaptive || got.Seed != 7 || got.Instructions != c.Instructions || !got.Created.Equal(c.Created) {
			t.Errorf("campaign read back as %+v", got)
		}
		if !got.Schema.Equal(c.Schema) {
			t.Errorf("schema read back as %+v", got.Schema)
		}
		if !slices.Equal(got.Scanners, c.Scanners) {
			t.Errorf("roster read back as %v", got.Scanners)
		}
	}
	all, err := s.Campaigns(ctx)
	if err != nil || len(all) != 1 || all[0].ID != id {
		t.Fatalf("Campaigns = %v, %v", all, err)
	}
	got, err := s.Events(ctx, id)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 3 || got[0].EventID != "ev-000" || got[2].EventID != "ev-002" {
		t.Fatalf("Events = %+v", got)
	}
	if got[0].Selection != nil || got[1].Selection == nil {
		t.Fatalf("selections read back as %+v, %+v", got[0].Selection, got[1].Selection)
	}
	if sel := got[1].Selection; !sel.Selected || sel.Class != "numu-cc" || sel.Score != 0.93 || sel.Box == nil || sel.Box.Points[1].Tick != 2300 {
		t.Errorf("selection read back as %+v", sel)
	}
}

func testCampaignRefused(t *testing.T, s store.Store) {
	ctx := context.Background()
	create(t, s, Campaign("taken", 1), Events(2))
	_, err := s.CreateCampaign(ctx, Campaign("taken", 1), Events(2))
	if !errors.Is(err, store.ErrConflict) {
		t.Errorf("duplicate name: err = %v, want ErrConflict", err)
	}
	bad := func(mod func(*scan.Campaign), evs []scan.CampaignEvent) error {
		c := Campaign("bad", 1)
		mod(&c)
		_, err := s.CreateCampaign(ctx, c, evs)
		return err
	}
	cases := map[string]error{
		"no events":                bad(func(*scan.Campaign) {}, nil),
		"K=0":                      bad(func(c *scan.Campaign) { c.PerEvent = 0 }, Events(1)),
		"bad mode":                 bad(func(c *scan.Campaign) { c.Mode = "guess" }, Events(1)),
		"duplicate event":          bad(func(*scan.Campaign) {}, append(Events(2), Events(1)...)),
		"invalid schema":           bad(func(c *scan.Campaign) { c.Schema.Classes = nil }, Events(1)),
		"verify without selection": bad(func(c *scan.Campaign) { c.Mode = scan.ModeVerify }, Events(1)),
	}
	for name, err := range cases {
		if err == nil {
			t.Errorf("%s: accepted", name)
		}
	}
	if all, _ := s.Campaigns(ctx); len(all) != 1 {
		t.Errorf("refused campaigns left %d campaigns behind", len(all))
	}
}

func testNotFound(t *testing.T, s store.Store) {
	ctx := context.Background()
	errs := map[string]error{}
	_, errs["Campaign"] = s.Campaign(ctx, 999)
	_, errs["CampaignByName"] = s.CampaignByName(ctx, "nope")
	_, errs["NextPass"] = s.NextPass(ctx, 999, "ana")
	_, errs["Pass"] = s.Pass(ctx, 999)
	_, errs["Revisions"] = s.Revisions(ctx, 999)
	_, errs["SaveRevision"] = s.SaveRevision(ctx, 999, "ana", scan.Revision{State: scan.PassDraft})
	_, errs["Resume"] = s.Resume(ctx, 999, "ana")
	id := create(t, s, Campaign("c", 1), Events(1))
	errs["AddPass"] = s.AddPass(ctx, id, "no-such-event", 2)
	for name, err := range errs {
		if !errors.Is(err, store.ErrNotFound) {
			t.Errorf("%s: err = %v, want ErrNotFound", name, err)
		}
	}
}

func testNextPassResumes(t *testing.T, s store.Store) {
	ctx := context.Background()
	id := create(t, s, Campaign("c", 1), Events(3))
	p := next(t, s, id, "ana")
	if p.State != scan.PassAssigned || p.Round != 1 || p.Scanner != "ana" || p.CampaignID != id {
		t.Fatalf("new pass = %+v", p)
	}
	if again := next(t, s, id, "ana"); again.ID != p.ID {
		t.Fatalf("open pass not resumed: %d then %d", p.ID, again.ID)
	}
	if _, err := s.SaveRevision(ctx, p.ID, "ana", scan.Revision{State: scan.PassDraft, Label: scan.Label{Class: "cosmic"}}); err != nil {
		t.Fatal(err)
	}
	d := next(t, s, id, "ana")
	if d.ID != p.ID || d.State != scan.PassDraft || d.Label.Class != "cosmic" {
		t.Fatalf("draft not resumed: %+v", d)
	}
	submit(t, s, d, "cosmic")
	if n := next(t, s, id, "ana"); n.ID == p.ID || n.EventID == p.EventID {
		t.Fatalf("submitted pass handed out again: %+v", n)
	}
}

func testKPerEvent(t *testing.T, s store.Store) {
	ctx := context.Background()
	const k, n = 2, 7
	id := create(t, s, Campaign("k", k), Events(n))
	seen := map[string]int{}
	for _, sc := range []string{"ana", "ben", "chidi", "dana"} {
		for _, ev := range drain(t, s, id, sc, "numu-cc") {
			seen[ev]++
		}
	}
	if len(seen) != n {
		t.Errorf("%d of %d events scanned", len(seen), n)
	}
	for ev, c := range seen {
		if c != k {
			t.Errorf("event %s has %d passes, want K = %d", ev, c, k)
		}
	}
	ps, err := s.Passes(ctx, id)
	if err != nil {
		t.Fatal(err)
	}
	if len(ps) != k*n {
		t.Fatalf("Passes returned %d, want %d", len(ps), k*n)
	}
	for i := 1; i < len(ps); i++ {
		if ps[i].EventID < ps[i-1].EventID || (ps[i].EventID == ps[i-1].EventID && ps[i].ID < ps[i-1].ID) {
			t.Fatalf("Passes not ordered by event then ID at %d", i)
		}
	}
	for _, sc := range []string{"ana", "eli"} {
		if _, err := s.NextPass(ctx, id, sc); !errors.Is(err, store.ErrNoWork) {
			t.Errorf("%s after the end: err = %v, want ErrNoWork", sc, err)
		}
	}
	mine, err := s.ScannerPasses(ctx, id, "ana")
	if err != nil {
		t.Fatal(err)
	}
	for i := 1; i < len(mine); i++ {
		if mine[i].ID <= mine[i-1].ID || mine[i].Scanner != "ana" {
			t.Fatalf("ScannerPasses out of order or foreign: %+v", mine)
		}
	}
}

func testOrderShuffled(t *testing.T, s store.Store) {
	const n = 30
	id := create(t, s, Campaign("order", 2), Events(n))
	a := drain(t, s, id, "ana", "nc-other")
	b := drain(t, s, id, "ben", "nc-other")
	if len(a) != n || len(b) != n {
		t.Fatalf("K=2 with two scanners: each must see all %d events, got %d and %d", n, len(a), len(b))
	}
	if slices.Equal(a, b) {
		t.Error("two scanners got the same order")
	}
	if slices.IsSorted(a) {
		t.Error("order is not shuffled")
	}
}

func testRevisionsAppendOnly(t *testing.T, s store.Store) {
	ctx := context.Background()
	id := create(t, s, Campaign("rev", 1), Events(1))
	p := next(t, s, id, "ana")
	vertex := scan.Mark{Kind: scan.MarkVertex, Plane: detector.Collection, Points: []detector.PlanePoint{{Wire: 812.5, Tick: 2410}}, Precision: scan.Precision{Wires: 4, Ticks: 16}}
	steps := []scan.Revision{
		{State: scan.PassDraft, Label: scan.Label{Class: "numu-cc"}, Seconds: 3},
		{State: scan.PassDraft, Label: scan.Label{Class: "numu-cc", Marks: []scan.Mark{vertex}}, Seconds: 4.5},
		{State: scan.PassSubmitted, Label: scan.Label{Class: "nc-pi0", Confidence: "2", Comment: "two showers", Marks: []scan.Mark{vertex}}, Seconds: 2},
	}
	for i, r := range steps {
		got, err := s.SaveRevision(ctx, p.ID, "ana", r)
		if err != nil {
			t.Fatalf("save %d: %v", i, err)
		}
		if got.Seq != i+1 || got.PassID != p.ID || got.ID == 0 || got.At.IsZero() || got.Schema != 1 {
			t.Fatalf("save %d returned %+v", i, got)
		}
	}
	rs, err := s.Revisions(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	if len(rs) != len(steps) {
		t.Fatalf("%d revisions, want %d", len(rs), len(steps))
	}
	for i, r := range rs {
		if r.Seq != i+1 || r.State != steps[i].State || r.Label.Class != steps[i].Label.Class || len(r.Label.Marks) != len(steps[i].Label.Marks) {
			t.Errorf("revision %d read back as %+v", i+1, r)
		}
	}
	if m := rs[1].Label.Marks[0]; m.Points[0].Wire != 812.5 || m.Precision.Ticks != 16 {
		t.Errorf("mark read back as %+v", m)
	}
	got, err := s.Pass(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	if got.State != scan.PassSubmitted || got.Label.Class != "nc-pi0" || got.Label.Comment != "two showers" || got.Revisions != 3 || got.Seconds != 9.5 {
		t.Errorf("pass = %+v: want the latest revision's label, 3 revisions, 9.5 s", got)
	}
	// A later revision after submitting is still appended, never overwrites.
	if _, err := s.SaveRevision(ctx, p.ID, "ana", scan.Revision{State: scan.PassSubmitted, Label: scan.Label{Class: "numu-cc", Confidence: "3"}}); err != nil {
		t.Fatal(err)
	}
	rs2, _ := s.Revisions(ctx, p.ID)
	if len(rs2) != 4 || rs2[2].Label.Class != "nc-pi0" {
		t.Errorf("earlier revision changed: %+v", rs2)
	}
}

func testSaveRevisionRefused(t *testing.T, s store.Store) {
	ctx := context.Background()
	id := create(t, s, Campaign("refuse", 1), Events(2))
	p := next(t, s, id, "ana")
	cases := []struct {
		name    string
		scanner string
		rev     scan.Revision
		is      error
	}{
		{"other scanner", "ben", scan.Revision{State: scan.PassDraft}, store.ErrConflict},
		{"newer schema", "ana", scan.Revision{State: scan.PassDraft, Schema: 2}, store.ErrConflict},
		{"bad state", "ana", scan.Revision{State: scan.PassAssigned}, nil},
		{"unknown class", "ana", scan.Revision{State: scan.PassDraft, Label: scan.Label{Class: "numu"}}, nil},
		{"submit without class", "ana", scan.Revision{State: scan.PassSubmitted, Label: scan.Label{Confidence: "1"}}, nil},
		{"negative time", "ana", scan.Revision{State: scan.PassDraft, Seconds: -1}, nil},
		{"verdict in label mode", "ana", scan.Revision{State: scan.PassSubmitted, Label: scan.Label{Class: "cosmic", Confidence: "1", Verdict: "agree"}}, nil},
	}
	for _, c := range cases {
		_, err := s.SaveRevision(ctx, p.ID, c.scanner, c.rev)
		if err == nil || (c.is != nil && !errors.Is(err, c.is)) {
			t.Errorf("%s: err = %v, want an error (%v)", c.name, err, c.is)
		}
	}
	if rs, _ := s.Revisions(ctx, p.ID); len(rs) != 0 {
		t.Errorf("refused saves stored %d revisions", len(rs))
	}
}

func testSkipReplacement(t *testing.T, s store.Store) {
	ctx := context.Background()
	id := create(t, s, Campaign("skip", 1), Events(1))
	p := next(t, s, id, "ana")
	if _, err := s.SaveRevision(ctx, p.ID, "ana", scan.Revision{State: scan.PassSkipped, Label: scan.Label{Comment: "display froze"}}); err != nil {
		t.Fatal(err)
	}
	q := next(t, s, id, "ben")
	if q.EventID != p.EventID {
		t.Fatalf("ben got %s, want the skipped %s", q.EventID, p.EventID)
	}
	if _, err := s.NextPass(ctx, id, "ana"); !errors.Is(err, store.ErrNoWork) {
		t.Errorf("ana after skipping: %v, want ErrNoWork", err)
	}
}

func testAdaptive(t *testing.T, s store.Store) {
	ctx := context.Background()
	c := Campaign("adaptive", 2)
	c.Adaptive = true
	id := create(t, s, c, Events(2))
	// ana and ben agree on one event and disagree on the other.
	for _, sc := range []string{"ana", "ben"} {
		for {
			p, err := s.NextPass(ctx, id, sc)
			if errors.Is(err, store.ErrNoWork) {
				break
			}
			if err != nil {
				t.Fatal(err)
			}
			class := "numu-cc"
			if sc == "ben" && p.EventID == "ev-001" {
				class = "nc-pi0"
			}
			submit(t, s, p, class)
		}
	}
	p := next(t, s, id, "chidi")
	if p.EventID != "ev-001" || p.Round != 2 {
		t.Fatalf("chidi got %s round %d, want ev-001 round 2", p.EventID, p.Round)
	}
	submit(t, s, p, "numu-cc")
	if _, err := s.NextPass(ctx, id, "dana"); !errors.Is(err, store.ErrNoWork) {
		t.Errorf("only one extra pass per disagreement: dana got %v", err)
	}
	// Without --adaptive the same disagreement adds nothing.
	id2 := create(t, s, Campaign("plain", 2), Events(1))
	submit(t, s, next(t, s, id2, "ana"), "numu-cc")
	submit(t, s, next(t, s, id2, "ben"), "cosmic")
	if _, err := s.NextPass(ctx, id2, "chidi"); !errors.Is(err, store.ErrNoWork) {
		t.Errorf("non-adaptive campaign added a pass: %v", err)
	}
}

func testAddPass(t *testing.T, s store.Store) {
	ctx := context.Background()
	id := create(t, s, Campaign("add", 1), Events(2))
	drain(t, s, id, "ana", "cosmic")
	if err := s.AddPass(ctx, id, "ev-001", 3); err != nil {
		t.Fatal(err)
	}
	if _, err := s.NextPass(ctx, id, "ana"); !errors.Is(err, store.ErrNoWork) {
		t.Errorf("extra pass given to a scanner who had the event: %v", err)
	}
	p := next(t, s, id, "ben")
	if p.EventID != "ev-001" || p.Round != 3 {
		t.Errorf("ben got %s round %d, want ev-001 round 3", p.EventID, p.Round)
	}
	if err := s.AddPass(ctx, id, "ev-001", 0); err == nil {
		t.Error("round 0 accepted")
	}
}

func testVerifyMode(t *testing.T, s store.Store) {
	ctx := context.Background()
	c := Campaign("verify", 1)
	c.Mode = scan.ModeVerify
	evs := Events(1)
	evs[0].Selection = &scan.Selection{EventID: evs[0].EventID, Selected: true, Class: "nue-cc", Score: 0.7}
	id := create(t, s, c, evs)
	p := next(t, s, id, "ana")
	if _, err := s.SaveRevision(ctx, p.ID, "ana", scan.Revision{State: scan.PassSubmitted, Label: scan.Label{Class: "nue-cc", Confidence: "2"}}); err == nil {
		t.Error("verify submission without a verdict accepted")
	}
	if _, err := s.SaveRevision(ctx, p.ID, "ana", scan.Revision{State: scan.PassSubmitted, Label: scan.Label{Verdict: "disagree", Confidence: "2"}}); err == nil {
		t.Error("disagree without the correct class accepted")
	}
	if _, err := s.SaveRevision(ctx, p.ID, "ana", scan.Revision{State: scan.PassSubmitted, Label: scan.Label{Verdict: "agree", Confidence: "3"}}); err != nil {
		t.Errorf("agree refused: %v", err)
	}
}

func testRoster(t *testing.T, s store.Store) {
	ctx := context.Background()
	c := Campaign("roster", 1)
	c.Scanners = []string{"ana", "ben"}
	id := create(t, s, c, Events(2))
	if _, err := s.NextPass(ctx, id, "mallory"); !errors.Is(err, store.ErrUnknownScanner) {
		t.Errorf("unknown scanner: err = %v, want ErrUnknownScanner", err)
	}
	next(t, s, id, "ben")
	if _, err := s.NextPass(ctx, id, "bad\x1b[2Jname"); err == nil {
		t.Error("scanner name with an escape sequence accepted")
	}
}

func testConsensus(t *testing.T, s store.Store) {
	ctx := context.Background()
	id := create(t, s, Campaign("cons", 1), Events(3))
	put := func(ev, method, class string) {
		t.Helper()
		if err := s.SetConsensus(ctx, scan.Consensus{CampaignID: id, EventID: ev, Method: method, Label: scan.Label{Class: class}, Posterior: 0.8, By: "coord"}); err != nil {
			t.Fatal(err)
		}
	}
	put("ev-002", "majority", "cosmic")
	put("ev-000", "majority", "numu-cc")
	put("ev-000", "majority", "nue-cc") // latest wins
	put("ev-002", "adjudication", "nc-pi0")
	put("ev-002", "dawid-skene", "none") // adjudication still first for ""
	got, err := s.Consensus(ctx, id, "majority")
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 2 || got[0].EventID != "ev-000" || got[0].Label.Class != "nue-cc" || got[1].Label.Class != "cosmic" {
		t.Errorf("majority consensus = %+v", got)
	}
	any, err := s.Consensus(ctx, id, "")
	if err != nil {
		t.Fatal(err)
	}
	if len(any) != 2 || any[1].Method != "adjudication" || any[1].Label.Class != "nc-pi0" || any[1].By != "coord" {
		t.Errorf("any-method consensus = %+v", any)
	}
	if err := s.SetConsensus(ctx, scan.Consensus{CampaignID: id, EventID: "nope", Method: "majority"}); err == nil {
		t.Error("consensus for an event outside the campaign accepted")
	}
}

func testResume(t *testing.T, s store.Store) {
	ctx := context.Background()
	id := create(t, s, Campaign("resume", 1), Events(1))
	if _, err := s.Resume(ctx, id, "ana"); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("no state yet: err = %v", err)
	}
	for _, st := range []string{`{"event":"ev-000","zoom":2}`, `{"event":"ev-000","zoom":4}`} {
		if err := s.SaveResume(ctx, id, "ana", []byte(st)); err != nil {
			t.Fatal(err)
		}
		got, err := s.Resume(ctx, id, "ana")
		if err != nil || string(got) != st {
			t.Fatalf("Resume = %q, %v; want %q", got, err, st)
		}
	}
	if _, err := s.Resume(ctx, id, "ben"); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("another scanner's state leaked: %v", err)
	}
}

// testConcurrent runs scanners in parallel and checks the invariants.
func testConcurrent(t *testing.T, s store.Store) {
	const k, n = 2, 40
	id := create(t, s, Campaign("parallel", k), Events(n))
	scanners := []string{"ana", "ben", "chidi", "dana", "eli"}
	got := make([][]string, len(scanners))
	errs := make([]error, len(scanners))
	var wg sync.WaitGroup
	for i, sc := range scanners {
		wg.Add(1)
		go func() {
			defer wg.Done()
			ctx := context.Background()
			for {
				p, err := s.NextPass(ctx, id, sc)
				if errors.Is(err, store.ErrNoWork) {
					return
				}
				if err == nil {
					_, err = s.SaveRevision(ctx, p.ID, sc, scan.Revision{State: scan.PassSubmitted, Label: scan.Label{Class: "cosmic", Confidence: "1"}})
				}
				if err != nil {
					errs[i] = err
					return
				}
				got[i] = append(got[i], p.EventID)
			}
		}()
	}
	wg.Wait()
	if err := errors.Join(errs...); err != nil {
		t.Fatal(err)
	}
	count := map[string]int{}
	for i, evs := range got {
		seen := map[string]bool{}
		for _, ev := range evs {
			if seen[ev] {
				t.Errorf("%s got %s twice", scanners[i], ev)
			}
			seen[ev] = true
			count[ev]++
		}
	}
	for ev, c := range count {
		if c != k {
			t.Errorf("event %s: %d passes, want %d", ev, c, k)
		}
	}
	if len(count) != n {
		t.Errorf("%d of %d events done", len(count), n)
	}
}
