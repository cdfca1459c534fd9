// Package serve runs the scanning station as an SSH server for a shift
// crew: public-key authentication against a scanners file, one TUI per
// session sized and coloured for the client's terminal, one shared store,
// drafts saved on disconnect, idle timeout and SIGTERM, and nothing else:
// no shell, no commands, no forwarding, no subsystems.
package serve

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/charmbracelet/ssh"
	"github.com/charmbracelet/wish"
	"github.com/charmbracelet/wish/activeterm"
	wishrecover "github.com/charmbracelet/wish/recover"
	gossh "golang.org/x/crypto/ssh"

	"github.com/tpcscan/tpcscan/render"
)

// DefaultAddr listens on loopback only: reaching the server from elsewhere
// goes through an SSH bastion or a deliberate, site-approved change.
const DefaultAddr = "127.0.0.1:2230"

// Defaults for the limits of Config.
const (
	DefaultMaxSessions = 64
	DefaultMaxPerKey   = 2
	DefaultGrace       = 10 * time.Second
	handshakeTimeout   = 30 * time.Second
)

// Config is everything a Server needs. Roster, HostKey, Factory and
// DetectTier are required.
type Config struct {
	Roster  *Roster
	HostKey gossh.Signer
	Factory Factory
	// DetectTier picks a colour tier from the client's announced
	// environment (render.DetectTier); it never sees the server's own.
	DetectTier func(getenv func(string) string) render.Tier
	// MaxSessions bounds concurrent sessions, MaxPerKey those of one key.
	MaxSessions, MaxPerKey int
	// Idle ends a session after this long without a keystroke (0: never).
	Idle time.Duration
	// Grace is how long a stopping session may take to save and quit
	// before it is killed.
	Grace  time.Duration
	Logger *slog.Logger
	// OnSessionEnd, if set, is called after a session has ended and its
	// model has saved (tests, metrics).
	OnSessionEnd func(SessionEnd)
}

// SessionEnd describes a finished session.
type SessionEnd struct {
	ID      int64
	Scanner string
	Reason  StopReason // "" if the model quit by itself
	Err     error
}

// Server is a running SSH scanning station.
type Server struct {
	cfg    Config
	log    *slog.Logger
	ssh    *ssh.Server
	roster atomic.Pointer[Roster] // swapped by SetRoster

	mu      sync.Mutex
	live    map[int64]*liveSession
	nextID  int64
	closing bool
	conns   int // open TCP connections, authenticated or not
}

// liveSession is the server's handle on one running session.
type liveSession struct {
	id      int64
	scanner string
	keyFP   string
	stopped atomic.Bool     // stop has been called
	reason  chan StopReason // the first stop's reason; buffered, one slot
	done    chan struct{}   // closed when the model has quit
}

func newLiveSession(scanner, keyFP string) *liveSession {
	return &liveSession{scanner: scanner, keyFP: keyFP, reason: make(chan StopReason, 1), done: make(chan struct{})}
}

// stop asks the session to save and quit; only the first call counts.
func (l *liveSession) stop(why StopReason) {
	if l.stopped.CompareAndSwap(false, true) {
		l.reason <- why
	}
}

