package serve

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"strings"
	"sync"
	"time"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"
	"github.com/charmbracelet/ssh"
	"github.com/charmbracelet/wish"
	"github.com/muesli/termenv"
	gossh "golang.org/x/crypto/ssh"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
)

// Session is what a Factory knows about one SSH session: who is connected
// and what their terminal is. Everything here comes from the client; none
// of it from the server's own environment.
type Session struct {
	ID      int64
	Scanner string
	Role    Role
	Term    string   // the pty's terminal type, e.g. "xterm-256color"
	Env     []string // the client's announced environment, TERM included
	Tier    render.Tier
	// Renderer is this session's lipgloss renderer, set to Tier's colour
	// profile: build every style of the session from it.
	Renderer      *lipgloss.Renderer
	Width, Height int
	Logger        *slog.Logger
}

// Getenv looks a variable up in the client's announced environment.
func (s Session) Getenv(key string) string { return lookupEnv(s.Env, key) }

// StopReason says why the server asks a model to save and quit.
type StopReason string

// Reasons for stopping a session.
const (
	StopDisconnect StopReason = "disconnected" // the client went away
	StopIdle       StopReason = "idle"         // no keystroke for Config.Idle
	StopShutdown   StopReason = "shutdown"     // the server is stopping
)

// App is what a Factory builds for a session.
type App struct {
	Model tea.Model
	// Stop returns the message that makes Model save its draft and resume
	// state and then quit. Required: the server sends it on disconnect,
	// idle timeout and shutdown.
	Stop func(StopReason) tea.Msg
	// Options are extra program options (the server sets input, output,
	// environment, alternate screen and signal handling itself).
	Options []tea.ProgramOption
}

// Factory builds the root model of a session. ctx ends when the model has
// quit, not when the connection drops: the model's last save, on the stop
// message, still needs it.
type Factory func(ctx context.Context, s Session) (App, error)

// programMiddleware runs one bubbletea program per session. It replaces
// wish's bubbletea middleware for two reasons: on disconnect that one quits
// the program at once, while we must let the model save first; and its
// renderer queries the client's background colour by reading the session
// input, which can swallow a scanner's first keystroke.
func (s *Server) programMiddleware() wish.Middleware {
	return func(next ssh.Handler) ssh.Handler {
		return func(sess ssh.Session) {
			s.runSession(sess)
			next(sess)
		}
	}
}

// runSession admits a session, builds its model and runs it to the end.
func (s *Server) runSession(sess ssh.Session) {
	ctx := sess.Context()
	sc := scannerOf(ctx)
	if sc.Name == "" { // cannot happen with public-key auth; refuse anyway
		fatal(sess, "not authenticated")
		return
	}
	l := newLiveSession(sc.Name, gossh.FingerprintSHA256(sc.Key))
	defer close(l.done)
	if why, ok := s.admit(l); !ok {
		s.log.Warn("session refused", "scanner", sc.Name, "reason", why)
		fatal(sess, why)
		return
	}
	defer s.release(l)
	log := s.log.With("session", l.id, "scanner", sc.Name)

	// Wait (bounded) for this scanner's dropped sessions to finish saving.
	for _, done := range s.stopping(sc.Name) {
		select {
		case <-done:
		case <-time.After(s.cfg.Grace):
		case <-ctx.Done():
			return
		}
	}

	if l.stopped.Load() { // the server began shutting down meanwhile
		fatal(sess, goodbye(StopShutdown, 0))
		return
	}
	info := s.describe(sess, l.id, sc, log)
	sctx, cancel := context.WithCancel(context.WithoutCancel(ctx))
	defer cancel()
	app, err := s.cfg.Factory(sctx, info)
	if err == nil && (app.Model == nil || app.Stop == nil) {
		err = errors.New("factory returned no model or no stop message")
	}
	if err != nil {
		log.Error("session setup failed", "err", err)
		fatal(sess, "cannot start the scanning station: "+scan.CleanText(err.Error()))
		return
	}
	reason, err := s.runProgram(sess, l, app, info, log)
	if err != nil && !errors.Is(err, tea.ErrProgramKilled) {
		log.Error("session program failed", "err", err)
	}
	if msg := goodbye(reason, s.cfg.Idle); msg != "" {
		_, _ = io.WriteString(sess, "\r\n"+msg+"\r\n")
	}
	_ = sess.Exit(0)
	if s.cfg.OnSessionEnd != nil {
		s.cfg.OnSessionEnd(SessionEnd{ID: l.id, Scanner: sc.Name, Reason: reason, Err: err})
	}
}

// describe gathers the client's terminal and identity.
func (s *Server) describe(sess ssh.Session, id int64, sc Scanner, log *slog.Logger) Session {
	pty, _, _ := sess.Pty()
	env := clientEnv(sess.Environ(), pty.Term)
	tier := s.cfg.DetectTier(func(k string) string { return lookupEnv(env, k) })
	r := lipgloss.NewRenderer(sess, termenv.WithEnvironment(environ(env)), termenv.WithColorCache(true))
	r.SetColorProfile(profileOf(tier))
	r.SetHasDarkBackground(true) // we do not query the client: see programMiddleware
	return Session{
		ID: id, Scanner: sc.Name, Role: sc.Role, Term: pty.Term, Env: env, Tier: tier, Renderer: r,
		Width: pty.Window.Width, Height: pty.Window.Height, Logger: log,
	}
}

