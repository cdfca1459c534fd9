package backend

import (
	"context"
	"fmt"
	"path/filepath"
	"reflect"
	"testing"
	"time"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/postgres/pgtest"
)

// scanned builds a campaign in s and works it like a shift would: drafts,
// submissions (some disagreeing, so the adaptive rule adds passes), skips,
// a rescan of a submitted pass, consensus and an adjudication, and resume
// states. It returns the campaign ID.
func scanned(t testing.TB, s store.Store, name string) int64 {
	t.Helper()
	ctx := context.Background()
	c := scan.Campaign{Name: name, Dataset: "demo", Mode: scan.ModeLabel, PerEvent: 2, Blind: true, Adaptive: true,
		Seed: 42, Schema: scan.DefaultSchema(), Instructions: "Tag the *topology* first.",
		Created: time.Date(2026, 2, 3, 4, 5, 6, 789000, time.UTC)}
	evs := make([]scan.CampaignEvent, 24)
	for i := range evs {
		evs[i].EventID = fmt.Sprintf("run1-ev%03d", i)
		if i%3 != 0 {
			evs[i].Selection = &scan.Selection{EventID: evs[i].EventID, Selected: i%2 == 0, Class: "nue-cc", Score: float64(i) / 24}
		}
	}
	id, err := s.CreateCampaign(ctx, c, evs)
	if err != nil {
		t.Fatal(err)
	}
	classes := []string{"numu-cc", "nue-cc", "nc-pi0", "cosmic"}
	for round := range 8 {
		for w, who := range []string{"ana", "ben", "chidi"} {
			p, err := s.NextPass(ctx, id, who)
			if err != nil {
				t.Fatal(err)
			}
			mark := scan.Mark{Kind: scan.MarkVertex, Plane: "coll", Precision: scan.Precision{Wires: 1, Ticks: 4},
				Points: []detector.PlanePoint{{Wire: 812.5, Tick: 3120.25}}}
			draft := scan.Revision{State: scan.PassDraft, Seconds: 3.25, Label: scan.Label{Class: "cosmic", Marks: []scan.Mark{mark}}}
			if _, err := s.SaveRevision(ctx, p.ID, who, draft); err != nil {
				t.Fatal(err)
			}
			final := scan.Revision{State: scan.PassSubmitted, Seconds: 10.5,
				Label: scan.Label{Class: classes[(round+w)%len(classes)], Confidence: "2", Comment: "vertex near the cathode"}}
			if (round+w)%5 == 4 {
				final = scan.Revision{State: scan.PassSkipped, Seconds: 1}
			}
			if _, err := s.SaveRevision(ctx, p.ID, who, final); err != nil {
				t.Fatal(err)
			}
		}
	}
	ps, err := s.ScannerPasses(ctx, id, "ana")
	if err != nil {
		t.Fatal(err)
	}
	rescan := scan.Revision{State: scan.PassSubmitted, Seconds: 4, Label: scan.Label{Class: "nc-other", Confidence: "3"}}
	if _, err := s.SaveRevision(ctx, ps[0].ID, "ana", rescan); err != nil {
		t.Fatal(err)
	}
	for i, e := range evs[:6] {
		cs := scan.Consensus{CampaignID: id, EventID: e.EventID, Method: "majority", Label: scan.Label{Class: classes[i%4]}, Posterior: 0.75}
		if err := s.SetConsensus(ctx, cs); err != nil {
			t.Fatal(err)
		}
	}
	adj := scan.Consensus{CampaignID: id, EventID: evs[1].EventID, Method: "adjudication", Label: scan.Label{Class: "nc-pi0"}, Posterior: 1, By: "coordinator"}
	if err := s.SetConsensus(ctx, adj); err != nil {
		t.Fatal(err)
	}
	for _, who := range []string{"ana", "ben"} {
		if err := s.SaveResume(ctx, id, who, []byte(`{"event":"run1-ev003","zoom":2}`)); err != nil {
			t.Fatal(err)
		}
	}
	return id
}

