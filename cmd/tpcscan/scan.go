package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"os/user"
	"path/filepath"
	"strings"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/campaign"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/scan/sim"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/backend"
	"github.com/tpcscan/tpcscan/ui"
)

func scanCommand() command {
	return command{
		name:    "scan",
		summary: "scan a campaign's events: tag, mark, submit (no flags: the built-in demo campaign)",
		run: func(ctx context.Context, env *environ, args []string) error {
			fs := newFlags(env, "scan", "[--db FILE|URL --scanner NAME] [FLAGS]",
				"Opens the station in scanning mode on your next event of a campaign. Every change is saved at once.\n"+
					"Without --db it opens the demo campaign (generated on first use; see the README to start over).\n"+
					"Press ? in the station for every key.")
			db := fs.String("db", "", "campaign database: an SQLite file or a postgres:// URL")
			who := fs.String("scanner", "", "your scanner name (default: your login name)")
			campaign := fs.String("campaign", "", "campaign name (default: the only campaign in the database)")
			dir := fs.String("dataset", "", "dataset folder (default: the folder recorded in the campaign)")
			color := fs.String("color", "auto", "colour tier: auto, "+strings.Join(render.TierNames(), ", "))
			keys := fs.String("keys", "", "key map file (TOML; default "+ui.DefaultKeyMapPath()+" if it exists)")
			mev := mevFlag(fs)
			if err := fs.Parse(args); err != nil {
				return err
			}
			if err := checkMeV(*mev); err != nil {
				return err
			}
			if fs.NArg() != 0 {
				return usageError{"scan takes no arguments; give the database with --db"}
			}
			tier, err := tierFlag(env, *color)
			if err != nil {
				return usageError{err.Error()}
			}
			km, err := keyMap(*keys)
			if err != nil {
				return err
			}
			name := *who
			if name == "" {
				name = loginName(env)
			}
			sc := scanConfig{db: *db, scanner: name, campaign: *campaign, dataset: *dir, tier: tier, keys: km, mevPerADC: *mev}
			if sc.db == "" {
				if err := prepareDemo(ctx, env, &sc); err != nil {
					return err
				}
			}
			return runScan(ctx, sc)
		},
	}
}

type scanConfig struct {
	db, scanner, campaign, dataset string
	tier                           render.Tier
	keys                           ui.KeyMap
	mevPerADC                      float64
}

// runScan opens the store, the campaign and its dataset and runs the
// station until the scanner quits.
func runScan(ctx context.Context, sc scanConfig) error {
	if strings.TrimSpace(sc.scanner) == "" || scan.CleanText(sc.scanner) != sc.scanner {
		return usageError{"a scanner name is needed (--scanner NAME), without control characters"}
	}
	st, err := backend.Open(ctx, sc.db)
	if err != nil {
		return err
	}
	defer st.Close()
	camp, err := pickCampaign(ctx, st, sc.campaign)
	if err != nil {
		return err
	}
	if !onRoster(camp, sc.scanner) {
		return fmt.Errorf("scanner %q is not on the roster of campaign %q (%s)", sc.scanner, camp.Name, strings.Join(camp.Scanners, ", "))
	}
	dir := sc.dataset
	if dir == "" {
		dir = camp.Dataset
	}
	ds, err := dataset.Open(dir)
	if err != nil {
		return fmt.Errorf("campaign %q: %w (give the folder with --dataset)", camp.Name, err)
	}
	if err := sc.keys.CheckSchema(camp.Schema); err != nil {
		return fmt.Errorf("campaign %q: %w", camp.Name, err)
	}
	return runTUI(ctx, ui.Options{Dataset: ds, Store: st, CampaignID: camp.ID, Scanner: sc.scanner,
		Role: ui.RoleScanner, Tier: sc.tier, Keys: sc.keys, MeVPerADC: sc.mevPerADC, Context: ctx})
}

func onRoster(c scan.Campaign, who string) bool {
	if len(c.Scanners) == 0 {
		return true
	}
	for _, s := range c.Scanners {
		if s == who {
			return true
		}
	}
	return false
}

// loginName is the user's login name, for the scanner name.
func loginName(env *environ) string {
	if u, err := user.Current(); err == nil && u.Username != "" {
		return u.Username
	}
	return env.getenv("USER")
}

// The demo: a deterministic generated dataset in the user's cache folder
// and a campaign over it in a store in the user's data folder.
const (
	demoVersion      = "demo-v2"
	demoEvents       = 20
	demoSeed         = 1
	demoCampaignName = "demo"
)

// demoPaths returns the demo dataset folder and database file.
func demoPaths(env *environ) (dataDir, db string, err error) {
	cache, err := os.UserCacheDir()
	if err != nil {
		return "", "", fmt.Errorf("demo: no cache folder: %w", err)
	}
	data := env.getenv("XDG_DATA_HOME")
	if data == "" {
		home, err := os.UserHomeDir()
		if err != nil {
			return "", "", fmt.Errorf("demo: no home folder: %w", err)
		}
		data = filepath.Join(home, ".local", "share")
	}
	return filepath.Join(cache, "tpcscan", demoVersion), filepath.Join(data, "tpcscan", "demo.db"), nil
}

