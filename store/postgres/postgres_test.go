package postgres

import (
	"context"
	"errors"
	"fmt"
	"reflect"
	"testing"
	"time"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/postgres/pgtest"
)

// open returns a store on a fresh private schema of the test server.
func open(t testing.TB) (*Store, string) {
	t.Helper()
	dsn := pgtest.DSN(t)
	s, err := Open(context.Background(), dsn)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	return s, dsn
}

func testCampaign(name string, k int, adaptive bool) scan.Campaign {
	return scan.Campaign{Name: name, Dataset: "demo", Mode: scan.ModeLabel, PerEvent: k, Blind: true,
		Adaptive: adaptive, Seed: 7, Schema: scan.DefaultSchema()}
}

func testEvents(n int) []scan.CampaignEvent {
	evs := make([]scan.CampaignEvent, n)
	for i := range evs {
		evs[i].EventID = fmt.Sprintf("ev%04d", i)
		if i%2 == 0 {
			evs[i].Selection = &scan.Selection{EventID: evs[i].EventID, Selected: true, Class: "numu-cc", Score: 0.5 + float64(i)/1000}
		}
	}
	return evs
}

func submit(class string) scan.Revision {
	return scan.Revision{State: scan.PassSubmitted, Seconds: 12.5, Label: scan.Label{Class: class, Confidence: "3"}}
}

func TestCampaignRoundTrip(t *testing.T) {
	t.Parallel()
	s, _ := open(t)
	ctx := context.Background()
	c := testCampaign("alpha", 2, false)
	c.Scanners = []string{"ana", "ben"}
	c.Created = time.Date(2026, 3, 1, 12, 0, 0, 123456000, time.UTC)
	evs := testEvents(5)
	id, err := s.CreateCampaign(ctx, c, evs)
	if err != nil {
		t.Fatal(err)
	}
	got, err := s.Campaign(ctx, id)
	if err != nil {
		t.Fatal(err)
	}
	c.ID = id
	got.Created = got.Created.UTC()
	if !reflect.DeepEqual(got, c) {
		t.Errorf("campaign:\n got %+v\nwant %+v", got, c)
	}
	if byName, err := s.CampaignByName(ctx, "alpha"); err != nil || byName.ID != id {
		t.Errorf("by name: %v %v", byName.ID, err)
	}
	gotEvs, err := s.Events(ctx, id)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(gotEvs, evs) {
		t.Errorf("events:\n got %+v\nwant %+v", gotEvs, evs)
	}
	if _, err := s.CreateCampaign(ctx, c, evs); !errors.Is(err, store.ErrConflict) {
		t.Errorf("duplicate name: %v, want ErrConflict", err)
	}
	if _, err := s.Campaign(ctx, id+99); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("missing campaign: %v", err)
	}
	if _, err := s.NextPass(ctx, id, "eve"); !errors.Is(err, store.ErrUnknownScanner) {
		t.Errorf("scanner off the roster: %v", err)
	}
}

