// Package report builds the campaign report: one self-contained HTML page
// with inline SVG plots of agreement, scanning efficiency, consensus,
// selection efficiency and purity, and time spent, each with its
// definition, its published method and the usual cautions.
package report

import (
	"cmp"
	"context"
	"fmt"
	"html/template"
	"io"
	"maps"
	"math"
	"slices"
	"time"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/agree"
)

// Input is what the report is made from: a campaign as read from a store.
type Input struct {
	Campaign  scan.Campaign
	Passes    []scan.Pass // submitted passes carry the label that counts
	Events    []scan.CampaignEvent
	Consensus []scan.Consensus // stored consensus, latest per event; may be empty
	Absent    []string         // classes meaning "no interaction" (for efficiency)
	Signal    []string         // selection signal classes; empty = the selection's most called class
	CL        float64          // confidence level of every interval
	Bootstrap int              // resamples for the kappa intervals
	Seed      uint64
	Generated time.Time
}

// Report is the computed content of the page.
type Report struct {
	Title, Generated string
	CL               float64
	Stats            []KV
	Figures          []Figure
	Notes            []string
}

// KV is a headline number.
type KV struct{ Key, Value string }

// Figure is a plot with its definition and method.
type Figure struct {
	ID, Title  string
	SVGs       []template.HTML
	Definition string
	Method     string
	Caution    string
	Table      [][]string // optional numbers behind the plot; first row is the header
}

// Build computes the report. It fails only on inconsistent input; a
// campaign without enough labels gives a report that says so.
func Build(ctx context.Context, in Input) (*Report, error) {
	if in.CL == 0 {
		in.CL = 0.95
	}
	r := &Report{Title: scan.CleanText(in.Campaign.Name), CL: in.CL,
		Generated: in.Generated.UTC().Format("2006-01-02 15:04 MST")}
	ratings := agree.PassRatings(in.Passes)
	r.Stats = append(r.Stats, KV{"campaign", r.Title}, KV{"dataset", scan.CleanText(in.Campaign.Dataset)},
		KV{"events", fmt.Sprint(len(in.Events))}, KV{"submitted passes", fmt.Sprint(len(ratings))})
	if len(ratings) == 0 {
		r.Notes = append(r.Notes, "No submitted labels yet: nothing to measure.")
		return r, nil
	}
	tab, err := agree.NewTable(ratings, agree.ClassOrder(in.Campaign.Schema, ratings))
	if err != nil {
		return nil, fmt.Errorf("report: %w", err)
	}
	r.Stats = append(r.Stats, KV{"scanners", fmt.Sprint(len(tab.Raters))})
	cons, method := consensusLabels(tab, in.Consensus)
	r.Stats = append(r.Stats, KV{"consensus", fmt.Sprintf("%s (%d events labelled)", method, len(cons))})
	if err := r.agreement(ctx, tab, in); err != nil {
		return nil, err
	}
	if err := r.confusions(tab, cons, method); err != nil {
		return nil, err
	}
	if err := r.efficiency(tab, in); err != nil {
		return nil, err
	}
	if err := r.selection(in, cons, tab); err != nil {
		return nil, err
	}
	if err := r.times(in.Passes); err != nil {
		return nil, err
	}
	return r, nil
}

// consensusLabels uses the stored consensus when there is one, else the
// Dawid–Skene consensus with three or more scanners, else majority vote.
func consensusLabels(tab *agree.Table, stored []scan.Consensus) (map[string]string, string) {
	out := map[string]string{}
	if len(stored) > 0 {
		methods := map[string]bool{}
		for _, c := range stored {
			if c.Label.Class != "" {
				out[c.EventID] = c.Label.Class
				methods[c.Method] = true
			}
		}
		return out, "stored: " + joinShort(slices.Sorted(maps.Keys(methods)))
	}
	res := agree.MajorityVote(tab)
	if len(tab.Raters) >= 3 {
		if ds, err := agree.DawidSkeneEM(tab, agree.DSOptions{}); err == nil && ds.Converged {
			res = ds
		}
	}
	for _, it := range res.Items {
		if it.Label != agree.Missing {
			out[it.Item] = tab.Categories[it.Label]
		}
	}
	return out, res.Method + " (computed, not stored)"
}

