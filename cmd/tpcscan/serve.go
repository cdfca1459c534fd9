package main

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"os"
	"os/signal"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"syscall"
	"time"

	tea "github.com/charmbracelet/bubbletea"
	gossh "golang.org/x/crypto/ssh"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/backend"
	"github.com/tpcscan/tpcscan/ui"
	"github.com/tpcscan/tpcscan/ui/serve"
)

const serveSummary = `Serves the scanning station over SSH: each scanner runs plain 'ssh -p PORT HOST'
with their own key and gets the full station, sized and coloured for their
terminal, on the campaign's shared database. There is no shell, no command
execution, no forwarding and no file transfer; only keys listed in the
scanners file get in.

The scanners file has one key per line: NAME ROLE KEYTYPE BASE64 [COMMENT],
ROLE being scanner or coordinator (see the README).

The server listens on loopback by default. Follow your site's security
policy before exposing it beyond loopback or a bastion host; keep the host
key private and review the scanners file.`

func serveCommand() command {
	return command{
		name:    "serve",
		summary: "serve the scanning station to a shift crew over SSH",
		run:     runServe,
	}
}

// serveFlags are the serve command's settings.
type serveFlags struct {
	db, listen, scanners, hostKey, campaign, data string
	maxSessions, maxPerKey                        int
	idle                                          time.Duration
	jsonLog                                       bool
}

func runServe(ctx context.Context, env *environ, args []string) error {
	var f serveFlags
	fs := newFlags(env, "serve", "--db FILE --scanners FILE [FLAGS]", serveSummary)
	fs.StringVar(&f.db, "db", "", "campaign database: an SQLite file or a postgres:// URL (required)")
	fs.StringVar(&f.scanners, "scanners", "", "scanners file: who may connect, with which key and role (required)")
	fs.StringVar(&f.listen, "listen", serve.DefaultAddr, "address to listen on; loopback unless your site's policy allows more")
	fs.StringVar(&f.hostKey, "host-key", "", "host key file, created (mode 0600) on first start (default: beside the database)")
	fs.StringVar(&f.campaign, "campaign", "", "campaign to serve (default: the only one in the database)")
	fs.StringVar(&f.data, "data", "", "dataset folder (default: the one the campaign was made from)")
	fs.IntVar(&f.maxSessions, "max-sessions", serve.DefaultMaxSessions, "most concurrent sessions")
	fs.IntVar(&f.maxPerKey, "max-per-key", serve.DefaultMaxPerKey, "most concurrent sessions of one key")
	fs.DurationVar(&f.idle, "idle", 30*time.Minute, "end sessions after this long without a keystroke, drafts saved (0: never)")
	fs.BoolVar(&f.jsonLog, "log-json", false, "write logs as JSON lines (for journald or a log collector)")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if err := f.check(fs.NArg()); err != nil {
		return err
	}
	log := newServeLogger(env, f.jsonLog)

	st, err := backend.Open(ctx, f.db)
	if err != nil {
		return err
	}
	defer st.Close()
	c, err := pickCampaign(ctx, st, f.campaign)
	if err != nil {
		return err
	}
	dir := f.data
	if dir == "" {
		dir = c.Dataset
	}
	ds, err := dataset.Open(dir)
	if err != nil {
		return fmt.Errorf("campaign %q: %w (give the folder with --data)", c.Name, err)
	}
	roster, err := serve.LoadRoster(f.scanners)
	if err != nil {
		return err
	}
	warnRoster(log, roster, c)
	host, created, err := serve.LoadHostKey(f.hostKeyPath())
	if err != nil {
		return err
	}
	log.Info("host key", "path", f.hostKeyPath(), "created", created,
		"fingerprint", gossh.FingerprintSHA256(host.PublicKey()))

	srv, err := serve.New(serve.Config{
		Roster: roster, HostKey: host, DetectTier: render.DetectTier,
		Factory:     stationFactory(st, ds, c.ID),
		MaxSessions: f.maxSessions, MaxPerKey: f.maxPerKey, Idle: f.idle,
		Logger: log,
	})
	if err != nil {
		return err
	}
	ln, err := net.Listen("tcp", f.listen)
	if err != nil {
		return fmt.Errorf("listen on %s: %w", f.listen, err)
	}
	warnExposure(log, ln.Addr())
	stopReload := reloadOnHangup(log, srv, f.scanners)
	defer stopReload()
	log.Info("serving", "addr", ln.Addr().String(), "campaign", c.Name, "dataset", ds.Dir(),
		"scanners", len(roster.Scanners()), "max_sessions", f.maxSessions, "idle", f.idle)
	return srv.Serve(ctx, ln)
}

