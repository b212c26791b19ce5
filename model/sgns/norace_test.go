//go:build !race

package sgns

const raceEnabled = false
