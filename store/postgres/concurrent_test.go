package postgres

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"sync"
	"testing"

	"github.com/jackc/pgx/v5"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
)

// Environment of the helper process started by TestTwoProcesses.
const (
	helperDSN      = "TPCSCAN_PG_HELPER_DSN"
	helperCampaign = "TPCSCAN_PG_HELPER_CAMPAIGN"
)

const (
	actionsPerProcess = 1000
	workersPerProcess = 8
	scannersPerSide   = 12
	scannerOverlap    = 6 // scanners working from both processes at once
)

// work performs n actions (NextPass, then a submitted revision whose
// comment is a unique token) from several goroutines, scanners
// first..first+scannersPerSide-1, and returns the tokens of the actions the
// store acknowledged.
func work(ctx context.Context, s store.Store, campaignID int64, side string, first, n int) ([]string, error) {
	var (
		mu    sync.Mutex
		acked []string
		errs  []error
		wg    sync.WaitGroup
	)
	per := n / workersPerProcess
	for w := range workersPerProcess {
		wg.Go(func() {
			for i := range per {
				scanner := fmt.Sprintf("s%02d", first+(w*per+i)%scannersPerSide)
				token := fmt.Sprintf("%s-%d-%d", side, w, i)
				p, err := s.NextPass(ctx, campaignID, scanner)
				if errors.Is(err, store.ErrNoWork) {
					continue
				}
				if err == nil {
					rev := scan.Revision{State: scan.PassSubmitted, Seconds: 1,
						Label: scan.Label{Class: "cosmic", Confidence: "2", Comment: token}}
					_, err = s.SaveRevision(ctx, p.ID, scanner, rev)
				}
				mu.Lock()
				if err != nil {
					errs = append(errs, fmt.Errorf("%s as %s: %w", token, scanner, err))
				} else {
					acked = append(acked, token)
				}
				mu.Unlock()
			}
		})
	}
	wg.Wait()
	return acked, errors.Join(errs...)
}

// TestTwoProcesses runs 1,000 actions from this process and 1,000 from a
// child process at once, on one campaign, with six scanners active in
// both. Every acknowledged action must be stored exactly once, and no
// event may reach more scanners than K.
func TestTwoProcesses(t *testing.T) {
	t.Parallel()
	s, dsn := open(t)
	ctx := context.Background()
	const k, nEvents = 2, 1500
	id, err := s.CreateCampaign(ctx, testCampaign("race", k, false), testEvents(nEvents))
	if err != nil {
		t.Fatal(err)
	}
	child := exec.CommandContext(ctx, os.Args[0], "-test.run=^TestHelperProcess$", "-test.count=1")
	child.Env = append(os.Environ(), helperDSN+"="+dsn, helperCampaign+"="+strconv.FormatInt(id, 10))
	var out, stderr bytes.Buffer
	child.Stdout, child.Stderr = &out, &stderr
	if err := child.Start(); err != nil {
		t.Fatal(err)
	}
	mine, err := work(ctx, s, id, "parent", 0, actionsPerProcess)
	if err != nil {
		t.Error(err)
	}
	if err := child.Wait(); err != nil {
		t.Fatalf("helper process: %v\n%s", err, stderr.String())
	}
	theirs := helperTokens(&out)
	if len(mine) != actionsPerProcess || len(theirs) != actionsPerProcess {
		t.Errorf("acknowledged %d here and %d in the child, want %d each", len(mine), len(theirs), actionsPerProcess)
	}
	checkStoredOnce(t, dsn, append(mine, theirs...))
	checkPerEvent(t, s, id, k)
}

// TestHelperProcess is the child of TestTwoProcesses; alone it does nothing.
func TestHelperProcess(t *testing.T) {
	dsn := os.Getenv(helperDSN)
	if dsn == "" {
		t.Skip("helper process for TestTwoProcesses")
	}
	id, err := strconv.ParseInt(os.Getenv(helperCampaign), 10, 64)
	if err != nil {
		t.Fatal(err)
	}
	s, err := Open(context.Background(), dsn)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	acked, err := work(context.Background(), s, id, "child", scannersPerSide-scannerOverlap, actionsPerProcess)
	for _, tok := range acked {
		fmt.Println("ack", tok)
	}
	if err != nil {
		t.Fatal(err)
	}
}

