package ui

import (
	"bufio"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store/sqlite"
)

// TestKilledAfterSaveShown runs a scanning station in a child process,
// tags an event there and waits until the station shows "saved ✓"; then
// the child is killed with SIGKILL. A new session must find the label.
func TestKilledAfterSaveShown(t *testing.T) {
	if os.Getenv("TPCSCAN_UI_CHILD_DB") != "" {
		t.Skip("child process")
	}
	f := newScanFixture(t, scan.ModeLabel, 2)
	db := filepath.Join(t.TempDir(), "kill.db")
	// The fixture's store lives elsewhere; make the campaign in db.
	st, err := sqlite.Open(context.Background(), db)
	if err != nil {
		t.Fatal(err)
	}
	c, err := f.st.Campaign(context.Background(), f.camp)
	if err != nil {
		t.Fatal(err)
	}
	evs, err := f.st.Events(context.Background(), f.camp)
	if err != nil {
		t.Fatal(err)
	}
	camp, err := st.CreateCampaign(context.Background(), c, evs)
	if err != nil {
		t.Fatal(err)
	}
	st.Close()

	cmd := exec.Command(os.Args[0], "-test.run=^TestKillChild$", "-test.count=1")
	cmd.Env = append(os.Environ(), "TPCSCAN_UI_CHILD_DB="+db, "TPCSCAN_UI_CHILD_CAMPAIGN="+strconv.FormatInt(camp, 10))
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	cmd.Stderr = os.Stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(out)
	shown := false
	for sc.Scan() {
		if strings.Contains(sc.Text(), "SHOWN saved ✓") {
			shown = true
			break
		}
	}
	cmd.Process.Kill() // SIGKILL on Unix
	cmd.Wait()
	if !shown {
		t.Fatal("the child never showed saved ✓")
	}

	st2, err := sqlite.Open(context.Background(), db)
	if err != nil {
		t.Fatal(err)
	}
	defer st2.Close()
	ps, err := st2.ScannerPasses(context.Background(), camp, "kim")
	if err != nil || len(ps) == 0 {
		t.Fatalf("after the kill: passes %v, err %v", ps, err)
	}
	if ps[0].Label.Class != "nc-other" || ps[0].State != scan.PassDraft {
		t.Errorf("after the kill the pass is %s with class %q, want a draft with nc-other", ps[0].State, ps[0].Label.Class)
	}
}

// TestKillChild is the child of TestKilledAfterSaveShown: it tags one
// event, prints the title bar once it says saved, and waits to be killed.
func TestKillChild(t *testing.T) {
	db := os.Getenv("TPCSCAN_UI_CHILD_DB")
	if db == "" {
		t.Skip("run by TestKilledAfterSaveShown")
	}
	camp, _ := strconv.ParseInt(os.Getenv("TPCSCAN_UI_CHILD_CAMPAIGN"), 10, 64)
	st, err := sqlite.Open(context.Background(), db)
	if err != nil {
		t.Fatal(err)
	}
	m := New(Options{Source: newSynthSource(2, 300), Store: st, CampaignID: camp, Scanner: "kim", Tier: render.TierMono})
	send(t, m, teaSize(120, 40))
	run(t, m, m.Init())
	keys(t, m, "4")
	title := strings.SplitN(m.View(), "\n", 2)[0]
	if strings.Contains(title, "saved ✓") {
		os.Stdout.WriteString("SHOWN saved ✓\n")
	}
	// Wait for SIGKILL; give up after a minute should the parent be gone.
	<-time.After(time.Minute)
	t.Fatal("not killed")
}