const kappaCaution = "Kappa depends on prevalence and on the raters' marginal rates: the same percent agreement gives a lower kappa for a rare class. Verbal agreement scales (\"moderate\", \"substantial\") are conventions, not tests."

func (r *Report) agreement(ctx context.Context, tab *agree.Table, in Input) error {
	a, err := agree.Agree(tab, agree.Options{Metric: agree.Nominal})
	if err != nil {
		r.Notes = append(r.Notes, "Agreement: "+err.Error())
		return nil
	}
	r.Stats = append(r.Stats, KV{"percent agreement", fmt3(a.PercentAgreement)},
		KV{"Fleiss' kappa", fmt3(a.Fleiss)}, KV{"Krippendorff's alpha (nominal)", fmt3(a.Alpha)})
	var ci *agree.AgreementCIs
	if in.Bootstrap > 0 {
		c, err := agree.Bootstrap(ctx, tab, agree.Options{Metric: agree.Nominal}, in.Bootstrap, in.Seed, in.CL)
		if err != nil {
			return fmt.Errorf("report: %w", err)
		}
		ci = &c
	}
	pts := make([]Point, len(a.Pairs))
	for i, p := range a.Pairs {
		pts[i] = Point{Name: scan.CleanText(p.A + " / " + p.B), Value: p.Kappa, Low: math.NaN(), High: math.NaN()}
		if ci != nil {
			pts[i].Low, pts[i].High = ci.Kappa[i].Low, ci.Kappa[i].High
		}
	}
	svg, err := intervalPlot("Cohen's kappa per scanner pair", "kappa", pts, nil)
	if err != nil {
		return err
	}
	method := "Cohen (1960), unweighted, over the events both scanners submitted."
	if ci != nil {
		method += fmt.Sprintf(" Bars: %.0f%% percentile bootstrap interval from %d resamples of the events (seed %d).", 100*in.CL, in.Bootstrap, in.Seed)
	}
	r.Figures = append(r.Figures, Figure{ID: "kappa", Title: "Agreement between scanners", SVGs: []template.HTML{svg},
		Definition: "κ = (p_o − p_e)/(1 − p_e): observed agreement p_o corrected for the agreement p_e expected from each scanner's class frequencies. κ = 1 is perfect agreement, 0 is chance level. Undefined when both scanners used one single class (p_e = 1). Fleiss' kappa (Fleiss 1971) needs the same number of labels on every event; Krippendorff's alpha (Krippendorff 2011) allows any missing pattern.",
		Method:     method, Caution: kappaCaution})
	return nil
}

