package ui

import (
	"strings"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"

	"github.com/tpcscan/tpcscan/render"
)

// setModeKeys enables the bindings that apply in the current mode, so
// that help lists exactly the keys that work.
func (m *Model) setModeKeys() {
	scanning := m.sess != nil
	k := &m.keys
	for _, b := range []*key.Binding{&k.Vertex, &k.Box, &k.Track, &k.Comment, &k.Undo, &k.Redo,
		&k.Submit, &k.Skip, &k.Back, &k.Instructions} {
		b.SetEnabled(scanning)
	}
	verify := scanning && m.sess.verify()
	k.Agree.SetEnabled(verify)
	k.Disagree.SetEnabled(verify)
	k.NextEvent.SetEnabled(!scanning)
	k.PrevEvent.SetEnabled(!scanning)
}

// shortHelp is the status line's key list.
func (m *Model) shortHelp() []key.Binding {
	k := m.keys
	if m.showList {
		return []key.Binding{k.Up, k.Down, k.ListPick, k.EventList, k.Help}
	}
	if m.sess != nil {
		return append(m.sess.shortHelp(), k.ZoomIn, k.ZoomOut, k.NextPlane, k.Help, k.Quit)
	}
	return []key.Binding{k.ZoomIn, k.ZoomOut, k.ZoomBox, k.Fit, k.NextPlane, k.Ruler, k.NextEvent, k.Help, k.Quit}
}

// fullHelp is the help overlay: every enabled binding, grouped.
func (m *Model) fullHelp() [][]key.Binding {
	k := m.keys
	groups := [][]key.Binding{
		{k.Left, k.Right, k.Up, k.Down, k.FastLeft, k.FastRight, k.FastUp, k.FastDown},
		{k.PanLeft, k.PanRight, k.PanEarlier, k.PanLater, k.ZoomIn, k.ZoomOut, k.ZoomBox, k.Fit},
		{k.NextPlane, k.PrevPlane, k.Enlarge, k.Ruler, k.Reduction, k.LogScale, k.NextScale},
		{k.NextEvent, k.PrevEvent, k.EventList, k.Help, k.Quit, k.Cancel},
	}
	if m.sess != nil {
		groups = append(groups, []key.Binding{k.Vertex, k.Box, k.Track, k.Comment, k.Undo, k.Redo,
			k.Submit, k.Skip, k.Back, k.Instructions, k.Agree, k.Disagree})
		groups = append(groups, m.sess.schemaBindings()...)
	}
	return groups
}

func (m *Model) helpView() string {
	title := m.st.Heading.Render("keys") + m.st.Dim.Render("  (mouse: click moves the cursor, wheel zooms, drag pans; "+
		m.keys.Help.Help().Key+" or "+m.keys.Cancel.Help().Key+" closes)")
	return title + "\n\n" + m.helpColumns(m.fullHelp())
}

// helpColumns lays the help groups out in as many bands as the width
// needs (help.Model drops groups that do not fit on one band).
func (m *Model) helpColumns(groups [][]key.Binding) string {
	var bands []string
	var band [][]key.Binding
	wide := m.help
	wide.Width = 0 // measure without truncation
	for _, g := range groups {
		try := append(append([][]key.Binding(nil), band...), g)
		if len(band) > 0 && lipgloss.Width(wide.FullHelpView(try)) > m.width {
			bands = append(bands, wide.FullHelpView(band))
			band = nil
		}
		band = append(band, g)
	}
	if len(band) > 0 {
		bands = append(bands, wide.FullHelpView(band))
	}
	return strings.Join(bands, "\n\n")
}

// onKey handles a key: text entry first, then global keys, overlays, the
// scanning session, and finally the display.
func (m *Model) onKey(msg tea.KeyMsg) tea.Cmd {
	k := m.keys
	// Keys typed quickly (or batched by a slow link) can arrive as one
	// message holding several runes; outside text entry each is a key.
	if msg.Type == tea.KeyRunes && len(msg.Runes) > 1 && !msg.Paste && !(m.sess != nil && m.sess.capturing()) {
		var cmds []tea.Cmd
		for _, r := range msg.Runes {
			cmds = append(cmds, m.onKey(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune{r}, Alt: msg.Alt}))
		}
		return tea.Batch(cmds...)
	}
	if m.sess != nil && m.sess.capturing() {
		if key.Matches(msg, k.Quit) {
			return m.quit()
		}
		cmd, _ := m.sess.key(msg)
		return cmd
	}
	switch {
	case key.Matches(msg, k.Quit):
		return m.quit()
	case key.Matches(msg, k.Help):
		m.showHelp = !m.showHelp
		m.helpTop = 0
		return nil
	case m.showHelp:
		switch {
		case key.Matches(msg, k.Cancel):
			m.showHelp = false
		case key.Matches(msg, k.Up):
			m.helpTop--
		case key.Matches(msg, k.Down):
			m.helpTop++
		case key.Matches(msg, k.PanEarlier):
			m.helpTop -= 10
		case key.Matches(msg, k.PanLater):
			m.helpTop += 10
		}
		return nil
	case key.Matches(msg, k.EventList):
		m.showList = !m.showList
		m.layout()
		return nil
	case m.showList:
		return m.listKey(msg)
	}
	m.status = ""
	if m.sess != nil {
		if cmd, ok := m.sess.key(msg); ok {
			return cmd
		}
	}
	return m.displayKey(msg)
}

