//go:build race

package store

// raceEnabled: the race detector is on (tests size their work down).
const raceEnabled = true