// prepareDemo generates the demo dataset once and creates the demo
// campaign once, then points sc at them.
func prepareDemo(ctx context.Context, env *environ, sc *scanConfig) error {
	dir, db, err := demoPaths(env)
	if err != nil {
		return err
	}
	if err := ensureDemoDataset(ctx, env, dir); err != nil {
		return err
	}
	if err := os.MkdirAll(filepath.Dir(db), 0o755); err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	st, err := backend.Open(ctx, db)
	if err != nil {
		return fmt.Errorf("demo: %w (delete %s to start over)", err, db)
	}
	defer st.Close()
	if _, err := st.CampaignByName(ctx, demoCampaignName); errors.Is(err, store.ErrNotFound) {
		if err := createDemoCampaign(ctx, st, dir, sc.scanner); err != nil {
			return err
		}
	} else if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	sc.db, sc.campaign = db, demoCampaignName
	if sc.dataset == "" {
		sc.dataset = dir
	}
	return nil
}

// ensureDemoDataset writes the demo dataset into a temporary folder and
// renames it into place, so an interrupted first run leaves nothing half
// written.
func ensureDemoDataset(ctx context.Context, env *environ, dir string) error {
	if _, err := os.Stat(filepath.Join(dir, dataset.ManifestName)); err == nil {
		return nil
	}
	if err := os.MkdirAll(filepath.Dir(dir), 0o755); err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	tmp, err := os.MkdirTemp(filepath.Dir(dir), ".demo-*")
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	defer os.RemoveAll(tmp)
	fmt.Fprintf(env.stderr, "tpcscan: first run: generating %d demo events into %s\n", demoEvents, dir)
	bar := newProgress(env, "generating", demoEvents)
	err = sim.WriteDataset(ctx, tmp, sim.Options{Events: demoEvents, Seed: demoSeed, Size: sim.SizeDemo, Compress: true}, func(done, total int) { bar.Step(1) })
	bar.Finish()
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	os.RemoveAll(dir) // a folder without a manifest is a leftover
	if err := os.Rename(tmp, dir); err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	return nil
}

// demoInstructions are the demo campaign's scanning rules.
const demoInstructions = `# Demo campaign

Welcome! These events come from **Tarn**, an invented test stand, generated
by tpcscan itself. Nothing you do here matters: practise freely.

## What to do with each event

1. Look at the three planes. Zoom onto the interaction (**+**, or a box with **z** twice).
2. Choose the topology class with its digit (**1**–**7**).
3. Put the vertex on two planes (**v**): tpcscan triangulates it and shows
   where the third plane should see it (◇).
4. Optionally mark particles: **t** at each point of a track, then the
   particle's capital letter (M μ, P p, I π±, E e, G γ, O other).
5. Flags (capitals V N K W D) and confidence (Z X C) if they apply.
6. Submit with **ctrl+s**; skip with **ctrl+k** and a reason.

Every change is saved at once ("saved ✓" in the title bar).

## Classes

- **νμ CC**: a long, straight muon track leaving the vertex, often with short
  heavily ionising protons.
- **νe CC**: an electron shower starting at the vertex (no gap).
- **NC π0**: two photon showers that start a few tens of cm away from the vertex.
- **cosmic only**: only long tracks crossing the whole window.
`

func createDemoCampaign(ctx context.Context, st store.Store, dir, scanner string) error {
	ds, err := dataset.Open(dir)
	if err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	var evs []scan.CampaignEvent
	for _, e := range ds.Events() {
		evs = append(evs, scan.CampaignEvent{EventID: e.ID})
	}
	c := scan.Campaign{Name: demoCampaignName, Dataset: dir, Mode: scan.ModeLabel, PerEvent: 1, Blind: true,
		Seed: demoCampaignSeed(ds, scanner), Schema: scan.DefaultSchema(), Instructions: demoInstructions}
	if _, err := st.CreateCampaign(ctx, c, evs); err != nil && !errors.Is(err, store.ErrConflict) {
		return fmt.Errorf("demo: %w", err)
	}
	return nil
}

// demoCampaignSeed picks the demo campaign's shuffle seed so that the
// newcomer's first event is a clear νμ CC interaction (see showcase). The
// order is still the campaign's seeded shuffle; only the seed is chosen.
func demoCampaignSeed(ds *dataset.Dataset, scanner string) int64 {
	evs := ds.Events()
	good := map[int]bool{}
	for i, e := range evs {
		good[i] = showcase(ds, e.ID)
	}
	for seed := int64(demoSeed); seed < demoSeed+1000; seed++ {
		pos := campaign.Positions(seed, len(evs))
		start := campaign.StartOffset(seed, scanner, len(evs))
		for i, p := range pos {
			if p == start {
				if good[i] {
					return seed
				}
				break
			}
		}
	}
	return demoSeed
}

// showcase reports whether the generator's truth makes an event a good first
// sight: νμ CC with a muon of at least 200 MeV (a track of most of a metre)
// and a proton of at least 60 MeV (a few cm, with its Bragg peak).
func showcase(ds *dataset.Dataset, id string) bool {
	b, err := ds.TruthJSON(id)
	if err != nil {
		return false
	}
	var t sim.Truth
	if json.Unmarshal(b, &t) != nil || t.Class != sim.ClassNumuCC {
		return false
	}
	var mu, p bool
	for _, q := range t.Particles {
		if q.Parent != 0 || q.Origin != "interaction" {
			continue
		}
		mu = mu || (q.Type == "muon" && q.KEMeV >= 200)
		p = p || (q.Type == "proton" && q.KEMeV >= 60)
	}
	return mu && p
}
