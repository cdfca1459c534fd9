package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/agree"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/backend"
)

// labelFlags are the input flags shared by agree, efficiency, consensus
// and validate: a labels CSV or a campaign in a store.
type labelFlags struct {
	labels, db, campaign string
	json                 bool
}

func addLabelFlags(fs *flag.FlagSet) *labelFlags {
	f := &labelFlags{}
	fs.StringVar(&f.labels, "labels", "", "labels CSV `FILE` with header item,rater,label[,time]; an empty label or absent row is a missing rating")
	fs.StringVar(&f.db, "db", "", "campaign database: an SQLite `FILE` or a postgres:// URL")
	fs.StringVar(&f.campaign, "campaign", "", "campaign `NAME` in the database (may be left out when there is only one)")
	fs.BoolVar(&f.json, "json", false, "print JSON for scripts instead of tables")
	return f
}

// labelSet is what a command reads: ratings, and for a campaign its store
// and passes.
type labelSet struct {
	ratings  []agree.Rating
	seconds  map[string][]float64 // rater → seconds per rated item, where known
	order    []string             // display order of the classes (the schema's, for a campaign)
	st       store.Store          // nil for a CSV
	campaign scan.Campaign
	passes   []scan.Pass
}

func (l *labelSet) Close() {
	if l.st != nil {
		l.st.Close()
	}
}

func (f *labelFlags) load(ctx context.Context) (*labelSet, error) {
	switch {
	case (f.labels == "") == (f.db == ""):
		return nil, usageError{"give exactly one of --labels FILE.csv or --db FILE"}
	case f.labels != "":
		return loadLabelsCSV(f.labels)
	}
	st, c, err := openCampaign(ctx, f.db, f.campaign)
	if err != nil {
		return nil, err
	}
	passes, err := campaignPasses(ctx, st, c.ID)
	if err != nil {
		st.Close()
		return nil, err
	}
	ls := &labelSet{st: st, campaign: c, passes: passes, ratings: agree.PassRatings(passes), seconds: map[string][]float64{}}
	ls.order = agree.ClassOrder(c.Schema, ls.ratings)
	for _, p := range passes {
		if p.State == scan.PassSubmitted {
			ls.seconds[p.Scanner] = append(ls.seconds[p.Scanner], p.Seconds)
		}
	}
	if len(ls.ratings) == 0 {
		ls.Close()
		return nil, fmt.Errorf("campaign %q has no submitted labels yet", c.Name)
	}
	return ls, nil
}

func loadLabelsCSV(path string) (*labelSet, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("read labels: %w", err)
	}
	defer fh.Close()
	rs, err := agree.ReadRatingsCSV(fh, path)
	if err != nil {
		return nil, err
	}
	ls := &labelSet{ratings: agree.Ratings(rs), seconds: map[string][]float64{}}
	for _, r := range rs {
		if !math.IsNaN(r.Seconds) && r.Label != "" {
			ls.seconds[r.Rater] = append(ls.seconds[r.Rater], r.Seconds)
		}
	}
	return ls, nil
}

// openCampaign opens a store and finds the campaign by name, or the only
// one when name is empty.
func openCampaign(ctx context.Context, dsn, name string) (store.Store, scan.Campaign, error) {
	st, err := backend.Open(ctx, dsn)
	if err != nil {
		return nil, scan.Campaign{}, err
	}
	c, err := findCampaign(ctx, st, name)
	if err != nil {
		st.Close()
		return nil, scan.Campaign{}, fmt.Errorf("%s: %w", backend.Redact(dsn), err)
	}
	return st, c, nil
}

func findCampaign(ctx context.Context, st store.Store, name string) (scan.Campaign, error) {
	if name != "" {
		c, err := st.CampaignByName(ctx, name)
		if err != nil {
			return c, fmt.Errorf("campaign %q: %w", name, err)
		}
		return c, nil
	}
	cs, err := st.Campaigns(ctx)
	if err != nil {
		return scan.Campaign{}, fmt.Errorf("list campaigns: %w", err)
	}
	switch len(cs) {
	case 0:
		return scan.Campaign{}, errors.New("no campaign in the database")
	case 1:
		return cs[0], nil
	}
	var names []string
	for _, c := range cs {
		names = append(names, scan.CleanText(c.Name))
	}
	return scan.Campaign{}, usageError{fmt.Sprintf("the database holds %d campaigns (%s): choose one with --campaign", len(cs), strings.Join(names, ", "))}
}

// campaignPasses returns the passes with, for a pass reopened as a draft
// after being submitted, its last submitted revision: a scanner's answer
// stands until they submit a new one.
func campaignPasses(ctx context.Context, st store.Store, id int64) ([]scan.Pass, error) {
	ps, err := st.Passes(ctx, id)
	if err != nil {
		return nil, fmt.Errorf("read passes: %w", err)
	}
	c, err := st.Campaign(ctx, id)
	if err != nil {
		return nil, fmt.Errorf("read campaign: %w", err)
	}
	if c.Mode == scan.ModeVerify {
		if err := verdictClasses(ctx, st, id, ps); err != nil {
			return nil, err
		}
	}
	for i, p := range ps {
		if p.State != scan.PassDraft || p.Revisions < 2 {
			continue
		}
		revs, err := st.Revisions(ctx, p.ID)
		if err != nil {
			return nil, fmt.Errorf("read revisions of pass %d: %w", p.ID, err)
		}
		for j := len(revs) - 1; j >= 0; j-- {
			if revs[j].State == scan.PassSubmitted {
				ps[i].State, ps[i].Label = scan.PassSubmitted, revs[j].Label
				break
			}
		}
	}
	return ps, nil
}