// TestAssignmentAndRevisions follows two scanners through a K=2 campaign.
func TestAssignmentAndRevisions(t *testing.T) {
	t.Parallel()
	s, _ := open(t)
	ctx := context.Background()
	id, err := s.CreateCampaign(ctx, testCampaign("beta", 2, false), testEvents(3))
	if err != nil {
		t.Fatal(err)
	}
	seen := map[string]map[string]bool{}
	for _, who := range []string{"ana", "ben"} {
		seen[who] = map[string]bool{}
		for {
			p, err := s.NextPass(ctx, id, who)
			if errors.Is(err, store.ErrNoWork) {
				break
			}
			if err != nil {
				t.Fatal(err)
			}
			again, err := s.NextPass(ctx, id, who)
			if err != nil || again.ID != p.ID {
				t.Fatalf("open pass not returned again: %v %v", again.ID, err)
			}
			if seen[who][p.EventID] {
				t.Fatalf("%s got %s twice", who, p.EventID)
			}
			seen[who][p.EventID] = true
			draft := scan.Revision{State: scan.PassDraft, Seconds: 2, Label: scan.Label{Class: "nc-pi0"}}
			if _, err := s.SaveRevision(ctx, p.ID, who, draft); err != nil {
				t.Fatal(err)
			}
			r, err := s.SaveRevision(ctx, p.ID, who, submit("numu-cc"))
			if err != nil {
				t.Fatal(err)
			}
			if r.Seq != 2 || r.Schema != 1 || r.At.IsZero() {
				t.Errorf("stored revision %+v", r)
			}
		}
		if len(seen[who]) != 3 {
			t.Errorf("%s scanned %d events, want all 3", who, len(seen[who]))
		}
	}
	if _, err := s.NextPass(ctx, id, "cy"); !errors.Is(err, store.ErrNoWork) {
		t.Errorf("third scanner on a K=2 campaign: %v, want ErrNoWork", err)
	}
	ps, err := s.Passes(ctx, id)
	if err != nil {
		t.Fatal(err)
	}
	if len(ps) != 6 {
		t.Fatalf("%d passes, want 6", len(ps))
	}
	for _, p := range ps {
		if p.State != scan.PassSubmitted || p.Revisions != 2 || p.Seconds != 14.5 || p.Label.Class != "numu-cc" {
			t.Errorf("pass %+v", p)
		}
	}
	revs, err := s.Revisions(ctx, ps[0].ID)
	if err != nil || len(revs) != 2 || revs[0].Label.Class != "nc-pi0" || revs[1].State != scan.PassSubmitted {
		t.Errorf("revisions %+v %v", revs, err)
	}
	if _, err := s.SaveRevision(ctx, ps[0].ID, "mallory", submit("nue-cc")); !errors.Is(err, store.ErrConflict) {
		t.Errorf("save by another scanner: %v, want ErrConflict", err)
	}
	if _, err := s.SaveRevision(ctx, ps[0].ID, ps[0].Scanner, submit("no-such-class")); err == nil {
		t.Error("label outside the schema was stored")
	}
	mine, err := s.ScannerPasses(ctx, id, "ana")
	if err != nil || len(mine) != 3 || mine[0].ID > mine[1].ID {
		t.Errorf("scanner passes %v %v", mine, err)
	}
}

// TestSkipAndAdaptive checks the replacement pass after a skip and the
// adaptive extra pass after a disagreement.
func TestSkipAndAdaptive(t *testing.T) {
	t.Parallel()
	s, _ := open(t)
	ctx := context.Background()
	id, err := s.CreateCampaign(ctx, testCampaign("gamma", 2, true), testEvents(1))
	if err != nil {
		t.Fatal(err)
	}
	classes := map[string]string{"ana": "numu-cc", "ben": "nue-cc"}
	for _, who := range []string{"ana", "ben"} {
		p, err := s.NextPass(ctx, id, who)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := s.SaveRevision(ctx, p.ID, who, submit(classes[who])); err != nil {
			t.Fatal(err)
		}
	}
	p, err := s.NextPass(ctx, id, "cy")
	if err != nil {
		t.Fatalf("disagreement gave no extra pass: %v", err)
	}
	if p.Round != 2 {
		t.Errorf("extra pass round %d, want 2", p.Round)
	}
	if _, err := s.SaveRevision(ctx, p.ID, "cy", scan.Revision{State: scan.PassSkipped}); err != nil {
		t.Fatal(err)
	}
	q, err := s.NextPass(ctx, id, "dee")
	if err != nil {
		t.Fatalf("skip gave no replacement pass: %v", err)
	}
	if _, err := s.NextPass(ctx, id, "eli"); !errors.Is(err, store.ErrNoWork) {
		t.Errorf("more passes than needed: %v", err)
	}
	if q.EventID != p.EventID {
		t.Errorf("replacement for %s, want %s", q.EventID, p.EventID)
	}
}

