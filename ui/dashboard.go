package ui

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"

	"github.com/charmbracelet/bubbles/help"
	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/agree"
	"github.com/tpcscan/tpcscan/store"
)

// NumbersOptions choose what the numbers panel measures. Zero values take
// the defaults noted beside each field.
type NumbersOptions struct {
	Absent    []string // classes meaning "no interaction" (nil: cosmic, none); for scanning efficiency
	Signal    []string // selection signal classes (nil: the class the selection calls most)
	CL        float64  // confidence level of every interval (0: 0.95)
	Bootstrap int      // resamples for the agreement intervals (0: 200; <0: none)
	Seed      uint64   // bootstrap seed (0: 1)
}

func (o NumbersOptions) withDefaults() NumbersOptions {
	if o.Absent == nil {
		o.Absent = []string{"cosmic", "none"}
	}
	if o.CL == 0 {
		o.CL = 0.95
	}
	if o.Bootstrap == 0 {
		o.Bootstrap = 200
	}
	if o.Seed == 0 {
		o.Seed = 1
	}
	return o
}

// NumbersInput is a campaign as read from a store: what the numbers are
// computed from.
type NumbersInput struct {
	Campaign  scan.Campaign
	Events    []scan.CampaignEvent
	Passes    []scan.Pass // a reopened pass carries its last submitted label
	Consensus []scan.Consensus
}

// ScannerProgress is one scanner's share of the work.
type ScannerProgress struct {
	Name                     string
	Submitted, Open, Skipped int
	MedianSeconds            float64 // per submitted pass; NaN without any
}

// Numbers are the key numbers of a campaign, for the terminal panel.
// Every statistic comes from scan/agree; NaN means undefined.
type Numbers struct {
	Campaign string
	Opts     NumbersOptions
	Events   int // events in the campaign
	Done     int // events with at least K submitted passes
	K        int
	Scanners []ScannerProgress

	Ratings   int
	Agreement *agree.Agreement // nil when undefined (AgreeNote says why)
	CIs       *agree.AgreementCIs
	AgreeNote string

	Efficiency []agree.Recapture

	Consensus     string // where the consensus came from
	Tied          int    // events whose majority vote is tied, without a decision
	Selection     *agree.Validation
	Signal        []string
	SelectionNote string
}

// ComputeNumbers measures a campaign. It is pure CPU work (the bootstrap
// honours ctx) and runs inside a tea.Cmd.
func ComputeNumbers(ctx context.Context, in NumbersInput, opt NumbersOptions) Numbers {
	opt = opt.withDefaults()
	n := Numbers{Campaign: scan.CleanText(in.Campaign.Name), Opts: opt, Events: len(in.Events), K: max(in.Campaign.PerEvent, 1)}
	n.progress(in.Passes)
	ratings := agree.PassRatings(in.Passes)
	n.Ratings = len(ratings)
	if len(ratings) == 0 {
		n.AgreeNote = "no submitted labels yet"
		n.selection(in, nil)
		return n
	}
	tab, err := agree.NewTable(ratings, usedClasses(in.Campaign.Schema, ratings))
	if err != nil {
		n.AgreeNote = err.Error()
		return n
	}
	n.agreement(ctx, tab)
	if len(tab.Raters) >= 2 && len(opt.Absent) > 0 {
		n.Efficiency = agree.Efficiencies(tab, opt.Absent, opt.CL, agree.ClopperPearson)
	}
	n.selection(in, tab)
	return n
}

func (n *Numbers) progress(passes []scan.Pass) {
	per := map[string]*ScannerProgress{}
	secs := map[string][]float64{}
	done := map[string]int{}
	for _, p := range passes {
		sp := per[p.Scanner]
		if sp == nil {
			sp = &ScannerProgress{Name: p.Scanner}
			per[p.Scanner] = sp
		}
		switch p.State {
		case scan.PassSubmitted:
			sp.Submitted++
			done[p.EventID]++
			if p.Seconds > 0 {
				secs[p.Scanner] = append(secs[p.Scanner], p.Seconds)
			}
		case scan.PassSkipped:
			sp.Skipped++
		default:
			if p.Scanner != "" {
				sp.Open++
			}
		}
	}
	for _, k := range done {
		if k >= n.K {
			n.Done++
		}
	}
	delete(per, "") // extra passes not yet handed out
	for name, sp := range per {
		sp.MedianSeconds = median(secs[name])
		n.Scanners = append(n.Scanners, *sp)
	}
	slices.SortFunc(n.Scanners, func(a, b ScannerProgress) int { return cmp.Compare(a.Name, b.Name) })
}

