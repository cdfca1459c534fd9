package ui

import (
	"fmt"
	"math"
	"strings"

	"github.com/charmbracelet/x/ansi"

	"github.com/tpcscan/tpcscan/scan"
)

// dims is where the panels go in the current window.
type dims struct {
	listW, planesW, tagW int
	bodyH                int
	tagBelow             int // rows of a compact tag panel under the planes
}

// Panel sizes.
const (
	listWidth     = 30
	tagWidth      = 34
	wideForPanels = 110 // narrower windows put the tag panel under the planes
	compactTagH   = 3
)

func (m *Model) computeLayout() dims {
	d := dims{bodyH: m.height - 3, planesW: m.width}
	if m.sess != nil {
		if m.width >= wideForPanels {
			d.tagW = tagWidth
		} else {
			d.tagBelow = compactTagH
			d.bodyH -= compactTagH
		}
	}
	if m.showList {
		if m.width-d.tagW >= 2*listWidth+40 {
			d.listW = listWidth
		} else {
			d.listW = m.width - d.tagW // the list covers the planes
		}
	}
	d.planesW = m.width - d.listW - d.tagW
	return d
}

// View draws the station. The frame is cached between messages that do
// not change it, and unchanged lines are byte-identical from frame to
// frame so that the terminal renderer skips them.
func (m *Model) View() string {
	if m.quitting {
		return ""
	}
	if !m.dirty && m.frame != "" {
		return m.frame
	}
	m.frame = m.draw()
	m.dirty = false
	return m.frame
}

func (m *Model) draw() string {
	if m.width == 0 {
		return ""
	}
	if m.tooSmall() {
		return m.drawTooSmall()
	}
	d := m.computeLayout()
	lines := make([]string, 0, m.height)
	lines = append(lines, m.titleLine())
	body := m.body(d)
	lines = append(lines, body...)
	if d.tagBelow > 0 {
		lines = append(lines, m.sess.compactLines(m.width, d.tagBelow)...)
	}
	lines = append(lines, fit(m.readout(), m.width, m.st.Readout.Render))
	lines = append(lines, m.statusLine())
	return strings.Join(lines, "\n")
}

func (m *Model) drawTooSmall() string {
	msg := fmt.Sprintf("window %d×%d is too small: tpcscan needs at least %d×%d", m.width, m.height, minWidth, minHeight)
	out := make([]string, m.height)
	for i := range out {
		out[i] = ""
	}
	for i, l := range wrap(msg, max(m.width, 1)) {
		if r := m.height/2 - 1 + i; r >= 0 && r < m.height {
			out[r] = l
		}
	}
	return strings.Join(out, "\n")
}

// wrap breaks s into lines of at most w cells at spaces.
func wrap(s string, w int) []string {
	var out []string
	line := ""
	for _, word := range strings.Fields(s) {
		if line != "" && ansi.StringWidth(line)+1+ansi.StringWidth(word) > w {
			out = append(out, line)
			line = ""
		}
		if line != "" {
			line += " "
		}
		line += word
	}
	return append(out, ansi.Truncate(line, w, ""))
}

// body returns bodyH lines: the event list, the planes and the tag panel
// side by side, or the help overlay.
func (m *Model) body(d dims) []string {
	if m.showHelp {
		return m.helpLines(d.bodyH)
	}
	if m.sess != nil && m.sess.showInstr {
		return block(m.sess.instrView(), m.width, d.bodyH)
	}
	var cols [][]string
	if d.listW > 0 {
		cols = append(cols, block(m.list.view(), d.listW, d.bodyH))
	}
	if d.planesW > 0 {
		cols = append(cols, m.planesLines(d))
	}
	if d.tagW > 0 {
		cols = append(cols, block(m.sess.panelView(), d.tagW, d.bodyH))
	}
	out := make([]string, d.bodyH)
	var b strings.Builder
	for r := range out {
		b.Reset()
		for k, c := range cols {
			b.WriteString(c[r])
			if k < len(cols)-1 {
				// A full reset between panels: a renderer that misses a
				// partial one (default background) must not tint the next.
				b.WriteString("\x1b[0m")
			}
		}
		out[r] = b.String()
	}
	return out
}

// planesLines is the plane area, or a message while there is no event.
func (m *Model) planesLines(d dims) []string {
	switch {
	case m.pv.prep == nil && m.err != nil:
		return block(m.st.Error.Render("cannot show the event: ")+scan.CleanText(m.err.Error()), d.planesW, d.bodyH)
	case m.pv.prep == nil && m.loading != "":
		return block("loading event "+scan.CleanText(m.loading)+" …", d.planesW, d.bodyH)
	case m.pv.prep == nil:
		return block(m.emptyMessage(), d.planesW, d.bodyH)
	}
	lines := m.pv.render()
	if len(lines) != d.bodyH {
		return block(strings.Join(lines, "\n"), d.planesW, d.bodyH)
	}
	return lines
}

