package main

import (
	"context"
	"crypto/rand"
	"encoding/binary"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/campaign"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/backend"
)

func campaignCommand() command {
	return command{
		name:    "campaign",
		summary: "make a scanning campaign, list campaigns, show progress (new, list, status)",
		run: func(ctx context.Context, env *environ, args []string) error {
			if len(args) == 0 || strings.HasPrefix(args[0], "-") {
				fmt.Fprintln(env.stderr, "usage: tpcscan campaign new|list|status [FLAGS]   (tpcscan campaign SUBCOMMAND -h for flags)")
				if len(args) > 0 && (args[0] == "-h" || args[0] == "--help" || args[0] == "-help") {
					return flag.ErrHelp
				}
				return usageError{"campaign needs a subcommand: new, list or status"}
			}
			switch args[0] {
			case "new":
				return campaignNew(ctx, env, args[1:])
			case "list":
				return campaignList(ctx, env, args[1:])
			case "status":
				return campaignStatus(ctx, env, args[1:])
			}
			return usageError{fmt.Sprintf("unknown campaign subcommand %q (new, list, status)", args[0])}
		},
	}
}

// instructionsLimit bounds a campaign's Markdown instructions.
const instructionsLimit = 1 << 20

func campaignNew(ctx context.Context, env *environ, args []string) error {
	fs := newFlags(env, "campaign new", "--dataset DIR --db FILE [FLAGS]",
		"Makes a scanning campaign of a dataset's events in the database (created if needed).\n"+
			"Each event goes to K scanners; each scanner's order is shuffled with the recorded seed.\n"+
			"With --selection, every selected event joins plus a seeded fraction of unselected ones.\n"+
			"The campaign's label schema is fixed from now on.")
	var (
		dir      = fs.String("dataset", "", "dataset `DIR` (a folder with a manifest)")
		db       = fs.String("db", "", "campaign database: an SQLite `FILE` or a postgres:// URL")
		name     = fs.String("name", "", "campaign `NAME` (default: the dataset folder's name)")
		k        = fs.Int("per-event", 2, "scanners per event (`K`)")
		blind    = fs.Bool("blind", true, "never show scanners the selection's output (label mode) or other scanners' labels")
		mode     = fs.String("mode", scan.ModeLabel, "`MODE`: label (full labelling) or verify (agree/disagree with the selection's class and box)")
		selFile  = fs.String("selection", "", "the automated selection's output, CSV `FILE`: event,selected,class,score[,box_plane,box_wire_lo,box_tick_lo,box_wire_hi,box_tick_hi]")
		unsel    = fs.Float64("include-unselected", 0, "`FRACTION` of the unselected events to mix in, sampled with the seed")
		adaptive = fs.Bool("adaptive", false, "add one more pass to an event whose first K passes disagree on the class")
		schemaF  = fs.String("schema", "", "label schema TOML `FILE` (default: the built-in neutrino schema)")
		instrF   = fs.String("instructions", "", "scanning instructions, a Markdown `FILE` scanners can open while scanning")
		seed     = fs.Int64("seed", 0, "`SEED` for the shuffles (default: a random one, printed and recorded)")
		scanners = fs.String("scanners", "", "comma-separated roster of scanner `NAMES`; when given, no one else may join")
	)
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *dir == "" || *db == "" || fs.NArg() > 0 {
		return usageError{"campaign new needs --dataset DIR and --db FILE (and no other arguments)"}
	}
	c := scan.Campaign{Name: *name, Dataset: *dir, Mode: *mode, PerEvent: *k, Blind: *blind, Adaptive: *adaptive, Seed: *seed, Schema: scan.DefaultSchema()}
	if c.Name == "" {
		c.Name = filepath.Base(filepath.Clean(*dir))
	}
	if abs, err := filepath.Abs(*dir); err == nil {
		c.Dataset = abs
	}
	if *mode != scan.ModeLabel && *mode != scan.ModeVerify {
		return usageError{fmt.Sprintf("--mode must be label or verify, got %q", *mode)}
	}
	if *schemaF != "" {
		s, err := scan.LoadSchemaFile(*schemaF)
		if err != nil {
			return err
		}
		c.Schema = s
	}
	if *instrF != "" {
		text, err := readInstructions(*instrF)
		if err != nil {
			return err
		}
		c.Instructions = text
	}
	if *scanners != "" {
		for _, n := range strings.Split(*scanners, ",") {
			if n = strings.TrimSpace(n); n != "" && !slices.Contains(c.Scanners, n) {
				c.Scanners = append(c.Scanners, n)
			}
		}
	}
	if !isFlagSet(fs, "seed") {
		c.Seed = randomSeed()
	}
	spec := campaign.Spec{Campaign: c, IncludeUnselected: *unsel}
	if *selFile != "" {
		f, err := os.Open(*selFile)
		if err != nil {
			return fmt.Errorf("read selection: %w", err)
		}
		spec.Selection, err = scan.ReadSelection(f, *selFile)
		f.Close()
		if err != nil {
			return err
		}
	}
	ds, err := dataset.Open(*dir)
	if err != nil {
		return err
	}
	var ids []string
	for _, e := range ds.Events() {
		ids = append(ids, e.ID)
	}
	c, events, sum, err := campaign.Build(spec, ids)
	if err != nil {
		return fmt.Errorf("campaign %q: %w", c.Name, err)
	}
	st, err := backend.Open(ctx, *db)
	if err != nil {
		return err
	}
	defer st.Close()
	if err := refuseExisting(ctx, st, c); err != nil {
		return err
	}
	id, err := st.CreateCampaign(ctx, c, events)
	if err != nil {
		return err
	}
	w := env.stdout
	fmt.Fprintf(w, "campaign %q (id %d) in %s: %s\n", c.Name, id, backend.Redact(*db), sum)
	fmt.Fprintf(w, "mode %s, %d scanners per event, blind %v, adaptive %v, seed %d, schema %s v%d\n",
		c.Mode, c.PerEvent, c.Blind, c.Adaptive, c.Seed, c.Schema.Name, c.Schema.Version)
	if len(c.Scanners) > 0 {
		fmt.Fprintf(w, "roster: %s\n", strings.Join(c.Scanners, ", "))
	}
	fmt.Fprintf(w, "scanners join with: tpcscan scan --db %s --campaign %q --scanner NAME\n", backend.Redact(*db), c.Name)
	return nil
}