// runProgram runs the model until it quits, and asks it to save and quit
// when the client goes away, goes idle or the server stops. It returns why
// it was stopped ("" if the model quit by itself).
func (s *Server) runProgram(sess ssh.Session, l *liveSession, app App, info Session, log *slog.Logger) (StopReason, error) {
	in := &watchedReader{r: sess, onEOF: func() { l.stop(StopDisconnect) }}
	opts := []tea.ProgramOption{
		tea.WithInput(in), tea.WithOutput(sess),
		tea.WithEnvironment(info.Env),
		tea.WithoutSignalHandler(), // signals are the server's, not a session's
		tea.WithAltScreen(),
	}
	p := tea.NewProgram(app.Model, append(opts, app.Options...)...)
	if s.cfg.Idle > 0 {
		idle := time.AfterFunc(s.cfg.Idle, func() { l.stop(StopIdle) })
		defer idle.Stop()
		in.onRead = func() { idle.Reset(s.cfg.Idle) }
	}
	quit := make(chan struct{})
	var reason StopReason
	var wg sync.WaitGroup
	wg.Add(2)
	go func() { defer wg.Done(); follow(sess, p, l, quit) }()
	go func() { defer wg.Done(); reason = s.stopWhenAsked(p, l, app, log, quit) }()
	_, err := p.Run()
	close(quit)
	wg.Wait()
	return reason, err
}

// stopWhenAsked waits for a stop request and sends the model its stop
// message; a model that has not quit after the grace time is killed (its
// drafts were saved as they changed).
func (s *Server) stopWhenAsked(p *tea.Program, l *liveSession, app App, log *slog.Logger, quit <-chan struct{}) StopReason {
	var why StopReason
	select {
	case <-quit:
		return ""
	case why = <-l.reason:
	}
	log.Info("session stopping", "reason", why)
	msg := app.Stop(why)
	select {
	case <-quit:
		return why
	default:
	}
	go p.Send(msg) // returns once the program has read it or ended
	t := time.NewTimer(s.cfg.Grace)
	defer t.Stop()
	select {
	case <-quit:
	case <-t.C:
		log.Warn("session did not quit in time; killed")
		p.Kill()
	}
	return why
}

// follow passes window changes to the program and stops the session when
// the connection drops.
func follow(sess ssh.Session, p *tea.Program, l *liveSession, quit <-chan struct{}) {
	_, winch, _ := sess.Pty()
	ctx := sess.Context()
	for {
		select {
		case <-quit:
			return
		case <-ctx.Done():
			l.stop(StopDisconnect)
			return
		case w, ok := <-winch:
			if !ok {
				winch = nil
				continue
			}
			p.Send(tea.WindowSizeMsg{Width: w.Width, Height: w.Height})
		}
	}
}

// watchedReader reports reads (keystrokes, for the idle timer) and the end
// of the client's input (a dropped connection or a closed channel).
type watchedReader struct {
	r      io.Reader
	onRead func()
	onEOF  func()
}

func (w *watchedReader) Read(b []byte) (int, error) {
	n, err := w.r.Read(b)
	if n > 0 && w.onRead != nil {
		w.onRead()
	}
	if err != nil && w.onEOF != nil {
		w.onEOF()
	}
	return n, err
}

// goodbye is the line a scanner sees after the station closes.
func goodbye(r StopReason, idle time.Duration) string {
	switch r {
	case StopIdle:
		return fmt.Sprintf("tpcscan: session closed after %s without a keystroke; your drafts are saved. Reconnect to carry on.", idle)
	case StopShutdown:
		return "tpcscan: the server is shutting down; your drafts are saved. Reconnect later to carry on."
	}
	return ""
}

// fatal tells the client why the session ends and closes it.
func fatal(sess ssh.Session, msg string) {
	_, _ = io.WriteString(sess, "tpcscan: "+msg+"\r\n")
	_ = sess.Exit(1)
}

// clientEnv is the client's announced environment with TERM set from the
// pty request, which is where ssh clients announce it.
func clientEnv(env []string, term string) []string {
	out := make([]string, 0, len(env)+1)
	for _, kv := range env {
		if !strings.HasPrefix(kv, "TERM=") {
			out = append(out, kv)
		}
	}
	return append(out, "TERM="+term)
}

func lookupEnv(env []string, key string) string {
	for i := len(env) - 1; i >= 0; i-- {
		if v, ok := strings.CutPrefix(env[i], key+"="); ok {
			return v
		}
	}
	return ""
}

// environ makes the client's environment a termenv.Environ.
type environ []string

func (e environ) Environ() []string        { return e }
func (e environ) Getenv(key string) string { return lookupEnv(e, key) }

// profileOf maps a colour tier to lipgloss's colour profile, so that the
// styles of the UI and the plane images agree.
func profileOf(t render.Tier) termenv.Profile {
	switch t {
	case render.TierTrueColor:
		return termenv.TrueColor
	case render.Tier256:
		return termenv.ANSI256
	case render.Tier16:
		return termenv.ANSI
	default:
		return termenv.Ascii
	}
}