func (m *Model) emptyMessage() string {
	if m.sess != nil {
		return m.sess.emptyMessage()
	}
	return "no events to show"
}

// block cuts or pads a multi-line string to exactly h lines of w cells.
func block(s string, w, h int) []string {
	src := strings.Split(s, "\n")
	out := make([]string, h)
	for i := range out {
		l := ""
		if i < len(src) {
			l = src[i]
		}
		out[i] = pad(l, w)
	}
	return out
}

// pad truncates or pads a (possibly styled) line to w cells.
func pad(l string, w int) string {
	n := ansi.StringWidth(l)
	if n > w {
		return ansi.Truncate(l, w, "…")
	}
	return l + strings.Repeat(" ", w-n)
}

// fit pads a plain line to the width and styles it.
func fit(s string, w int, style func(...string) string) string {
	return style(pad(s, w))
}

func (m *Model) titleLine() string {
	left := " tpcscan"
	if m.sess != nil {
		left += " · " + m.sess.title()
	} else if m.opts.Dataset != nil {
		left += " · " + scan.CleanText(m.opts.Dataset.Dir())
	}
	if m.cur >= 0 && m.cur < len(m.ids) {
		left += fmt.Sprintf(" · event %s (%d/%d)", scan.CleanText(m.ids[m.cur]), m.cur+1, len(m.ids))
	}
	right := ""
	if m.sess != nil {
		right = m.sess.indicator()
	}
	rw := ansi.StringWidth(right)
	return m.st.Title.Render(pad(left, m.width-rw-1)) + right + m.st.Title.Render(" ")
}

// readout describes the cursor: plane, wire, tick, charge, x and, when a
// wire on a second plane is known, y and z; then the ruler.
func (m *Model) readout() string {
	v := m.pv
	if v.prep == nil {
		return ""
	}
	c := v.cur
	role := v.det.Planes[c.Plane].Role
	s := fmt.Sprintf(" %s wire %.0f tick %.0f · %.1f ADC · x %.1f cm", role, math.Floor(c.Wire), math.Floor(c.Tick), v.charge(c), v.det.X(c.Tick))
	if y, z, j, ok := v.yz(); ok {
		s += fmt.Sprintf(" · y %.1f z %.1f cm (with %s wire %.0f)", y, z, v.det.Planes[j].Role, math.Floor(v.seen[j]))
	}
	s += fmt.Sprintf(" · cell %s×%s", perCell(v.cellWires(c.Plane), "w"), perCell(v.cellTicks(), "t"))
	if r := v.rulerText(); r != "" {
		s += " · " + r
	}
	if v.boxStart != nil {
		s += " · zoom box: move to the other corner and press " + m.keys.ZoomBox.Help().Key
	}
	return s
}

func perCell(x float64, unit string) string {
	if x >= 10 {
		return fmt.Sprintf("%.0f%s", x, unit)
	}
	return fmt.Sprintf("%.2g%s", x, unit)
}

func (m *Model) statusLine() string {
	switch {
	case m.sess != nil && m.sess.inputMode != inputNone:
		return pad(" "+m.sess.input.View(), m.width)
	case m.err != nil && m.pv.prep != nil:
		return fit(" "+scan.CleanText(m.err.Error()), m.width, m.st.Error.Render)
	case m.status != "":
		return fit(" "+m.status, m.width, m.st.Warn.Render)
	}
	return pad(" "+m.help.ShortHelpView(m.shortHelp()), m.width)
}

// helpLines is the help overlay, scrolled by helpTop when it is taller
// than the body; the last line then says how to see the rest.
func (m *Model) helpLines(h int) []string {
	lines := strings.Split(m.helpView(), "\n")
	if len(lines) <= h {
		m.helpTop = 0
		return block(strings.Join(lines, "\n"), m.width, h)
	}
	m.helpTop = max(0, min(m.helpTop, len(lines)-(h-1)))
	shown := lines[m.helpTop : m.helpTop+h-1]
	more := fmt.Sprintf("lines %d–%d of %d · %s/%s scroll", m.helpTop+1, m.helpTop+h-1, len(lines),
		m.keys.Up.Help().Key, m.keys.Down.Help().Key)
	return block(strings.Join(shown, "\n")+"\n"+m.st.Dim.Render(more), m.width, h)
}