// refuseExisting explains why a campaign of that name cannot be made: its
// schema is frozen, so a different schema file is refused by name.
func refuseExisting(ctx context.Context, st store.Store, c scan.Campaign) error {
	old, err := st.CampaignByName(ctx, c.Name)
	if errors.Is(err, store.ErrNotFound) {
		return nil
	}
	if err != nil {
		return err
	}
	if !old.Schema.Equal(c.Schema) {
		return fmt.Errorf("campaign %q exists already with schema %s v%d; a campaign's schema is fixed when it is made, so the schema given now (%s v%d) cannot be applied to it: make a new campaign with another --name",
			c.Name, old.Schema.Name, old.Schema.Version, c.Schema.Name, c.Schema.Version)
	}
	return fmt.Errorf("campaign %q exists already (id %d); choose another --name", c.Name, old.ID)
}

func readInstructions(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", fmt.Errorf("read instructions: %w", err)
	}
	defer f.Close()
	b, err := io.ReadAll(io.LimitReader(f, instructionsLimit+1))
	if err != nil {
		return "", fmt.Errorf("read instructions %s: %w", path, err)
	}
	if len(b) > instructionsLimit {
		return "", fmt.Errorf("read instructions %s: larger than %d bytes", path, instructionsLimit)
	}
	// Keep the Markdown's lines; strip control sequences inside each.
	lines := strings.Split(strings.ReplaceAll(string(b), "\r\n", "\n"), "\n")
	for i, l := range lines {
		lines[i] = scan.CleanText(l)
	}
	return strings.Join(lines, "\n"), nil
}

func isFlagSet(fs *flag.FlagSet, name string) bool {
	set := false
	fs.Visit(func(f *flag.Flag) { set = set || f.Name == name })
	return set
}

