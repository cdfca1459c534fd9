package ui

import (
	"bytes"
	"context"
	"errors"
	"math"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"
	"github.com/charmbracelet/x/exp/golden"
	"github.com/charmbracelet/x/exp/teatest"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/detector"
	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/sqlite"
)

// adjVotes is the test campaign's scanning, event → scanner → class:
// syn-001 is split three ways, syn-002 two to one, on syn-003 the scanners
// agree with each other but not with the selection, and on syn-004
// everybody agrees (no dispute).
var adjVotes = map[string]map[string]string{
	"syn-001": {"alice": "numu-cc", "bob": "nue-cc", "carol": "nc-pi0"},
	"syn-002": {"alice": "numu-cc", "bob": "numu-cc", "carol": "nue-cc"},
	"syn-003": {"alice": "numu-cc", "bob": "numu-cc", "carol": "numu-cc"},
	"syn-004": {"alice": "nue-cc", "bob": "nue-cc", "carol": "nue-cc"},
}

// adjOffsets puts each scanner's marks at a different place around the
// synthetic vertex, in wires, so that every glyph stays visible.
var adjOffsets = map[string]float64{"alice": -12, "bob": 0, "carol": 12}

// adjCampaign makes a three-scanner campaign on the synthetic source in a
// temporary SQLite file and fills it with adjVotes.
func adjCampaign(t testing.TB) (store.Store, int64, *synthSource) {
	t.Helper()
	ctx := context.Background()
	st, err := sqlite.Open(ctx, filepath.Join(t.TempDir(), "campaign.db"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	src := newSynthSource(4, 300)
	c := scan.Campaign{Name: "trial", Dataset: "synthetic", Mode: scan.ModeLabel, PerEvent: 3, Seed: 7, Schema: scan.DefaultSchema()}
	evs := []scan.CampaignEvent{
		{EventID: "syn-001", Selection: &scan.Selection{EventID: "syn-001", Selected: true, Class: "numu-cc", Score: 0.81, Box: selBox(src.det)}},
		{EventID: "syn-002", Selection: &scan.Selection{EventID: "syn-002", Selected: false, Score: 0.2}},
		{EventID: "syn-003", Selection: &scan.Selection{EventID: "syn-003", Selected: true, Class: "nc-pi0", Score: 0.64}},
		{EventID: "syn-004", Selection: &scan.Selection{EventID: "syn-004", Selected: true, Class: "nue-cc", Score: 0.9}},
	}
	id, err := st.CreateCampaign(ctx, c, evs)
	if err != nil {
		t.Fatal(err)
	}
	for _, who := range []string{"alice", "bob", "carol"} {
		for {
			p, err := st.NextPass(ctx, id, who)
			if errors.Is(err, store.ErrNoWork) {
				break
			}
			if err != nil {
				t.Fatal(err)
			}
			l := scan.Label{Class: adjVotes[p.EventID][who], Confidence: "2", Marks: adjMarks(src.det, adjOffsets[who])}
			if who == "bob" {
				l.Flags = []string{"overlapping-cosmic"}
				l.Comment = "second shower?\x1b[31m"
			}
			if _, err := st.SaveRevision(ctx, p.ID, who, scan.Revision{State: scan.PassSubmitted, Label: l, Seconds: 20}); err != nil {
				t.Fatal(err)
			}
		}
	}
	return st, id, src
}

// selBox is the selection's box on coll, wide around the vertex.
func selBox(det *detector.Detector) *scan.Mark {
	w, tk := det.Project(2, synthVertex)
	return &scan.Mark{Kind: scan.MarkBox, Plane: det.Planes[2].Role, Points: []detector.PlanePoint{{Wire: w - 25, Tick: tk - 90}, {Wire: w + 25, Tick: tk + 90}}}
}

// adjMarks is a vertex on ind1 and coll and a box on coll around the
// synthetic vertex, dw wires off.
func adjMarks(det *detector.Detector, dw float64) []scan.Mark {
	var out []scan.Mark
	for _, i := range []int{0, 2} {
		w, tk := det.Project(i, synthVertex)
		role := det.Planes[i].Role
		out = append(out, scan.Mark{Kind: scan.MarkVertex, Plane: role, Points: []detector.PlanePoint{{Wire: w + dw, Tick: tk}}})
		if i == 2 {
			out = append(out, scan.Mark{Kind: scan.MarkBox, Plane: role,
				Points: []detector.PlanePoint{{Wire: w + dw - 8, Tick: tk - 40 + 4*dw}, {Wire: w + dw + 8, Tick: tk + 40 + 4*dw}}})
		}
	}
	return out
}

var adjClock = time.Date(2026, 3, 4, 5, 6, 7, 0, time.UTC)

func newTestAdjudicator(t testing.TB, st store.Store, id int64, src Source, tier render.Tier) *Adjudicator {
	t.Helper()
	return NewAdjudicator(AdjudicateOptions{Store: st, CampaignID: id, Source: src, Coordinator: "dana", Tier: tier,
		Now: func() time.Time { return adjClock }, Numbers: NumbersOptions{Bootstrap: 50}})
}

func adjKeys(t testing.TB, a *Adjudicator, names ...string) {
	t.Helper()
	for _, n := range names {
		_, cmd := a.Update(keyMsg(n))
		run(t, a, cmd)
	}
}

// startAdjudicator opens the adjudicator at w×h and runs its start-up.
func startAdjudicator(t testing.TB, w, h int, tier render.Tier) (*Adjudicator, store.Store, int64) {
	t.Helper()
	st, id, src := adjCampaign(t)
	a := newTestAdjudicator(t, st, id, src, tier)
	a.Update(tea.WindowSizeMsg{Width: w, Height: h})
	run(t, a, a.Init())
	if !a.started || a.pv.prep == nil {
		t.Fatalf("adjudicator did not start (err %v)", a.err)
	}
	return a, st, id
}

func TestFindDisputesOrder(t *testing.T) {
	sel := func(c string) *scan.Selection { return &scan.Selection{Selected: true, Class: c} }
	var passes []scan.Pass
	add := func(ev string, classes ...string) {
		for i, c := range classes {
			passes = append(passes, scan.Pass{EventID: ev, Scanner: string(rune('a' + i)), State: scan.PassSubmitted, Label: scan.Label{Class: c}})
		}
	}
	add("agree", "x", "x", "x")
	add("two-one", "x", "x", "y")
	add("split", "x", "y", "z")
	add("pair", "x", "y")
	add("sel", "x", "x")
	add("decided", "x", "y", "z", "w")
	passes = append(passes, scan.Pass{EventID: "agree", Scanner: "d", State: scan.PassDraft, Label: scan.Label{Class: "q"}})
	events := []scan.CampaignEvent{{EventID: "sel", Selection: sel("y")}, {EventID: "agree", Selection: sel("x")}}
	decided := []scan.Consensus{{EventID: "decided", Method: MethodAdjudication, Label: scan.Label{Class: "x"}},
		{EventID: "two-one", Method: "majority", Label: scan.Label{Class: "x"}}}
	ds := findDisputes(passes, events, decided)
	var got []string
	for _, d := range ds {
		got = append(got, d.Event)
	}
	// Most contested first: share 1/3 (entropy log2 3), then 1/2 by
	// entropy (1 bit) and number of votes, then 2/3, then the selection-
	// only dispute (share 1); decided last whatever its spread. A draft
	// does not vote; a majority consensus is not a decision.
	want := []string{"split", "pair", "two-one", "sel", "decided"}
	if !slices.Equal(got, want) {
		t.Fatalf("order %v, want %v", got, want)
	}
	if ds[0].Share != 1.0/3 || ds[2].Share != 2.0/3 {
		t.Errorf("shares %g, %g; want 1/3, 2/3", ds[0].Share, ds[2].Share)
	}
}

// TestAdjudicateGolden pins the disputes page at 120×40 (escapes
// stripped) on the monochrome tier, where only glyphs tell scanners apart.
func TestAdjudicateGolden(t *testing.T) {
	a, _, _ := startAdjudicator(t, 120, 40, render.TierMono)
	out := a.View()
	checkFrameSize(t, out, 120, 40)
	plain := ansi.Strip(out)
	golden.RequireEqual(t, plain)
	// Control sequences in a scanner's comment never reach the screen.
	if strings.Contains(out, "\x1b[31m") {
		t.Error("a scanner's comment wrote an escape sequence to the screen")
	}
}

// TestAdjudicateMarkGlyphs checks that each scanner's marks are drawn in
// that scanner's own glyphs, and that the legend names scanner → glyphs.
func TestAdjudicateMarkGlyphs(t *testing.T) {
	a, _, _ := startAdjudicator(t, 160, 48, render.TierMono)
	a.View()
	d, _ := a.current()
	if d.Event != "syn-001" {
		t.Fatalf("first dispute %s, want syn-001", d.Event)
	}
	on := map[rune]bool{}
	for _, c := range a.pv.work.Cells {
		on[c.Rune] = true
	}
	legend := ansi.Strip(a.legendLine())
	seen := map[rune]string{}
	for _, v := range d.Votes {
		s := a.styleOf[v.Scanner]
		for _, r := range []rune{s.vertex, s.tl, s.br} {
			if !on[r] {
				t.Errorf("%s's glyph %q is not on the planes", v.Scanner, r)
			}
			if o, dup := seen[r]; dup {
				t.Errorf("glyph %q is used by both %s and %s", r, o, v.Scanner)
			}
			seen[r] = v.Scanner
		}
		if !strings.Contains(legend, s.sample()+" "+v.Scanner) {
			t.Errorf("legend %q does not name %s's style %s", legend, v.Scanner, s.sample())
		}
	}
}

// TestAdjudicateAcceptFlow runs the program: the coordinator picks bob's
// label on the most contested event, types a note and accepts. The
// decision is stored with method, coordinator, class, note and time, and
// the event moves below the open disputes.
func TestAdjudicateAcceptFlow(t *testing.T) {
	st, id, src := adjCampaign(t)
	a := newTestAdjudicator(t, st, id, src, render.TierMono)
	tm := teatest.NewTestModel(t, a, teatest.WithInitialTermSize(120, 40))
	waitFor(t, tm, "Disputes: 3 open, 0 decided")
	tm.Send(keyMsg("right")) // alice → bob
	tm.Send(keyMsg("n"))
	tm.Type("looks like a shower")
	tm.Send(keyMsg("enter")) // keep the note
	tm.Send(keyMsg("enter")) // accept bob's label
	waitFor(t, tm, "Disputes: 2 open, 1 decided")
	tm.Send(keyMsg("ctrl+c"))
	fm, ok := tm.FinalModel(t, teatest.WithFinalTimeout(10*time.Second)).(*Adjudicator)
	if !ok {
		t.Fatal("final model is not the adjudicator")
	}
	cs, err := st.Consensus(context.Background(), id, MethodAdjudication)
	if err != nil {
		t.Fatal(err)
	}
	if len(cs) != 1 {
		t.Fatalf("%d adjudications stored, want 1", len(cs))
	}
	c := cs[0]
	if c.EventID != "syn-001" || c.Method != MethodAdjudication || c.By != "dana" || c.Label.Class != "nue-cc" || c.Posterior != 1 {
		t.Errorf("stored %+v, want syn-001 adjudicated by dana as nue-cc (bob's class) with posterior 1", c)
	}
	if !c.At.Equal(adjClock) {
		t.Errorf("decided at %v, want the session clock %v", c.At, adjClock)
	}
	if !strings.Contains(c.Label.Comment, "bob") || !strings.Contains(c.Label.Comment, "looks like a shower") {
		t.Errorf("comment %q does not say whose label and the note", c.Label.Comment)
	}
	if len(c.Label.Marks) != 3 {
		t.Errorf("accepted label has %d marks, want bob's 3", len(c.Label.Marks))
	}
	last := fm.disputes[len(fm.disputes)-1]
	if last.Event != "syn-001" || last.Decided == nil {
		t.Errorf("last dispute %s (decided %v), want syn-001 decided", last.Event, last.Decided != nil)
	}
	if fm.disputes[0].Event != "syn-002" || fm.cur != 0 {
		t.Errorf("after deciding, showing %s (index %d), want syn-002 first", fm.disputes[fm.cur].Event, fm.cur)
	}
}

func waitFor(t *testing.T, tm *teatest.TestModel, s string) {
	t.Helper()
	teatest.WaitFor(t, tm.Output(), func(b []byte) bool { return bytes.Contains(b, []byte(s)) },
		teatest.WithDuration(10*time.Second), teatest.WithCheckInterval(5*time.Millisecond))
}

// TestAdjudicateSetClass sets a class by its schema hotkey: the label
// keeps the marks of the scanner who gave that class.
func TestAdjudicateSetClass(t *testing.T) {
	a, st, id := startAdjudicator(t, 120, 40, render.TierMono)
	adjKeys(t, a, "3") // NC π0 in the default schema: carol's class on syn-001
	cs, err := st.Consensus(context.Background(), id, MethodAdjudication)
	if err != nil {
		t.Fatal(err)
	}
	if len(cs) != 1 || cs[0].EventID != "syn-001" || cs[0].Label.Class != "nc-pi0" {
		t.Fatalf("stored %+v, want syn-001 as nc-pi0", cs)
	}
	if !strings.Contains(cs[0].Label.Comment, "carol") || len(cs[0].Label.Marks) != 3 {
		t.Errorf("label %+v: want carol's marks and a comment saying so", cs[0].Label)
	}
	// A second decision on the same event wins.
	adjKeys(t, a, "down", "down")
	if d, _ := a.current(); d.Event != "syn-001" {
		t.Fatalf("at %s, want the decided syn-001 at the bottom", d.Event)
	}
	adjKeys(t, a, "1")
	cs, _ = st.Consensus(context.Background(), id, MethodAdjudication)
	if len(cs) != 1 || cs[0].Label.Class != "numu-cc" || !strings.Contains(cs[0].Label.Comment, "alice") {
		t.Errorf("after re-deciding, stored %+v, want numu-cc with alice's marks", cs)
	}
}

// TestAdjudicateNumbersPage switches to the numbers and back.
func TestAdjudicateNumbersPage(t *testing.T) {
	a, _, _ := startAdjudicator(t, 120, 40, render.TierMono)
	adjKeys(t, a, "s")
	out := ansi.Strip(a.View())
	for _, want := range []string{"[numbers]", "Progress", "Cohen κ", "Scanning efficiency", "Selection against the consensus"} {
		if !strings.Contains(out, want) {
			t.Errorf("numbers page lacks %q:\n%s", want, out)
		}
	}
	adjKeys(t, a, "s")
	if out := ansi.Strip(a.View()); !strings.Contains(out, "Disputes: 3 open") {
		t.Errorf("back on the disputes page, no list:\n%s", out)
	}
}

// TestAdjudicateTooSmall and resizes: every frame fills the window.
func TestAdjudicateResize(t *testing.T) {
	a, _, _ := startAdjudicator(t, 120, 40, render.Tier256)
	for _, sz := range [][2]int{{200, 60}, {80, 20}, {137, 41}} {
		a.Update(tea.WindowSizeMsg{Width: sz[0], Height: sz[1]})
		checkFrameSize(t, a.View(), sz[0], sz[1])
	}
	a.Update(tea.WindowSizeMsg{Width: 60, Height: 15})
	if out := ansi.Strip(a.View()); !strings.Contains(strings.ReplaceAll(out, "\n", " "), "too small") {
		t.Errorf("no too-small message at 60×15:\n%s", out)
	}
}

// TestAdjudicateSmallWindow keeps the chosen scanner's tags in view when
// the side table is longer than the window, and the help names the keys.
func TestAdjudicateSmallWindow(t *testing.T) {
	a, _, _ := startAdjudicator(t, 100, 24, render.TierMono)
	adjKeys(t, a, "right", "right") // carol, the last block of the table
	out := ansi.Strip(a.View())
	checkFrameSize(t, a.View(), 100, 24)
	for _, want := range []string{"▸┏━┓■ carol", "class  NC π0"} {
		if !strings.Contains(out, want) {
			t.Errorf("chosen scanner's %q not in view:\n%s", want, out)
		}
	}
	adjKeys(t, a, "?")
	out = ansi.Strip(a.View())
	for _, want := range []string{"Adjudication keys", "accept label", "merge labels", "3 NC π0", "Merging takes"} {
		if !strings.Contains(out, want) {
			t.Errorf("help lacks %q:\n%s", want, out)
		}
	}
	adjKeys(t, a, "esc")
	if a.showHelp {
		t.Error("esc does not close the help")
	}
}

// TestAdjudicateMerge merges the two νμ CC labels of syn-002 (alice's
// marks 12 wires below bob's): mean vertices, the box enclosing both
// boxes, the union of flags, a triangulated vertex (hand arithmetic on
// adjMarks).
func TestAdjudicateMerge(t *testing.T) {
	a, st, id := startAdjudicator(t, 120, 40, render.TierMono)
	adjKeys(t, a, "down")
	if d, _ := a.current(); d.Event != "syn-002" || d.Votes[a.row].Scanner != "alice" {
		t.Fatalf("at %s/%s, want syn-002/alice", d.Event, d.Votes[a.row].Scanner)
	}
	adjKeys(t, a, "g")
	cs, err := st.Consensus(context.Background(), id, MethodAdjudication)
	if err != nil || len(cs) != 1 {
		t.Fatalf("stored %v (%v), want one decision", cs, err)
	}
	l := cs[0].Label
	if cs[0].EventID != "syn-002" || l.Class != "numu-cc" || l.Comment != "merged from alice, bob" {
		t.Errorf("stored %s %q %q, want syn-002 numu-cc merged from alice, bob", cs[0].EventID, l.Class, l.Comment)
	}
	if !slices.Equal(l.Flags, []string{"overlapping-cosmic"}) || l.Vertex3D == nil {
		t.Errorf("flags %v, vertex %v; want bob's flag and a triangulated vertex", l.Flags, l.Vertex3D)
	}
	det := a.pv.det
	wColl, tColl := det.Project(2, synthVertex)
	for _, mk := range l.Marks {
		switch {
		case mk.Kind == scan.MarkVertex && mk.Plane == "coll":
			if got := mk.Points[0]; math.Abs(got.Wire-(wColl-6)) > 1e-9 || math.Abs(got.Tick-tColl) > 1e-9 {
				t.Errorf("coll vertex %+v, want wire %g (mean of −12 and 0 offsets), tick %g", got, wColl-6, tColl)
			}
		case mk.Kind == scan.MarkBox:
			lo, hi := mk.Points[0], mk.Points[1]
			// alice: wires −20…−4, ticks −88…−8; bob: wires −8…8, ticks −40…40.
			want := [4]float64{wColl - 20, tColl - 88, wColl + 8, tColl + 40}
			got := [4]float64{lo.Wire, lo.Tick, hi.Wire, hi.Tick}
			for i := range got {
				if math.Abs(got[i]-want[i]) > 1e-9 {
					t.Errorf("merged box %v, want %v", got, want)
					break
				}
			}
		}
	}
	if n := len(l.Marks); n != 3 {
		t.Errorf("%d merged marks, want 2 vertices and 1 box", n)
	}
}
