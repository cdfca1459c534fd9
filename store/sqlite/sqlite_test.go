package sqlite

import (
	"bufio"
	"context"
	"database/sql"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	_ "modernc.org/sqlite"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/storetest"
)

func TestOpenRefuses(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	write := func(name string, data []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, data, 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	foreign := func(name string, stmts ...string) string {
		p := filepath.Join(dir, name)
		db, err := sql.Open("sqlite", p)
		if err != nil {
			t.Fatal(err)
		}
		defer db.Close()
		for _, s := range stmts {
			if _, err := db.Exec(s); err != nil {
				t.Fatal(err)
			}
		}
		return p
	}
	newer := filepath.Join(dir, "newer.db")
	s, err := Open(ctx, newer)
	if err != nil {
		t.Fatal(err)
	}
	s.Close()
	foreign("newer.db", `INSERT INTO schema_migrations (version, name, applied) VALUES (99, '099_future.sql', '2030-01-01T00:00:00Z')`)

	// A damaged page inside an otherwise valid tpcscan database.
	damaged := filepath.Join(dir, "damaged.db")
	s, err = Open(ctx, damaged)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.CreateCampaign(ctx, storetest.Campaign("c", 1), storetest.Events(200)); err != nil {
		t.Fatal(err)
	}
	s.Close()
	raw, err := os.ReadFile(damaged)
	if err != nil {
		t.Fatal(err)
	}
	for page := 4096; page+8 <= len(raw); page += 4096 { // b-tree page headers
		for i := page; i < page+8; i++ {
			raw[i] ^= 0xff
		}
	}
	write("damaged.db", raw)
	os.Remove(damaged + "-wal")

	tests := []struct {
		name, path, want string
		is               error
	}{
		{"text file", write("notes.db", []byte("these are my notes, not a database\n")), "the file is not SQLite", nil},
		{"truncated header", write("short.db", []byte("SQLite fo")), "the file is not SQLite", nil},
		{"foreign tables", foreign("other.db", `CREATE TABLE invoices (id INTEGER)`, `CREATE TABLE customers (id INTEGER)`), "another program (tables customers, invoices)", nil},
		{"foreign application id", foreign("app.db", `PRAGMA application_id = 1234`), "belongs to another program", nil},
		{"newer tpcscan", newer, "schema version 99", store.ErrTooNew},
		{"damaged pages", damaged, "damaged", nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			before, _ := os.ReadFile(tt.path)
			s, err := Open(ctx, tt.path)
			if err == nil && tt.name == "damaged pages" {
				// Damage may hide until the damaged pages are read.
				_, err = s.Events(ctx, 1)
				s.Close()
			}
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Fatalf("err = %v, want it to contain %q", err, tt.want)
			}
			t.Logf("message: %v", err)
			if tt.is != nil && !errors.Is(err, tt.is) {
				t.Errorf("err = %v, want errors.Is %v", err, tt.is)
			}
			if !strings.Contains(err.Error(), tt.path) {
				t.Errorf("error %q does not name the file", err)
			}
			if after, _ := os.ReadFile(tt.path); string(after) != string(before) {
				t.Error("refused file was changed")
			}
		})
	}
}

func TestOpenEmptyFileAndReopen(t *testing.T) {
	ctx := context.Background()
	p := filepath.Join(t.TempDir(), "empty.db")
	if err := os.WriteFile(p, nil, 0o644); err != nil {
		t.Fatal(err)
	}
	for range 2 { // a second open must find the migrations applied
		s, err := Open(ctx, p)
		if err != nil {
			t.Fatal(err)
		}
		var n int
		if err := s.r.QueryRow(`SELECT count(*) FROM schema_migrations`).Scan(&n); err != nil || n != 1 {
			t.Fatalf("schema_migrations rows = %d, %v", n, err)
		}
		var mode string
		if err := s.r.QueryRow(`PRAGMA journal_mode`).Scan(&mode); err != nil || mode != "wal" {
			t.Fatalf("journal_mode = %q, %v", mode, err)
		}
		s.Close()
	}
}

// The database itself refuses to change or delete a revision.
func TestRevisionsImmutableInSQL(t *testing.T) {
	ctx := context.Background()
	s := openTemp(t)
	id, err := s.CreateCampaign(ctx, storetest.Campaign("c", 1), storetest.Events(1))
	if err != nil {
		t.Fatal(err)
	}
	p, err := s.NextPass(ctx, id, "ana")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.SaveRevision(ctx, p.ID, "ana", scan.Revision{State: scan.PassDraft, Label: scan.Label{Class: "cosmic"}}); err != nil {
		t.Fatal(err)
	}
	for _, q := range []string{`UPDATE revisions SET label = '{}'`, `DELETE FROM revisions`} {
		if _, err := s.w.Exec(q); err == nil || !strings.Contains(err.Error(), "append-only") {
			t.Errorf("%s: err = %v, want append-only refusal", q, err)
		}
	}
}

// helperEnv selects what the re-executed test binary does.
const helperEnv = "TPCSCAN_STORE_HELPER"

// TestHelperProcess is not a test: the reliability tests re-execute the
// test binary to run it as a separate scanner process.
func TestHelperProcess(t *testing.T) {
	mode := os.Getenv(helperEnv)
	if mode == "" {
		t.Skip("helper process only")
	}
	if err := helper(mode, os.Getenv("TPCSCAN_DB"), os.Getenv("TPCSCAN_SCANNER")); err != nil {
		fmt.Println("error:", err)
		os.Exit(1)
	}
	os.Exit(0)
}

