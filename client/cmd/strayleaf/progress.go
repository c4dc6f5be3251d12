package main

import (
	"fmt"
	"io"
	"os"
	"sync"
	"time"

	"golang.org/x/term"
)

// progress prints a one-line progress indicator to stderr when stderr is a terminal and quiet is
// off; otherwise it prints nothing.
type progress struct {
	mu      sync.Mutex
	w       io.Writer
	label   string
	start   time.Time
	last    time.Time
	enabled bool
}

func newProgress(stderr io.Writer, label string, quiet bool) *progress {
	enabled := false
	if f, ok := stderr.(*os.File); ok && !quiet {
		enabled = term.IsTerminal(int(f.Fd()))
	}
	return &progress{w: stderr, label: label, start: time.Now(), enabled: enabled}
}

// update reports done of total; safe for concurrent use.
func (p *progress) update(done, total int) {
	if !p.enabled {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	now := time.Now()
	if done < total && now.Sub(p.last) < 100*time.Millisecond {
		return
	}
	p.last = now
	fmt.Fprintf(p.w, "\r%s: %d/%d (%.1fs)   ", p.label, done, total, now.Sub(p.start).Seconds())
	if done >= total {
		fmt.Fprintln(p.w)
	}
}