// verdictClasses gives each "agree" verdict of a verify campaign the
// selection's class it agreed with, so that every submitted pass rates a
// class.
func verdictClasses(ctx context.Context, st store.Store, id int64, ps []scan.Pass) error {
	evs, err := st.Events(ctx, id)
	if err != nil {
		return fmt.Errorf("read events: %w", err)
	}
	sel := map[string]string{}
	for _, e := range evs {
		if e.Selection != nil {
			sel[e.EventID] = e.Selection.Class
		}
	}
	for i, p := range ps {
		if p.Label.Verdict == "agree" && p.Label.Class == "" {
			ps[i].Label.Class = sel[p.EventID]
		}
	}
	return nil
}

func splitList(s string) []string {
	var out []string
	for _, f := range strings.Split(s, ",") {
		if f = strings.TrimSpace(f); f != "" {
			out = append(out, f)
		}
	}
	return out
}

// num is a float64 that marshals NaN and ±Inf as null: an undefined
// statistic, never a made-up 0 or 1.
type num float64

func (n num) MarshalJSON() ([]byte, error) {
	f := float64(n)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, f, 'g', -1, 64), nil
}

func nums(v []float64) []num {
	out := make([]num, len(v))
	for i, x := range v {
		out[i] = num(x)
	}
	return out
}

func matrix(m [][]float64) [][]num {
	out := make([][]num, len(m))
	for i := range m {
		out[i] = nums(m[i])
	}
	return out
}

func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

// f3 prints a statistic with three decimals, or "undefined".
func f3(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "undefined"
	}
	return strconv.FormatFloat(v, 'f', 3, 64)
}

func ci3(lo, hi float64) string {
	if math.IsNaN(lo) || math.IsNaN(hi) {
		return "–"
	}
	return "[" + f3(lo) + ", " + f3(hi) + "]"
}

func newTab(w io.Writer) *tabwriter.Writer { return tabwriter.NewWriter(w, 0, 0, 2, ' ', 0) }

func checkCL(cl float64) error {
	if !(cl > 0 && cl < 1) {
		return usageError{fmt.Sprintf("--cl %g: the confidence level must lie between 0 and 1 (e.g. 0.95, or 0.6827 for ±1σ)", cl)}
	}
	return nil
}

// ---- agree ----

func agreeCommand() command {
	return command{
		name:    "agree",
		summary: "agreement between scanners: percent agreement, Cohen's and Fleiss' kappa, Krippendorff's alpha",
		run: func(ctx context.Context, env *environ, args []string) error {
			fs := newFlags(env, "agree", "(--labels FILE.csv | --db FILE) [flags]",
				"Cohen's kappa for every pair of scanners (with --weights, also weighted kappa over the\n"+
					"--order scale), Fleiss' kappa (only when every event has the same number of labels),\n"+
					"Krippendorff's alpha (any missing pattern) and percent agreement. With --bootstrap N,\n"+
					"percentile intervals from N resamples of the events. Kappa depends on prevalence, and\n"+
					"agreement scales (\"substantial\", ...) are conventions, not tests.")
			src := addLabelFlags(fs)
			weights := fs.String("weights", "none", "weighted kappa: none, linear or quadratic (needs an ordered scale)")
			order := fs.String("order", "", "ordered scale `A,B,...`, lowest first; every level counts even if unused")
			metric := fs.String("metric", "nominal", "Krippendorff's alpha metric: nominal, ordinal, interval or ratio (interval and ratio need numeric labels)")
			field := fs.String("field", agree.FieldClass, "with --db, the label field: class, or confidence (ordinal in the schema's order)")
			boot := fs.Int("bootstrap", 0, "bootstrap resamples for intervals (0 = none; 1000 is usual)")
			seed := fs.Uint64("seed", 1, "bootstrap seed: the same seed gives the same intervals")
			cl := fs.Float64("cl", 0.95, "confidence level of the bootstrap intervals")
			if err := fs.Parse(args); err != nil {
				return err
			}
			if fs.NArg() > 0 {
				return usageError{"agree takes no arguments, only flags"}
			}
			w, err := agree.ParseWeighting(*weights)
			if err != nil {
				return usageError{err.Error()}
			}
			m, err := agree.ParseMetric(*metric)
			if err != nil {
				return usageError{err.Error()}
			}
			if err := checkCL(*cl); err != nil {
				return err
			}
			if *boot < 0 {
				return usageError{"--bootstrap must be 0 or more"}
			}
			if *field != agree.FieldClass && src.db == "" {
				return usageError{"--field needs --db (a labels CSV has one label column)"}
			}
			ls, err := src.load(ctx)
			if err != nil {
				return err
			}
			defer ls.Close()
			ord := splitList(*order)
			if *field == agree.FieldConfidence {
				if ls.ratings, err = agree.PassFieldRatings(ls.passes, *field); err != nil {
					return err
				}
				if len(ls.ratings) == 0 {
					return fmt.Errorf("campaign %q has no submitted confidence levels", scan.CleanText(ls.campaign.Name))
				}
				if len(ord) == 0 { // the schema declares the scale, lowest first
					for _, c := range ls.campaign.Schema.Confidence {
						ord = append(ord, c.Key)
					}
				}
			} else if *field != agree.FieldClass {
				return usageError{fmt.Sprintf("unknown --field %q (want class or confidence)", *field)}
			}
			return runAgree(ctx, env, ls, src.json, agreeArgs{agree.Options{Weights: w, Metric: m}, ord, *boot, *seed, *cl})
		},
	}
}