// New checks cfg and builds a server; Serve starts it.
func New(cfg Config) (*Server, error) {
	switch {
	case cfg.Roster == nil:
		return nil, errors.New("serve: no scanners file")
	case cfg.HostKey == nil:
		return nil, errors.New("serve: no host key")
	case cfg.Factory == nil:
		return nil, errors.New("serve: no model factory")
	case cfg.DetectTier == nil:
		return nil, errors.New("serve: no colour tier detector")
	case cfg.MaxSessions < 0 || cfg.MaxPerKey < 0 || cfg.Idle < 0 || cfg.Grace < 0:
		return nil, errors.New("serve: limits must not be negative")
	}
	if cfg.MaxSessions == 0 {
		cfg.MaxSessions = DefaultMaxSessions
	}
	if cfg.MaxPerKey == 0 {
		cfg.MaxPerKey = DefaultMaxPerKey
	}
	if cfg.Grace == 0 {
		cfg.Grace = DefaultGrace
	}
	if cfg.Logger == nil {
		cfg.Logger = slog.New(slog.DiscardHandler)
	}
	s := &Server{cfg: cfg, log: cfg.Logger, live: map[int64]*liveSession{}}
	s.roster.Store(cfg.Roster)
	srv, err := wish.NewServer(
		func(srv *ssh.Server) error { srv.AddHostKey(cfg.HostKey); return nil },
		wish.WithPublicKeyAuth(s.authorise),
		wish.WithVersion("tpcscan"),
		// Each session runs recover → logging → activeterm → program. wish
		// wraps a middleware list from first to last, so the last one listed
		// is the outermost and runs first: the lists here read in reverse.
		// recover takes the inner list itself, so that a panic anywhere in
		// them ends one session, logged, and never the server.
		wish.WithMiddleware(
			wishrecover.MiddlewareWithLogger(panicLogger{s.log},
				s.programMiddleware(),
				activeterm.Middleware(),
				s.loggingMiddleware(),
			),
		),
	)
	if err != nil {
		return nil, fmt.Errorf("serve: %w", err)
	}
	s.lockDown(srv)
	s.ssh = srv
	return s, nil
}

// lockDown removes everything but an interactive session: only "session"
// channels (no direct-tcpip or other forwarding channels), no global
// requests (no tcpip-forward), no subsystems (no sftp), no exec, no agent
// or X11 forwarding, and no password or keyboard-interactive logins.
func (s *Server) lockDown(srv *ssh.Server) {
	srv.ChannelHandlers = map[string]ssh.ChannelHandler{"session": s.sessionChannel, "default": s.refuseChannel}
	srv.RequestHandlers = map[string]ssh.RequestHandler{"default": s.refuseGlobal}
	srv.SubsystemHandlers = map[string]ssh.SubsystemHandler{}
	srv.LocalPortForwardingCallback = nil
	srv.ReversePortForwardingCallback = nil
	srv.PasswordHandler = nil
	srv.KeyboardInteractiveHandler = nil
	srv.SessionRequestCallback = s.allowRequest
	srv.ServerConfigCallback = func(ssh.Context) *gossh.ServerConfig {
		return &gossh.ServerConfig{AuthLogCallback: s.logAuth}
	}
	srv.ConnCallback = s.trackConn
	srv.ConnectionFailedCallback = func(c net.Conn, err error) {
		s.log.Info("connection failed", "remote", c.RemoteAddr().String(), "err", err)
	}
}

// refuseChannel rejects and logs any channel but a session (direct-tcpip
// port forwarding, streamlocal, ...).
func (s *Server) refuseChannel(_ *ssh.Server, conn *gossh.ServerConn, nc gossh.NewChannel, ctx ssh.Context) {
	s.log.Warn("channel refused", "kind", nc.ChannelType(), "scanner", scannerOf(ctx).Name,
		"remote", conn.RemoteAddr().String())
	_ = nc.Reject(gossh.Prohibited, "only the scanning station is served here")
}

// refuseGlobal refuses global requests (tcpip-forward, ...); keepalives
// are refused too, as OpenSSH servers do for unknown requests, which is
// all a client needs for its keepalive to work.
func (s *Server) refuseGlobal(ctx ssh.Context, _ *ssh.Server, req *gossh.Request) (bool, []byte) {
	level := slog.LevelWarn
	if strings.HasPrefix(req.Type, "keepalive@") {
		level = slog.LevelDebug
	}
	s.log.Log(context.Background(), level, "request refused", "kind", req.Type, "scanner", scannerOf(ctx).Name,
		"remote", ctx.RemoteAddr().String())
	return false, nil
}

// refusedRequest says which session requests are refused before the SSH
// library sees them (it would accept an agent forwarding request).
func refusedRequest(kind string) bool {
	return kind == "auth-agent-req@openssh.com" || kind == "x11-req"
}

// sessionChannel is the stock session handler behind a filter that
// refuses agent and X11 forwarding requests.
func (s *Server) sessionChannel(srv *ssh.Server, conn *gossh.ServerConn, nc gossh.NewChannel, ctx ssh.Context) {
	ssh.DefaultSessionHandler(srv, conn, filteredChannel{NewChannel: nc, log: s.log}, ctx)
}