func (r *Report) confusions(tab *agree.Table, cons map[string]string, method string) error {
	cats := cleanAll(tab.Categories)
	var pairs []template.HTML
	for i := range tab.Raters {
		for j := i + 1; j < len(tab.Raters); j++ {
			m := agree.Confusion(tab, i, j)
			svg, err := heatMap(Matrix{Title: scan.CleanText(tab.Raters[i] + " vs " + tab.Raters[j]),
				RowLabel: scan.CleanText(tab.Raters[i]), ColLabel: scan.CleanText(tab.Raters[j]), Rows: cats, Cols: cats, Cells: m})
			if err != nil {
				return err
			}
			pairs = append(pairs, svg)
		}
	}
	r.Figures = append(r.Figures, Figure{ID: "pairs", Title: "Confusion between scanners", SVGs: pairs,
		Definition: "Number of events labelled with the row class by the first scanner and the column class by the second, over the events both submitted. The diagonal is agreement.",
		Method:     "Contingency table; the colour is the count relative to the largest cell (darker = more)."})
	var each []template.HTML
	for ri, name := range tab.Raters {
		cl, m := agree.CrossTab(cons, tab.Labels(ri), tab.Categories)
		normaliseRows(m)
		svg, err := heatMap(Matrix{Title: scan.CleanText(name) + " vs consensus", RowLabel: "consensus",
			ColLabel: scan.CleanText(name) + "'s answer", Rows: cleanAll(cl), Cols: cleanAll(cl),
			Cells: m, Percent: true, RowNormalisedMax: true})
		if err != nil {
			return err
		}
		each = append(each, svg)
	}
	r.Figures = append(r.Figures, Figure{ID: "vs-consensus", Title: "Each scanner against the consensus", SVGs: each,
		Definition: "Row k: of the events whose consensus class is k, the fraction this scanner labelled with each class. The diagonal is the scanner's class efficiency; the row of the no-interaction class shows spurious finds. Consensus: " + method + ".",
		Method:     "Dawid & Skene (1979) EM over per-scanner confusion matrices, started from the vote shares, when three or more scanners take part and no consensus is stored; majority vote otherwise (ties are left out and listed for adjudication).",
		Caution:    "A scanner's own label is part of the consensus it is compared to, which flatters every scanner, most of all with few scanners per event."})
	return nil
}

func normaliseRows(m [][]float64) {
	for _, row := range m {
		var s float64
		for _, v := range row {
			s += v
		}
		for j := range row {
			if s > 0 {
				row[j] /= s
			} else {
				row[j] = math.NaN()
			}
		}
	}
}

func (r *Report) efficiency(tab *agree.Table, in Input) error {
	if len(in.Absent) == 0 || len(tab.Raters) < 2 {
		return nil
	}
	rec := agree.Efficiencies(tab, in.Absent, in.CL, agree.ClopperPearson)
	var pts []Point
	for _, p := range rec {
		pts = append(pts,
			Point{Name: scan.CleanText(p.A + " (vs " + p.B + ")"), Value: p.EffA.Value, Low: p.EffA.Low, High: p.EffA.High},
			Point{Name: scan.CleanText(p.B + " (vs " + p.A + ")"), Value: p.EffB.Value, Low: p.EffB.Low, High: p.EffB.High})
	}
	svg, err := intervalPlot("Scanning efficiency per scanner", "efficiency", pts, nil)
	if err != nil {
		return err
	}
	table := [][]string{{"scanners A / B", "events", "n₁ (A)", "n₂ (B)", "m (both)", "Lincoln–Petersen N", "Chapman N ± SE", "efficiency A", "efficiency B", "combined"}}
	for _, p := range rec {
		table = append(table, []string{scan.CleanText(p.A + " / " + p.B), fmt.Sprint(p.Events), fmt.Sprint(p.N1), fmt.Sprint(p.N2), fmt.Sprint(p.M),
			fmt1(p.LincolnPetersen), fmt1(p.Chapman) + " ± " + fmt1(p.ChapmanSE),
			fmt3(p.EffA.Value) + " [" + fmt3(p.EffA.Low) + ", " + fmt3(p.EffA.High) + "]",
			fmt3(p.EffB.Value) + " [" + fmt3(p.EffB.Low) + ", " + fmt3(p.EffB.High) + "]", fmt3(p.Combined)})
	}
	r.Figures = append(r.Figures, Figure{ID: "efficiency", Title: "Scanning efficiency from double scanning", SVGs: []template.HTML{svg},
		Definition: fmt.Sprintf("Over the events both scanners of a pair looked at, scanner A found n₁ interactions (any class but %s), B found n₂, both found m. A's efficiency is m/n₂, B's is m/n₁; the pair's combined efficiency is (n₁ + n₂ − m)/N with the Lincoln–Petersen N.", joinShort(in.Absent)),
		Table:      table,
		Method:     fmt.Sprintf("Capture–recapture: Lincoln–Petersen N = n₁n₂/m; Chapman (1951) N = (n₁+1)(n₂+1)/(m+1) − 1 with the variance of Seber (1982). Bars: %.0f%% Clopper–Pearson (1934) interval on m of n₂ (resp. n₁).", 100*in.CL),
		Caution:    "Capture–recapture assumes the scanners find interactions independently. Correlated misses — the same hard events missed by both — bias N low and the efficiencies high."})
	return nil
}

