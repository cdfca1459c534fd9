package main

import (
	"bytes"
	"context"
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/backend"
	"github.com/tpcscan/tpcscan/store/postgres/pgtest"
)

// shiftDB writes an SQLite campaign that four scanners have worked through
// (with disagreements, skips and a consensus label) and returns its path.
func shiftDB(t *testing.T) string {
	t.Helper()
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "shift.db")
	s, err := backend.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	evs := make([]scan.CampaignEvent, 12)
	for i := range evs {
		evs[i] = scan.CampaignEvent{EventID: fmt.Sprintf("r7-e%02d", i),
			Selection: &scan.Selection{EventID: fmt.Sprintf("r7-e%02d", i), Selected: i%3 > 0, Class: "numu-cc", Score: 0.1 * float64(i%10)}}
	}
	c := scan.Campaign{Name: "spring", Dataset: "demo", Mode: scan.ModeLabel, PerEvent: 3, Adaptive: true, Seed: 3, Schema: scan.DefaultSchema()}
	id, err := s.CreateCampaign(ctx, c, evs)
	if err != nil {
		t.Fatal(err)
	}
	classes := []string{"numu-cc", "numu-cc", "nue-cc", "nc-pi0", "cosmic"}
	for i := range 36 {
		who := fmt.Sprintf("scanner%d", i%4)
		p, err := s.NextPass(ctx, id, who)
		if err == store.ErrNoWork || (err != nil && strings.Contains(err.Error(), store.ErrNoWork.Error())) {
			continue
		}
		if err != nil {
			t.Fatal(err)
		}
		rev := scan.Revision{State: scan.PassSubmitted, Seconds: float64(5 + i), Label: scan.Label{Class: classes[(i*7)%5], Confidence: "2"}}
		if i%11 == 10 {
			rev = scan.Revision{State: scan.PassSkipped, Seconds: 2}
		}
		if _, err := s.SaveRevision(ctx, p.ID, who, rev); err != nil {
			t.Fatal(err)
		}
	}
	if err := s.SetConsensus(ctx, scan.Consensus{CampaignID: id, EventID: "r7-e03", Method: "adjudication",
		Label: scan.Label{Class: "nue-cc"}, Posterior: 1, By: "coordinator"}); err != nil {
		t.Fatal(err)
	}
	return path
}

func runCmd(t *testing.T, args ...string) (string, error) {
	t.Helper()
	var out, errb bytes.Buffer
	env := &environ{stdin: strings.NewReader(""), stdout: &out, stderr: &errb, getenv: func(string) string { return "" }}
	err := run(context.Background(), env, args)
	return out.String(), err
}

// TestMigrate copies a scanned SQLite campaign to PostgreSQL, checks that
// agree reports the same numbers from both, that a second run copies
// nothing, and that a campaign changed since its copy is refused.
func TestMigrate(t *testing.T) {
	file := shiftDB(t)
	dsn := pgtest.DSN(t)
	out, err := runCmd(t, "migrate", "--from", file, "--to", dsn)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out, "spring: copied, verified") {
		t.Errorf("first run said %q", out)
	}
	out, err = runCmd(t, "migrate", "--from", file, "--to", dsn)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out, "spring: already there, verified") {
		t.Errorf("second run said %q", out)
	}
	pg, err := backend.Open(context.Background(), dsn)
	if err != nil {
		t.Fatal(err)
	}
	defer pg.Close()
	if cs, err := pg.Campaigns(context.Background()); err != nil || len(cs) != 1 {
		t.Errorf("after two runs the server has %d campaigns (%v), want 1", len(cs), err)
	}

	// consensus stores its labels, in each store with its own time stamp.
	for _, args := range [][]string{{"agree"}, {"agree", "--json"}, {"consensus"}} {
		lite, errLite := runCmd(t, append(args, "--db", file)...)
		pg, errPG := runCmd(t, append(args, "--db", dsn)...)
		if errLite != nil || errPG != nil {
			t.Fatalf("%v: %v / %v", args, errLite, errPG)
		}
		if lite != pg || lite == "" {
			t.Errorf("%v differs between SQLite and PostgreSQL:\n%s\n---\n%s", args, lite, pg)
		}
	}
	lite, err := backend.Open(context.Background(), file)
	if err != nil {
		t.Fatal(err)
	}
	c, err := lite.CampaignByName(context.Background(), "spring")
	if err == nil {
		err = lite.SaveResume(context.Background(), c.ID, "scanner1", []byte("moved on"))
	}
	lite.Close()
	if err != nil {
		t.Fatal(err)
	}
	if _, err := runCmd(t, "migrate", "--from", file, "--to", dsn); err == nil || !strings.Contains(err.Error(), "resume") {
		t.Errorf("a changed source was not refused by table: %v", err)
	}
}

func TestMigrateUsage(t *testing.T) {
	for _, args := range [][]string{{"migrate"}, {"migrate", "--from", "x.db"}, {"migrate", "--from", "a", "--to", "b", "extra"}} {
		if _, err := runCmd(t, args...); err == nil {
			t.Errorf("%v: accepted", args)
		}
	}
}
