package fit

import (
	"context"
	"testing"
)

// benchSink keeps benchmark results alive.
var benchSink any

// BenchmarkTypicalFit is the typical fit of DEVELOPERS.md: 40 unlabelled
// frequencies of the rock-salt-like example, 4 shell constants started
// 10–30 % off (set-up, the Levenberg–Marquardt loop, the fitted model and
// the error analysis).
func BenchmarkTypicalFit(b *testing.B) {
	p, _ := typicalProblem(b)
	b.ReportAllocs()
	for b.Loop() {
		res, err := Fit(context.Background(), p)
		if err != nil {
			b.Fatal(err)
		}
		benchSink = res
	}
}