// filteredChannel accepts a channel and drops the refused requests.
type filteredChannel struct {
	gossh.NewChannel
	log *slog.Logger
}

func (f filteredChannel) Accept() (gossh.Channel, <-chan *gossh.Request, error) {
	ch, reqs, err := f.NewChannel.Accept()
	if err != nil {
		return ch, reqs, err
	}
	out := make(chan *gossh.Request)
	go func() {
		defer close(out)
		for r := range reqs {
			if refusedRequest(r.Type) {
				f.log.Warn("request refused", "kind", r.Type)
				if r.WantReply {
					_ = r.Reply(false, nil)
				}
				continue
			}
			out <- r
		}
	}()
	return ch, out, nil
}

// allowRequest accepts a shell request (a plain "ssh host") and refuses
// exec and subsystem requests.
func (s *Server) allowRequest(sess ssh.Session, kind string) bool {
	if kind == "shell" {
		return true
	}
	s.log.Warn("request refused", "kind", kind, "scanner", scannerOf(sess.Context()).Name,
		"remote", sess.RemoteAddr().String(), "command", sess.RawCommand(), "subsystem", sess.Subsystem())
	return false
}

// Serve accepts connections on ln until ctx is cancelled, then shuts down
// gracefully: every connected scanner is told, every model saves its draft,
// and the connections close. It returns nil after a graceful shutdown.
func (s *Server) Serve(ctx context.Context, ln net.Listener) error {
	errc := make(chan error, 1)
	go func() { errc <- s.ssh.Serve(ln) }()
	select {
	case err := <-errc:
		return fmt.Errorf("serve: %w", err)
	case <-ctx.Done():
	}
	s.log.Info("shutting down", "sessions", s.Sessions())
	sctx, cancel := context.WithTimeout(context.Background(), s.cfg.Grace+5*time.Second)
	defer cancel()
	err := s.Shutdown(sctx)
	<-errc
	return err
}

// Shutdown refuses new sessions, asks every session to save and quit
// (their scanners see why), waits for them, then closes the listener and
// every connection. Past ctx's deadline it closes everything at once.
func (s *Server) Shutdown(ctx context.Context) error {
	s.mu.Lock()
	s.closing = true
	live := make([]*liveSession, 0, len(s.live))
	for _, l := range s.live {
		live = append(live, l)
	}
	s.mu.Unlock()
	for _, l := range live {
		l.stop(StopShutdown)
	}
	for _, l := range live {
		select {
		case <-l.done:
		case <-ctx.Done():
			s.ssh.Close()
			return fmt.Errorf("shutdown: sessions still saving: %w", ctx.Err())
		}
	}
	// Every model has saved and every scanner has been told: what is left
	// are idle or half-open connections, closed without waiting.
	err := s.ssh.Close()
	if err != nil && !errors.Is(err, ssh.ErrServerClosed) && !errors.Is(err, net.ErrClosed) {
		return fmt.Errorf("shutdown: %w", err)
	}
	s.log.Info("shut down")
	return nil
}

// SetRoster replaces the scanners file for new logins (a reload after the
// file changed). Sessions already open keep running.
func (s *Server) SetRoster(r *Roster) {
	if r != nil {
		s.roster.Store(r)
	}
}

// Sessions returns the number of running sessions.
func (s *Server) Sessions() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	return len(s.live)
}

// admit registers a session if the limits allow it. It returns a
// scanner-facing reason when they do not.
func (s *Server) admit(l *liveSession) (string, bool) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closing {
		return "the server is shutting down; try again in a minute", false
	}
	if len(s.live) >= s.cfg.MaxSessions {
		return fmt.Sprintf("the server is full (%d sessions); try again later", s.cfg.MaxSessions), false
	}
	perKey := 0
	for _, o := range s.live {
		if o.keyFP == l.keyFP {
			perKey++
		}
	}
	if perKey >= s.cfg.MaxPerKey {
		return fmt.Sprintf("this key already has %d open sessions; close one first", perKey), false
	}
	s.nextID++
	l.id = s.nextID
	s.live[l.id] = l
	return "", true
}

