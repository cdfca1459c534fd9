package ui

import (
	"bytes"
	"io"
	"strings"
	"testing"
	"time"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/exp/teatest"

	"github.com/tpcscan/tpcscan/render"
)

// TestOneStepRedrawBytes runs the station in a real bubbletea program and
// counts the bytes it writes after one cursor step and after one pan: the
// standard renderer skips lines that are byte-identical to the last frame,
// so a cursor step must cost a few lines, and a pan no more than the lines
// it changes.
func TestOneStepRedrawBytes(t *testing.T) {
	const w, h = 160, 48
	src := newSynthSource(2, 400)
	m := newViewModel(t, src, w, h, render.Tier256)
	// ref replays the same keys synchronously to know what the frames are;
	// m belongs to the program's goroutine once it runs.
	ref := newViewModel(t, src, w, h, render.Tier256)
	tm := teatest.NewTestModel(t, m, teatest.WithInitialTermSize(w, h))
	out := tm.Output()
	full := readUntil(t, out, ref.readout())

	before := ref.View()
	tm.Send(keyMsg("right"))
	keys(t, ref, "right")
	step := readUntil(t, out, ref.readout())
	afterStep := ref.View()

	tm.Send(keyMsg("pgdown"))
	keys(t, ref, "pgdown")
	pan := readUntil(t, out, ref.readout())
	afterPan := ref.View()
	if err := tm.Quit(); err != nil {
		t.Fatal(err)
	}

	stepChanged := changedBytes(before, afterStep)
	panChanged := changedBytes(afterStep, afterPan)
	t.Logf("full frame %d bytes; cursor step wrote %d (changed lines %d); pan wrote %d (changed lines %d)",
		full, step, stepChanged, pan, panChanged)
	if step > full/4 {
		t.Errorf("a cursor step wrote %d bytes, a quarter of the %d-byte full frame at most", step, full)
	}
	// Cursor movement escapes cost a few bytes per line on top of the lines.
	if step > stepChanged+16*h {
		t.Errorf("a cursor step wrote %d bytes for %d bytes of changed lines", step, stepChanged)
	}
	if pan > panChanged+16*h {
		t.Errorf("a pan wrote %d bytes for %d bytes of changed lines", pan, panChanged)
	}
}

// readUntil reads program output until it contains want and returns how
// many bytes it read.
func readUntil(t *testing.T, r io.Reader, want string) int {
	t.Helper()
	n := 0
	teatest.WaitFor(t, r, func(b []byte) bool {
		n = len(b)
		return bytes.Contains(b, []byte(want))
	}, teatest.WithDuration(10*time.Second), teatest.WithCheckInterval(10*time.Millisecond))
	return n
}

// changedBytes sums the bytes of the lines of b that differ from a.
func changedBytes(a, b string) int {
	la, lb := strings.Split(a, "\n"), strings.Split(b, "\n")
	n := 0
	for i, l := range lb {
		if i >= len(la) || la[i] != l {
			n += len(l)
		}
	}
	return n
}

var _ tea.Model = (*Model)(nil)
