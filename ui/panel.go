package ui

import (
	"fmt"
	"slices"
	"strings"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/glamour"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
)

func (s *session) setSize(w, h, screenW int) {
	s.w, s.h, s.screenW = w, h, screenW
	s.input.Width = max(screenW-20, 10)
	s.instr.Width, s.instr.Height = screenW, max(h, 3)
}

// panelView is the tag panel beside the planes: what the label holds and
// which keys change it.
func (s *session) panelView() string {
	st := s.m.st
	var b strings.Builder
	line := func(format string, a ...any) { fmt.Fprintf(&b, format+"\n", a...) }
	if !s.hasPass {
		return st.Panel.Render(st.Dim.Render("no pass open"))
	}
	line("%s", st.Heading.Render(fmt.Sprintf("pass %d · %s", s.passNumber(), s.pass.State)))
	if s.verify() {
		s.verifyLines(line)
	}
	sc := s.camp.Schema
	line("%s", st.Heading.Render("class"))
	for _, c := range sc.Classes {
		line("%s", s.choiceLine(c, s.label.Class == c.Key))
	}
	line("%s", st.Heading.Render("flags"))
	for _, c := range sc.Flags {
		line("%s", s.choiceLine(c, slices.Contains(s.label.Flags, c.Key)))
	}
	line("%s", st.Heading.Render("confidence"))
	for _, c := range sc.Confidence {
		line("%s", s.choiceLine(c, s.label.Confidence == c.Key))
	}
	line("%s", st.Heading.Render("marks"))
	for _, mk := range s.label.Marks {
		if len(mk.Points) > 0 {
			line(" %s", s.describeMark(mk))
		}
	}
	if p := s.label.Vertex3D; p != nil {
		line(" 3-D vertex x %.1f y %.1f z %.1f cm", p.X, p.Y, p.Z)
	}
	if len(s.track) > 0 {
		line(" %s", st.Warn.Render(fmt.Sprintf("track: %d points, particle? %s", len(s.track), hotkeyList(sc.Particles))))
	}
	if len(s.label.Marks) == 0 && len(s.track) == 0 {
		line(" %s", st.Dim.Render(fmt.Sprintf("%s vertex, %s box, %s track",
			s.m.keys.Vertex.Help().Key, s.m.keys.Box.Help().Key, s.m.keys.Track.Help().Key)))
	}
	if c := s.label.Comment; c != "" {
		line("%s %s", st.Heading.Render("comment"), scan.CleanText(c))
	}
	if miss := s.missing(); len(miss) > 0 {
		line("%s", st.Warn.Render("to submit: "+strings.Join(miss, ", ")))
	} else {
		line("%s", st.Saved.Render("ready: "+s.m.keys.Submit.Help().Key+" submits"))
	}
	return st.Panel.Width(max(s.w-1, 1)).Height(max(s.h, 1)).Render(strings.TrimRight(b.String(), "\n"))
}

func (s *session) verifyLines(line func(string, ...any)) {
	st := s.m.st
	sel := s.events[s.pass.EventID]
	if sel == nil {
		line("%s", st.Dim.Render("no selection output for this event"))
		return
	}
	verdict := "?"
	if s.label.Verdict != "" {
		verdict = s.label.Verdict
	}
	line("selection: %s (score %.2f)", s.choiceName(s.camp.Schema.Classes, sel.Class), sel.Score)
	line("your verdict: %s", st.Chosen.Render(verdict))
}

func (s *session) choiceLine(c scan.Choice, on bool) string {
	text := fmt.Sprintf(" %s %s", c.Hotkey, scan.CleanText(c.Name))
	if on {
		return s.m.st.Chosen.Render(text + " ✓")
	}
	return text
}

// passNumber is the current pass's position in the scanner's order.
func (s *session) passNumber() int {
	return slices.IndexFunc(s.passes, func(p scan.Pass) bool { return p.ID == s.pass.ID }) + 1
}

