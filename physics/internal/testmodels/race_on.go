//go:build race

package testmodels

// RaceEnabled: the race detector slows the engine's loops about tenfold,
// so the longest tests run a shorter ladder under it.
const RaceEnabled = true
