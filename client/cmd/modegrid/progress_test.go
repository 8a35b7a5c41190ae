package main

import (
	"bytes"
	"strings"
	"testing"
	"time"
)

// TestProgress: a disabled indicator writes nothing; an enabled one draws a
// bar with the fraction done, throttles redraws, always draws the last one,
// and clears its line.
func TestProgress(t *testing.T) {
	tests := []struct {
		name    string
		enabled bool
		steps   [][2]int // done, total
		advance time.Duration
		want    []string
		wantNot []string
	}{
		{name: "disabled", enabled: false, steps: [][2]int{{1, 4}, {4, 4}}},
		{name: "bar", enabled: true, steps: [][2]int{{2, 4}}, advance: time.Second,
			want: []string{"\rmodes [###############---------------]  50% 2/4 q-points"}},
		{name: "last always drawn", enabled: true, steps: [][2]int{{1, 4}, {2, 4}, {4, 4}}, advance: 0,
			want: []string{"25%", "100% 4/4"}, wantNot: []string{"50%"}},
		{name: "unknown total ignored", enabled: true, steps: [][2]int{{3, 0}}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var buf bytes.Buffer
			p := newProgress(&buf, tc.enabled)
			clock := time.Unix(0, 0)
			p.now = func() time.Time { return clock }
			for i, s := range tc.steps {
				if i == 0 {
					clock = clock.Add(time.Hour) // first draw is never throttled
				} else {
					clock = clock.Add(tc.advance)
				}
				p.update("modes", s[0], s[1])
			}
			p.clear()
			got := buf.String()
			if !tc.enabled || tc.name == "unknown total ignored" {
				if got != "" {
					t.Fatalf("wrote %q; want nothing", got)
				}
				return
			}
			for _, s := range tc.want {
				if !strings.Contains(got, s) {
					t.Errorf("output %q lacks %q", got, s)
				}
			}
			for _, s := range tc.wantNot {
				if strings.Contains(got, s) {
					t.Errorf("output %q has %q (redraw not throttled)", got, s)
				}
			}
			if !strings.HasSuffix(got, "\r\x1b[K") {
				t.Errorf("output %q does not end by clearing the line", got)
			}
		})
	}
}

// TestRunningIndicator: the elapsed-time indicator stops and clears its
// line; disabled, it writes nothing.
func TestRunningIndicator(t *testing.T) {
	var buf bytes.Buffer
	stop := newProgress(&buf, false).running("dos")
	stop()
	if buf.Len() != 0 {
		t.Errorf("disabled indicator wrote %q", buf.String())
	}
	p := newProgress(&buf, true)
	stop = p.running("dos")
	stop()
	if s := buf.String(); s != "" && !strings.HasSuffix(s, "\r\x1b[K") {
		t.Errorf("indicator left %q on the line", s)
	}
}
