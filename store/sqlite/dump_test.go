package sqlite

import (
	"context"
	"errors"
	"slices"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/storetest"
)

func TestDumpLoadRoundTrip(t *testing.T) {
	ctx := context.Background()
	src := openTemp(t)
	c := storetest.Campaign("trip", 2)
	c.Adaptive = true
	id, err := src.CreateCampaign(ctx, c, storetest.Events(4))
	if err != nil {
		t.Fatal(err)
	}
	save := func(scanner string, st scan.PassState, class string) {
		t.Helper()
		p, err := src.NextPass(ctx, id, scanner)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := src.SaveRevision(ctx, p.ID, scanner, scan.Revision{State: scan.PassDraft, Label: scan.Label{Class: class}, Seconds: 2}); err != nil {
			t.Fatal(err)
		}
		if _, err := src.SaveRevision(ctx, p.ID, scanner, scan.Revision{State: st, Label: scan.Label{Class: class, Confidence: "2"}, Seconds: 3}); err != nil {
			t.Fatal(err)
		}
	}
	for range 4 {
		save("ana", scan.PassSubmitted, "numu-cc")
	}
	save("ben", scan.PassSubmitted, "nc-pi0") // disagrees: an extra pass is wanted
	save("ben", scan.PassSkipped, "")         // a replacement is wanted
	if err := src.SetConsensus(ctx, scan.Consensus{CampaignID: id, EventID: "ev-001", Method: "majority", Label: scan.Label{Class: "numu-cc"}, Posterior: 0.75}); err != nil {
		t.Fatal(err)
	}
	if err := src.SaveResume(ctx, id, "ana", []byte(`{"zoom":3}`)); err != nil {
		t.Fatal(err)
	}
	d, err := src.Dump(ctx, id)
	if err != nil {
		t.Fatal(err)
	}
	dst := openTemp(t)
	nid, err := dst.Load(ctx, d)
	if err != nil {
		t.Fatal(err)
	}
	back, err := dst.Dump(ctx, nid)
	if err != nil {
		t.Fatal(err)
	}
	a, err := d.Checksums()
	if err != nil {
		t.Fatal(err)
	}
	b, err := back.Checksums()
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(a, b) {
		t.Errorf("checksums differ after the round trip:\n%v\n%v", a, b)
	}
	// Assignment goes on the same way in both stores.
	var orders [][]string
	for _, s := range []struct {
		st *Store
		id int64
	}{{src, id}, {dst, nid}} {
		var got []string
		for _, sc := range []string{"chidi", "dana", "eli"} {
			p, err := s.st.NextPass(ctx, s.id, sc)
			if errors.Is(err, store.ErrNoWork) {
				continue
			}
			if err != nil {
				t.Fatal(err)
			}
			got = append(got, p.EventID)
		}
		orders = append(orders, got)
	}
	if len(orders[0]) == 0 || !slices.Equal(orders[0], orders[1]) {
		t.Errorf("extra and replacement passes: source gave %v, loaded copy %v; want the same", orders[0], orders[1])
	}
	if _, err := dst.Load(ctx, d); !errors.Is(err, store.ErrConflict) {
		t.Errorf("loading the same campaign twice: %v, want ErrConflict", err)
	}
}
