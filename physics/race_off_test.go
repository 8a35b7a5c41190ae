//go:build !race

package physics

const raceEnabled = false
