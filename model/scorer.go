package model

import (
	"encoding/json"
	"fmt"
	"math"
	"strconv"
)

// MetaScorer is the metadata key of Model.Scorer: JSON of Scorer.
const MetaScorer = "scorer"

// Scorer kinds.
const (
	ScoreNetwork  = "network"  // the network's softmax
	ScoreBaseline = "baseline" // the linear baseline's softmax
	ScoreCombined = "combined" // the log-linear mixture of both
)

// Scorer says how a Predictor turns a text into probabilities: with the
// network, with the linear baseline, or with their log-linear mixture
//
//	p(c) ∝ p_network(c)^(1-W) · p_baseline(c)^W
//
// (a weighted geometric mean, renormalised), W in [0, 1]. The kinds are the
// mixture's end points and its inside: "network" is W = 0, "baseline" W = 1.
type Scorer struct {
	Kind   string  `json:"kind"`
	Weight float64 `json:"baseline_weight,omitempty"` // W, for "combined"
}

// String is the scorer as a person reads it.
func (s Scorer) String() string {
	switch s.kind() {
	case ScoreCombined:
		return "combined (baseline weight " + strconv.FormatFloat(s.Weight, 'f', -1, 64) + ")"
	default:
		return s.kind()
	}
}

func (s Scorer) kind() string {
	if s.Kind == "" {
		return ScoreNetwork
	}
	return s.Kind
}

// weight is W of the mixture.
func (s Scorer) weight() float64 {
	switch s.kind() {
	case ScoreBaseline:
		return 1
	case ScoreCombined:
		return s.Weight
	}
	return 0
}

// check says whether s can run on m.
func (s Scorer) check(m *Model) error {
	switch s.kind() {
	case ScoreNetwork:
		return nil
	case ScoreBaseline, ScoreCombined:
		if m.Multi {
			return fmt.Errorf("model: scorer %q is for single-label models; a multi-label model scores with its network", s.kind())
		}
		if m.Linear == nil {
			return fmt.Errorf("model: scorer %q needs the linear baseline, which this model file does not hold", s.kind())
		}
		if m.Linear.Labels() != len(m.Labels) {
			return fmt.Errorf("model: linear baseline has %d labels, the model %d", m.Linear.Labels(), len(m.Labels))
		}
		if s.kind() == ScoreCombined && !(s.Weight > 0 && s.Weight < 1) {
			return fmt.Errorf("model: combined scorer's baseline weight %v is not strictly between 0 and 1", s.Weight)
		}
		return nil
	}
	return fmt.Errorf("model: unknown scorer %q (want %s, %s or %s)", s.Kind, ScoreNetwork, ScoreBaseline, ScoreCombined)
}

// ParseScorer reads a scorer's kind as a user names it ("network",
// "baseline" or "combined"); "combined" takes the weight of m's stored
// scorer, or 0.5 when m stores none.
func ParseScorer(m *Model, kind string) (Scorer, error) {
	s := Scorer{Kind: kind}
	if kind == ScoreCombined {
		s.Weight = 0.5
		if m.Scorer.kind() == ScoreCombined {
			s.Weight = m.Scorer.Weight
		}
	}
	if err := s.check(m); err != nil {
		return Scorer{}, err
	}
	return s, nil
}

func encodeScorer(s Scorer) string {
	js, _ := json.Marshal(s)
	return string(js)
}

func decodeScorer(v string) (Scorer, error) {
	var s Scorer
	if err := json.Unmarshal([]byte(v), &s); err != nil {
		return Scorer{}, err
	}
	if math.IsNaN(s.Weight) {
		return Scorer{}, fmt.Errorf("weight is NaN")
	}
	return s, nil
}

// Mix writes into dst the mixture of the network's probabilities pn and
// the baseline's pb with baseline weight w (see Scorer), computed in
// float64 from the log-probabilities; a zero probability of either side
// takes its log as that of the smallest positive float32, so the mixture
// stays finite. z is scratch of at least len(pn). It is the scorer's one
// formula, used by Predictor and by training when it chooses W.
func Mix(dst []float32, z []float64, pn []float32, pb []float64, w float64) {
	const floor = math.SmallestNonzeroFloat32
	hi := math.Inf(-1)
	z = z[:len(pn)]
	for c := range pn {
		z[c] = (1-w)*math.Log(max(float64(pn[c]), floor)) + w*math.Log(max(pb[c], floor))
		hi = max(hi, z[c])
	}
	var sum float64
	for c := range z {
		z[c] = math.Exp(z[c] - hi)
		sum += z[c]
	}
	for c := range z {
		dst[c] = float32(z[c] / sum)
	}
}
