package ui

import (
	"fmt"

	"github.com/charmbracelet/bubbles/table"

	"github.com/tpcscan/tpcscan/scan"
)

// Event statuses shown in the list.
const (
	statusUnseen = "unseen"
	statusSeen   = "seen"
)

// eventList is the list of the dataset's events with their status.
type eventList struct {
	st     *Styles
	t      table.Model
	ids    []string
	status map[string]string
	cur    int
	height int
	width  int
}

func newEventList(ids []string, st *Styles) *eventList {
	l := &eventList{st: st, ids: ids, status: map[string]string{}, cur: -1}
	ts := table.Styles{
		Header:   st.Heading,
		Cell:     st.Readout,
		Selected: st.Chosen,
	}
	l.t = table.New(table.WithStyles(ts), table.WithFocused(true))
	return l
}

func (l *eventList) setSize(w, h int) {
	if w <= 0 || h <= 0 {
		return
	}
	l.width, l.height = w, h
	idW := max(w-18, 6)
	l.t.SetColumns([]table.Column{{Title: "#", Width: 5}, {Title: "event", Width: idW}, {Title: "status", Width: 9}})
	l.t.SetWidth(w)
	l.t.SetHeight(h - 1)
	l.refresh()
	if l.t.Cursor() < 0 {
		l.t.SetCursor(max(l.cur, 0))
	}
}

// setStatus records an event's status (scanning mode: the pass state).
func (l *eventList) setStatus(id, s string) {
	if l.status[id] == s {
		return
	}
	l.status[id] = s
	l.refresh()
}

// setCurrent marks the shown event; it becomes "seen" in view mode.
func (l *eventList) setCurrent(i int) {
	l.cur = i
	if i >= 0 && i < len(l.ids) && l.status[l.ids[i]] == "" {
		l.status[l.ids[i]] = statusSeen
	}
	l.refresh()
	l.t.SetCursor(max(i, 0))
}

func (l *eventList) refresh() {
	if l.width == 0 {
		return
	}
	rows := make([]table.Row, len(l.ids))
	for i, id := range l.ids {
		s := l.status[id]
		if s == "" {
			s = statusUnseen
		}
		mark := " "
		if i == l.cur {
			mark = "▸"
		}
		rows[i] = table.Row{fmt.Sprintf("%s%d", mark, i+1), scan.CleanText(id), s}
	}
	l.t.SetRows(rows)
}

func (l *eventList) move(n int) {
	if n < 0 {
		l.t.MoveUp(-n)
	} else {
		l.t.MoveDown(n)
	}
}

func (l *eventList) selected() int { return l.t.Cursor() }

func (l *eventList) view() string { return l.t.View() }