func (f serveFlags) check(nargs int) error {
	switch {
	case nargs > 0:
		return usageError{"serve takes flags only"}
	case f.db == "":
		return usageError{"serve needs --db FILE"}
	case f.scanners == "":
		return usageError{"serve needs --scanners FILE (who may connect)"}
	case f.maxSessions < 1 || f.maxPerKey < 1:
		return usageError{"--max-sessions and --max-per-key must be at least 1"}
	case f.idle < 0:
		return usageError{"--idle must not be negative"}
	}
	return nil
}

// hostKeyPath defaults to a file beside an SQLite database, or in the
// working folder for a PostgreSQL URL.
func (f serveFlags) hostKeyPath() string {
	if f.hostKey != "" {
		return f.hostKey
	}
	if strings.Contains(f.db, "://") {
		return "tpcscan_host_ed25519"
	}
	return filepath.Join(filepath.Dir(f.db), "tpcscan_host_ed25519")
}

func newServeLogger(env *environ, asJSON bool) *slog.Logger {
	if asJSON {
		return slog.New(slog.NewJSONHandler(env.stderr, nil))
	}
	return slog.New(slog.NewTextHandler(env.stderr, nil))
}

// pickCampaign finds the campaign by name, or the only one there is.
func pickCampaign(ctx context.Context, st store.Store, name string) (scan.Campaign, error) {
	if name != "" {
		c, err := st.CampaignByName(ctx, name)
		if errors.Is(err, store.ErrNotFound) {
			return c, fmt.Errorf("no campaign %q in the database", name)
		}
		return c, err
	}
	cs, err := st.Campaigns(ctx)
	if err != nil {
		return scan.Campaign{}, err
	}
	switch len(cs) {
	case 0:
		return scan.Campaign{}, errors.New("the database has no campaign: make one with 'tpcscan campaign' first")
	case 1:
		return cs[0], nil
	}
	names := make([]string, len(cs))
	for i, c := range cs {
		names[i] = c.Name
	}
	return scan.Campaign{}, usageError{"the database has several campaigns; pick one with --campaign: " + strings.Join(names, ", ")}
}

// warnRoster points out people of the scanners file the campaign's own
// roster would turn away once connected.
func warnRoster(log *slog.Logger, r *serve.Roster, c scan.Campaign) {
	if len(c.Scanners) == 0 {
		return
	}
	for _, s := range r.Scanners() {
		if !slices.Contains(c.Scanners, s.Name) {
			log.Warn("scanner not on the campaign's roster: they can connect but get no events",
				"scanner", s.Name, "campaign", c.Name, "line", s.Line)
		}
	}
}

// reloadOnHangup rereads the scanners file on SIGHUP (systemctl reload):
// new logins follow the new file, open sessions go on, and a file with an
// error is reported and ignored. The returned func stops listening.
func reloadOnHangup(log *slog.Logger, srv *serve.Server, path string) func() {
	hup := make(chan os.Signal, 1)
	signal.Notify(hup, syscall.SIGHUP)
	done := make(chan struct{})
	go func() {
		for {
			select {
			case <-done:
				return
			case <-hup:
				r, err := serve.LoadRoster(path)
				if err != nil {
					log.Error("scanners file not reloaded; the previous one stays in force", "err", err)
					continue
				}
				srv.SetRoster(r)
				log.Info("scanners file reloaded", "path", path, "keys", len(r.Scanners()))
			}
		}
	}()
	return func() {
		signal.Stop(hup)
		close(done)
	}
}

