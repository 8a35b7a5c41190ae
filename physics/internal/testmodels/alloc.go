package testmodels

import (
	"runtime"
	"runtime/debug"
	"testing"
)

// MeasureAlloc runs fn with the garbage collector off and returns the heap
// bytes it allocated (runtime.MemStats.TotalAlloc growth). With no
// collection nothing is freed, so this is an upper bound of fn's peak live
// heap, and deterministic: it does not depend on when a collection would
// have run. The cost ladders hold estimates to it from both sides (the
// same measurement as thermo's TestCostLadder).
func MeasureAlloc(t testing.TB, fn func()) int64 {
	t.Helper()
	old := debug.SetGCPercent(-1)
	defer debug.SetGCPercent(old)
	runtime.GC()
	var a, b runtime.MemStats
	runtime.ReadMemStats(&a)
	fn()
	runtime.ReadMemStats(&b)
	return int64(b.TotalAlloc - a.TotalAlloc)
}
