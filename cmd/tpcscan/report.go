package main

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"time"

	"github.com/tpcscan/tpcscan/ui/report"
)

func reportCommand() command {
	return command{
		name:    "report",
		summary: "write an HTML report of a campaign: agreement, efficiency, consensus, selection, time",
		run: func(ctx context.Context, env *environ, args []string) error {
			fs := newFlags(env, "report", "--db FILE --out DIR [flags]",
				"Writes DIR/index.html: one self-contained page (inline SVG, no scripts) with confusion\n"+
					"matrices, Cohen's kappa per scanner pair with bootstrap intervals, scanning efficiency\n"+
					"per scanner (capture–recapture), the selection's efficiency and purity against the score\n"+
					"threshold, and time per event per scanner. Each figure states its definition and method.")
			db := fs.String("db", "", "campaign database: an SQLite `FILE` or a postgres:// URL (required)")
			name := fs.String("campaign", "", "campaign `NAME` (may be left out when there is only one)")
			out := fs.String("out", "", "output `DIR` (created if needed; index.html is replaced)")
			absent := fs.String("absent", "cosmic,none", "classes meaning no interaction, for scanning efficiency (empty: skip)")
			signal := fs.String("signal", "", "selection signal classes `A,B,...` (default: the class the selection calls most)")
			cl := fs.Float64("cl", 0.95, "confidence level of every interval")
			boot := fs.Int("bootstrap", 1000, "bootstrap resamples for the kappa intervals (0 = none)")
			seed := fs.Uint64("seed", 1, "bootstrap seed")
			if err := fs.Parse(args); err != nil {
				return err
			}
			if *db == "" || *out == "" {
				return usageError{"report needs --db and --out"}
			}
			if err := checkCL(*cl); err != nil {
				return err
			}
			st, c, err := openCampaign(ctx, *db, *name)
			if err != nil {
				return err
			}
			defer st.Close()
			in := report.Input{Campaign: c, Absent: splitList(*absent), Signal: splitList(*signal),
				CL: *cl, Bootstrap: max(0, *boot), Seed: *seed, Generated: time.Now()}
			if in.Passes, err = campaignPasses(ctx, st, c.ID); err != nil {
				return err
			}
			if in.Events, err = st.Events(ctx, c.ID); err != nil {
				return fmt.Errorf("read events: %w", err)
			}
			if in.Consensus, err = st.Consensus(ctx, c.ID, ""); err != nil {
				return fmt.Errorf("read consensus: %w", err)
			}
			rep, err := report.Build(ctx, in)
			if err != nil {
				return err
			}
			path, err := writeReport(*out, rep)
			if err != nil {
				return err
			}
			fmt.Fprintf(env.stdout, "report: %s (%d figures)\n", path, len(rep.Figures))
			return nil
		},
	}
}

// writeReport writes DIR/index.html through a temporary file, so that a
// reader never sees half a page.
func writeReport(dir string, rep *report.Report) (string, error) {
	var buf bytes.Buffer
	if err := rep.WriteHTML(&buf); err != nil {
		return "", err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return "", fmt.Errorf("report: %w", err)
	}
	path := filepath.Join(dir, "index.html")
	tmp, err := os.CreateTemp(dir, ".index-*.html")
	if err != nil {
		return "", fmt.Errorf("report: %w", err)
	}
	defer os.Remove(tmp.Name())
	if _, err := tmp.Write(buf.Bytes()); err != nil {
		tmp.Close()
		return "", fmt.Errorf("write %s: %w", path, err)
	}
	if err := tmp.Close(); err != nil {
		return "", fmt.Errorf("write %s: %w", path, err)
	}
	if err := os.Chmod(tmp.Name(), 0o644); err != nil {
		return "", fmt.Errorf("write %s: %w", path, err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return "", fmt.Errorf("write %s: %w", path, err)
	}
	return path, nil
}
