//go:build race

package engine_test

// raceEnabled: the race detector is on.
const raceEnabled = true
