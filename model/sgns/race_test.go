//go:build race

package sgns

const raceEnabled = true