// median of a sample; NaN when empty. Not a statistic of the scan, only a
// summary of time spent.
func median(x []float64) float64 {
	if len(x) == 0 {
		return math.NaN()
	}
	s := slices.Clone(x)
	slices.Sort(s)
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return (s[len(s)/2-1] + s[len(s)/2]) / 2
}

func (n *Numbers) agreement(ctx context.Context, tab *agree.Table) {
	if len(tab.Raters) < 2 {
		n.AgreeNote = "one scanner so far: agreement needs two"
		return
	}
	a, err := agree.Agree(tab, agree.Options{Metric: agree.Nominal})
	if err != nil {
		n.AgreeNote = err.Error()
		return
	}
	n.Agreement = &a
	if n.Opts.Bootstrap > 0 {
		ci, err := agree.Bootstrap(ctx, tab, agree.Options{Metric: agree.Nominal}, n.Opts.Bootstrap, n.Opts.Seed, n.Opts.CL)
		if err == nil {
			n.CIs = &ci
		}
	}
}

// selection measures the automated selection against the consensus: the
// stored decisions (adjudication first), and the majority vote for every
// other event.
func (n *Numbers) selection(in NumbersInput, tab *agree.Table) {
	cons := map[string]string{}
	methods := map[string]int{}
	for _, c := range in.Consensus {
		if c.Label.Class != "" {
			cons[c.EventID] = c.Label.Class
			methods[c.Method]++
		}
	}
	var parts []string
	for _, m := range slices.Sorted(mapKeysInt(methods)) {
		parts = append(parts, fmt.Sprintf("%d %s", methods[m], m))
	}
	if tab != nil {
		mv := agree.MajorityVote(tab)
		added := 0
		for _, it := range mv.Items {
			if _, ok := cons[it.Item]; ok {
				continue
			}
			if it.Label == agree.Missing {
				n.Tied++
				continue
			}
			cons[it.Item] = tab.Categories[it.Label]
			added++
		}
		if added > 0 {
			parts = append(parts, fmt.Sprintf("%d majority vote", added))
		}
	}
	n.Consensus = strings.Join(parts, ", ")
	if n.Consensus == "" {
		n.Consensus = "none yet"
	}
	var sel []scan.Selection
	for _, e := range in.Events {
		if e.Selection != nil {
			sel = append(sel, *e.Selection)
		}
	}
	if len(sel) == 0 {
		n.SelectionNote = "the campaign holds no selection output"
		return
	}
	n.Signal = n.Opts.Signal
	if len(n.Signal) == 0 {
		n.Signal = selectionMostCalled(sel)
	}
	if len(cons) == 0 {
		n.SelectionNote = "no consensus yet"
		return
	}
	v, err := agree.Validate(sel, cons, n.Signal, n.Opts.CL, agree.ClopperPearson)
	if err != nil {
		n.SelectionNote = err.Error()
		return
	}
	n.Selection = &v
}

func mapKeysInt(m map[string]int) func(func(string) bool) {
	return func(yield func(string) bool) {
		for k := range m {
			if !yield(k) {
				return
			}
		}
	}
}

// selectionMostCalled is the class the selection calls most among its
// selected events (ties: the first in key order).
func selectionMostCalled(sel []scan.Selection) []string {
	count := map[string]int{}
	for _, s := range sel {
		if s.Selected && s.Class != "" {
			count[s.Class]++
		}
	}
	best := ""
	for _, c := range slices.Sorted(mapKeysInt(count)) {
		if count[c] > count[best] {
			best = c
		}
	}
	if best == "" {
		return nil
	}
	return []string{best}
}

// usedClasses is the schema's class order restricted to the classes used,
// then any others alphabetically.
func usedClasses(s scan.Schema, rs []agree.Rating) []string {
	used := map[string]bool{}
	for _, r := range rs {
		used[r.Label] = true
	}
	var out []string
	for _, c := range s.Classes {
		if used[c.Key] {
			out = append(out, c.Key)
			delete(used, c.Key)
		}
	}
	var rest []string
	for c := range used {
		rest = append(rest, c)
	}
	slices.Sort(rest)
	return append(out, rest...)
}

