package main

import (
	"fmt"
	"io"
	"os"
	"strings"
	"sync"
	"time"

	"golang.org/x/term"
)

// isTerminal reports whether w is a terminal; progress is drawn only then,
// so redirected or piped stderr stays clean.
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	return ok && term.IsTerminal(int(f.Fd()))
}

// progress draws a one-line progress indicator on a terminal: a bar when
// the amount of work is known (streamed modes), otherwise the elapsed time
// of a running call. A disabled progress writes nothing. Safe for
// concurrent use.
type progress struct {
	w       io.Writer
	enabled bool
	now     func() time.Time // the clock, replaceable in tests

	mu    sync.Mutex // protects the fields below
	label string
	start time.Time
	last  time.Time // last redraw
	drawn bool      // a line is on the screen
}

// minRedraw is the shortest time between two redraws of the bar.
const minRedraw = 100 * time.Millisecond

// barWidth is the number of cells of the bar.
const barWidth = 30

func newProgress(w io.Writer, enabled bool) *progress {
	return &progress{w: w, enabled: enabled, now: time.Now}
}

// update shows done of total points for label.
func (p *progress) update(label string, done, total int) {
	if !p.enabled || total <= 0 {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	now := p.now()
	if p.label != label {
		p.label, p.start = label, now
	}
	if done < total && now.Sub(p.last) < minRedraw {
		return
	}
	p.last = now
	frac := float64(min(done, total)) / float64(total)
	n := int(frac * barWidth)
	fmt.Fprintf(p.w, "\r%s [%s%s] %3.0f%% %d/%d q-points %s\x1b[K", label,
		strings.Repeat("#", n), strings.Repeat("-", barWidth-n), 100*frac, done, total, elapsed(now.Sub(p.start)))
	p.drawn = true
}

// running shows an elapsed-time line for label until the returned stop is
// called, for calls whose amount of work is not reported.
func (p *progress) running(label string) (stop func()) {
	if !p.enabled {
		return func() {}
	}
	p.mu.Lock()
	p.label, p.start = label, p.now()
	p.mu.Unlock()
	t := time.NewTicker(250 * time.Millisecond)
	done := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		for {
			select {
			case <-done:
				return
			case <-t.C:
				p.mu.Lock()
				fmt.Fprintf(p.w, "\r%s … %s\x1b[K", p.label, elapsed(p.now().Sub(p.start)))
				p.drawn = true
				p.mu.Unlock()
			}
		}
	}()
	return func() {
		t.Stop()
		close(done)
		wg.Wait()
		p.clear()
	}
}

// clear erases the progress line, if one is drawn.
func (p *progress) clear() {
	if !p.enabled {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.drawn {
		fmt.Fprint(p.w, "\r\x1b[K")
		p.drawn = false
	}
	p.label = ""
}

func elapsed(d time.Duration) string {
	return fmt.Sprintf("%.1f s", d.Seconds())
}
