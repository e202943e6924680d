// Package progress reports the progress of long work: a line rewritten in
// place on a terminal, and sparse plain lines elsewhere (CI logs), so logs stay
// short and line-based.
package progress

import (
	"fmt"
	"io"
	"os"
	"time"

	"golang.org/x/sys/unix"
)

// A Meter reports progress of one task to a writer. The zero Meter (or nil)
// reports nothing.
type Meter struct {
	w        io.Writer
	label    string
	tty      bool
	interval time.Duration
	last     time.Time
	start    time.Time
	now      func() time.Time
	dirty    bool
}

// New starts a meter for label writing to w. On a terminal it redraws one line
// at most ten times a second; otherwise it writes a line at most every 10 s.
func New(w io.Writer, label string) *Meter {
	m := &Meter{w: w, label: label, tty: IsTerminal(w), interval: 10 * time.Second, now: time.Now}
	if m.tty {
		m.interval = 100 * time.Millisecond
	}
	m.start = m.now()
	m.last = m.start
	return m
}

// IsTerminal reports whether w is a terminal.
func IsTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	_, err := unix.IoctlGetTermios(int(f.Fd()), unix.TCGETS)
	return err == nil
}

// Update reports that done of total units are finished.
func (m *Meter) Update(done, total int) {
	if m == nil || m.w == nil {
		return
	}
	t := m.now()
	if t.Sub(m.last) < m.interval && done < total {
		return
	}
	m.last = t
	pct := 100.0
	if total > 0 {
		pct = 100 * float64(done) / float64(total)
	}
	line := fmt.Sprintf("%s: %d/%d (%.0f%%) %s", m.label, done, total, pct, t.Sub(m.start).Round(100*time.Millisecond))
	if m.tty {
		fmt.Fprintf(m.w, "\r\x1b[K%s", line)
		m.dirty = true
		return
	}
	if done < total {
		fmt.Fprintln(m.w, line)
	}
}

// Done ends the meter, clearing the terminal line.
func (m *Meter) Done() {
	if m == nil || m.w == nil || !m.dirty {
		return
	}
	fmt.Fprint(m.w, "\r\x1b[K")
	m.dirty = false
}
