//go:build !race

package qha_test

// raceEnabled: built with the race detector.
const raceEnabled = false