func (r *Report) selection(in Input, cons map[string]string, tab *agree.Table) error {
	order := tab.Categories
	var sel []scan.Selection
	for _, e := range in.Events {
		if e.Selection != nil {
			sel = append(sel, *e.Selection)
		}
	}
	if len(sel) == 0 {
		r.Notes = append(r.Notes, "The campaign holds no selection output: no selection efficiency or purity.")
		return nil
	}
	signal := in.Signal
	if len(signal) == 0 {
		signal = mostCalled(sel)
	}
	v, err := agree.Validate(sel, cons, signal, in.CL, agree.ClopperPearson)
	if err != nil {
		r.Notes = append(r.Notes, "Selection: "+err.Error())
		return nil
	}
	r.Stats = append(r.Stats, KV{"selection signal", cleanJoin(signal)},
		KV{"selection efficiency", fmt.Sprintf("%s [%s, %s] (%d/%d)", fmt3(v.Efficiency.Value), fmt3(v.Efficiency.Low), fmt3(v.Efficiency.High), v.Efficiency.K, v.Efficiency.N)},
		KV{"selection purity", fmt.Sprintf("%s [%s, %s] (%d/%d)", fmt3(v.Purity.Value), fmt3(v.Purity.Low), fmt3(v.Purity.High), v.Purity.K, v.Purity.N)})
	pts := make([]CurvePoint, len(v.Curve))
	for i, c := range v.Curve {
		pts[i] = CurvePoint{c.Threshold, c.Efficiency.Value, c.Efficiency.Low, c.Efficiency.High, c.Purity.Value, c.Purity.Low, c.Purity.High}
	}
	cut := operatingPoint(sel)
	curve, err := curvePlot("Selection efficiency and purity against the score threshold", pts, cut)
	if err != nil {
		return err
	}
	calls := agree.SelectionCalls(sel)
	svgs := []template.HTML{curve}
	tables := []struct {
		name   string
		labels map[string]string
	}{{"consensus", cons}}
	for ri, name := range tab.Raters {
		tables = append(tables, struct {
			name   string
			labels map[string]string
		}{scan.CleanText(name) + "'s answer", tab.Labels(ri)})
	}
	for _, tb := range tables {
		rows, cols, m := callMatrix(tb.labels, calls, order)
		h, err := heatMap(Matrix{Title: tb.name + " vs the selection's call", RowLabel: tb.name,
			ColLabel: "selection's call", Rows: cleanAll(rows), Cols: cleanAll(cols), Cells: m, Percent: true, RowNormalisedMax: true})
		if err != nil {
			return err
		}
		svgs = append(svgs, h)
	}
	r.Figures = append(r.Figures, Figure{ID: "selection", Title: "The automated selection against the consensus", SVGs: svgs,
		Definition: fmt.Sprintf("Signal: consensus class %s. Efficiency = selected signal events / all signal events; purity = selected signal events / all selected events, over the %d events with both a selection output and a consensus. The curves redefine the selection as score ≥ threshold; the dotted line marks the selection's own operating point. The heat maps show, row by row as fractions, what the selection did with the events of each consensus class (and of each scanner's answers): the class it called, or not selected.", joinShort(signal), v.Events),
		Method:     fmt.Sprintf("Bands: %.0f%% Clopper–Pearson (1934) intervals, exact binomial, from Beta quantiles.", 100*in.CL),
		Caution:    "The consensus is itself uncertain: scanner errors that the consensus does not remove bias both efficiency and purity."})
	return nil
}