type agreeArgs struct {
	opt   agree.Options
	order []string
	boot  int
	seed  uint64
	cl    float64
}

func runAgree(ctx context.Context, env *environ, ls *labelSet, asJSON bool, a agreeArgs) error {
	order := a.order
	if len(order) == 0 {
		order = ls.order // a campaign's schema order: for display only
	}
	tab, err := agree.NewTable(ls.ratings, order)
	if err != nil {
		return err
	}
	ordered := len(a.order) > 0 || tab.Numeric()
	if !ordered && (a.opt.Weights != agree.Unweighted || a.opt.Metric == agree.Ordinal) {
		return usageError{"weighted kappa and the ordinal metric need an ordered scale: give --order A,B,... (or use numeric labels)"}
	}
	res, err := agree.Agree(tab, a.opt)
	if err != nil {
		return err
	}
	var ci *agree.AgreementCIs
	if a.boot > 0 {
		bar := newProgress(env, "bootstrap", a.boot)
		c, err := agree.BootstrapProgress(ctx, tab, a.opt, a.boot, a.seed, a.cl, func(int, int) { bar.Step(1) })
		bar.Finish()
		if err != nil {
			return err
		}
		ci = &c
	}
	var spatial []agree.SpatialPair
	if ls.passes != nil {
		spatial = agree.Spatial(agree.PassLabels(ls.passes), tab.Raters)
	}
	if asJSON {
		out := agreeJSON(res, ci, a)
		for _, sp := range spatial {
			out.Spatial = append(out.Spatial, spatialJSON{sp.A, sp.B, sp.Boxes, num(sp.MeanIoU), num(sp.MedianIoU),
				sp.Vertices, num(sp.MeanVertexCm), num(sp.MedianCm)})
		}
		out.MedianSeconds = medianSeconds(ls.seconds)
		return writeJSON(env.stdout, out)
	}
	printAgree(env.stdout, res, ci)
	printSpatial(env.stdout, spatial)
	if ms := medianSeconds(ls.seconds); len(ms) > 0 {
		fmt.Fprintln(env.stdout)
		tw := newTab(env.stdout)
		fmt.Fprintln(tw, "scanner\tmedian seconds per event")
		for _, r := range res.Raters {
			if v, ok := ms[r]; ok {
				fmt.Fprintf(tw, "%s\t%s\n", scan.CleanText(r), f1(float64(v)))
			}
		}
		tw.Flush()
	}
	return nil
}

// medianSeconds is each rater's median time per rated item, where known.
func medianSeconds(by map[string][]float64) map[string]num {
	out := map[string]num{}
	for r, v := range by {
		if len(v) == 0 {
			continue
		}
		s := slices.Sorted(slices.Values(v))
		m := s[len(s)/2]
		if len(s)%2 == 0 {
			m = (s[len(s)/2-1] + s[len(s)/2]) / 2
		}
		out[r] = num(m)
	}
	return out
}

// spatialJSON is where two scanners' marks agree: box IoU per (event,
// plane) where both drew a box, 3-D vertex distance where both vertices
// triangulated.
type spatialJSON struct {
	A              string `json:"a"`
	B              string `json:"b"`
	Boxes          int    `json:"boxes"`
	MeanIoU        num    `json:"mean_iou"`
	MedianIoU      num    `json:"median_iou"`
	Vertices       int    `json:"vertices"`
	MeanVertexCm   num    `json:"mean_vertex_distance_cm"`
	MedianVertexCm num    `json:"median_vertex_distance_cm"`
}

func printSpatial(w io.Writer, sp []agree.SpatialPair) {
	found := false
	for _, p := range sp {
		found = found || p.Boxes > 0 || p.Vertices > 0
	}
	if !found {
		return
	}
	fmt.Fprintln(w)
	tw := newTab(w)
	fmt.Fprintln(tw, "scanner A\tscanner B\tboxes\tmean IoU\tmedian IoU\tvertices\tmean distance (cm)\tmedian (cm)")
	for _, p := range sp {
		fmt.Fprintf(tw, "%s\t%s\t%d\t%s\t%s\t%d\t%s\t%s\n", scan.CleanText(p.A), scan.CleanText(p.B), p.Boxes,
			f3(p.MeanIoU), f3(p.MedianIoU), p.Vertices, f1(p.MeanVertexCm), f1(p.MedianCm))
	}
	tw.Flush()
}

type pairJSON struct {
	A                string `json:"a"`
	B                string `json:"b"`
	Items            int    `json:"items"`
	PercentAgreement num    `json:"percent_agreement"`
	CohenKappa       num    `json:"cohen_kappa"`
	WeightedKappa    *num   `json:"weighted_kappa,omitempty"`
	CohenKappaCI     []num  `json:"cohen_kappa_ci,omitempty"`
	WeightedKappaCI  []num  `json:"weighted_kappa_ci,omitempty"`
}