// warnExposure repeats the caution when the server is reachable beyond
// this machine.
func warnExposure(log *slog.Logger, addr net.Addr) {
	if ta, ok := addr.(*net.TCPAddr); ok && ta.IP.IsLoopback() {
		return
	}
	log.Warn("listening beyond loopback: follow your site's security policy (firewall, bastion host); keep the host key private and review the scanners file",
		"addr", addr.String())
}

// stationFactory builds the scanning station for each SSH session: the
// same root model as the local station, with the session's renderer,
// colour tier and identity. Coordinators get it inside a hub with the
// adjudicator and the campaign dashboard.
func stationFactory(st store.Store, ds *dataset.Dataset, campaignID int64) serve.Factory {
	src := newPlanesOnly(ds, max(1, runtime.GOMAXPROCS(0)/2))
	return func(ctx context.Context, s serve.Session) (serve.App, error) {
		var m tea.Model = ui.New(ui.Options{
			Dataset: ds, Source: src, Store: st, CampaignID: campaignID,
			Scanner: s.Scanner, Role: string(s.Role),
			Tier: s.Tier, Renderer: s.Renderer, Keys: ui.DefaultKeyMap(),
			Logger: s.Logger, Context: ctx,
		})
		if s.Role == serve.RoleCoordinator {
			m = coordinatorHub(ctx, m, st, src, campaignID, s)
		}
		return serve.App{
			Model:   m,
			Stop:    func(serve.StopReason) tea.Msg { return ui.ShutdownMsg{} },
			Options: []tea.ProgramOption{tea.WithMouseCellMotion()},
		}, nil
	}
}

// coordinatorHub puts the station beside the adjudicator and the
// campaign dashboard; the adjudicator and dashboard read the store only
// when first shown.
func coordinatorHub(ctx context.Context, station tea.Model, st store.Store, src ui.Source, campaignID int64, s serve.Session) *ui.Hub {
	adj := ui.NewAdjudicator(ui.AdjudicateOptions{
		Store: st, CampaignID: campaignID, Source: src, Coordinator: s.Scanner,
		Tier: s.Tier, Renderer: s.Renderer, Keys: ui.DefaultKeyMap(), Logger: s.Logger, Context: ctx,
		QuitHelp: "back to scanning",
	})
	dash := ui.NewDashboard(ui.DashboardOptions{
		Store: st, CampaignID: campaignID, Tier: s.Tier, Renderer: s.Renderer, Context: ctx,
		QuitHelp: "back to scanning",
	})
	return ui.NewHub(ui.HubOptions{Tier: s.Tier, Renderer: s.Renderer},
		ui.HubPage{Name: "scanning", Model: station},
		ui.HubPage{Name: "adjudication", Model: adj},
		ui.HubPage{Name: "dashboard", Model: dash})
}

// planesOnly serves a dataset's events to every session, without their
// pixel truth (the station never draws it, and each session would keep its
// own copy: a third of a demo event's memory), and decodes at most a few
// events at a time, so that a crew logging in at once, each session
// loading and prefetching, leaves CPU for the others' keystrokes.
type planesOnly struct {
	ds    *dataset.Dataset
	slots chan struct{}
}

func newPlanesOnly(ds *dataset.Dataset, concurrent int) planesOnly {
	return planesOnly{ds: ds, slots: make(chan struct{}, concurrent)}
}

func (p planesOnly) EventIDs() []string {
	evs := p.ds.Events()
	ids := make([]string, len(evs))
	for i, e := range evs {
		ids[i] = e.ID
	}
	return ids
}

func (p planesOnly) Load(id string) (*scan.Event, error) {
	p.slots <- struct{}{}
	defer func() { <-p.slots }()
	return p.ds.LoadPlanes(id)
}
