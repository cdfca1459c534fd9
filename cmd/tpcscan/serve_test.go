package main

import (
	"bytes"
	"context"
	"crypto/ed25519"
	"crypto/rand"
	"fmt"
	"io"
	"log/slog"
	"net"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	gossh "golang.org/x/crypto/ssh"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/scan/sim"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/backend"
	"github.com/tpcscan/tpcscan/ui/serve"
	"github.com/tpcscan/tpcscan/ui/serve/servetest"
)

const serveWait = 30 * time.Second // a deadline for failures, never a pause

// station is the real scanning station served on 127.0.0.1:0 over a
// generated demo dataset and a fresh SQLite campaign.
type station struct {
	addr     string
	hostKey  gossh.PublicKey
	st       store.Store
	campaign int64
	keys     map[string]gossh.Signer
	ends     chan serve.SessionEnd
}

// startStation serves the station to names, each "name" (a scanner) or
// "name:role".
func startStation(t *testing.T, names ...string) *station {
	t.Helper()
	ctx := context.Background()
	dir := filepath.Join(t.TempDir(), "tarn")
	if err := sim.WriteDataset(ctx, dir, sim.Options{Events: 4, Seed: 11, Size: "demo"}, nil); err != nil {
		t.Fatal(err)
	}
	ds, err := dataset.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	st, err := backend.Open(ctx, filepath.Join(t.TempDir(), "scan.db"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	var events []scan.CampaignEvent
	for _, e := range ds.Events() {
		events = append(events, scan.CampaignEvent{EventID: e.ID})
	}
	s := &station{st: st, keys: map[string]gossh.Signer{}, ends: make(chan serve.SessionEnd, 64)}
	s.campaign, err = st.CreateCampaign(ctx, scan.Campaign{Name: "shift", Dataset: dir, Mode: scan.ModeLabel,
		PerEvent: 2, Blind: true, Seed: 3, Schema: scan.DefaultSchema()}, events)
	if err != nil {
		t.Fatal(err)
	}
	var roster strings.Builder
	for _, n := range names {
		n, role, ok := strings.Cut(n, ":") // "name:coordinator"; a scanner by default
		if !ok {
			role = string(serve.RoleScanner)
		}
		signer, text := testKey(t)
		s.keys[n] = signer
		fmt.Fprintf(&roster, "%s %s %s\n", n, role, text)
	}
	ro, err := serve.ParseRoster(strings.NewReader(roster.String()), "crew")
	if err != nil {
		t.Fatal(err)
	}
	host, _ := testKey(t)
	s.hostKey = host.PublicKey()
	srv, err := serve.New(serve.Config{
		Roster: ro, HostKey: host, DetectTier: render.DetectTier,
		Factory: stationFactory(st, ds, s.campaign), Logger: slog.New(slog.DiscardHandler),
		OnSessionEnd: func(e serve.SessionEnd) { s.ends <- e },
	})
	if err != nil {
		t.Fatal(err)
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	s.addr = ln.Addr().String()
	sctx, cancel := context.WithCancel(ctx)
	served := make(chan error, 1)
	go func() { served <- srv.Serve(sctx, ln) }()
	t.Cleanup(func() {
		cancel()
		if err := <-served; err != nil {
			t.Errorf("serve: %v", err)
		}
	})
	return s
}

func testKey(t testing.TB) (gossh.Signer, string) {
	t.Helper()
	_, priv, err := ed25519.GenerateKey(rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	s, err := gossh.NewSignerFromKey(priv)
	if err != nil {
		t.Fatal(err)
	}
	return s, strings.TrimSpace(string(gossh.MarshalAuthorizedKey(s.PublicKey())))
}

// scannerTerm is one scanner's ssh -t session on the station.
type scannerTerm struct {
	t    *testing.T
	conn net.Conn
	tm   *servetest.Terminal
}

func (s *station) connect(t *testing.T, name string) *scannerTerm {
	t.Helper()
	c, conn, err := servetest.Dial(s.addr, s.hostKey, name, serveWait, gossh.PublicKeys(s.keys[name]))
	if err != nil {
		t.Fatalf("dial as %s: %v", name, err)
	}
	t.Cleanup(func() { c.Close() })
	tm, err := servetest.Open(c, "xterm-256color", nil, 160, 45)
	if err != nil {
		t.Fatal(err)
	}
	return &scannerTerm{t: t, conn: conn, tm: tm}
}

func (st *scannerTerm) send(keys string) {
	st.t.Helper()
	if _, err := io.WriteString(st.tm.In, keys); err != nil {
		st.t.Fatalf("send %q: %v", keys, err)
	}
}

func (st *scannerTerm) expect(text string) {
	st.t.Helper()
	if err := st.tm.Out.WaitForText(text, serveWait); err != nil {
		st.t.Fatal(err)
	}
}

// wiresRe finds a plane's wire range in the header, e.g. "wires 250–650".
var wiresRe = regexp.MustCompile(`wires \d+–\d+`)

// TestServeStation drives the real station through the SSH server: two
// scanners label at once, one drops mid-event and resumes where it was.
func TestServeStation(t *testing.T) {
	s := startStation(t, "ana", "ben")
	ana, ben := s.connect(t, "ana"), s.connect(t, "ben")
	for _, sc := range []*scannerTerm{ana, ben} {
		sc.expect("ind1 wire ") // the cursor line: the event is on screen
		sc.send("1")
		sc.expect("νμ CC ✓") // the class panel marks the choice
		sc.send("C")
		sc.expect("3 certain ✓")
		sc.send("\x13") // ctrl+s: submit, and the next event comes
		sc.expect("· assigned")
	}
	ctx := context.Background()
	for _, who := range []string{"ana", "ben"} {
		ps, err := s.st.ScannerPasses(ctx, s.campaign, who)
		if err != nil {
			t.Fatal(err)
		}
		if len(ps) < 1 || ps[0].State != scan.PassSubmitted || ps[0].Label.Class != "numu-cc" || ps[0].Label.Confidence == "" {
			t.Errorf("%s's first pass: %+v", who, ps)
		}
	}

	// ben drafts a class and loses the link.
	ben.send("2")
	ben.expect("νe CC ✓") // "saved ✓" may already be on screen and not redrawn
	ben.conn.Close()
	select {
	case e := <-s.ends:
		if e.Scanner != "ben" || e.Reason != serve.StopDisconnect {
			t.Fatalf("session end %+v", e)
		}
	case <-time.After(serveWait):
		t.Fatal("ben's session did not end")
	}
	ps, err := s.st.ScannerPasses(ctx, s.campaign, "ben")
	if err != nil {
		t.Fatal(err)
	}
	last := ps[len(ps)-1]
	if last.State != scan.PassDraft || last.Label.Class != "nue-cc" {
		t.Errorf("after the drop ben's pass is %s with %+v", last.State, last.Label)
	}
	// Back at the same event with the draft on screen. (That the view is
	// restored too is the station's own resume logic; the server's part,
	// the stop message and waiting for its save, is tested in ui/serve.)
	again := s.connect(t, "ben")
	again.expect(last.EventID)
	again.expect("νe CC ✓")
}

func TestPlanesOnlyDropsPixelTruth(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "tarn")
	if err := sim.WriteDataset(context.Background(), dir, sim.Options{Events: 1, Seed: 2, Size: "demo"}, nil); err != nil {
		t.Fatal(err)
	}
	ds, err := dataset.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	src := newPlanesOnly(ds, 1)
	ids := src.EventIDs()
	if len(ids) != 1 {
		t.Fatalf("ids %v", ids)
	}
	full, err := ds.Load(ids[0])
	if err != nil || len(full.Truth) == 0 {
		t.Fatalf("the demo event should carry pixel truth (err %v)", err)
	}
	ev, err := src.Load(ids[0])
	if err != nil {
		t.Fatal(err)
	}
	if ev.Truth != nil || len(ev.Planes) != len(full.Planes) {
		t.Errorf("served event: %d truth planes, %d planes (want 0 and %d)", len(ev.Truth), len(ev.Planes), len(full.Planes))
	}
}

// TestServeStationColours checks the real station's output for the colour
// tier each client announces, whatever the server's own environment says.
// Source: ECMA-48 / ITU-T T.416 SGR 38;5;n / 48;5;n select from the 256-colour
// palette, 38;2;r;g;b / 48;2;r;g;b direct colour; 30–37, 40–47, 90–97 and
// 100–107 are the 16 colours.
func TestServeStationColours(t *testing.T) {
	t.Setenv("COLORTERM", "truecolor") // the server's, not the clients'
	s := startStation(t, "ana", "ben", "cy")
	tests := []struct {
		who, term string
		env       map[string]string
		want      []string
		refuse    []string
	}{
		{"ana", "xterm-256color", nil, []string{"8;5;"}, []string{"38;2;", "48;2;"}},
		{"ben", "xterm", nil, []string{"\x1b["}, []string{"38;5;", "48;5;", "38;2;", "48;2;"}},
		{"cy", "xterm", map[string]string{"COLORTERM": "truecolor"}, []string{"8;2;"}, nil},
	}
	for _, tc := range tests {
		t.Run(tc.who+" "+tc.term, func(t *testing.T) {
			c, _, err := servetest.Dial(s.addr, s.hostKey, tc.who, serveWait, gossh.PublicKeys(s.keys[tc.who]))
			if err != nil {
				t.Fatal(err)
			}
			defer c.Close()
			tm, err := servetest.Open(c, tc.term, tc.env, 120, 40)
			if err != nil {
				t.Fatal(err)
			}
			if err := tm.Out.WaitForText("ind1 wire ", serveWait); err != nil {
				t.Fatal(err)
			}
			out := tm.Out.String()
			for _, w := range tc.want {
				if !strings.Contains(out, w) {
					t.Errorf("no %q in the output", w)
				}
			}
			for _, r := range tc.refuse {
				if strings.Contains(out, r) {
					t.Errorf("%q in the output", r)
				}
			}
		})
	}
}

func TestServeCommandRefusesBadSetups(t *testing.T) {
	dir := t.TempDir()
	_, text := testKey(t)
	crew := filepath.Join(dir, "crew.txt")
	if err := os.WriteFile(crew, []byte("ana scanner "+text+"\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	badCrew := filepath.Join(dir, "bad.txt")
	if err := os.WriteFile(badCrew, []byte("# crew\nana admin "+text+"\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	empty := filepath.Join(dir, "empty.db")
	st, err := backend.Open(context.Background(), empty)
	if err != nil {
		t.Fatal(err)
	}
	st.Close()
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"no db", []string{"--scanners", crew}, "serve needs --db"},
		{"no scanners", []string{"--db", empty}, "serve needs --scanners"},
		{"bad limit", []string{"--db", empty, "--scanners", crew, "--max-sessions", "0"}, "at least 1"},
		{"stray argument", []string{"--db", empty, "--scanners", crew, "extra"}, "flags only"},
		{"no campaign", []string{"--db", empty, "--scanners", crew}, "no campaign"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var out bytes.Buffer
			env := &environ{stdout: &out, stderr: &out, getenv: func(string) string { return "" }}
			err := run(context.Background(), env, append([]string{"serve"}, tc.args...))
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("err = %v, want %q", err, tc.want)
			}
		})
	}
	// The scanners file is read before anything listens; its errors name
	// the line. (A campaign is needed to get that far.)
	var out bytes.Buffer
	env := &environ{stdout: &out, stderr: &out, getenv: func(string) string { return "" }}
	db := filepath.Join(dir, "one.db")
	st2, err := backend.Open(context.Background(), db)
	if err != nil {
		t.Fatal(err)
	}
	data := filepath.Join(dir, "tarn")
	if err := sim.WriteDataset(context.Background(), data, sim.Options{Events: 1, Seed: 1, Size: "demo"}, nil); err != nil {
		t.Fatal(err)
	}
	ds, err := dataset.Open(data)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := st2.CreateCampaign(context.Background(), scan.Campaign{Name: "one", Dataset: data, Mode: scan.ModeLabel,
		PerEvent: 1, Seed: 1, Schema: scan.DefaultSchema()}, []scan.CampaignEvent{{EventID: ds.Events()[0].ID}}); err != nil {
		t.Fatal(err)
	}
	st2.Close()
	err = run(context.Background(), env, []string{"serve", "--db", db, "--scanners", badCrew})
	if err == nil || !strings.Contains(err.Error(), "bad.txt:2: role \"admin\"") {
		t.Errorf("bad scanners file: err = %v", err)
	}
}