type agreeOut struct {
	Items             int              `json:"items"`
	Raters            []string         `json:"raters"`
	Categories        []string         `json:"categories"`
	Metric            string           `json:"metric"`
	Weights           string           `json:"weights,omitempty"`
	PercentAgreement  num              `json:"percent_agreement"`
	PerCategory       map[string]num   `json:"per_category_agreement"`
	Pairwise          []pairJSON       `json:"pairwise"`
	FleissKappa       num              `json:"fleiss_kappa"`
	KrippendorffAlpha num              `json:"krippendorff_alpha"`
	Bootstrap         *bootstrapJSON   `json:"bootstrap,omitempty"`
	Intervals         map[string][]num `json:"intervals,omitempty"`
	Spatial           []spatialJSON    `json:"spatial,omitempty"`
	MedianSeconds     map[string]num   `json:"median_seconds_per_item,omitempty"`
}

type bootstrapJSON struct {
	Resamples int     `json:"resamples"`
	Seed      uint64  `json:"seed"`
	CL        float64 `json:"cl"`
}

func agreeJSON(res agree.Agreement, ci *agree.AgreementCIs, a agreeArgs) agreeOut {
	out := agreeOut{Items: res.Items, Raters: res.Raters, Categories: res.Categories, Metric: string(res.Metric),
		Weights: string(res.Weights), PercentAgreement: num(res.PercentAgreement),
		PerCategory: map[string]num{}, FleissKappa: num(res.Fleiss), KrippendorffAlpha: num(res.Alpha)}
	for c, v := range res.PerCategory {
		out.PerCategory[res.Categories[c]] = num(v)
	}
	for i, p := range res.Pairs {
		pj := pairJSON{A: p.A, B: p.B, Items: p.Items, PercentAgreement: num(p.PercentAgreement), CohenKappa: num(p.Kappa)}
		if res.Weights != agree.Unweighted {
			wk := num(p.WeightedKappa)
			pj.WeightedKappa = &wk
		}
		if ci != nil {
			pj.CohenKappaCI = []num{num(ci.Kappa[i].Low), num(ci.Kappa[i].High)}
			if res.Weights != agree.Unweighted {
				pj.WeightedKappaCI = []num{num(ci.WeightedKappa[i].Low), num(ci.WeightedKappa[i].High)}
			}
		}
		out.Pairwise = append(out.Pairwise, pj)
	}
	if ci != nil {
		out.Bootstrap = &bootstrapJSON{ci.Resamples, a.seed, ci.CL}
		out.Intervals = map[string][]num{
			"percent_agreement":  {num(ci.PercentAgreement.Low), num(ci.PercentAgreement.High)},
			"fleiss_kappa":       {num(ci.Fleiss.Low), num(ci.Fleiss.High)},
			"krippendorff_alpha": {num(ci.Alpha.Low), num(ci.Alpha.High)},
		}
	}
	return out
}

func printAgree(w io.Writer, res agree.Agreement, ci *agree.AgreementCIs) {
	pick := func(c agree.CI) string {
		if ci == nil {
			return ""
		}
		return "  " + ci3(c.Low, c.High)
	}
	var pc, fc, ac agree.CI
	fmt.Fprintf(w, "%d events, %d scanners, %d categories\n", res.Items, len(res.Raters), len(res.Categories))
	if ci != nil {
		fmt.Fprintf(w, "intervals: %.0f%% percentile bootstrap, %d resamples of the events\n", 100*ci.CL, ci.Resamples)
		pc, fc, ac = ci.PercentAgreement, ci.Fleiss, ci.Alpha
	}
	fmt.Fprintln(w)
	tw := newTab(w)
	fmt.Fprintf(tw, "percent agreement\t%s%s\n", f3(res.PercentAgreement), pick(pc))
	fleissNote := ""
	if math.IsNaN(res.Fleiss) {
		fleissNote = "  (needs the same number of labels on every event)"
	}
	fmt.Fprintf(tw, "Fleiss' kappa\t%s%s%s\n", f3(res.Fleiss), pick(fc), fleissNote)
	fmt.Fprintf(tw, "Krippendorff's alpha (%s)\t%s%s\n", res.Metric, f3(res.Alpha), pick(ac))
	tw.Flush()
	fmt.Fprintln(w)
	tw = newTab(w)
	hdr := "scanner A\tscanner B\tevents\tagreement\tCohen's kappa"
	if ci != nil {
		hdr += "\tinterval"
	}
	if res.Weights != agree.Unweighted {
		hdr += "\t" + string(res.Weights) + " kappa"
		if ci != nil {
			hdr += "\tinterval"
		}
	}
	fmt.Fprintln(tw, hdr)
	for i, p := range res.Pairs {
		row := fmt.Sprintf("%s\t%s\t%d\t%s\t%s", scan.CleanText(p.A), scan.CleanText(p.B), p.Items, f3(p.PercentAgreement), f3(p.Kappa))
		if ci != nil {
			row += "\t" + ci3(ci.Kappa[i].Low, ci.Kappa[i].High)
		}
		if res.Weights != agree.Unweighted {
			row += "\t" + f3(p.WeightedKappa)
			if ci != nil {
				row += "\t" + ci3(ci.WeightedKappa[i].Low, ci.WeightedKappa[i].High)
			}
		}
		fmt.Fprintln(tw, row)
	}
	tw.Flush()
	fmt.Fprintln(w)
	tw = newTab(w)
	fmt.Fprintln(tw, "category\tspecific agreement")
	for c, v := range res.PerCategory {
		fmt.Fprintf(tw, "%s\t%s\n", scan.CleanText(res.Categories[c]), f3(v))
	}
	tw.Flush()
}

