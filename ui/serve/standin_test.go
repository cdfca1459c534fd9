package serve

import (
	"context"
	"encoding/json"
	"fmt"
	"strings"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
)

// standin is a small scanning model for the server's tests: it gets a pass
// from the real store, saves a draft on every class key, submits on 's',
// keeps a zoom level as its "view", and saves its resume state only when
// the server asks it to stop, so that the tests see that the stop message
// arrives. Its View paints a block of coloured cells that changes with
// every key, as a plane image does when a scanner pans.
type standin struct {
	ctx      context.Context
	st       store.Store
	campaign int64
	sess     Session
	schema   scan.Schema

	pass    scan.Pass
	zoom    int
	keys    int
	width   int
	height  int
	status  string
	notes   []string // other scanners' comments (coordinators only)
	ramp    []string // pre-rendered coloured cells
	accent  lipgloss.Style
	stopped bool
}

// resumeState is what the stand-in keeps with Store.SaveResume.
type resumeState struct {
	Event string `json:"event"`
	Zoom  int    `json:"zoom"`
}

type (
	loadedMsg struct {
		pass  scan.Pass
		zoom  int
		notes []string
		err   error
	}
	savedMsg struct {
		what string
		err  error
	}
	stopMsg struct{ why StopReason }
)

// standinFactory builds stand-in models on the test's store and campaign.
func standinFactory(st store.Store, campaign int64) Factory {
	return func(ctx context.Context, s Session) (App, error) {
		m := &standin{ctx: ctx, st: st, campaign: campaign, sess: s, schema: scan.DefaultSchema(),
			width: s.Width, height: s.Height, status: "loading"}
		m.accent = s.Renderer.NewStyle().Foreground(lipgloss.Color("#d08020")).Bold(true)
		for i := 0; i < 16; i++ {
			c := lipgloss.Color(fmt.Sprintf("#%02x%02x%02x", 16*i, 40+10*i, 200-12*i))
			m.ramp = append(m.ramp, s.Renderer.NewStyle().Background(c).Render(" "))
		}
		return App{Model: m, Stop: func(why StopReason) tea.Msg { return stopMsg{why} }}, nil
	}
}

func (m *standin) Init() tea.Cmd { return m.load }

func (m *standin) load() tea.Msg {
	p, err := m.st.NextPass(m.ctx, m.campaign, m.sess.Scanner)
	if err != nil {
		return loadedMsg{err: err}
	}
	out := loadedMsg{pass: p}
	if b, err := m.st.Resume(m.ctx, m.campaign, m.sess.Scanner); err == nil {
		var rs resumeState
		if json.Unmarshal(b, &rs) == nil && rs.Event == p.EventID {
			out.zoom = rs.Zoom
		}
	}
	if m.sess.Role == RoleCoordinator {
		all, err := m.st.Passes(m.ctx, m.campaign)
		if err != nil {
			return loadedMsg{err: err}
		}
		for _, o := range all {
			if o.Label.Comment != "" {
				out.notes = append(out.notes, scan.CleanText(o.Scanner+": "+o.Label.Comment))
			}
		}
	}
	return out
}

func (m *standin) save(state scan.PassState, then tea.Cmd) tea.Cmd {
	p := m.pass
	return func() tea.Msg {
		_, err := m.st.SaveRevision(m.ctx, p.ID, m.sess.Scanner, scan.Revision{State: state, Label: p.Label, Seconds: 1})
		if err == nil && then != nil {
			return then()
		}
		return savedMsg{what: string(state), err: err}
	}
}

func (m *standin) saveResume() error {
	b, _ := json.Marshal(resumeState{Event: m.pass.EventID, Zoom: m.zoom})
	return m.st.SaveResume(context.WithoutCancel(m.ctx), m.campaign, m.sess.Scanner, b)
}

func (m *standin) Update(msg tea.Msg) (tea.Model, tea.Cmd) {
	switch msg := msg.(type) {
	case tea.WindowSizeMsg:
		m.width, m.height = msg.Width, msg.Height
	case loadedMsg:
		if msg.err != nil {
			m.status = "error: " + msg.err.Error()
			return m, nil
		}
		m.pass, m.zoom, m.notes, m.status = msg.pass, msg.zoom, msg.notes, "ready"
	case savedMsg:
		m.status = "saved " + msg.what
		if msg.err != nil {
			m.status = "error: " + msg.err.Error()
		}
	case stopMsg:
		m.stopped = true
		if m.pass.ID != 0 && m.pass.Label.Class != "" && m.pass.State != scan.PassSubmitted {
			m.pass.Label.Comment = "saved on " + string(msg.why)
			_, _ = m.st.SaveRevision(context.WithoutCancel(m.ctx), m.pass.ID, m.sess.Scanner,
				scan.Revision{State: scan.PassDraft, Label: m.pass.Label})
		}
		_ = m.saveResume()
		return m, tea.Quit
	case tea.KeyMsg:
		return m, m.key(msg.String())
	}
	return m, nil
}

func (m *standin) key(k string) tea.Cmd {
	m.keys++
	switch {
	case k == "ctrl+c" || k == "q":
		return tea.Quit
	case len(k) == 1 && k[0] >= '1' && k[0] <= '9':
		for _, c := range m.schema.Classes {
			if c.Hotkey == k {
				m.pass.Label.Class = c.Key
				return m.save(scan.PassDraft, nil)
			}
		}
	case k == "+":
		m.zoom++
	case k == "s" && m.pass.Label.Class != "":
		m.pass.Label.Comment = "submitted by " + m.sess.Scanner
		m.pass.Label.Confidence = m.schema.Confidence[len(m.schema.Confidence)-1].Key
		return m.save(scan.PassSubmitted, m.load)
	}
	return nil
}

func (m *standin) View() string {
	var b strings.Builder
	b.WriteString(m.accent.Render("tpcscan stand-in"))
	fmt.Fprintf(&b, " | %s | event %s zoom %d class %s keys %d size %dx%d\n",
		m.status, m.pass.EventID, m.zoom, m.pass.Label.Class, m.keys, m.width, m.height)
	for _, n := range m.notes {
		b.WriteString("note " + n + "\n")
	}
	// Keep clear of the last line: a view taller than the terminal loses
	// its top lines, and with them the header the tests read.
	rows, cols := max(0, min(m.height-2-len(m.notes), 40)), max(0, min(m.width, 160))
	for y := 0; y < rows; y++ {
		for x := 0; x < cols; x++ {
			b.WriteString(m.ramp[(x+y+m.keys+m.zoom)%len(m.ramp)])
		}
		if y < rows-1 {
			b.WriteByte('\n')
		}
	}
	return b.String()
}
