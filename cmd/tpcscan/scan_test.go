package main

import (
	"context"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store/backend"
)

// TestScanRefusals: clear messages before the station opens.
func TestScanRefusals(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	db := filepath.Join(dir, "s.db")
	env, _ := viewTestEnv(func(string) string { return "" })
	if err := run(ctx, env, []string{"scan", "--db", db, "--scanner", "ana"}); err == nil || !strings.Contains(err.Error(), "no campaign") {
		t.Errorf("empty database: %v", err)
	}
	st, err := backend.Open(ctx, db)
	if err != nil {
		t.Fatal(err)
	}
	evs := []scan.CampaignEvent{{EventID: "e1"}}
	for _, name := range []string{"one", "two"} {
		c := scan.Campaign{Name: name, Dataset: "../../testdata/datasets/valid", Mode: scan.ModeLabel, PerEvent: 1,
			Schema: scan.DefaultSchema(), Scanners: []string{"ana"}}
		if _, err := st.CreateCampaign(ctx, c, evs); err != nil {
			t.Fatal(err)
		}
	}
	st.Close()
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"scan", "--db", db, "--scanner", "ana"}, "--campaign"},
		{[]string{"scan", "--db", db, "--scanner", "ana", "--campaign", "three"}, `no campaign "three"`},
		{[]string{"scan", "--db", db, "--scanner", "bo", "--campaign", "one"}, "not on the roster"},
		{[]string{"scan", "--db", db, "--scanner", "ana", "--campaign", "one", "--dataset", filepath.Join(dir, "none")}, "give the folder with --dataset"},
		{[]string{"scan", "--db", db, "--scanner", "a\x1b[2Jb", "--campaign", "one"}, "control characters"},
		{[]string{"scan", "--db", db, "stray"}, "no arguments"},
	} {
		err := run(ctx, env, tc.args)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%q: error %v, want one containing %q", tc.args, err, tc.want)
		}
	}
}
