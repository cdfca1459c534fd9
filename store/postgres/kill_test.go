package postgres

import (
	"context"
	"fmt"
	"sync"
	"sync/atomic"
	"testing"

	"github.com/jackc/pgx/v5"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store/postgres/pgtest"
)

// TestKilledConnection terminates a server backend in the middle of a
// SaveRevision transaction (held there by a row lock from another
// connection): the acknowledged draft stays, and the interrupted save,
// which had committed nothing, is run again and stored exactly once.
func TestKilledConnection(t *testing.T) {
	t.Parallel()
	s, dsn := open(t)
	ctx := context.Background()
	id, err := s.CreateCampaign(ctx, testCampaign("kill", 1, false), testEvents(3))
	if err != nil {
		t.Fatal(err)
	}
	p, err := s.NextPass(ctx, id, "ana")
	if err != nil {
		t.Fatal(err)
	}
	draft := scan.Revision{State: scan.PassDraft, Seconds: 1, Label: scan.Label{Comment: "before"}}
	if _, err := s.SaveRevision(ctx, p.ID, "ana", draft); err != nil {
		t.Fatal(err)
	}

	blocker, err := pgx.Connect(ctx, dsn)
	if err != nil {
		t.Fatal(err)
	}
	defer blocker.Close(ctx)
	tx, err := blocker.Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tx.Exec(ctx, "SELECT 1 FROM passes WHERE id = $1 FOR UPDATE", p.ID); err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() {
		_, err := s.SaveRevision(ctx, p.ID, "ana", submit("nue-cc"))
		done <- err
	}()
	// The save's backend is now inside its transaction, waiting for our
	// lock: find it among the backends our connection blocks, and kill it.
	var victim int32
	for victim == 0 {
		err := blocker.QueryRow(ctx, `SELECT coalesce(min(pid), 0) FROM pg_stat_activity
			WHERE pg_backend_pid() = ANY (pg_blocking_pids(pid))`).Scan(&victim)
		if err != nil {
			t.Fatal(err)
		}
		select {
		case err := <-done:
			t.Fatalf("save finished while the pass was locked: %v", err)
		default:
		}
	}
	var killed bool
	if err := blocker.QueryRow(ctx, "SELECT pg_terminate_backend($1)", victim).Scan(&killed); err != nil || !killed {
		t.Fatalf("terminate backend %d: %v %v", victim, killed, err)
	}
	// The killed transaction committed nothing, so the store runs it again
	// on a fresh connection; it goes through once we release the lock.
	if err := tx.Rollback(ctx); err != nil {
		t.Fatal(err)
	}
	if err := <-done; err != nil {
		t.Fatalf("save interrupted by a killed backend: %v", err)
	}
	revs, err := s.Revisions(ctx, p.ID)
	if err != nil {
		t.Fatal(err)
	}
	if len(revs) != 2 || revs[0].Label.Comment != "before" || revs[1].State != scan.PassSubmitted {
		t.Fatalf("after the kill the pass has %+v, want the draft and the submission, once each", revs)
	}
}

// TestKillsUnderLoad kills the store's server backends again and again
// while four sessions save: whatever was acknowledged is stored exactly
// once, and the sessions keep working.
func TestKillsUnderLoad(t *testing.T) {
	t.Parallel()
	// A name of our own, so that the killing spares other tests' backends.
	const app = "tpcscan-kills-under-load"
	dsn := pgtest.DSN(t) + "&application_name=" + app
	ctx := context.Background()
	s, err := Open(ctx, dsn)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	id, err := s.CreateCampaign(ctx, testCampaign("kills", 1, false), testEvents(200))
	if err != nil {
		t.Fatal(err)
	}
	admin, err := pgx.Connect(ctx, dsn)
	if err != nil {
		t.Fatal(err)
	}
	defer admin.Close(ctx)
	var (
		mu     sync.Mutex
		acked  []string
		failed atomic.Int64
		count  atomic.Int64
		wg     sync.WaitGroup
	)
	kill := make(chan struct{}, 16)
	for w := range 4 {
		wg.Go(func() {
			scanner := fmt.Sprintf("k%d", w)
			for i := range 20 {
				tok := fmt.Sprintf("%s-%d", scanner, i)
				p, err := s.NextPass(ctx, id, scanner)
				if err == nil {
					rev := scan.Revision{State: scan.PassSubmitted, Label: scan.Label{Class: "cosmic", Confidence: "1", Comment: tok}}
					_, err = s.SaveRevision(ctx, p.ID, scanner, rev)
				}
				if err != nil {
					failed.Add(1)
				} else {
					mu.Lock()
					acked = append(acked, tok)
					mu.Unlock()
				}
				if count.Add(1)%10 == 0 {
					kill <- struct{}{}
				}
			}
		})
	}
	go func() { wg.Wait(); close(kill) }()
	kills := 0
	for range kill {
		var n int
		err := admin.QueryRow(ctx, `SELECT count(pg_terminate_backend(pid)) FROM pg_stat_activity
			WHERE datname = current_database() AND pid <> pg_backend_pid() AND application_name = $1`, app).Scan(&n)
		if err != nil {
			t.Fatal(err)
		}
		kills += n
	}
	t.Logf("%d backends killed, %d actions acknowledged, %d failed", kills, len(acked), failed.Load())
	if kills == 0 {
		t.Fatal("no backend was killed")
	}
	if len(acked) < 40 {
		t.Errorf("only %d of 80 actions acknowledged (%d failed): the pool does not recover", len(acked), failed.Load())
	}
	checkStoredOnce(t, dsn, acked)
	checkPerEvent(t, s, id, 1)
}
