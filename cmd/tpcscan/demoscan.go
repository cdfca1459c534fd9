package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"hash/fnv"
	"maps"
	"math"
	"math/rand/v2"
	"slices"
	"strconv"
	"strings"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/agree"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/store"
)

func demoScanCommand() command {
	return command{
		name:    "demo-scan",
		summary: "fill a demo campaign with labels from simulated scanners of known efficiency and accuracy",
		run: func(ctx context.Context, env *environ, args []string) error {
			fs := newFlags(env, "demo-scan", "--db FILE --scanners NAME:EFF:ACC[:SECONDS],... [flags]",
				"Scans a campaign as if the named scanners had looked at every event they are assigned,\n"+
					"using the dataset's truth: a scanner finds a real interaction with probability EFF\n"+
					"(else answers the --absent class), names its class right with probability ACC (else\n"+
					"another interaction class at random), and spends a log-normal time with median SECONDS\n"+
					"(default 30). Events without an interaction are always answered --absent. For trying\n"+
					"out agree, efficiency, consensus and report on known answers; never on a real campaign.")
			db := fs.String("db", "", "campaign database: an SQLite `FILE` or a postgres:// URL (required)")
			name := fs.String("campaign", "", "campaign `NAME` (may be left out when there is only one)")
			dir := fs.String("dataset", "", "dataset `DIR` with truth (default: the campaign's dataset)")
			spec := fs.String("scanners", "", "simulated scanners `NAME:EFF:ACC[:SECONDS],...`, e.g. ana:0.95:0.9,ben:0.85:0.8 (required)")
			absent := fs.String("absent", "cosmic", "the class meaning no neutrino interaction")
			seed := fs.Uint64("seed", 1, "random seed: the same seed gives the same labels")
			if err := fs.Parse(args); err != nil {
				return err
			}
			if *db == "" || *spec == "" {
				return usageError{"demo-scan needs --db and --scanners"}
			}
			scanners, err := parseSimScanners(*spec)
			if err != nil {
				return usageError{err.Error()}
			}
			st, c, err := openCampaign(ctx, *db, *name)
			if err != nil {
				return err
			}
			defer st.Close()
			if *dir == "" {
				*dir = c.Dataset
			}
			truth, err := datasetTruth(*dir)
			if err != nil {
				return err
			}
			bar := newProgress(env, "scanning", 0)
			n, err := simulateScans(ctx, st, c, truth, scanners, *absent, *seed, func(done, total int) {
				bar.total = total
				bar.Step(1)
			})
			bar.Finish()
			if err != nil {
				return err
			}
			fmt.Fprintf(env.stdout, "demo-scan: %d passes submitted in campaign %q by %d simulated scanners\n", n, scan.CleanText(c.Name), len(scanners))
			return nil
		},
	}
}

// simScanner is one simulated scanner of the demo.
type simScanner struct {
	name          string
	eff, acc, sec float64
}

func parseSimScanners(s string) ([]simScanner, error) {
	var out []simScanner
	for _, f := range splitList(s) {
		parts := strings.Split(f, ":")
		if len(parts) < 3 || len(parts) > 4 {
			return nil, fmt.Errorf("scanner %q: want NAME:EFFICIENCY:ACCURACY[:SECONDS]", f)
		}
		sc := simScanner{name: parts[0], sec: 30}
		vals := []*float64{&sc.eff, &sc.acc, &sc.sec}
		for i, p := range parts[1:] {
			v, err := strconv.ParseFloat(p, 64)
			if err != nil || math.IsNaN(v) {
				return nil, fmt.Errorf("scanner %q: %q is not a number", f, p)
			}
			*vals[i] = v
		}
		if sc.name == "" || sc.eff < 0 || sc.eff > 1 || sc.acc < 0 || sc.acc > 1 || sc.sec <= 0 {
			return nil, fmt.Errorf("scanner %q: needs a name, efficiency and accuracy in [0, 1], seconds > 0", f)
		}
		if slices.ContainsFunc(out, func(o simScanner) bool { return o.name == sc.name }) {
			return nil, fmt.Errorf("scanner %q given twice", sc.name)
		}
		out = append(out, sc)
	}
	if len(out) == 0 {
		return nil, errors.New("no scanner given")
	}
	return out, nil
}

