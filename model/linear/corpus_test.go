package linear

import (
	"math/rand/v2"
)

// The invented scenario: help-desk lines of a small island ferry service,
// in four queues. Every word is made up for the test or plain English; the
// lines are drawn from a fixed seed, with words shared between queues and
// one label in twelve flipped, so the classes overlap and the choice of C
// matters.
var ferryLabels = []string{"timetable", "fares", "lost-property", "safety"}

var ferryWords = [][]string{
	{"sailing", "departs", "delayed", "late", "earlier", "pier", "crossing", "tide", "schedule", "morning", "evening", "cancelled"},
	{"ticket", "fare", "refund", "price", "card", "pass", "return", "charged", "discount", "receipt", "paid", "cost"},
	{"left", "bag", "umbrella", "found", "scarf", "wallet", "keys", "lost", "bench", "deck", "forgot", "phone"},
	{"lifejacket", "rail", "slippery", "crew", "rough", "waves", "injured", "ramp", "alarm", "wet", "deck", "storm"},
}

var ferryCommon = []string{"the", "a", "my", "on", "at", "is", "was", "i", "please", "today", "ferry", "boat", "to", "from", "quillhaven", "norrow", "skerry"}

// ferryCorpus returns n tokenised lines and their labels, drawn from seed.
func ferryCorpus(n int, seed uint64) ([][]string, []int) {
	rng := rand.New(rand.NewPCG(seed, 0x66657272)) // "ferr"
	docs := make([][]string, n)
	y := make([]int, n)
	for i := range n {
		c := rng.IntN(len(ferryLabels))
		l := 3 + rng.IntN(9)
		for range l {
			switch r := rng.Float64(); {
			case r < 0.45:
				docs[i] = append(docs[i], ferryWords[c][rng.IntN(len(ferryWords[c]))])
			case r < 0.6:
				o := rng.IntN(len(ferryWords))
				docs[i] = append(docs[i], ferryWords[o][rng.IntN(len(ferryWords[o]))])
			default:
				docs[i] = append(docs[i], ferryCommon[rng.IntN(len(ferryCommon))])
			}
		}
		if rng.IntN(12) == 0 {
			c = (c + 1 + rng.IntN(len(ferryLabels)-1)) % len(ferryLabels)
		}
		y[i] = c
	}
	return docs, y
}