func helperTokens(out *bytes.Buffer) []string {
	var toks []string
	sc := bufio.NewScanner(out)
	for sc.Scan() {
		if tok, ok := strings.CutPrefix(sc.Text(), "ack "); ok {
			toks = append(toks, tok)
		}
	}
	return toks
}

// checkStoredOnce checks that each acknowledged token is in exactly one
// revision. (An unacknowledged action may still have committed if only
// its reply was lost, so extra tokens are allowed.)
func checkStoredOnce(t *testing.T, dsn string, acked []string) {
	t.Helper()
	ctx := context.Background()
	conn, err := pgx.Connect(ctx, dsn)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(ctx)
	rows, err := conn.Query(ctx, `SELECT label->>'comment', count(*) FROM revisions GROUP BY 1`)
	if err != nil {
		t.Fatal(err)
	}
	stored := map[string]int{}
	for rows.Next() {
		var tok string
		var n int
		if err := rows.Scan(&tok, &n); err != nil {
			t.Fatal(err)
		}
		stored[tok] = n
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	for _, tok := range acked {
		if stored[tok] != 1 {
			t.Errorf("acknowledged action %s stored %d times", tok, stored[tok])
		}
	}
}

// checkPerEvent checks that no event has more than k passes, nor two by
// one scanner, and that every pass's revision count matches its rows.
func checkPerEvent(t *testing.T, s *Store, id int64, k int) {
	t.Helper()
	ctx := context.Background()
	ps, err := s.Passes(ctx, id)
	if err != nil {
		t.Fatal(err)
	}
	byEvent := map[string]map[string]bool{}
	for _, p := range ps {
		if byEvent[p.EventID] == nil {
			byEvent[p.EventID] = map[string]bool{}
		}
		if byEvent[p.EventID][p.Scanner] {
			t.Errorf("event %s handed to %s twice", p.EventID, p.Scanner)
		}
		byEvent[p.EventID][p.Scanner] = true
	}
	for ev, who := range byEvent {
		if len(who) > k {
			t.Errorf("event %s handed to %d scanners, K = %d", ev, len(who), k)
		}
	}
	var bad int
	err = s.pool.QueryRow(ctx, `SELECT count(*) FROM passes p
		WHERE p.campaign_id = $1 AND p.revisions <> (SELECT count(*) FROM revisions r WHERE r.pass_id = p.id)`, id).Scan(&bad)
	if err != nil {
		t.Fatal(err)
	}
	if bad > 0 {
		t.Errorf("%d passes count a different number of revisions than they have", bad)
	}
}

// TestOneScannerManySessions: eight sessions of one scanner asking for
// work at the same moment all get the same single open pass.
func TestOneScannerManySessions(t *testing.T) {
	t.Parallel()
	s, _ := open(t)
	ctx := context.Background()
	id, err := s.CreateCampaign(ctx, testCampaign("twins", 2, false), testEvents(50))
	if err != nil {
		t.Fatal(err)
	}
	ids := make(chan int64, 8)
	var wg sync.WaitGroup
	for range 8 {
		wg.Go(func() {
			p, err := s.NextPass(ctx, id, "ana")
			if err != nil {
				t.Error(err)
			}
			ids <- p.ID
		})
	}
	wg.Wait()
	close(ids)
	first := <-ids
	for other := range ids {
		if other != first {
			t.Errorf("one scanner holds passes %d and %d at once", first, other)
		}
	}
	ps, err := s.ScannerPasses(ctx, id, "ana")
	if err != nil || len(ps) != 1 {
		t.Errorf("ana has %d passes (%v), want 1", len(ps), err)
	}
}
