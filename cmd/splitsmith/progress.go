package main

import (
	"fmt"
	"io"
	"sync"
	"time"
)

// progress prints "label: done/total" on one terminal line at most five times a second, and
// nothing when stderr is not a terminal (pipes, CI, tests).
type progress struct {
	mu    sync.Mutex
	w     io.Writer
	label string
	last  time.Time
	on    bool
	shown bool
}

func newProgress(w io.Writer, label string) *progress {
	return &progress{w: w, label: label, on: isTerminal(w)}
}

// Report is the callback domain packages take: done of total units (total 0 = unknown).
func (p *progress) Report(done, total int64) {
	if p == nil || !p.on {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	if now := time.Now(); now.Sub(p.last) >= 200*time.Millisecond {
		p.last = now
		p.shown = true
		if total > 0 {
			fmt.Fprintf(p.w, "\r%s: %d/%d (%.0f%%)   ", p.label, done, total, 100*float64(done)/float64(total))
		} else {
			fmt.Fprintf(p.w, "\r%s: %d   ", p.label, done)
		}
	}
}

// Done clears the progress line.
func (p *progress) Done() {
	if p != nil && p.on && p.shown {
		fmt.Fprintf(p.w, "\r\033[K")
	}
}
