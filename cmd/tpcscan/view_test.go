package main

import (
	"bytes"
	"context"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/store/backend"
)

func viewTestEnv(getenv func(string) string) (*environ, *bytes.Buffer) {
	var errb bytes.Buffer
	return &environ{stdin: strings.NewReader(""), stdout: &bytes.Buffer{}, stderr: &errb, getenv: getenv}, &errb
}

// TestViewPNG writes a snapshot of a dataset's event without a terminal.
func TestViewPNG(t *testing.T) {
	out := filepath.Join(t.TempDir(), "ev.png")
	env, _ := viewTestEnv(func(string) string { return "" })
	err := run(context.Background(), env, []string{"view", "--png", out, "--size", "100x30", "--color", "256", "--event", "e2", "../../testdata/datasets/valid"})
	if err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("snapshot is not a PNG: %v", err)
	}
	if b := img.Bounds(); b.Dx() < 100 || b.Dy() < 30 {
		t.Errorf("snapshot is %v, smaller than 100×30 cells", b)
	}
}

func TestViewErrors(t *testing.T) {
	env, _ := viewTestEnv(func(string) string { return "" })
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"view"}, "one DATASET"},
		{[]string{"view", "--color", "sepia", "../../testdata/datasets/valid"}, "colour tier"},
		{[]string{"view", "--png", "x.png", "--size", "10", "../../testdata/datasets/valid"}, "WIDTHxHEIGHT"},
		{[]string{"view", "--png", "x.png", "--size", "40x10", "../../testdata/datasets/valid"}, "at least"},
		{[]string{"view", "--png", "x.png", "--event", "nope", "../../testdata/datasets/valid"}, `no event "nope"`},
		{[]string{"view", "--keys", "/no/such/keys.toml", "../../testdata/datasets/valid"}, "key map"},
	} {
		err := run(context.Background(), env, tc.args)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%v: error %v, want one containing %q", tc.args, err, tc.want)
		}
	}
}

// TestDemoPreparedOnce: the first run generates the demo dataset and
// campaign in the user's folders; a second run reuses both.
func TestDemoPreparedOnce(t *testing.T) {
	tmp := t.TempDir()
	t.Setenv("XDG_CACHE_HOME", filepath.Join(tmp, "cache"))
	t.Setenv("HOME", tmp)
	data := filepath.Join(tmp, "data")
	env, errb := viewTestEnv(func(k string) string {
		if k == "XDG_DATA_HOME" {
			return data
		}
		return ""
	})
	sc := scanConfig{scanner: "newcomer"}
	if err := prepareDemo(context.Background(), env, &sc); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(errb.String(), "generating") {
		t.Errorf("first run said %q, want a word about generating", errb.String())
	}
	if want := filepath.Join(data, "tpcscan", "demo.db"); sc.db != want {
		t.Errorf("demo database %s, want %s", sc.db, want)
	}
	manifest := filepath.Join(sc.dataset, "tpcscan.toml")
	st1, err := os.Stat(manifest)
	if err != nil {
		t.Fatalf("no demo manifest: %v", err)
	}
	errb.Reset()
	var again scanConfig
	if err := prepareDemo(context.Background(), env, &again); err != nil {
		t.Fatal(err)
	}
	if errb.Len() != 0 {
		t.Errorf("second run printed %q", errb.String())
	}
	if st2, _ := os.Stat(manifest); !st2.ModTime().Equal(st1.ModTime()) {
		t.Error("the second run wrote the demo dataset again")
	}
	st, err := backend.Open(context.Background(), sc.db)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	cs, err := st.Campaigns(context.Background())
	if err != nil || len(cs) != 1 || cs[0].Name != "demo" {
		t.Fatalf("campaigns %v (err %v), want one named demo", cs, err)
	}
	evs, err := st.Events(context.Background(), cs[0].ID)
	if err != nil || len(evs) != demoEvents {
		t.Errorf("demo campaign has %d events (err %v), want %d", len(evs), err, demoEvents)
	}
	// The newcomer's first event is a clear νμ CC interaction.
	p, err := st.NextPass(context.Background(), cs[0].ID, "newcomer")
	if err != nil {
		t.Fatal(err)
	}
	ds, err := dataset.Open(sc.dataset)
	if err != nil {
		t.Fatal(err)
	}
	if !showcase(ds, p.EventID) {
		t.Errorf("first demo event %s is not a showcase νμ CC event", p.EventID)
	}
}