// ---- efficiency ----

func efficiencyCommand() command {
	return command{
		name:    "efficiency",
		summary: "scanning efficiency from double scanning (Lincoln–Petersen and Chapman capture–recapture)",
		run: func(ctx context.Context, env *environ, args []string) error {
			fs := newFlags(env, "efficiency", "(--labels FILE.csv | --db FILE) --absent LABEL,... [flags]",
				"For each pair of scanners, over the events both looked at: A found n1 interactions, B\n"+
					"found n2, both found m. Scanner A's efficiency is m/n2 (B's is m/n1) with a binomial\n"+
					"interval on m of n2; the true number is estimated by Lincoln–Petersen n1·n2/m and\n"+
					"Chapman (n1+1)(n2+1)/(m+1) − 1 with Seber's standard error. Assumes the scanners find\n"+
					"interactions independently: correlated misses bias the number low and efficiencies high.")
			src := addLabelFlags(fs)
			absent := fs.String("absent", "", "labels that mean \"no interaction found\", `LABEL,...` (required)")
			cl := fs.Float64("cl", 0.95, "confidence level of the efficiency intervals")
			interval := fs.String("interval", "clopper-pearson", "binomial interval: clopper-pearson or wilson")
			if err := fs.Parse(args); err != nil {
				return err
			}
			abs := splitList(*absent)
			if len(abs) == 0 {
				return usageError{"efficiency needs --absent LABEL,... (the labels meaning no interaction)"}
			}
			im, err := agree.ParseIntervalMethod(*interval)
			if err != nil {
				return usageError{err.Error()}
			}
			if err := checkCL(*cl); err != nil {
				return err
			}
			ls, err := src.load(ctx)
			if err != nil {
				return err
			}
			defer ls.Close()
			tab, err := agree.NewTable(ls.ratings, ls.order)
			if err != nil {
				return err
			}
			if len(tab.Raters) < 2 {
				return fmt.Errorf("efficiency needs at least two scanners; found %d", len(tab.Raters))
			}
			rec := agree.Efficiencies(tab, abs, *cl, im)
			if src.json {
				return writeJSON(env.stdout, efficiencyJSON(rec, *cl, im))
			}
			printEfficiency(env.stdout, rec, *cl, im)
			return nil
		},
	}
}

type effPairJSON struct {
	A                  string `json:"a"`
	B                  string `json:"b"`
	Events             int    `json:"events"`
	FoundA             int    `json:"found_a"`
	FoundB             int    `json:"found_b"`
	FoundBoth          int    `json:"found_both"`
	LincolnPetersen    num    `json:"lincoln_petersen"`
	Chapman            num    `json:"chapman"`
	ChapmanSE          num    `json:"chapman_se"`
	EfficiencyA        num    `json:"efficiency_a"`
	EfficiencyAInt     []num  `json:"efficiency_a_interval"`
	EfficiencyB        num    `json:"efficiency_b"`
	EfficiencyBInt     []num  `json:"efficiency_b_interval"`
	EfficiencyCombined num    `json:"efficiency_combined"`
}

func efficiencyJSON(rec []agree.Recapture, cl float64, im agree.IntervalMethod) any {
	pairs := []effPairJSON{}
	for _, r := range rec {
		pairs = append(pairs, effPairJSON{A: r.A, B: r.B, Events: r.Events, FoundA: r.N1, FoundB: r.N2, FoundBoth: r.M,
			LincolnPetersen: num(r.LincolnPetersen), Chapman: num(r.Chapman), ChapmanSE: num(r.ChapmanSE),
			EfficiencyA: num(r.EffA.Value), EfficiencyAInt: []num{num(r.EffA.Low), num(r.EffA.High)},
			EfficiencyB: num(r.EffB.Value), EfficiencyBInt: []num{num(r.EffB.Low), num(r.EffB.High)},
			EfficiencyCombined: num(r.Combined)})
	}
	return struct {
		CL       float64       `json:"cl"`
		Interval string        `json:"interval"`
		Pairs    []effPairJSON `json:"pairs"`
	}{cl, string(im), pairs}
}

func printEfficiency(w io.Writer, rec []agree.Recapture, cl float64, im agree.IntervalMethod) {
	fmt.Fprintf(w, "scanning efficiency from double scanning; %s intervals at %g%%\n", im, 100*cl)
	fmt.Fprintln(w, "assumes independent finding: correlated misses bias N low and efficiencies high")
	fmt.Fprintln(w)
	tw := newTab(w)
	fmt.Fprintln(tw, "A\tB\tevents\tfound A\tfound B\tboth\tN (L–P)\tN (Chapman)\tefficiency A\tefficiency B\tcombined")
	for _, r := range rec {
		fmt.Fprintf(tw, "%s\t%s\t%d\t%d\t%d\t%d\t%s\t%s ± %s\t%s %s\t%s %s\t%s\n",
			scan.CleanText(r.A), scan.CleanText(r.B), r.Events, r.N1, r.N2, r.M,
			f1(r.LincolnPetersen), f1(r.Chapman), f1(r.ChapmanSE),
			f3(r.EffA.Value), ci3(r.EffA.Low, r.EffA.High), f3(r.EffB.Value), ci3(r.EffB.Low, r.EffB.High), f3(r.Combined))
	}
	tw.Flush()
}