// datasetTruth reads the generator's class of every event with truth.
func datasetTruth(dir string) (map[string]string, error) {
	ds, err := dataset.Open(dir)
	if err != nil {
		return nil, err
	}
	truth := map[string]string{}
	for _, ev := range ds.Events() {
		raw, err := ds.TruthJSON(ev.ID)
		if errors.Is(err, dataset.ErrNoTruth) {
			continue
		}
		if err != nil {
			return nil, err
		}
		var t struct {
			Class string `json:"class"`
		}
		if err := json.Unmarshal(raw, &t); err != nil {
			return nil, fmt.Errorf("%s: truth of event %s: %w", dir, ev.ID, err)
		}
		if t.Class != "" {
			truth[ev.ID] = t.Class
		}
	}
	if len(truth) == 0 {
		return nil, fmt.Errorf("%s: no event has a truth class (demo-scan needs generated events)", dir)
	}
	return truth, nil
}

// simulateScans takes passes round-robin for each scanner until none has
// work left and submits simulated labels; it returns the passes submitted.
// Each answer depends only on (seed, scanner, event), not on the order.
// progress gets the passes done and the passes the campaign asks for at
// the start (adaptive rounds may add more).
func simulateScans(ctx context.Context, st store.Store, c scan.Campaign, truth map[string]string, scanners []simScanner, absent string, seed uint64, progress func(done, total int)) (int, error) {
	classes, err := truthClasses(c.Schema, truth)
	if err != nil {
		return 0, err
	}
	ab := slices.Index(classes, absent)
	raters := make([]agree.SimRater, len(scanners))
	for i, sc := range scanners {
		m, err := agree.ScannerConfusion(len(classes), ab, sc.eff, sc.acc)
		if err != nil {
			return 0, fmt.Errorf("scanner %s: %w", sc.name, err)
		}
		raters[i] = agree.SimRater{Name: sc.name, Coverage: 1, Confusion: m}
	}
	events, err := st.Events(ctx, c.ID)
	if err != nil {
		return 0, fmt.Errorf("read events: %w", err)
	}
	selection := map[string]*scan.Selection{}
	for _, e := range events {
		selection[e.EventID] = e.Selection
	}
	done := make([]bool, len(scanners))
	n := 0
	for slices.Contains(done, false) {
		for i, sc := range scanners {
			if done[i] {
				continue
			}
			p, err := st.NextPass(ctx, c.ID, sc.name)
			if errors.Is(err, store.ErrNoWork) {
				done[i] = true
				continue
			}
			if err != nil {
				return n, fmt.Errorf("next pass for %s: %w", sc.name, err)
			}
			k := slices.Index(classes, truth[p.EventID])
			if k < 0 {
				return n, fmt.Errorf("event %s has no truth class in the dataset", p.EventID)
			}
			rng := rand.New(rand.NewPCG(seed, hashKey(sc.name, p.EventID)))
			answer := classes[raters[i].Answer(k, rng.Float64())]
			rev := scan.Revision{State: scan.PassSubmitted, Seconds: sc.sec * math.Exp(0.5*rng.NormFloat64()),
				Label: simLabel(c, answer, answer == truth[p.EventID], selection[p.EventID])}
			if _, err := st.SaveRevision(ctx, p.ID, sc.name, rev); err != nil {
				return n, fmt.Errorf("submit %s's pass of event %s: %w", sc.name, p.EventID, err)
			}
			n++
			if progress != nil {
				progress(n, len(events)*min(c.PerEvent, len(scanners)))
			}
		}
	}
	return n, nil
}

// truthClasses lists the classes in the truth, in schema order; a truth
// class outside the schema could not be submitted.
func truthClasses(s scan.Schema, truth map[string]string) ([]string, error) {
	present := map[string]bool{}
	for _, v := range truth {
		present[v] = true
	}
	var out []string
	for _, ch := range s.Classes {
		if present[ch.Key] {
			out = append(out, ch.Key)
			delete(present, ch.Key)
		}
	}
	if len(present) > 0 {
		return nil, fmt.Errorf("truth classes %s are not in the campaign's schema %s", strings.Join(slices.Sorted(maps.Keys(present)), ", "), s.Name)
	}
	return out, nil
}

// simLabel is the label a simulated scanner submits: its class, a
// confidence (the highest level when right, the middle one when wrong) and,
// in a verify campaign, the verdict on the selection's class.
func simLabel(c scan.Campaign, class string, right bool, sel *scan.Selection) scan.Label {
	l := scan.Label{Class: class}
	if lv := c.Schema.Confidence; len(lv) > 0 {
		l.Confidence = lv[len(lv)-1].Key
		if !right {
			l.Confidence = lv[len(lv)/2].Key
		}
	}
	if c.Mode == scan.ModeVerify {
		l.Verdict = "disagree"
		if sel != nil && sel.Class == class {
			l.Verdict, l.Class = "agree", ""
		}
	}
	return l
}

func hashKey(parts ...string) uint64 {
	h := fnv.New64a()
	for _, p := range parts {
		h.Write([]byte(p))
		h.Write([]byte{0})
	}
	return h.Sum64()
}
