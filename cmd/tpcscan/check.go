package main

import (
	"context"
	"fmt"
	"io"
	"strings"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/dataset"
)

func checkCommand() command {
	return command{
		name:    "check",
		summary: "validate a dataset and print a summary (events, planes, sizes, problems)",
		run: func(ctx context.Context, env *environ, args []string) error {
			fs := newFlags(env, "check", "DATASET", "Reads every event of the dataset folder and reports each problem with the file and event it is in.\nExits non-zero when any problem is found.")
			maxProblems := fs.Int("max-problems", 50, "list at most this many problems (all are counted)")
			if err := fs.Parse(args); err != nil {
				return err
			}
			if fs.NArg() != 1 {
				return usageError{"check needs one DATASET folder"}
			}
			return runCheck(ctx, env, fs.Arg(0), *maxProblems)
		},
	}
}

func runCheck(ctx context.Context, env *environ, dir string, maxProblems int) error {
	var bar *progress
	r := dataset.Check(ctx, dir, func(done, total int) {
		if bar == nil {
			bar = newProgress(env, "checking", total)
		}
		bar.Step(1)
	})
	if bar != nil {
		bar.Finish()
	}
	printReport(env.stdout, &r, maxProblems)
	if !r.OK() {
		return fmt.Errorf("check %s: %d problem%s", dir, len(r.Problems), plural(len(r.Problems)))
	}
	return nil
}

func printReport(w io.Writer, r *dataset.Report, maxProblems int) {
	fmt.Fprintf(w, "dataset   %s\n", r.Dir)
	if r.Detector != "" || len(r.Planes) > 0 {
		var ps []string
		for _, p := range r.Planes {
			ps = append(ps, fmt.Sprintf("%s %d wires", p.Role, p.Wires))
		}
		ticks := 0
		if len(r.Planes) > 0 {
			ticks = r.Planes[0].Ticks
		}
		fmt.Fprintf(w, "detector  %s: %s; %d readout ticks\n", scan.CleanText(r.Detector), strings.Join(ps, ", "), ticks)
	}
	if r.Detector == "" && r.Events == 0 {
		fmt.Fprintln(w, "manifest  not usable: see the problems")
		printProblems(w, r, maxProblems)
		return
	}
	var src []string
	for _, s := range r.SortedSources() {
		src = append(src, fmt.Sprintf("%d %s", r.Sources[s], s))
	}
	fmt.Fprintf(w, "events    %d (%s), %d read cleanly\n", r.Events, strings.Join(src, ", "), r.Loaded)
	fmt.Fprintf(w, "truth     %d with truth JSON, %d with pixel truth\n", r.Truth, r.PixelTruth)
	fmt.Fprintf(w, "size      %s on disk, %s plane samples\n", bytesString(r.Bytes), countString(r.Samples))
	printProblems(w, r, maxProblems)
}

func printProblems(w io.Writer, r *dataset.Report, maxProblems int) {
	if r.OK() {
		fmt.Fprintln(w, "problems  none")
		return
	}
	fmt.Fprintf(w, "problems  %d\n", len(r.Problems))
	for i, p := range r.Problems {
		if maxProblems > 0 && i == maxProblems {
			fmt.Fprintf(w, "  … and %d more\n", len(r.Problems)-i)
			break
		}
		fmt.Fprintf(w, "  %s\n", scan.CleanText(p.String()))
	}
}

func plural(n int) string {
	if n == 1 {
		return ""
	}
	return "s"
}

func bytesString(n int64) string {
	const unit = 1024
	if n < unit {
		return fmt.Sprintf("%d B", n)
	}
	f, u := float64(n), 0
	for f >= unit && u < 4 {
		f /= unit
		u++
	}
	return fmt.Sprintf("%.1f %ciB", f, "KMGT"[u-1])
}

func countString(n int64) string {
	switch {
	case n >= 1e9:
		return fmt.Sprintf("%.2f G", float64(n)/1e9)
	case n >= 1e6:
		return fmt.Sprintf("%.2f M", float64(n)/1e6)
	case n >= 1e3:
		return fmt.Sprintf("%.1f k", float64(n)/1e3)
	}
	return fmt.Sprint(n)
}