func randomSeed() int64 {
	var b [8]byte
	if _, err := rand.Read(b[:]); err != nil {
		return time.Now().UnixNano()
	}
	return int64(binary.LittleEndian.Uint64(b[:]) >> 1)
}

func campaignList(ctx context.Context, env *environ, args []string) error {
	fs := newFlags(env, "campaign list", "--db FILE", "Lists the campaigns in a database.")
	db := fs.String("db", "", "campaign database: an SQLite `FILE` or a postgres:// URL")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *db == "" {
		return usageError{"campaign list needs --db FILE"}
	}
	st, err := backend.Open(ctx, *db)
	if err != nil {
		return err
	}
	defer st.Close()
	cs, err := st.Campaigns(ctx)
	if err != nil {
		return err
	}
	if len(cs) == 0 {
		fmt.Fprintln(env.stdout, "no campaigns; make one with: tpcscan campaign new --dataset DIR --db", *db)
		return nil
	}
	tw := tabwriter.NewWriter(env.stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "ID\tNAME\tMODE\tK\tBLIND\tADAPTIVE\tSCHEMA\tCREATED\tDATASET")
	for _, c := range cs {
		fmt.Fprintf(tw, "%d\t%s\t%s\t%d\t%v\t%v\t%s v%d\t%s\t%s\n", c.ID, scan.CleanText(c.Name), c.Mode, c.PerEvent, c.Blind, c.Adaptive,
			scan.CleanText(c.Schema.Name), c.Schema.Version, c.Created.Local().Format("2006-01-02 15:04"), scan.CleanText(c.Dataset))
	}
	return tw.Flush()
}

func campaignStatus(ctx context.Context, env *environ, args []string) error {
	fs := newFlags(env, "campaign status", "--db FILE [--campaign NAME] [--events]",
		"Shows a campaign's progress per scanner and per event.")
	db := fs.String("db", "", "campaign database: an SQLite `FILE` or a postgres:// URL")
	name := fs.String("campaign", "", "campaign `NAME` (may be left out when there is only one)")
	perEvent := fs.Bool("events", false, "list every event with its passes")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *db == "" {
		return usageError{"campaign status needs --db FILE"}
	}
	st, c, err := openCampaign(ctx, *db, *name)
	if err != nil {
		return err
	}
	defer st.Close()
	events, err := st.Events(ctx, c.ID)
	if err != nil {
		return err
	}
	passes, err := st.Passes(ctx, c.ID)
	if err != nil {
		return err
	}
	p := campaign.Progress(c, events, passes)
	w := env.stdout
	fmt.Fprintf(w, "campaign %q: %s mode, K = %d, %d events, blind %v, adaptive %v\n", scan.CleanText(c.Name), c.Mode, c.PerEvent, len(events), c.Blind, c.Adaptive)
	fmt.Fprintf(w, "events: %d done, %d in progress, %d not started, %d with an extra pass", p.Done, p.InProgress, p.NotStarted, p.Extra)
	if c.Mode == scan.ModeLabel {
		fmt.Fprintf(w, ", %d with disagreeing classes", p.Disagree)
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "SCANNER\tOPEN\tSUBMITTED\tSKIPPED\tTIME\tMEDIAN/EVENT\t")
	for _, s := range p.Scanners {
		fmt.Fprintf(tw, "%s\t%d\t%d\t%d\t%s\t%s\t\n", scan.CleanText(s.Name), s.Open, s.Submitted, s.Skipped,
			(time.Duration(s.Seconds) * time.Second).String(), (time.Duration(s.Median*10) * time.Second / 10).String())
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if !*perEvent {
		return nil
	}
	fmt.Fprintln(w)
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "EVENT\tSUBMITTED\tOPEN\tSKIPPED\tCLASSES")
	for _, e := range p.Events {
		fmt.Fprintf(tw, "%s\t%d/%d\t%d\t%d\t%s\n", scan.CleanText(e.EventID), e.Submitted, e.Wanted, e.Open, e.Skipped, scan.CleanText(strings.Join(e.Classes, " ")))
	}
	return tw.Flush()
}
