package main

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"strings"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/backend"
)

func migrateCommand() command {
	return command{
		name:    "migrate",
		summary: "copy campaigns from an SQLite file to a PostgreSQL server (or back), verified",
		run:     runMigrate,
	}
}

// migrateNames collects repeated -campaign flags.
type migrateNames []string

func (l *migrateNames) String() string     { return strings.Join(*l, ",") }
func (l *migrateNames) Set(s string) error { *l = append(*l, s); return nil }

func runMigrate(ctx context.Context, env *environ, args []string) error {
	fs := newFlags(env, "migrate", "--from FILE.db --to postgres://USER@HOST/DB [--campaign NAME]...",
		"Copies whole campaigns (events, passes with every revision, consensus labels and\n"+
			"adjudications, resume states) from one store to another, normally from the\n"+
			"SQLite file of a shift to the collaboration's PostgreSQL server (or back into a\n"+
			"fresh SQLite file, to take a campaign offline), then reads both stores back and\n"+
			"compares row counts and a SHA-256 checksum per table. A campaign already on the\n"+
			"destination is verified, not copied again, so running migrate twice duplicates\n"+
			"nothing. Each campaign is copied in one transaction.")
	from := fs.String("from", "", "source `STORE`: an SQLite file (or a postgres:// URL)")
	to := fs.String("to", "", "destination `STORE`: a postgres:// URL (or an SQLite file)")
	var only migrateNames
	fs.Var(&only, "campaign", "copy only the campaign of this `NAME` (repeatable; default: all)")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *from == "" || *to == "" || fs.NArg() > 0 {
		return usageError{"migrate needs --from and --to, and no other arguments"}
	}
	src, err := backend.Open(ctx, *from)
	if err != nil {
		return err
	}
	defer src.Close()
	dst, err := backend.Open(ctx, *to)
	if err != nil {
		return err
	}
	defer dst.Close()
	return migrate(ctx, env, src, dst, only)
}

// migrate copies and verifies every selected campaign of src into dst.
func migrate(ctx context.Context, env *environ, src, dst store.Store, only []string) error {
	dumper, ok := src.(store.Dumper)
	if !ok {
		return errors.New("migrate: the source store cannot export campaigns")
	}
	loader, ok := dst.(store.Loader)
	dstDumper, ok2 := dst.(store.Dumper)
	if !ok || !ok2 {
		return errors.New("migrate: the destination store cannot import campaigns")
	}
	cs, err := src.Campaigns(ctx)
	if err != nil {
		return fmt.Errorf("migrate: %w", err)
	}
	cs, err = pickCampaigns(cs, only)
	if err != nil {
		return err
	}
	bar := newProgress(env, "migrate", 2*len(cs))
	var errs []error
	var lines []string
	for _, c := range cs {
		line, err := migrateOne(ctx, dumper, loader, dstDumper, dst, c, bar)
		if err != nil {
			errs = append(errs, fmt.Errorf("campaign %q: %w", c.Name, err))
			continue
		}
		lines = append(lines, line)
	}
	bar.Finish()
	for _, l := range lines {
		fmt.Fprintln(env.stdout, l)
	}
	return errors.Join(errs...)
}

// pickCampaigns returns the campaigns named in only (all when only is empty).
func pickCampaigns(cs []scan.Campaign, only []string) ([]scan.Campaign, error) {
	if len(only) == 0 {
		return cs, nil
	}
	var out []scan.Campaign
	for _, name := range only {
		i := slices.IndexFunc(cs, func(c scan.Campaign) bool { return c.Name == name })
		if i < 0 {
			return nil, fmt.Errorf("migrate: no campaign %q in the source", name)
		}
		out = append(out, cs[i])
	}
	return out, nil
}

// migrateOne copies one campaign unless the destination has it already,
// then verifies the destination against the source; it returns a summary.
func migrateOne(ctx context.Context, src store.Dumper, load store.Loader, dstDump store.Dumper, dst store.Store,
	c scan.Campaign, bar *progress) (string, error) {
	d, err := src.Dump(ctx, c.ID)
	if err != nil {
		return "", err
	}
	want, err := d.Checksums()
	if err != nil {
		return "", err
	}
	verb := "copied"
	id, err := destCampaignID(ctx, dst, c.Name)
	if err != nil {
		return "", err
	}
	if id == 0 {
		if id, err = load.Load(ctx, d); err != nil {
			return "", err
		}
	} else {
		verb = "already there"
	}
	bar.Step(1)
	back, err := dstDump.Dump(ctx, id)
	if err != nil {
		return "", fmt.Errorf("read back: %w", err)
	}
	got, err := back.Checksums()
	if err != nil {
		return "", err
	}
	bar.Step(1)
	if diff := diffTableSums(want, got); diff != "" {
		if verb == "already there" {
			return "", fmt.Errorf("the destination holds a different campaign of that name (%s); "+
				"if the source changed since the last copy, remove the campaign from the destination and migrate again; nothing was written", diff)
		}
		return "", fmt.Errorf("verification failed after the copy (%s)", diff)
	}
	return migrateSummary(c.Name, verb, want), nil
}

// destCampaignID returns the ID of the destination's campaign of that name, or 0.
func destCampaignID(ctx context.Context, dst store.Store, name string) (int64, error) {
	c, err := dst.CampaignByName(ctx, name)
	if errors.Is(err, store.ErrNotFound) {
		return 0, nil
	}
	if err != nil {
		return 0, err
	}
	return c.ID, nil
}

// diffTableSums names the tables whose counts or checksums differ.
func diffTableSums(want, got []store.TableSum) string {
	var diffs []string
	for i := range want {
		w, g := want[i], got[i]
		switch {
		case w.Rows != g.Rows:
			diffs = append(diffs, fmt.Sprintf("%s: %d rows in the source, %d in the destination", w.Table, w.Rows, g.Rows))
		case w.Sum != g.Sum:
			diffs = append(diffs, fmt.Sprintf("%s: same %d rows, different contents", w.Table, w.Rows))
		}
	}
	return strings.Join(diffs, "; ")
}

func migrateSummary(name, verb string, sums []store.TableSum) string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s: %s, verified:", name, verb)
	for _, s := range sums {
		fmt.Fprintf(&b, " %s %d", s.Table, s.Rows)
	}
	return b.String()
}
