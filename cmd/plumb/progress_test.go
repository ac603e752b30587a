package main

import (
	"bytes"
	"sync"
	"testing"
	"time"

	"github.com/plumbref/plumb/internal/expect"
)

// syncBuffer is a bytes.Buffer safe for the progress goroutine.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

func TestProgress(t *testing.T) {
	d, k := progressDelay, progressTick
	defer func() { progressDelay, progressTick = d, k }()
	progressDelay, progressTick = 5*time.Millisecond, time.Millisecond

	for _, c := range []struct {
		name            string
		terminal, quiet bool
		shown           bool
	}{
		{"terminal", true, false, true},
		{"quiet", true, true, false},
		{"not a terminal", false, false, false},
	} {
		t.Run(c.name, func(t *testing.T) {
			var buf syncBuffer
			done := progress(&env{stderr: &buf, terminal: c.terminal}, c.quiet, "running attention-forward")
			time.Sleep(30 * time.Millisecond)
			done()
			if c.shown {
				expect.Contains(t, buf.String(), "\rplumb: running attention-forward … ")
				expect.Contains(t, buf.String(), " s ")
				expect.Contains(t, buf.String(), "\r\033[K", "the line is cleared at the end")
			} else {
				expect.Empty(t, buf.String())
			}
		})
	}

	// A step shorter than the delay shows nothing.
	progressDelay = time.Hour
	var buf syncBuffer
	progress(&env{stderr: &buf, terminal: true}, false, "quick")()
	expect.Empty(t, buf.String())
}
