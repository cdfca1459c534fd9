package main

import (
	"fmt"
	"io"
	"os"
	"strings"
	"time"

	"github.com/mattn/go-isatty"
)

// progress draws a one-line progress bar on stderr when stderr is a
// terminal and stays quiet otherwise (CI logs, pipes, files).
type progress struct {
	w     io.Writer
	label string
	total int
	done  int
	start time.Time
	last  time.Time
	tty   bool
}

// newProgress starts a bar for total steps of work.
func newProgress(env *environ, label string, total int) *progress {
	p := &progress{w: env.stderr, label: label, total: total, start: time.Now()}
	if f, ok := env.stderr.(*os.File); ok {
		p.tty = isatty.IsTerminal(f.Fd())
	}
	return p
}

// Step records n more steps done and redraws at most ten times a second.
func (p *progress) Step(n int) {
	p.done += n
	if !p.tty || (time.Since(p.last) < 100*time.Millisecond && p.done < p.total) {
		return
	}
	p.last = time.Now()
	const width = 30
	frac := 1.0
	if p.total > 0 {
		frac = min(1, float64(p.done)/float64(p.total))
	}
	full := int(frac * width)
	fmt.Fprintf(p.w, "\r%s [%s%s] %d/%d  %s ", p.label, strings.Repeat("█", full), strings.Repeat("·", width-full),
		p.done, p.total, time.Since(p.start).Round(100*time.Millisecond))
}

// Finish ends the bar's line.
func (p *progress) Finish() {
	if p.tty {
		fmt.Fprintln(p.w)
	}
}