// LoadNumbersInput reads a campaign's events, passes and stored consensus.
// A pass reopened as a draft after a submit keeps its last submitted
// label (the scanner's answer stands until they submit another); an
// "agree" verdict of a verify campaign rates the selection's class.
func LoadNumbersInput(ctx context.Context, st store.Store, campaignID int64) (NumbersInput, error) {
	var in NumbersInput
	var err error
	if in.Campaign, err = st.Campaign(ctx, campaignID); err != nil {
		return in, fmt.Errorf("read campaign %d: %w", campaignID, err)
	}
	if in.Events, err = st.Events(ctx, campaignID); err != nil {
		return in, fmt.Errorf("read events of campaign %q: %w", in.Campaign.Name, err)
	}
	if in.Passes, err = st.Passes(ctx, campaignID); err != nil {
		return in, fmt.Errorf("read passes of campaign %q: %w", in.Campaign.Name, err)
	}
	if in.Consensus, err = st.Consensus(ctx, campaignID, ""); err != nil {
		return in, fmt.Errorf("read consensus of campaign %q: %w", in.Campaign.Name, err)
	}
	sel := map[string]string{}
	for _, e := range in.Events {
		if e.Selection != nil {
			sel[e.EventID] = e.Selection.Class
		}
	}
	for i, p := range in.Passes {
		if p.Label.Verdict == "agree" && p.Label.Class == "" {
			in.Passes[i].Label.Class = sel[p.EventID]
		}
		if p.State != scan.PassDraft || p.Revisions < 2 {
			continue
		}
		revs, err := st.Revisions(ctx, p.ID)
		if err != nil {
			return in, fmt.Errorf("read revisions of pass %d: %w", p.ID, err)
		}
		for j := len(revs) - 1; j >= 0; j-- {
			if revs[j].State == scan.PassSubmitted {
				in.Passes[i].State, in.Passes[i].Label = scan.PassSubmitted, revs[j].Label
				break
			}
		}
	}
	return in, nil
}

// numbersPane draws Numbers as text. It holds no store and does no I/O.
type numbersPane struct {
	st      *Styles
	num     *Numbers
	loading bool
	err     error
	scroll  int
}

// Caution shown under the agreement numbers (as in the HTML report).
const kappaCaution = "κ depends on prevalence; agreement scales are conventions, not tests."

func (p *numbersPane) view(w, h int) string {
	switch {
	case p.err != nil:
		return p.st.Error.Render("cannot compute the numbers: ") + scan.CleanText(p.err.Error())
	case p.num == nil:
		return "computing the numbers …"
	}
	lines := p.lines(w)
	if p.loading {
		lines[0] += p.st.Dim.Render("  (updating …)")
	}
	p.scroll = max(0, min(p.scroll, len(lines)-h))
	return strings.Join(lines[p.scroll:], "\n")
}