func f1(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "undefined"
	}
	return strconv.FormatFloat(v, 'f', 1, 64)
}

// ---- consensus ----

func consensusCommand() command {
	return command{
		name:    "consensus",
		summary: "consensus labels by majority vote or the Dawid–Skene model; with --db, stores them",
		run: func(ctx context.Context, env *environ, args []string) error {
			fs := newFlags(env, "consensus", "(--labels FILE.csv | --db FILE) [--method majority|dawid-skene] [flags]",
				"Majority vote: the most frequent class; ties go to the adjudication list. Dawid–Skene\n"+
					"(1979): maximum-likelihood per-scanner confusion matrices and class priors by EM, started\n"+
					"from the vote shares (deterministic). With --db the consensus is stored in the campaign.")
			src := addLabelFlags(fs)
			method := fs.String("method", agree.Majority, "majority or dawid-skene")
			all := fs.Bool("all", false, "list every event in the table output (default: the first 20)")
			dry := fs.Bool("dry-run", false, "with --db, compute but do not store")
			if err := fs.Parse(args); err != nil {
				return err
			}
			if *method != agree.Majority && *method != agree.DawidSkene {
				return usageError{fmt.Sprintf("unknown --method %q (want majority or dawid-skene)", *method)}
			}
			ls, err := src.load(ctx)
			if err != nil {
				return err
			}
			defer ls.Close()
			res, err := computeConsensus(ls.ratings, ls.order, *method)
			if err != nil {
				return err
			}
			stored := 0
			if ls.st != nil && !*dry {
				if stored, err = storeConsensus(ctx, ls.st, ls.campaign.ID, res); err != nil {
					return err
				}
			}
			if src.json {
				return writeJSON(env.stdout, consensusJSON(res, stored))
			}
			printConsensus(env.stdout, res, *all, stored, ls.st != nil && !*dry)
			return nil
		},
	}
}

func computeConsensus(rs []agree.Rating, order []string, method string) (agree.ConsensusResult, error) {
	tab, err := agree.NewTable(rs, order)
	if err != nil {
		return agree.ConsensusResult{}, err
	}
	if method == agree.DawidSkene {
		return agree.DawidSkeneEM(tab, agree.DSOptions{})
	}
	return agree.MajorityVote(tab), nil
}

func storeConsensus(ctx context.Context, st store.Store, id int64, res agree.ConsensusResult) (int, error) {
	now := time.Now().UTC()
	n := 0
	for _, it := range res.Items {
		if it.Label == agree.Missing {
			continue
		}
		c := scan.Consensus{CampaignID: id, EventID: it.Item, Method: res.Method,
			Label: scan.Label{Class: res.Categories[it.Label]}, Posterior: it.Posterior, By: "tpcscan consensus", At: now}
		if err := st.SetConsensus(ctx, c); err != nil {
			return n, fmt.Errorf("store consensus of event %s: %w", it.Item, err)
		}
		n++
	}
	return n, nil
}

type consensusItemJSON struct {
	Item      string  `json:"item"`
	Label     *string `json:"label"`
	Posterior num     `json:"posterior"`
}

type consensusRaterJSON struct {
	Rater     string  `json:"rater"`
	Accuracy  num     `json:"accuracy"`
	Confusion [][]num `json:"confusion"`
}

func consensusJSON(res agree.ConsensusResult, stored int) any {
	items := make([]consensusItemJSON, len(res.Items))
	for i, it := range res.Items {
		items[i] = consensusItemJSON{Item: it.Item, Posterior: num(it.Posterior)}
		if it.Label != agree.Missing {
			items[i].Label = &res.Categories[it.Label]
		}
	}
	raters := make([]consensusRaterJSON, len(res.Raters))
	for i, r := range res.Raters {
		raters[i] = consensusRaterJSON{r.Rater, num(r.Accuracy), matrix(r.Confusion)}
	}
	var converged *bool
	if res.Method == agree.DawidSkene {
		converged = &res.Converged
	}
	adj := res.Adjudicate
	if adj == nil {
		adj = []string{}
	}
	return struct {
		Method     string               `json:"method"`
		Categories []string             `json:"categories"`
		Priors     []num                `json:"priors,omitempty"`
		Iterations int                  `json:"iterations,omitempty"`
		Converged  *bool                `json:"converged,omitempty"`
		Items      []consensusItemJSON  `json:"items"`
		Raters     []consensusRaterJSON `json:"raters"`
		Adjudicate []string             `json:"adjudicate"`
		Stored     int                  `json:"stored"`
	}{res.Method, res.Categories, nums(res.Priors), res.Iterations, converged, items, raters, adj, stored}
}