// mostCalled is the class the selection calls most among selected events.
func mostCalled(sel []scan.Selection) []string {
	n := map[string]int{}
	for _, s := range sel {
		if s.Selected && s.Class != "" {
			n[s.Class]++
		}
	}
	best := ""
	for c, k := range n {
		if k > n[best] || (k == n[best] && c < best) {
			best = c
		}
	}
	if best == "" {
		return nil
	}
	return []string{best}
}

// operatingPoint is the lowest score among selected events, when the
// selection is a score cut (every selected score above every rejected one).
func operatingPoint(sel []scan.Selection) *float64 {
	lo, hiRejected := math.Inf(1), math.Inf(-1)
	for _, s := range sel {
		if s.Selected {
			lo = math.Min(lo, s.Score)
		} else {
			hiRejected = math.Max(hiRejected, s.Score)
		}
	}
	if math.IsInf(lo, 1) || hiRejected >= lo {
		return nil
	}
	return &lo
}

func (r *Report) times(passes []scan.Pass) error {
	by := map[string][]float64{}
	for _, p := range passes {
		if p.State == scan.PassSubmitted && p.Seconds > 0 {
			by[p.Scanner] = append(by[p.Scanner], p.Seconds)
		}
	}
	if len(by) == 0 {
		return nil
	}
	names := slices.Sorted(maps.Keys(by))
	vals := make([][]float64, len(names))
	var medians []string
	for i, n := range names {
		vals[i] = by[n]
		s := slices.Clone(by[n])
		slices.SortFunc(s, cmp.Compare)
		medians = append(medians, fmt.Sprintf("%s %.0f s", scan.CleanText(n), s[len(s)/2]))
	}
	svg, err := boxPlot("Time per event per scanner", cleanAll(names), vals)
	if err != nil {
		return err
	}
	r.Figures = append(r.Figures, Figure{ID: "time", Title: "Time spent per event", SVGs: []template.HTML{svg},
		Definition: "Seconds a scanner spent on a submitted pass, summed over its revisions. Medians: " + joinShort(medians) + ".",
		Method:     "Box: quartiles; line: median; whiskers: the furthest points within 1.5 × the interquartile range (Tukey 1977); points beyond are drawn singly."})
	return nil
}

func fmt3(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "undefined"
	}
	return fmt.Sprintf("%.3f", v)
}

func fmt1(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "undefined"
	}
	return fmt.Sprintf("%.1f", v)
}

// WriteHTML writes the report as one self-contained page.
func (r *Report) WriteHTML(w io.Writer) error {
	if err := page.Execute(w, r); err != nil {
		return fmt.Errorf("write report: %w", err)
	}
	return nil
}

func cleanAll(s []string) []string {
	out := make([]string, len(s))
	for i, x := range s {
		out[i] = scan.CleanText(x)
	}
	return out
}

// callMatrix cross-tabulates labels (rows, in order) against the
// selection's calls (columns: the classes it called, in order, then "not
// selected"), normalised per row; empty rows and columns are dropped.
func callMatrix(labels, calls map[string]string, order []string) (rows, cols []string, m [][]float64) {
	cats, full := agree.CrossTab(labels, calls, append(slices.Clone(order), agree.NotSelected))
	colUsed := make([]bool, len(cats))
	for i := range full {
		for j, v := range full[i] {
			colUsed[j] = colUsed[j] || v > 0
		}
	}
	for i, row := range full {
		var n float64
		for _, v := range row {
			n += v
		}
		if n == 0 {
			continue
		}
		rows = append(rows, cats[i])
		var r []float64
		for j, v := range row {
			if colUsed[j] {
				r = append(r, v/n)
			}
		}
		m = append(m, r)
	}
	for j, c := range cats {
		if colUsed[j] {
			cols = append(cols, c)
		}
	}
	return rows, cols, m
}

func cleanJoin(s []string) string { return joinShort(cleanAll(s)) }