func (p *numbersPane) lines(w int) []string {
	n, st := p.num, p.st
	var out []string
	add := func(format string, a ...any) { out = append(out, fmt.Sprintf(format, a...)) }
	head := func(s, how string) {
		out = append(out, "", st.Heading.Render(s)+"  "+st.Dim.Render(how))
	}
	add(" %s  ·  %d events  ·  %d scanners per event  ·  %d submitted labels", n.Campaign, n.Events, n.K, n.Ratings)

	head("Progress", fmt.Sprintf("(an event is done with %d submitted passes)", n.K))
	add("  events done   %s  %d / %d", bar(n.Done, n.Events, 20), n.Done, n.Events)
	if len(n.Scanners) > 0 {
		add("  %-16s %9s %6s %8s %12s", "scanner", "submitted", "open", "skipped", "median time")
	}
	for _, s := range n.Scanners {
		add("  %-16s %9d %6d %8d %12s", trunc(scan.CleanText(s.Name), 16), s.Submitted, s.Open, s.Skipped, seconds(s.MedianSeconds))
	}

	pct := fmt.Sprintf("%.0f%%", 100*n.Opts.CL)
	if n.CIs != nil {
		head("Agreement on the class", fmt.Sprintf("(nominal; %s bootstrap intervals over events, %d resamples)", pct, n.CIs.Resamples))
	} else {
		head("Agreement on the class", "(nominal)")
	}
	if a := n.Agreement; a != nil {
		ci := func(c func(*agree.AgreementCIs) agree.CI) string {
			if n.CIs == nil {
				return ""
			}
			return interval(c(n.CIs))
		}
		add("  %-24s %6s %s", "percent agreement", num(a.PercentAgreement, 3), ci(func(c *agree.AgreementCIs) agree.CI { return c.PercentAgreement }))
		add("  %-24s %6s %s", "Fleiss' κ", num(a.Fleiss, 3), ci(func(c *agree.AgreementCIs) agree.CI { return c.Fleiss }))
		add("  %-24s %6s %s", "Krippendorff's α", num(a.Alpha, 3), ci(func(c *agree.AgreementCIs) agree.CI { return c.Alpha }))
		var per []string
		for i, c := range a.Categories {
			if i < len(a.PerCategory) {
				per = append(per, fmt.Sprintf("%s %s", scan.CleanText(c), num(a.PerCategory[i], 2)))
			}
		}
		if len(per) > 0 {
			for i, ln := range wrap("specific agreement per class: "+strings.Join(per, " · "), max(w-4, 20)) {
				add("  %s%s", strings.Repeat(" ", 2*min(i, 1)), ln)
			}
		}
		add("  %-24s %6s %6s %7s  %s", "pair", "events", "agree", "Cohen κ", pct+" interval")
		for i, pr := range a.Pairs {
			civ := ""
			if n.CIs != nil && i < len(n.CIs.Kappa) {
				civ = interval(n.CIs.Kappa[i])
			}
			add("  %-24s %6d %6s %7s  %s", trunc(scan.CleanText(pr.A)+" – "+scan.CleanText(pr.B), 24), pr.Items, num(pr.PercentAgreement, 3), num(pr.Kappa, 3), civ)
		}
		add("  %s", st.Dim.Render(kappaCaution))
	} else {
		add("  %s", st.Dim.Render(scan.CleanText(n.AgreeNote)))
	}

	head("Scanning efficiency", fmt.Sprintf("(capture–recapture; no interaction = %s; %s Clopper–Pearson)", strings.Join(cleanList(n.Opts.Absent), ", "), pct))
	if len(n.Efficiency) == 0 {
		add("  %s", st.Dim.Render("needs two scanners on the same events"))
	} else {
		add("  %-24s %4s %4s %4s %13s  %-23s %-23s %s", "pair A – B", "n₁", "n₂", "m", "Chapman N", "A's efficiency m/n₂", "B's efficiency m/n₁", "combined")
		for _, r := range n.Efficiency {
			add("  %-24s %4d %4d %4d %13s  %-23s %-23s %s", trunc(scan.CleanText(r.A)+" – "+scan.CleanText(r.B), 24), r.N1, r.N2, r.M,
				num(r.Chapman, 1)+" ± "+num(r.ChapmanSE, 1), propText(r.EffA), propText(r.EffB), num(r.Combined, 3))
		}
		add("  %s", st.Dim.Render("assumes independent misses: the same hard events missed by both bias N low."))
	}

	head("Selection against the consensus", "")
	add("  consensus: %s", n.Consensus)
	if n.Tied > 0 {
		add("  %d %s tied under majority vote: adjudicate %s", n.Tied, plural(n.Tied, "event", "events"), plural(n.Tied, "it", "them"))
	}
	if v := n.Selection; v != nil {
		add("  signal %s over %d events (%s Clopper–Pearson)", strings.Join(cleanList(n.Signal), ", "), v.Events, pct)
		add("  %-12s %s", "efficiency", propText(v.Efficiency))
		add("  %-12s %s", "purity", propText(v.Purity))
	} else {
		add("  %s", st.Dim.Render(scan.CleanText(n.SelectionNote)))
	}
	for i := range out {
		out[i] = pad(out[i], w)
	}
	return out
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}

func cleanList(s []string) []string {
	out := make([]string, len(s))
	for i, x := range s {
		out[i] = scan.CleanText(x)
	}
	return out
}

// bar is a text progress bar of k of n in w cells.
func bar(k, n, w int) string {
	f := 0
	if n > 0 {
		f = min(w, k*w/n)
	}
	return strings.Repeat("█", f) + strings.Repeat("░", w-f)
}

func trunc(s string, n int) string {
	if len([]rune(s)) > n {
		return truncRunes(s, n-1) + "…"
	}
	return s
}

// num formats a statistic to the given decimals, or "undef" when the
// statistic is undefined on these data.
func num(v float64, decimals int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "undef"
	}
	return strconv.FormatFloat(v, 'f', decimals, 64)
}

func interval(c agree.CI) string {
	if math.IsNaN(c.Low) || math.IsNaN(c.High) {
		return "[undefined]"
	}
	return fmt.Sprintf("[%.3f, %.3f]", c.Low, c.High)
}

func propText(p agree.Proportion) string {
	if p.N == 0 {
		return "undef (0/0)"
	}
	return fmt.Sprintf("%.2f [%.2f,%.2f] %d/%d", p.Value, p.Low, p.High, p.K, p.N)
}

func seconds(s float64) string {
	if math.IsNaN(s) {
		return "–"
	}
	if s >= 60 {
		return fmt.Sprintf("%.1f min", s/60)
	}
	return fmt.Sprintf("%.0f s", s)
}

// numbersMsg carries freshly computed numbers.
type numbersMsg struct {
	num Numbers
	err error
}