// compactLines is the tag panel for narrow windows: n lines under the
// planes.
func (s *session) compactLines(w, n int) []string {
	st := s.m.st
	var out []string
	if s.inputMode != inputNone {
		out = append(out, pad(" "+s.input.View(), w))
	}
	if !s.hasPass {
		out = append(out, pad(st.Dim.Render(" no pass open"), w))
		return block(strings.Join(out, "\n"), w, n)
	}
	sc := s.camp.Schema
	cls := "—"
	if s.label.Class != "" {
		cls = s.choiceName(sc.Classes, s.label.Class)
	}
	var flags []string
	for _, f := range s.label.Flags {
		flags = append(flags, s.choiceName(sc.Flags, f))
	}
	conf := "—"
	if s.label.Confidence != "" {
		conf = s.choiceName(sc.Confidence, s.label.Confidence)
	}
	counts := map[scan.MarkKind]int{}
	for _, mk := range s.label.Marks {
		counts[mk.Kind]++
	}
	l1 := fmt.Sprintf(" class %s · conf %s · flags %s · marks %dv %db %dt", st.Chosen.Render(cls), conf,
		orDash(strings.Join(flags, ", ")), counts[scan.MarkVertex], counts[scan.MarkBox], counts[scan.MarkTrack])
	if s.verify() {
		if sel := s.events[s.pass.EventID]; sel != nil {
			l1 = fmt.Sprintf(" selection %s · verdict %s ·", s.choiceName(sc.Classes, sel.Class), orDash(s.label.Verdict)) + l1
		}
	}
	out = append(out, pad(l1, w))
	if p := s.label.Vertex3D; p != nil {
		out = append(out, pad(fmt.Sprintf(" 3-D vertex x %.1f y %.1f z %.1f cm", p.X, p.Y, p.Z), w))
	}
	if miss := s.missing(); len(miss) > 0 {
		out = append(out, pad(st.Warn.Render(" to submit: "+strings.Join(miss, ", ")), w))
	} else {
		out = append(out, pad(st.Saved.Render(" ready: "+s.m.keys.Submit.Help().Key+" submits"), w))
	}
	return block(strings.Join(out, "\n"), w, n)
}

func orDash(s string) string {
	if s == "" {
		return "—"
	}
	return s
}

// startInput opens the text input for a comment or a skip reason.
func (s *session) startInput(mode inputMode, prompt, value string) tea.Cmd {
	if !s.hasPass {
		return nil
	}
	s.inputMode = mode
	s.input.Prompt = prompt
	s.input.SetValue(value)
	s.input.CursorEnd()
	s.m.status = "enter keeps, " + s.m.keys.Cancel.Help().Key + " cancels"
	return s.input.Focus()
}

func (s *session) inputKey(msg tea.KeyMsg) tea.Cmd {
	switch msg.Type {
	case tea.KeyEnter:
		mode, text := s.inputMode, s.input.Value()
		s.inputMode = inputNone
		s.input.Blur()
		s.m.status = ""
		if mode == inputSkip {
			return s.skip(text)
		}
		text = strings.TrimSpace(scan.CleanText(text))
		return s.change(func(l *scan.Label) { l.Comment = text })
	case tea.KeyEsc:
		s.inputMode = inputNone
		s.input.Blur()
		s.m.status = ""
		return nil
	}
	var cmd tea.Cmd
	s.input, cmd = s.input.Update(msg)
	return cmd
}

// openInstructions renders the campaign's Markdown instructions.
func (s *session) openInstructions() {
	md := cleanMarkdown(s.camp.Instructions)
	if strings.TrimSpace(md) == "" {
		md = "# No instructions\n\nThis campaign has no instructions. Ask the coordinator."
	}
	style := "dark"
	if s.m.opts.Tier == render.TierMono || s.m.opts.Tier == render.TierBraille {
		style = "notty"
	}
	r, err := glamour.NewTermRenderer(glamour.WithStandardStyle(style),
		glamour.WithWordWrap(min(max(s.screenW-4, 20), 100)), glamour.WithColorProfile(profileOf(s.m.opts.Tier)))
	out := md
	if err == nil {
		if o, err := r.Render(md); err == nil {
			out = o
		}
	}
	s.instr.SetContent(out)
	s.instr.GotoTop()
	s.showInstr = true
}

// cleanMarkdown strips control sequences line by line, keeping newlines.
func cleanMarkdown(s string) string {
	lines := strings.Split(s, "\n")
	for i, l := range lines {
		lines[i] = scan.CleanText(l)
	}
	return strings.Join(lines, "\n")
}

func (s *session) instrKey(msg tea.KeyMsg) tea.Cmd {
	k := s.m.keys
	if key.Matches(msg, k.Cancel, k.Instructions, k.Help) || msg.String() == "q" {
		s.showInstr = false
		return nil
	}
	if key.Matches(msg, k.Quit) {
		return s.m.quit()
	}
	var cmd tea.Cmd
	s.instr, cmd = s.instr.Update(msg)
	return cmd
}

func (s *session) instrView() string {
	return s.m.st.Heading.Render("instructions") + s.m.st.Dim.Render(fmt.Sprintf("  (%s closes, arrows scroll)", s.m.keys.Cancel.Help().Key)) + "\n" + s.instr.View()
}