// TestMigrateRoundTrip copies a worked SQLite campaign to PostgreSQL and
// checks that both stores answer every read the same way, that a second
// copy is refused, and that scanning goes on from where it stood.
func TestMigrateRoundTrip(t *testing.T) {
	ctx := context.Background()
	lite, err := Open(ctx, filepath.Join(t.TempDir(), "shift.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer lite.Close()
	pg, err := Open(ctx, pgtest.DSN(t))
	if err != nil {
		t.Fatal(err)
	}
	defer pg.Close()
	srcID := scanned(t, lite, "winter")

	d, err := lite.(store.Dumper).Dump(ctx, srcID)
	if err != nil {
		t.Fatal(err)
	}
	dstID, err := pg.(store.Loader).Load(ctx, d)
	if err != nil {
		t.Fatal(err)
	}
	back, err := pg.(store.Dumper).Dump(ctx, dstID)
	if err != nil {
		t.Fatal(err)
	}
	want, err := d.Checksums()
	if err != nil {
		t.Fatal(err)
	}
	got, err := back.Checksums()
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("checksums differ:\n got %v\nwant %v", got, want)
	}
	if _, err := pg.(store.Loader).Load(ctx, d); err == nil {
		t.Error("a second load of the same campaign was accepted")
	}
	sameReads(t, lite, srcID, pg, dstID)
}

// sameReads compares what two stores answer for one campaign, ignoring
// row IDs and the sub-microsecond part of times.
func sameReads(t *testing.T, a store.Store, aID int64, b store.Store, bID int64) {
	t.Helper()
	ctx := context.Background()
	norm := func(ps []scan.Pass) []scan.Pass {
		for i := range ps {
			ps[i].ID, ps[i].CampaignID = 0, 0
			ps[i].Assigned = ps[i].Assigned.UTC().Truncate(time.Microsecond)
			ps[i].Updated = ps[i].Updated.UTC().Truncate(time.Microsecond)
		}
		return ps
	}
	pa, err := a.Passes(ctx, aID)
	if err != nil {
		t.Fatal(err)
	}
	pb, err := b.Passes(ctx, bID)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(norm(pa), norm(pb)) {
		t.Errorf("passes differ:\n%+v\n%+v", pa, pb)
	}
	for _, method := range []string{"", "majority", "adjudication"} {
		ca, err := a.Consensus(ctx, aID, method)
		if err != nil {
			t.Fatal(err)
		}
		cb, err := b.Consensus(ctx, bID, method)
		if err != nil {
			t.Fatal(err)
		}
		if len(ca) != len(cb) {
			t.Fatalf("consensus %q: %d vs %d labels", method, len(ca), len(cb))
		}
		for i := range ca {
			ca[i].CampaignID, cb[i].CampaignID = 0, 0
			ca[i].At, cb[i].At = ca[i].At.UTC(), cb[i].At.UTC()
		}
		if !reflect.DeepEqual(ca, cb) {
			t.Errorf("consensus %q differs:\n%+v\n%+v", method, ca, cb)
		}
	}
	// Scanning continues identically: the same next event for each scanner.
	for _, who := range []string{"ana", "ben", "dee"} {
		x, errA := a.NextPass(ctx, aID, who)
		y, errB := b.NextPass(ctx, bID, who)
		if (errA == nil) != (errB == nil) || x.EventID != y.EventID || x.Round != y.Round {
			t.Errorf("%s's next pass: %s round %d (%v) vs %s round %d (%v)", who, x.EventID, x.Round, errA, y.EventID, y.Round, errB)
		}
	}
}

// TestMigrateBack copies a campaign worked on PostgreSQL into a fresh
// SQLite file (a site taking a campaign offline) and checks that nothing
// changed on the way.
func TestMigrateBack(t *testing.T) {
	ctx := context.Background()
	pg, err := Open(ctx, pgtest.DSN(t))
	if err != nil {
		t.Fatal(err)
	}
	defer pg.Close()
	lite, err := Open(ctx, filepath.Join(t.TempDir(), "offline.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer lite.Close()
	srcID := scanned(t, pg, "summer")
	d, err := pg.(store.Dumper).Dump(ctx, srcID)
	if err != nil {
		t.Fatal(err)
	}
	dstID, err := lite.(store.Loader).Load(ctx, d)
	if err != nil {
		t.Fatal(err)
	}
	back, err := lite.(store.Dumper).Dump(ctx, dstID)
	if err != nil {
		t.Fatal(err)
	}
	want, err := d.Checksums()
	if err != nil {
		t.Fatal(err)
	}
	got, err := back.Checksums()
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("checksums differ:\n got %v\nwant %v", got, want)
	}
	sameReads(t, pg, srcID, lite, dstID)
}
