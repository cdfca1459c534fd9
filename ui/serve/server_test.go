package serve

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"log/slog"
	"net"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	gossh "golang.org/x/crypto/ssh"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/backend"
	"github.com/tpcscan/tpcscan/ui/serve/servetest"
)

// wait bounds every wait for output; it is a deadline for failures, never
// a pause: tests go on as soon as the expected text arrives.
const wait = 20 * time.Second

// fixture is a server on 127.0.0.1:0 with a fresh SQLite store, a campaign
// of six events and four people: ada (coordinator), bo, cy and mallory.
type fixture struct {
	t        *testing.T
	addr     string
	hostKey  gossh.PublicKey
	st       store.Store
	campaign int64
	keys     map[string]gossh.Signer
	ends     chan SessionEnd
	logs     *syncBuffer
	stop     context.CancelFunc
	served   chan error
	srv      *Server
}

func newFixture(t *testing.T, tweak func(*Config)) *fixture {
	t.Helper()
	ctx := context.Background()
	f := &fixture{t: t, keys: map[string]gossh.Signer{}, ends: make(chan SessionEnd, 64), logs: &syncBuffer{}}
	var roster strings.Builder
	for _, p := range []struct{ name, role string }{{"ada", "coordinator"}, {"bo", "scanner"}, {"cy", "scanner"}, {"mallory", "scanner"}} {
		s, text := newKey(t)
		f.keys[p.name] = s
		fmt.Fprintf(&roster, "%s %s %s\n", p.name, p.role, text)
	}
	ro, err := ParseRoster(strings.NewReader(roster.String()), "crew")
	if err != nil {
		t.Fatal(err)
	}
	st, err := backend.Open(ctx, filepath.Join(t.TempDir(), "scan.db"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	f.st = st
	var events []scan.CampaignEvent
	for i := 1; i <= 6; i++ {
		events = append(events, scan.CampaignEvent{EventID: fmt.Sprintf("ev%03d", i)})
	}
	f.campaign, err = st.CreateCampaign(ctx, scan.Campaign{Name: "shift", Dataset: "demo", Mode: scan.ModeLabel,
		PerEvent: 2, Blind: true, Seed: 7, Schema: scan.DefaultSchema()}, events)
	if err != nil {
		t.Fatal(err)
	}
	host, _ := newKey(t)
	f.hostKey = host.PublicKey()
	cfg := Config{
		Roster: ro, HostKey: host, Factory: standinFactory(st, f.campaign), DetectTier: render.DetectTier,
		Logger:       slog.New(slog.NewTextHandler(f.logs, nil)),
		OnSessionEnd: func(e SessionEnd) { f.ends <- e },
	}
	if tweak != nil {
		tweak(&cfg)
	}
	srv, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	f.srv = srv
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	f.addr = ln.Addr().String()
	sctx, cancel := context.WithCancel(ctx)
	f.stop, f.served = cancel, make(chan error, 1)
	go func() { f.served <- srv.Serve(sctx, ln) }()
	t.Cleanup(func() {
		cancel()
		select {
		case <-f.served:
		case <-time.After(wait):
			t.Error("server did not shut down")
		}
	})
	return f
}

// dial connects as one of the fixture's people, or with any signer.
func (f *fixture) dial(name string) (*gossh.Client, net.Conn) {
	f.t.Helper()
	c, conn, err := f.tryDial(name, gossh.PublicKeys(f.keys[name]))
	if err != nil {
		f.t.Fatalf("dial as %s: %v", name, err)
	}
	return c, conn
}

func (f *fixture) tryDial(user string, auth ...gossh.AuthMethod) (*gossh.Client, net.Conn, error) {
	c, conn, err := servetest.Dial(f.addr, f.hostKey, user, wait, auth...)
	if err == nil {
		f.t.Cleanup(func() { c.Close() })
	}
	return c, conn, err
}

// end waits for the next session end.
func (f *fixture) end() SessionEnd {
	f.t.Helper()
	select {
	case e := <-f.ends:
		return e
	case <-time.After(wait):
		f.t.Fatal("no session ended")
		return SessionEnd{}
	}
}

// terminal is a client session with a pty, as `ssh -t` opens.
type terminal struct {
	t    *testing.T
	sess *gossh.Session
	in   io.WriteCloser
	out  *servetest.Stream
}

func openTerminal(t *testing.T, c *gossh.Client, term string, env map[string]string, w, h int) *terminal {
	t.Helper()
	tm, err := servetest.Open(c, term, env, w, h)
	if err != nil {
		t.Fatal(err)
	}
	return &terminal{t: t, sess: tm.Session, in: tm.In, out: tm.Out}
}

// press sends one key and waits for the text that shows it was handled.
func (tm *terminal) press(key, want string) {
	tm.t.Helper()
	if _, err := io.WriteString(tm.in, key); err != nil {
		tm.t.Fatalf("send %q: %v", key, err)
	}
	tm.expect(want)
}

func (tm *terminal) expect(want string) {
	tm.t.Helper()
	if err := tm.out.WaitFor(want, wait); err != nil {
		tm.t.Fatal(err)
	}
}

type syncBuffer struct {
	mu  sync.Mutex
	buf bytes.Buffer
}

func (b *syncBuffer) Write(p []byte) (int, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.Write(p)
}

func (b *syncBuffer) String() string {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.String()
}

func TestRefusals(t *testing.T) {
	f := newFixture(t, nil)
	stranger, _ := newKey(t)

	t.Run("unknown key", func(t *testing.T) {
		_, _, err := f.tryDial("bo", gossh.PublicKeys(stranger))
		if err == nil || !strings.Contains(err.Error(), "unable to authenticate") {
			t.Errorf("err = %v", err)
		}
		if !strings.Contains(f.logs.String(), gossh.FingerprintSHA256(stranger.PublicKey())) {
			t.Error("refused key not logged with its fingerprint")
		}
	})
	t.Run("password", func(t *testing.T) {
		// The server offers only "publickey", so a client cannot even try
		// a password (RFC 4252 section 5.1: the methods that can continue).
		_, _, err := f.tryDial("bo", gossh.Password("hunter2"))
		if err == nil || !strings.Contains(err.Error(), "no supported methods remain") {
			t.Fatalf("password login: err = %v", err)
		}
	})
	t.Run("keyboard-interactive", func(t *testing.T) {
		answer := func(string, string, []string, []bool) ([]string, error) { return nil, nil }
		if _, _, err := f.tryDial("bo", gossh.KeyboardInteractive(answer)); err == nil {
			t.Fatal("keyboard-interactive login accepted")
		}
	})

	c, _ := f.dial("bo")
	t.Run("exec", func(t *testing.T) {
		s, err := c.NewSession()
		if err != nil {
			t.Fatal(err)
		}
		defer s.Close()
		out, err := s.CombinedOutput("cat /etc/passwd")
		if err == nil || len(out) > 0 {
			t.Errorf("exec: err = %v, output %q", err, out)
		}
	})
	t.Run("subsystem sftp", func(t *testing.T) {
		s, err := c.NewSession()
		if err != nil {
			t.Fatal(err)
		}
		defer s.Close()
		if err := s.RequestSubsystem("sftp"); err == nil {
			t.Error("sftp subsystem accepted")
		}
	})
	t.Run("tcpip-forward", func(t *testing.T) {
		ln, err := c.Listen("tcp", "127.0.0.1:0")
		if err == nil {
			ln.Close()
			t.Error("remote port forwarding accepted")
		}
		if !strings.Contains(f.logs.String(), "kind=tcpip-forward") {
			t.Error("refused forwarding not logged")
		}
	})
	t.Run("direct-tcpip", func(t *testing.T) {
		conn, err := c.Dial("tcp", f.addr)
		if err == nil {
			conn.Close()
			t.Fatal("local port forwarding accepted")
		}
		if !strings.Contains(err.Error(), "administratively prohibited") {
			t.Errorf("err = %v", err)
		}
		if !strings.Contains(f.logs.String(), "kind=direct-tcpip") {
			t.Error("refused channel not logged")
		}
	})
	for _, kind := range []string{"auth-agent-req@openssh.com", "x11-req"} {
		t.Run(kind, func(t *testing.T) {
			s, err := c.NewSession()
			if err != nil {
				t.Fatal(err)
			}
			defer s.Close()
			// RFC 4254 section 6.3.1: x11-req carries single-connection, protocol, cookie, screen.
			payload := gossh.Marshal(struct {
				Single        bool
				Proto, Cookie string
				Screen        uint32
			}{false, "MIT-MAGIC-COOKIE-1", "00", 0})
			if kind != "x11-req" {
				payload = nil
			}
			ok, err := s.SendRequest(kind, true, payload)
			if err != nil || ok {
				t.Errorf("%s: ok=%v err=%v, want a refusal", kind, ok, err)
			}
		})
	}
	t.Run("shell without pty", func(t *testing.T) {
		s, err := c.NewSession()
		if err != nil {
			t.Fatal(err)
		}
		defer s.Close()
		var out bytes.Buffer
		s.Stdout = &out
		if err := s.Shell(); err != nil {
			t.Fatal(err)
		}
		if err := s.Wait(); err == nil || !strings.Contains(out.String(), "PTY") {
			t.Errorf("exit %v, output %q: want the pty refusal", err, out.String())
		}
	})
}

func TestTwoScannersLabelAtOnce(t *testing.T) {
	f := newFixture(t, nil)
	var wg sync.WaitGroup
	for _, name := range []string{"bo", "cy"} {
		c, _ := f.dial(name)
		tm := openTerminal(t, c, "xterm-256color", nil, 100, 30)
		wg.Add(1)
		go func() {
			defer wg.Done()
			tm.expect("| ready |")
			for range 3 {
				tm.press("1", "| saved draft |")
				tm.press("s", "| ready |")
			}
			tm.press("q", "")
		}()
	}
	wg.Wait()
	for range 2 {
		if e := f.end(); e.Err != nil || e.Reason != "" {
			t.Errorf("session end %+v", e)
		}
	}
	passes, err := f.st.Passes(context.Background(), f.campaign)
	if err != nil {
		t.Fatal(err)
	}
	submitted := map[string]int{}
	for _, p := range passes {
		if p.State == scan.PassSubmitted {
			submitted[p.Scanner]++
			if want := "submitted by " + p.Scanner; p.Label.Comment != want || p.Label.Class != "numu-cc" {
				t.Errorf("pass %d of %s: label %+v", p.ID, p.Scanner, p.Label)
			}
		}
	}
	if submitted["bo"] != 3 || submitted["cy"] != 3 {
		t.Errorf("submitted per scanner %v, want 3 each", submitted)
	}
}

func TestDroppedConnectionKeepsDraftAndResumes(t *testing.T) {
	f := newFixture(t, nil)
	c, conn := f.dial("bo")
	tm := openTerminal(t, c, "xterm", nil, 90, 24)
	tm.expect("| ready |")
	tm.press("2", "| saved draft |")
	tm.press("+", "zoom 1 ")
	tm.press("+", "zoom 2 ")
	conn.Close() // the TCP connection drops mid-event

	e := f.end()
	if e.Scanner != "bo" || e.Reason != StopDisconnect {
		t.Fatalf("session end %+v, want bo disconnected", e)
	}
	passes, err := f.st.ScannerPasses(context.Background(), f.campaign, "bo")
	if err != nil || len(passes) != 1 {
		t.Fatalf("passes %v, err %v", passes, err)
	}
	p := passes[0]
	if p.State != scan.PassDraft || p.Label.Class != "nue-cc" || p.Label.Comment != "saved on disconnected" {
		t.Errorf("after the drop the pass is %s with %+v", p.State, p.Label)
	}

	c2, _ := f.dial("bo")
	tm2 := openTerminal(t, c2, "xterm", nil, 90, 24)
	tm2.expect(fmt.Sprintf("event %s zoom 2 class nue-cc", p.EventID))
}

func TestColourTierFollowsClient(t *testing.T) {
	// The server's own environment asks for 24-bit colour; no client below
	// may get it unless it says so itself.
	t.Setenv("COLORTERM", "truecolor")
	t.Setenv("TERM", "xterm-256color")
	f := newFixture(t, nil)
	tests := []struct {
		name, term string
		env        map[string]string
		want       string
		refuse     []string
	}{
		// Source: ECMA-48 / ITU T.416 SGR 38;5;n selects a 256-palette colour, 38;2;r;g;b a direct colour.
		{"256", "xterm-256color", nil, "38;5;", []string{"38;2;"}},
		{"16", "xterm", nil, "\x1b[", []string{"38;5;", "38;2;", "48;5;", "48;2;"}},
		{"truecolor", "xterm-256color", map[string]string{"COLORTERM": "truecolor"}, "38;2;", nil},
		{"no colour", "xterm-256color", map[string]string{"NO_COLOR": "1"}, "stand-in", []string{"38;5;", "38;2;", "48;5;", "[4"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			c, _ := f.dial("ada")
			tm := openTerminal(t, c, tc.term, tc.env, 80, 12)
			tm.expect("| ready |")
			tm.press("x", "keys 1 ")
			out := tm.out.String()
			if !strings.Contains(out, tc.want) {
				t.Errorf("no %q in the %s output", tc.want, tc.name)
			}
			for _, r := range tc.refuse {
				if strings.Contains(out, r) {
					t.Errorf("%q in the %s output", r, tc.name)
				}
			}
			tm.press("q", "")
			f.end()
		})
	}
}

func TestResizeFollows(t *testing.T) {
	f := newFixture(t, nil)
	c, _ := f.dial("cy")
	tm := openTerminal(t, c, "xterm", nil, 80, 24)
	tm.expect("size 80x24")
	if err := tm.sess.WindowChange(40, 132); err != nil {
		t.Fatal(err)
	}
	tm.expect("size 132x40")
}

func TestControlCharactersNeverReachOtherScreens(t *testing.T) {
	f := newFixture(t, nil)
	ctx := context.Background()
	// mallory's comment carries an OSC 52 clipboard write, a window title
	// and an 8-bit CSI (ECMA-48 control functions).
	p, err := f.st.NextPass(ctx, f.campaign, "mallory")
	if err != nil {
		t.Fatal(err)
	}
	evil := "fine\x1b]52;c;cm0gLXJmIH4=\x07\x1b]0;owned\x07\u009b31mred"
	if _, err := f.st.SaveRevision(ctx, p.ID, "mallory", scan.Revision{State: scan.PassDraft,
		Label: scan.Label{Class: "nc-other", Comment: evil}}); err != nil {
		t.Fatal(err)
	}
	c, _ := f.dial("ada")
	tm := openTerminal(t, c, "xterm-256color", nil, 100, 20)
	tm.expect("note mallory: fine")
	out := tm.out.String()
	for _, bad := range []string{"\x1b]52", "\x1b]0;owned", "\u009b"} {
		if strings.Contains(out, bad) {
			t.Errorf("%q reached the coordinator's screen", bad)
		}
	}
}

func TestSetRosterTakesEffectForNewLogins(t *testing.T) {
	f := newFixture(t, nil)
	newcomer, text := newKey(t)
	if _, _, err := f.tryDial("dee", gossh.PublicKeys(newcomer)); err == nil {
		t.Fatal("a key not yet in the scanners file got in")
	}
	ro, err := ParseRoster(strings.NewReader("dee scanner "+text+"\n"), "crew")
	if err != nil {
		t.Fatal(err)
	}
	f.srv.SetRoster(ro)
	if _, _, err := f.tryDial("dee", gossh.PublicKeys(newcomer)); err != nil {
		t.Fatalf("after the reload: %v", err)
	}
	if _, _, err := f.tryDial("bo", gossh.PublicKeys(f.keys["bo"])); err == nil {
		t.Error("a key removed from the scanners file still gets in")
	}
}

func TestLimits(t *testing.T) {
	f := newFixture(t, func(c *Config) { c.MaxSessions, c.MaxPerKey = 2, 1 })
	c1, _ := f.dial("bo")
	openTerminal(t, c1, "xterm", nil, 80, 24).expect("| ready |")
	c2, _ := f.dial("bo")
	openTerminal(t, c2, "xterm", nil, 80, 24).expect("already has 1 open sessions")
	c3, _ := f.dial("cy")
	openTerminal(t, c3, "xterm", nil, 80, 24).expect("| ready |")
	c4, _ := f.dial("ada")
	openTerminal(t, c4, "xterm", nil, 80, 24).expect("server is full (2 sessions)")
}

func TestIdleSessionEndsWithDraftSaved(t *testing.T) {
	f := newFixture(t, func(c *Config) { c.Idle = 300 * time.Millisecond })
	c, _ := f.dial("bo")
	tm := openTerminal(t, c, "xterm", nil, 80, 24)
	tm.expect("| ready |")
	tm.press("2", "| saved draft |")
	tm.expect("without a keystroke; your drafts are saved")
	if e := f.end(); e.Reason != StopIdle {
		t.Errorf("end %+v, want idle", e)
	}
	passes, err := f.st.ScannerPasses(context.Background(), f.campaign, "bo")
	if err != nil || len(passes) != 1 || passes[0].Label.Comment != "saved on idle" {
		t.Errorf("passes %+v, err %v", passes, err)
	}
}

func TestShutdownTellsScannersAndSaves(t *testing.T) {
	f := newFixture(t, nil)
	var terms []*terminal
	for _, name := range []string{"bo", "cy"} {
		c, _ := f.dial(name)
		tm := openTerminal(t, c, "xterm", nil, 80, 24)
		tm.expect("| ready |")
		tm.press("4", "| saved draft |")
		terms = append(terms, tm)
	}
	f.stop() // as SIGTERM does in the command
	for _, tm := range terms {
		tm.expect("the server is shutting down; your drafts are saved")
	}
	select {
	case err := <-f.served:
		if err != nil {
			t.Errorf("Serve: %v", err)
		}
		f.served <- nil // for the cleanup
	case <-time.After(wait):
		t.Fatal("server did not stop")
	}
	passes, err := f.st.Passes(context.Background(), f.campaign)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range passes {
		if p.Label.Comment != "saved on shutdown" {
			t.Errorf("pass of %s: %+v", p.Scanner, p.Label)
		}
	}
	if len(passes) != 2 {
		t.Errorf("%d passes, want 2", len(passes))
	}
}

func TestFactoryErrorShownClean(t *testing.T) {
	f := newFixture(t, func(c *Config) {
		c.Factory = func(context.Context, Session) (App, error) {
			return App{}, fmt.Errorf("open dataset \x1b]0;pwned\x07/data: no such file")
		}
	})
	c, _ := f.dial("bo")
	tm := openTerminal(t, c, "xterm", nil, 80, 24)
	tm.expect("cannot start the scanning station: open dataset")
	tm.expect("/data: no such file")
	if out := tm.out.String(); strings.Contains(out, "\x1b]0;") {
		t.Errorf("escape sequence reached the client: %q", out)
	}
}