func helper(mode, db, scanner string) error {
	ctx := context.Background()
	s, err := Open(ctx, db)
	if err != nil {
		return err
	}
	defer s.Close()
	switch mode {
	case "save-and-wait":
		p, err := s.NextPass(ctx, 1, scanner)
		if err != nil {
			return err
		}
		if _, err := s.SaveRevision(ctx, p.ID, scanner, scan.Revision{State: scan.PassSubmitted, Label: scan.Label{Class: "nc-pi0", Confidence: "3", Comment: "saved before the kill"}}); err != nil {
			return err
		}
		fmt.Printf("saved %d\n", p.ID)
		select {} // wait to be killed
	case "label-250":
		// 250 events × (assign, draft, draft, submit) = 1,000 actions.
		for range 250 {
			p, err := s.NextPass(ctx, 1, scanner)
			if err != nil {
				return err
			}
			for i, st := range []scan.PassState{scan.PassDraft, scan.PassDraft, scan.PassSubmitted} {
				l := scan.Label{Class: "numu-cc", Confidence: "2", Comment: fmt.Sprintf("%s step %d", scanner, i)}
				if _, err := s.SaveRevision(ctx, p.ID, scanner, scan.Revision{State: st, Label: l, Seconds: 0.5}); err != nil {
					return err
				}
			}
		}
		fmt.Println("done")
		return nil
	}
	return fmt.Errorf("unknown helper mode %q", mode)
}

func helperCmd(t *testing.T, mode, db, scanner string) *exec.Cmd {
	t.Helper()
	cmd := exec.Command(os.Args[0], "-test.run=^TestHelperProcess$")
	cmd.Env = append(os.Environ(), helperEnv+"="+mode, "TPCSCAN_DB="+db, "TPCSCAN_SCANNER="+scanner)
	return cmd
}

func newCampaignFile(t *testing.T, events int) string {
	t.Helper()
	db := filepath.Join(t.TempDir(), "scan.db")
	s, err := Open(context.Background(), db)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if _, err := s.CreateCampaign(context.Background(), storetest.Campaign("c", 1), storetest.Events(events)); err != nil {
		t.Fatal(err)
	}
	return db
}

// A label acknowledged as saved survives SIGKILL of the process.
func TestSavedLabelSurvivesSIGKILL(t *testing.T) {
	if testing.Short() {
		t.Skip("subprocess test")
	}
	db := newCampaignFile(t, 3)
	cmd := helperCmd(t, "save-and-wait", db, "ana")
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	line, err := bufio.NewReader(out).ReadString('\n')
	if err != nil || !strings.HasPrefix(line, "saved ") {
		cmd.Process.Kill()
		cmd.Wait()
		t.Fatalf("helper said %q, %v", line, err)
	}
	if err := cmd.Process.Signal(os.Kill); err != nil {
		t.Fatal(err)
	}
	cmd.Wait()
	id, err := strconv.ParseInt(strings.TrimSpace(strings.TrimPrefix(line, "saved ")), 10, 64)
	if err != nil {
		t.Fatal(err)
	}
	s, err := Open(context.Background(), db)
	if err != nil {
		t.Fatalf("reopen after SIGKILL: %v", err)
	}
	defer s.Close()
	p, err := s.Pass(context.Background(), id)
	if err != nil {
		t.Fatal(err)
	}
	if p.State != scan.PassSubmitted || p.Label.Class != "nc-pi0" || p.Label.Comment != "saved before the kill" {
		t.Errorf("after SIGKILL the pass reads %+v", p)
	}
}

// Two processes label different events of one campaign at once, 1,000
// actions each: nothing is lost and no busy error reaches them.
func TestTwoProcesses(t *testing.T) {
	if testing.Short() {
		t.Skip("subprocess test")
	}
	db := newCampaignFile(t, 500)
	cmds := []*exec.Cmd{helperCmd(t, "label-250", db, "ana"), helperCmd(t, "label-250", db, "ben")}
	outs := make([]strings.Builder, len(cmds))
	for i, c := range cmds {
		c.Stdout, c.Stderr = &outs[i], &outs[i]
		if err := c.Start(); err != nil {
			t.Fatal(err)
		}
	}
	for i, c := range cmds {
		if err := c.Wait(); err != nil || !strings.Contains(outs[i].String(), "done") {
			t.Errorf("process %d: %v\n%s", i, err, outs[i].String())
		}
	}
	s, err := Open(context.Background(), db)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	ps, err := s.Passes(context.Background(), 1)
	if err != nil {
		t.Fatal(err)
	}
	if len(ps) != 500 {
		t.Fatalf("%d passes, want 500", len(ps))
	}
	per := map[string]int{}
	for _, p := range ps {
		per[p.Scanner]++
		if p.State != scan.PassSubmitted || p.Revisions != 3 || p.Seconds != 1.5 || !strings.HasPrefix(p.Label.Comment, p.Scanner+" step 2") {
			t.Fatalf("pass lost work: %+v", p)
		}
	}
	if per["ana"] != 250 || per["ben"] != 250 {
		t.Errorf("passes per scanner = %v", per)
	}
}
