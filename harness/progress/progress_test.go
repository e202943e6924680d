package progress

import (
	"bytes"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/require"
)

// fakeClock advances by step on every reading.
func fakeClock(step time.Duration) func() time.Time {
	t := time.Unix(0, 0)
	return func() time.Time {
		t = t.Add(step)
		return t
	}
}

func TestPlainOutputIsSparseAndLineBased(t *testing.T) {
	var b bytes.Buffer
	m := New(&b, "scoring")
	require.False(t, m.tty, "a buffer is not a terminal")
	m.now = fakeClock(time.Second)
	m.start, m.last = m.now(), m.now()
	for i := 1; i <= 100; i++ {
		m.Update(i, 100)
	}
	m.Done()
	lines := strings.Split(strings.TrimSpace(b.String()), "\n")
	// One line per 10 s of a 100 s job, and none at completion.
	require.Len(t, lines, 9)
	require.NotContains(t, b.String(), "\r")
	require.Contains(t, lines[0], "scoring: ")
}

func TestTerminalRedrawsOneLine(t *testing.T) {
	var b bytes.Buffer
	m := New(&b, "x")
	m.tty, m.interval = true, 100*time.Millisecond
	m.now = fakeClock(time.Second)
	m.start, m.last = m.now(), m.now()
	m.Update(1, 2)
	m.Update(2, 2)
	m.Done()
	require.Equal(t, 3, strings.Count(b.String(), "\r\x1b[K"))
	require.NotContains(t, b.String(), "\n")
}

func TestNilMeterIsSilent(t *testing.T) {
	var m *Meter
	m.Update(1, 2)
	m.Done()
}