// numbersCmd reads the campaign and computes its numbers.
func numbersCmd(ctx context.Context, st store.Store, id int64, opt NumbersOptions) tea.Cmd {
	return func() tea.Msg {
		in, err := LoadNumbersInput(ctx, st, id)
		if err != nil {
			return numbersMsg{err: err}
		}
		return numbersMsg{num: ComputeNumbers(ctx, in, opt)}
	}
}

// DashboardOptions configure a stand-alone numbers panel (a coordinator's
// SSH session, or a terminal beside the scanners).
type DashboardOptions struct {
	Store      store.Store
	CampaignID int64
	Numbers    NumbersOptions
	Tier       render.Tier
	// Renderer is this session's lipgloss renderer; nil writes nowhere.
	Renderer *lipgloss.Renderer
	Context  context.Context
	// QuitHelp, if set, is what the help says the quit keys do.
	QuitHelp string
}

// DashboardKeyMap are the panel's keys.
type DashboardKeyMap struct {
	Refresh, Up, Down, Quit key.Binding
}

// ShortHelp lists the keys for the help line.
func (k DashboardKeyMap) ShortHelp() []key.Binding {
	return []key.Binding{k.Refresh, k.Up, k.Down, k.Quit}
}

// FullHelp lists the keys for the help overlay.
func (k DashboardKeyMap) FullHelp() [][]key.Binding { return [][]key.Binding{k.ShortHelp()} }

// DefaultDashboardKeyMap returns the panel's keys.
func DefaultDashboardKeyMap() DashboardKeyMap {
	return DashboardKeyMap{
		Refresh: bind("recompute", "r"),
		Up:      bind("scroll up", "up", "k"),
		Down:    bind("scroll down", "down", "j"),
		Quit:    bind("quit", "q", "ctrl+c"),
	}
}

// Dashboard is the stand-alone numbers panel model.
type Dashboard struct {
	opts DashboardOptions
	ctx  context.Context
	st   Styles
	keys DashboardKeyMap
	help help.Model
	pane numbersPane
	w, h int
}

// NewDashboard builds the numbers panel for one terminal session.
func NewDashboard(opts DashboardOptions) *Dashboard {
	d := &Dashboard{opts: opts, ctx: opts.Context, keys: DefaultDashboardKeyMap(), help: help.New()}
	if d.ctx == nil {
		d.ctx = context.Background()
	}
	r := opts.Renderer
	if r == nil {
		r = lipgloss.NewRenderer(io.Discard)
	}
	d.st = NewStyles(r, opts.Tier)
	d.help.Styles = d.st.Help
	d.pane = numbersPane{st: &d.st, loading: true}
	if opts.QuitHelp != "" {
		d.keys.Quit.SetHelp(d.keys.Quit.Help().Key, opts.QuitHelp)
	}
	return d
}

// Init computes the numbers.
func (d *Dashboard) Init() tea.Cmd { return d.refresh() }

func (d *Dashboard) refresh() tea.Cmd {
	if d.opts.Store == nil {
		d.pane.err = errors.New("no campaign database")
		return nil
	}
	d.pane.loading = true
	return numbersCmd(d.ctx, d.opts.Store, d.opts.CampaignID, d.opts.Numbers)
}

// Update handles keys, resizes and computed numbers.
func (d *Dashboard) Update(msg tea.Msg) (tea.Model, tea.Cmd) {
	switch msg := msg.(type) {
	case tea.WindowSizeMsg:
		d.w, d.h = msg.Width, msg.Height
		d.help.Width = msg.Width
	case numbersMsg:
		d.pane.loading = false
		d.pane.err = msg.err
		if msg.err == nil {
			d.pane.num = &msg.num
		}
	case ShutdownMsg:
		return d, tea.Quit
	case tea.KeyMsg:
		switch {
		case key.Matches(msg, d.keys.Quit):
			return d, tea.Quit
		case key.Matches(msg, d.keys.Refresh):
			return d, d.refresh()
		case key.Matches(msg, d.keys.Up):
			d.pane.scroll--
		case key.Matches(msg, d.keys.Down):
			d.pane.scroll++
		}
	}
	return d, nil
}

// View draws the panel: a title, the numbers and the key help.
func (d *Dashboard) View() string {
	if d.w == 0 || d.h < 3 {
		return ""
	}
	title := d.st.Title.Render(pad(" tpcscan · campaign numbers", d.w))
	body := block(d.pane.view(d.w, d.h-2), d.w, d.h-2)
	status := pad(" "+d.help.ShortHelpView(d.keys.ShortHelp()), d.w)
	return title + "\n" + strings.Join(body, "\n") + "\n" + status
}