func TestConsensusAndResume(t *testing.T) {
	t.Parallel()
	s, _ := open(t)
	ctx := context.Background()
	id, err := s.CreateCampaign(ctx, testCampaign("delta", 1, false), testEvents(3))
	if err != nil {
		t.Fatal(err)
	}
	put := func(ev, method, class string) {
		t.Helper()
		err := s.SetConsensus(ctx, scan.Consensus{CampaignID: id, EventID: ev, Method: method, Label: scan.Label{Class: class}, Posterior: 0.9})
		if err != nil {
			t.Fatal(err)
		}
	}
	put("ev0002", "majority", "cosmic")
	put("ev0000", "majority", "numu-cc")
	put("ev0000", "adjudication", "nue-cc")
	put("ev0000", "majority", "nc-pi0")
	all, err := s.Consensus(ctx, id, "")
	if err != nil {
		t.Fatal(err)
	}
	if len(all) != 2 || all[0].EventID != "ev0000" || all[0].Label.Class != "nue-cc" || all[1].Label.Class != "cosmic" {
		t.Errorf("any method: %+v", all)
	}
	maj, err := s.Consensus(ctx, id, "majority")
	if err != nil || len(maj) != 2 || maj[0].Label.Class != "nc-pi0" {
		t.Errorf("majority: %+v %v", maj, err)
	}
	if err := s.SetConsensus(ctx, scan.Consensus{CampaignID: id, EventID: "nope", Method: "majority"}); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("consensus of a missing event: %v", err)
	}
	if _, err := s.Resume(ctx, id, "ana"); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("resume before save: %v", err)
	}
	for _, st := range []string{"first", "second"} {
		if err := s.SaveResume(ctx, id, "ana", []byte(st)); err != nil {
			t.Fatal(err)
		}
	}
	if b, err := s.Resume(ctx, id, "ana"); err != nil || string(b) != "second" {
		t.Errorf("resume %q %v", b, err)
	}
}

// TestTooNew: a schema from a newer tpcscan is refused, not touched.
func TestTooNew(t *testing.T) {
	t.Parallel()
	s, dsn := open(t)
	ctx := context.Background()
	if err := pgtest.Exec(ctx, dsn, "INSERT INTO schema_migrations (version, name) VALUES (99, '099_future.sql')"); err != nil {
		t.Fatal(err)
	}
	s.Close()
	if _, err := Open(ctx, dsn); !errors.Is(err, store.ErrTooNew) {
		t.Errorf("open newer schema: %v, want ErrTooNew", err)
	}
}

// TestConcurrentOpen: servers starting together upgrade the schema once.
func TestConcurrentOpen(t *testing.T) {
	t.Parallel()
	dsn := pgtest.DSN(t)
	errs := make(chan error, 4)
	for range 4 {
		go func() {
			s, err := Open(context.Background(), dsn)
			if err == nil {
				s.Close()
			}
			errs <- err
		}()
	}
	for range 4 {
		if err := <-errs; err != nil {
			t.Error(err)
		}
	}
}

// TestRevisionsAppendOnly: the database itself refuses to rewrite history.
func TestRevisionsAppendOnly(t *testing.T) {
	t.Parallel()
	s, dsn := open(t)
	ctx := context.Background()
	id, err := s.CreateCampaign(ctx, testCampaign("eps", 1, false), testEvents(1))
	if err != nil {
		t.Fatal(err)
	}
	p, err := s.NextPass(ctx, id, "ana")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.SaveRevision(ctx, p.ID, "ana", submit("cosmic")); err != nil {
		t.Fatal(err)
	}
	if err := pgtest.Exec(ctx, dsn, "UPDATE revisions SET seconds = 0"); err == nil {
		t.Error("a revision was updated")
	}
	if err := pgtest.Exec(ctx, dsn, "DELETE FROM revisions"); err == nil {
		t.Error("a revision was deleted")
	}
}
