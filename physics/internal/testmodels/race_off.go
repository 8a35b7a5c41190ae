//go:build !race

package testmodels

// RaceEnabled: see race_on.go.
const RaceEnabled = false
