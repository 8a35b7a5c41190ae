//go:build race

package physics

// raceEnabled: the race detector slows the engine's loops about tenfold,
// so the longest tests run a shorter ladder under it.
const raceEnabled = true