func (m *Model) listKey(msg tea.KeyMsg) tea.Cmd {
	k := m.keys
	switch {
	case key.Matches(msg, k.Cancel):
		m.showList = false
		m.layout()
	case key.Matches(msg, k.Up):
		m.list.move(-1)
	case key.Matches(msg, k.Down):
		m.list.move(1)
	case key.Matches(msg, k.PanEarlier):
		m.list.move(-m.list.height)
	case key.Matches(msg, k.PanLater):
		m.list.move(m.list.height)
	case key.Matches(msg, k.ListPick):
		i := m.list.selected()
		m.showList = false
		m.layout()
		if m.sess != nil {
			return m.sess.open(m.ids[i])
		}
		return m.show(i)
	}
	return nil
}

// displayKey handles the display's own keys.
func (m *Model) displayKey(msg tea.KeyMsg) tea.Cmd {
	k := m.keys
	v := m.pv
	if v.prep == nil {
		if key.Matches(msg, k.NextEvent) {
			return m.show(m.cur + 1)
		}
		return nil
	}
	switch {
	case key.Matches(msg, k.Left):
		v.moveCursor(-1, 0)
	case key.Matches(msg, k.Right):
		v.moveCursor(1, 0)
	case key.Matches(msg, k.Up):
		v.moveCursor(0, -1)
	case key.Matches(msg, k.Down):
		v.moveCursor(0, 1)
	case key.Matches(msg, k.FastLeft):
		v.moveCursor(-fastCells, 0)
	case key.Matches(msg, k.FastRight):
		v.moveCursor(fastCells, 0)
	case key.Matches(msg, k.FastUp):
		v.moveCursor(0, -fastCells)
	case key.Matches(msg, k.FastDown):
		v.moveCursor(0, fastCells)
	case v.viewKey(msg, k):
	case key.Matches(msg, k.ZoomBox):
		if v.boxStart == nil {
			c := v.cur
			v.boxStart = &c
		} else {
			v.zoomBox(*v.boxStart)
			v.boxStart = nil
		}
	case key.Matches(msg, k.Fit):
		v.fit()
		v.boxStart = nil
	case key.Matches(msg, k.Ruler):
		v.addRulerPoint()
	case key.Matches(msg, k.Reduction):
		if v.reduce == render.ReduceMax {
			v.reduce = render.ReduceSum
		} else {
			v.reduce = render.ReduceMax
		}
		m.status = "block reduction: " + reduceName(v.reduce)
	case key.Matches(msg, k.NextScale):
		v.scaleIdx = (v.scaleIdx + 1) % len(v.scales)
		m.status = "colour scale: " + v.scales[v.scaleIdx].Name
	case key.Matches(msg, k.NextEvent):
		return m.show(m.cur + 1)
	case key.Matches(msg, k.PrevEvent):
		return m.show(m.cur - 1)
	case key.Matches(msg, k.Cancel):
		v.boxStart = nil
	}
	return nil
}

// viewKey applies the zoom, pan, plane and log-scale keys that every
// model showing planes shares, and reports whether msg was one of them.
func (v *planes) viewKey(msg tea.KeyMsg, k KeyMap) bool {
	cols, rows := v.panStep()
	switch {
	case key.Matches(msg, k.ZoomIn):
		v.zoom(1 / zoomStep)
	case key.Matches(msg, k.ZoomOut):
		v.zoom(zoomStep)
	case key.Matches(msg, k.PanLeft):
		v.pan(-cols, 0)
	case key.Matches(msg, k.PanRight):
		v.pan(cols, 0)
	case key.Matches(msg, k.PanEarlier):
		v.pan(0, -rows)
	case key.Matches(msg, k.PanLater):
		v.pan(0, rows)
	case key.Matches(msg, k.NextPlane):
		v.setFocus((v.cur.Plane + 1) % len(v.det.Planes))
	case key.Matches(msg, k.PrevPlane):
		v.setFocus((v.cur.Plane + len(v.det.Planes) - 1) % len(v.det.Planes))
	case key.Matches(msg, k.Enlarge):
		v.toggleOne()
	case key.Matches(msg, k.LogScale):
		v.log = !v.log
	default:
		return false
	}
	return true
}

func reduceName(r render.Reduce) string {
	if r == render.ReduceSum {
		return "sum (charge-conserving)"
	}
	return "max (keeps thin tracks)"
}

// onMouse: a click moves the cursor (and the focus) to the cell, the wheel
// zooms at the pointer, a drag with the left button pans.
func (m *Model) onMouse(msg tea.MouseMsg) tea.Cmd {
	v := m.pv
	if v.prep == nil || m.showHelp || m.tooSmall() {
		return nil
	}
	d := m.computeLayout()
	if m.showList && d.listW >= m.width-d.tagW {
		return nil
	}
	x, y := msg.X-d.listW, msg.Y-1 // plane area origin: below the title, right of the list
	p, col, row, ok := v.hit(x, y)
	switch {
	case msg.Action == tea.MouseActionPress && msg.Button == tea.MouseButtonWheelUp && ok:
		v.moveTo(p, col, row)
		v.zoom(1 / zoomStep)
	case msg.Action == tea.MouseActionPress && msg.Button == tea.MouseButtonWheelDown && ok:
		v.moveTo(p, col, row)
		v.zoom(zoomStep)
	case msg.Action == tea.MouseActionPress && msg.Button == tea.MouseButtonLeft && ok:
		v.moveTo(p, col, row)
		v.drag = &dragState{x: x, y: y}
	case msg.Action == tea.MouseActionMotion && msg.Button == tea.MouseButtonLeft && v.drag != nil:
		dc, dr := v.drag.x-x, v.drag.y-y
		v.drag.x, v.drag.y = x, y
		v.pan(dc, dr)
	case msg.Action == tea.MouseActionRelease:
		v.drag = nil
	}
	return nil
}