func (s *Server) release(l *liveSession) {
	s.mu.Lock()
	delete(s.live, l.id)
	s.mu.Unlock()
}

// stopping returns the done channels of the scanner's sessions that are
// saving on their way out, so a reconnecting scanner resumes from what
// they saved rather than from the state before.
func (s *Server) stopping(scanner string) []chan struct{} {
	s.mu.Lock()
	defer s.mu.Unlock()
	var out []chan struct{}
	for _, l := range s.live {
		if l.scanner == scanner && l.stopped.Load() {
			out = append(out, l.done)
		}
	}
	return out
}

// trackConn bounds open connections (authenticated or not) and closes
// those that have not authenticated within handshakeTimeout.
func (s *Server) trackConn(ctx ssh.Context, c net.Conn) net.Conn {
	s.mu.Lock()
	limit := 2*s.cfg.MaxSessions + 16
	if s.closing || s.conns >= limit {
		s.mu.Unlock()
		s.log.Warn("connection refused", "remote", c.RemoteAddr().String(), "open", limit)
		return nil
	}
	s.conns++
	s.mu.Unlock()
	g := &guardedConn{Conn: c, onClose: func() {
		s.mu.Lock()
		s.conns--
		s.mu.Unlock()
	}}
	g.timer = time.AfterFunc(handshakeTimeout, func() {
		if !g.authed.Load() {
			s.log.Warn("handshake timeout", "remote", c.RemoteAddr().String())
			g.Close()
		}
	})
	ctx.SetValue(guardKey{}, g)
	return g
}

// guardedConn counts itself out when closed.
type guardedConn struct {
	net.Conn
	authed  atomic.Bool
	timer   *time.Timer
	once    sync.Once
	onClose func()
}

func (g *guardedConn) Close() error {
	g.once.Do(func() {
		g.timer.Stop()
		g.onClose()
	})
	return g.Conn.Close()
}

type guardKey struct{}
type scannerKey struct{}

// authorise is the public-key callback: known keys pass, others are
// refused and logged with their fingerprint.
func (s *Server) authorise(ctx ssh.Context, key ssh.PublicKey) bool {
	sc, ok := s.roster.Load().Lookup(key)
	if !ok {
		s.log.Warn("unknown key refused", "fingerprint", gossh.FingerprintSHA256(key),
			"type", key.Type(), "user", ctx.User(), "remote", ctx.RemoteAddr().String())
		return false
	}
	ctx.SetValue(scannerKey{}, sc)
	if g, ok := ctx.Value(guardKey{}).(*guardedConn); ok {
		g.authed.Store(true)
	}
	return true
}

// scannerOf returns the scanner the connection authenticated as.
func scannerOf(ctx ssh.Context) Scanner {
	sc, _ := ctx.Value(scannerKey{}).(Scanner)
	return sc
}

// logAuth logs failed logins other than the "none" probe every client
// starts with; refused public keys are logged by authorise.
func (s *Server) logAuth(c gossh.ConnMetadata, method string, err error) {
	if err == nil || method == "none" || method == "publickey" {
		return
	}
	s.log.Warn("login refused", "method", method, "user", c.User(), "remote", c.RemoteAddr().String())
}

// loggingMiddleware logs each session's start and end.
func (s *Server) loggingMiddleware() wish.Middleware {
	return func(next ssh.Handler) ssh.Handler {
		return func(sess ssh.Session) {
			start := time.Now()
			pty, _, _ := sess.Pty()
			sc := scannerOf(sess.Context())
			s.log.Info("session start", "scanner", sc.Name, "role", sc.Role, "remote", sess.RemoteAddr().String(),
				"term", pty.Term, "width", pty.Window.Width, "height", pty.Window.Height,
				"client", sess.Context().ClientVersion())
			next(sess)
			s.log.Info("session end", "scanner", sc.Name, "remote", sess.RemoteAddr().String(),
				"duration", time.Since(start).Round(time.Second))
		}
	}
}

// panicLogger adapts slog to wish's recover middleware.
type panicLogger struct{ log *slog.Logger }

func (p panicLogger) Printf(format string, v ...any) {
	p.log.Error("session panic", "detail", fmt.Sprintf(format, v...))
}
