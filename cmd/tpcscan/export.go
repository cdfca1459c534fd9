package main

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"os"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/campaign"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/scan/detector"
	"github.com/tpcscan/tpcscan/store"
)

func exportCommand() command {
	return command{
		name:    "export",
		summary: "write a campaign's labels (or consensus) as JSON Lines or CSV, with pixel masks for training",
		run:     runExport,
	}
}

func runExport(ctx context.Context, env *environ, args []string) error {
	fs := newFlags(env, "export", "--db FILE [--campaign NAME] --format jsonl|csv [FLAGS]",
		"Writes every pass's latest label (or, with --consensus, each event's consensus label) with its\n"+
			"marks in wire/tick and cm, the schema and its version, the campaign, scanner, state and time.\n"+
			"With --masks DIR it also writes, per label and plane, a .npy array of particle codes per\n"+
			"wire/tick pixel: pixels above THRESHOLD × the plane's noise RMS within the ellipse of\n"+
			"WIRES × TICKS around a marked track get the track's particle code (DIR/masks.json lists the codes).")
	var (
		db        = fs.String("db", "", "campaign database: an SQLite `FILE` or a postgres:// URL")
		name      = fs.String("campaign", "", "campaign `NAME` (may be left out when there is only one)")
		format    = fs.String("format", "jsonl", "`FORMAT`: jsonl or csv")
		out       = fs.String("out", "", "output `FILE` (default: standard output)")
		consensus = fs.Bool("consensus", false, "export the consensus label of each event instead of every pass")
		method    = fs.String("method", "", "consensus `METHOD` (majority, dawid-skene, adjudication; default: adjudication where there is one, else the latest)")
		all       = fs.Bool("all", false, "include passes not submitted (assigned, drafts, skips)")
		masks     = fs.String("masks", "", "also write per-plane pixel-label .npy arrays into `DIR`")
		thr       = fs.Float64("mask-threshold", 3, "pixel charge threshold for masks, in `UNITS` of the plane's noise RMS (1.4826 × MAD)")
		mw        = fs.Float64("mask-wires", 2, "mask half-width across wires around a track, in `WIRES`")
		mt        = fs.Float64("mask-ticks", 6, "mask half-width along drift around a track, in `TICKS`")
	)
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *db == "" || fs.NArg() > 0 {
		return usageError{"export needs --db FILE (and no other arguments)"}
	}
	if *format != "jsonl" && *format != "csv" {
		return usageError{fmt.Sprintf("--format must be jsonl or csv, got %q", *format)}
	}
	opt := campaign.MaskOptions{Threshold: *thr, Wires: *mw, Ticks: *mt}
	if !(opt.Threshold >= 0) || !(opt.Wires > 0) || !(opt.Ticks > 0) {
		return usageError{"--mask-threshold must be ≥ 0 and --mask-wires, --mask-ticks > 0"}
	}
	st, c, err := openCampaign(ctx, *db, *name)
	if err != nil {
		return err
	}
	defer st.Close()
	ds, det := openCampaignDataset(env, c, *masks != "")
	if *masks != "" && ds == nil {
		return fmt.Errorf("masks need the campaign's dataset %s", c.Dataset)
	}
	recs, err := exportRecords(ctx, st, c, det, *consensus, *method, *all)
	if err != nil {
		return err
	}
	if err := writeExport(env, *out, *format, recs); err != nil {
		return err
	}
	if *masks == "" {
		return nil
	}
	bar := newProgress(env, "masks", 0)
	man, err := campaign.WriteMasks(*masks, recs, ds.Load, c.Schema, opt, func(done, total int) {
		bar.total = total
		bar.Step(1)
	})
	bar.Finish()
	if err != nil {
		return err
	}
	fmt.Fprintf(env.stderr, "wrote %d mask arrays and masks.json to %s\n", len(man.Files), *masks)
	return nil
}

// openCampaignDataset opens the campaign's dataset for its geometry. Without
// it the export has no cm coordinates, which is said on stderr.
func openCampaignDataset(env *environ, c scan.Campaign, required bool) (*dataset.Dataset, *detector.Detector) {
	ds, err := dataset.Open(c.Dataset)
	if err != nil {
		if !required {
			fmt.Fprintf(env.stderr, "tpcscan: dataset of campaign %q not readable (%v): cm coordinates left out\n", scan.CleanText(c.Name), err)
		}
		return nil, nil
	}
	return ds, ds.Detector()
}

func exportRecords(ctx context.Context, st store.Store, c scan.Campaign, det *detector.Detector, consensus bool, method string, all bool) ([]campaign.Record, error) {
	var recs []campaign.Record
	if consensus {
		cs, err := st.Consensus(ctx, c.ID, method)
		if err != nil {
			return nil, err
		}
		if len(cs) == 0 {
			return nil, fmt.Errorf("campaign %q has no consensus labels yet: run tpcscan consensus first", scan.CleanText(c.Name))
		}
		for _, x := range cs {
			recs = append(recs, campaign.ConsensusRecord(c, det, x))
		}
		return recs, nil
	}
	ps, err := st.Passes(ctx, c.ID)
	if err != nil {
		return nil, err
	}
	for _, p := range ps {
		if all || p.State == scan.PassSubmitted {
			recs = append(recs, campaign.PassRecord(c, det, p))
		}
	}
	return recs, nil
}

func writeExport(env *environ, path, format string, recs []campaign.Record) (err error) {
	var w io.Writer = env.stdout
	if path != "" {
		f, err := os.Create(path)
		if err != nil {
			return fmt.Errorf("export: %w", err)
		}
		defer func() {
			if cerr := f.Close(); err == nil && cerr != nil {
				err = fmt.Errorf("export: %w", cerr)
			}
		}()
		w = f
	}
	bw := bufio.NewWriter(w)
	if format == "csv" {
		err = campaign.WriteCSV(bw, recs)
	} else {
		err = campaign.WriteJSONL(bw, recs)
	}
	if err != nil {
		return fmt.Errorf("export: %w", err)
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("export: %w", err)
	}
	return nil
}