func printConsensus(w io.Writer, res agree.ConsensusResult, all bool, stored int, toStore bool) {
	fmt.Fprintf(w, "consensus by %s: %d events, %d tied (to adjudicate)\n", res.Method, len(res.Items), len(res.Adjudicate))
	if res.Method == agree.DawidSkene {
		if res.Converged {
			fmt.Fprintf(w, "EM converged in %d iterations; class priors:", res.Iterations)
		} else {
			fmt.Fprintf(w, "warning: EM stopped after %d iterations without converging (last change %.2g); class priors:", res.Iterations, res.Change)
		}
		for c, p := range res.Priors {
			fmt.Fprintf(w, " %s %.3f", scan.CleanText(res.Categories[c]), p)
		}
		fmt.Fprintln(w)
		if len(res.Raters) < 3 {
			fmt.Fprintln(w, "note: with fewer than three scanners the Dawid–Skene model is poorly identified; prefer the majority vote")
		}
	}
	if toStore {
		fmt.Fprintf(w, "stored %d consensus labels in the campaign\n", stored)
	}
	fmt.Fprintln(w)
	tw := newTab(w)
	fmt.Fprintln(tw, "scanner\taccuracy\tconfusion (rows: consensus class; columns: scanner's answer)")
	cols := make([]string, len(res.Categories))
	for c, name := range res.Categories {
		cols[c] = scan.CleanText(name)
	}
	fmt.Fprintf(tw, "\t\t%s\n", strings.Join(cols, " | "))
	for _, r := range res.Raters {
		fmt.Fprintf(tw, "%s\t%s\t\n", scan.CleanText(r.Rater), f3(r.Accuracy))
		for c, row := range r.Confusion {
			cells := make([]string, len(row))
			for l, v := range row {
				cells[l] = f3(v)
			}
			fmt.Fprintf(tw, "\t%s\t%s\n", scan.CleanText(res.Categories[c]), strings.Join(cells, " "))
		}
	}
	tw.Flush()
	fmt.Fprintln(w)
	tw = newTab(w)
	fmt.Fprintln(tw, "event\tlabel\tposterior")
	for i, it := range res.Items {
		if !all && i == 20 {
			break
		}
		lab := "(tied)"
		if it.Label != agree.Missing {
			lab = res.Categories[it.Label]
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\n", scan.CleanText(it.Item), scan.CleanText(lab), f3(it.Posterior))
	}
	tw.Flush()
	if !all && len(res.Items) > 20 {
		fmt.Fprintf(w, "… %d more events (--all lists them, --json for scripts)\n", len(res.Items)-20)
	}
	if len(res.Adjudicate) > 0 {
		fmt.Fprintf(w, "\nto adjudicate (most contested first): %s\n", scan.CleanText(strings.Join(firstN(res.Adjudicate, 30), ", ")))
	}
}

func firstN(s []string, n int) []string {
	if len(s) <= n {
		return s
	}
	return append(s[:n:n], fmt.Sprintf("… %d more", len(s)-n))
}

// ---- validate ----

func validateCommand() command {
	return command{
		name:    "validate",
		summary: "efficiency and purity of an automated selection against the consensus, with intervals",
		run: func(ctx context.Context, env *environ, args []string) error {
			fs := newFlags(env, "validate", "(--db FILE | --labels FILE.csv) [--selection FILE.csv] --signal CLASS,... [flags]",
				"Efficiency = selected signal events / all signal events; purity = selected signal events /\n"+
					"all selected events, where signal means a consensus class in --signal. With --db the\n"+
					"consensus is the campaign's stored one (adjudication first), or its majority vote when\n"+
					"none is stored; with --labels it is the majority vote of the labels (ties left out).\n"+
					"The selection is --selection FILE.csv (header event,selected,class,score) or, with --db,\n"+
					"the campaign's own. Also per consensus class, and as curves over score thresholds.")
			src := addLabelFlags(fs)
			selPath := fs.String("selection", "", "selection CSV `FILE` (event,selected,class,score[,box columns])")
			signal := fs.String("signal", "", "signal classes `CLASS,...` (required)")
			cl := fs.Float64("cl", 0.95, "confidence level")
			interval := fs.String("interval", "clopper-pearson", "binomial interval: clopper-pearson or wilson")
			if err := fs.Parse(args); err != nil {
				return err
			}
			sig := splitList(*signal)
			if len(sig) == 0 {
				return usageError{"validate needs --signal CLASS,..."}
			}
			im, err := agree.ParseIntervalMethod(*interval)
			if err != nil {
				return usageError{err.Error()}
			}
			if err := checkCL(*cl); err != nil {
				return err
			}
			if *selPath == "" && src.db == "" {
				return usageError{"validate needs --selection FILE.csv (or --db, whose campaign holds the selection)"}
			}
			ls, err := src.load(ctx)
			if err != nil {
				return err
			}
			defer ls.Close()
			sel, err := loadSelection(ctx, ls, *selPath)
			if err != nil {
				return err
			}
			cons, method, err := validationConsensus(ctx, ls)
			if err != nil {
				return err
			}
			v, err := agree.Validate(sel, cons, sig, *cl, im)
			if err != nil {
				return err
			}
			if src.json {
				return writeJSON(env.stdout, validateJSON(v, method))
			}
			printValidation(env.stdout, v, method)
			return nil
		},
	}
}

func loadSelection(ctx context.Context, ls *labelSet, path string) ([]scan.Selection, error) {
	if path != "" {
		fh, err := os.Open(path)
		if err != nil {
			return nil, fmt.Errorf("read selection: %w", err)
		}
		defer fh.Close()
		return scan.ReadSelection(fh, path)
	}
	evs, err := ls.st.Events(ctx, ls.campaign.ID)
	if err != nil {
		return nil, fmt.Errorf("read events: %w", err)
	}
	var sel []scan.Selection
	for _, e := range evs {
		if e.Selection != nil {
			sel = append(sel, *e.Selection)
		}
	}
	if len(sel) == 0 {
		return nil, fmt.Errorf("campaign %q holds no selection output: give --selection FILE.csv", scan.CleanText(ls.campaign.Name))
	}
	return sel, nil
}

// validationConsensus is the stored consensus of a campaign, else the
// majority vote of the labels.
func validationConsensus(ctx context.Context, ls *labelSet) (map[string]string, string, error) {
	out := map[string]string{}
	if ls.st != nil {
		stored, err := ls.st.Consensus(ctx, ls.campaign.ID, "")
		if err != nil {
			return nil, "", fmt.Errorf("read consensus: %w", err)
		}
		methods := map[string]bool{}
		for _, c := range stored {
			if c.Label.Class != "" {
				out[c.EventID] = c.Label.Class
				methods[c.Method] = true
			}
		}
		if len(out) > 0 {
			names := make([]string, 0, len(methods))
			for m := range methods {
				names = append(names, m)
			}
			slices.Sort(names)
			return out, "stored " + strings.Join(names, "+"), nil
		}
	}
	res, err := computeConsensus(ls.ratings, ls.order, agree.Majority)
	if err != nil {
		return nil, "", err
	}
	for _, it := range res.Items {
		if it.Label != agree.Missing {
			out[it.Item] = res.Categories[it.Label]
		}
	}
	return out, agree.Majority, nil
}

type propJSON struct {
	K     int `json:"k"`
	N     int `json:"n"`
	Value num `json:"value"`
	Low   num `json:"low"`
	High  num `json:"high"`
}

func prop(p agree.Proportion) propJSON {
	return propJSON{p.K, p.N, num(p.Value), num(p.Low), num(p.High)}
}

func validateJSON(v agree.Validation, method string) any {
	type classJSON struct {
		Class    string   `json:"class"`
		Signal   bool     `json:"signal"`
		Selected propJSON `json:"selected"`
		Correct  propJSON `json:"class_call_correct"`
	}
	type pointJSON struct {
		Threshold  float64  `json:"threshold"`
		Efficiency propJSON `json:"efficiency"`
		Purity     propJSON `json:"purity"`
	}
	classes := []classJSON{}
	for _, c := range v.Classes {
		classes = append(classes, classJSON{c.Class, c.Signal, prop(c.Selected), prop(c.Correct)})
	}
	curve := []pointJSON{}
	for _, p := range v.Curve {
		curve = append(curve, pointJSON{p.Threshold, prop(p.Efficiency), prop(p.Purity)})
	}
	return struct {
		Consensus   string      `json:"consensus"`
		Signal      []string    `json:"signal"`
		CL          float64     `json:"cl"`
		Interval    string      `json:"interval"`
		Events      int         `json:"events"`
		NoConsensus int         `json:"events_without_consensus"`
		Efficiency  propJSON    `json:"efficiency"`
		Purity      propJSON    `json:"purity"`
		Classes     []classJSON `json:"classes"`
		Curve       []pointJSON `json:"curve"`
	}{method, v.Signal, v.CL, string(v.Method), v.Events, len(v.NoConsensus), prop(v.Efficiency), prop(v.Purity), classes, curve}
}

func printValidation(w io.Writer, v agree.Validation, method string) {
	fmt.Fprintf(w, "selection against the %s consensus; signal %s; %s intervals at %g%%\n",
		method, scan.CleanText(strings.Join(v.Signal, ", ")), v.Method, 100*v.CL)
	fmt.Fprintf(w, "%d events with a selection output and a consensus; %d without a consensus left out\n\n", v.Events, len(v.NoConsensus))
	tw := newTab(w)
	fmt.Fprintf(tw, "efficiency\t%s\t%d/%d\t%s\n", f3(v.Efficiency.Value), v.Efficiency.K, v.Efficiency.N, ci3(v.Efficiency.Low, v.Efficiency.High))
	fmt.Fprintf(tw, "purity\t%s\t%d/%d\t%s\n", f3(v.Purity.Value), v.Purity.K, v.Purity.N, ci3(v.Purity.Low, v.Purity.High))
	tw.Flush()
	fmt.Fprintln(w)
	tw = newTab(w)
	fmt.Fprintln(tw, "consensus class\tsignal\tselected\tfraction\tinterval\tcalled so, right\tinterval")
	for _, c := range v.Classes {
		s := ""
		if c.Signal {
			s = "yes"
		}
		fmt.Fprintf(tw, "%s\t%s\t%d/%d\t%s\t%s\t%d/%d\t%s\n", scan.CleanText(c.Class), s, c.Selected.K, c.Selected.N,
			f3(c.Selected.Value), ci3(c.Selected.Low, c.Selected.High), c.Correct.K, c.Correct.N, ci3(c.Correct.Low, c.Correct.High))
	}
	tw.Flush()
	fmt.Fprintln(w)
	tw = newTab(w)
	fmt.Fprintln(tw, "score ≥\tefficiency\tinterval\tpurity\tinterval")
	step := max(1, len(v.Curve)/10)
	for i, p := range v.Curve {
		if i%step != 0 && i != len(v.Curve)-1 {
			continue
		}
		fmt.Fprintf(tw, "%.4g\t%s\t%s\t%s\t%s\n", p.Threshold, f3(p.Efficiency.Value), ci3(p.Efficiency.Low, p.Efficiency.High),
			f3(p.Purity.Value), ci3(p.Purity.Low, p.Purity.High))
	}
	tw.Flush()
	fmt.Fprintf(w, "(%d thresholds in --json)\n", len(v.Curve))
}
