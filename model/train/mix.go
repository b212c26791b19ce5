package train

import (
	"math"

	"convtag/model"
	"convtag/model/metrics"
)

// MixGrid is the baseline weights ChooseMix tries: 0 (the network alone)
// to 1 (the baseline alone) in steps of 0.1.
var MixGrid = []float64{0, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1}

// MixScores are the dev figures behind a mixture's choice.
type MixScores struct {
	Scorer   model.Scorer `json:"scorer"`
	LinearC  float64      `json:"linear_c"`
	Network  float64      `json:"network_dev_accuracy"`
	Baseline float64      `json:"baseline_dev_accuracy"` // the linear baseline alone
	Mixed    float64      `json:"dev_accuracy"`          // the chosen scorer
	// Accuracy and LogLoss are the dev figures of every weight of MixGrid.
	Accuracy []float64 `json:"grid_accuracy"`
	LogLoss  []float64 `json:"grid_log_loss"`
}

// ChooseMix picks the baseline weight of MixGrid whose mixture (model.Mix)
// has the highest accuracy on the dev records, the lower mean log-loss
// breaking ties; the scorer is the network alone unless that weight's
// accuracy is strictly higher than the network's, the baseline alone at
// weight 1, and the mixture in between. net and base are each record's
// probabilities, gold its label.
func ChooseMix(net [][]float32, base [][]float64, gold []int) *MixScores {
	ms := &MixScores{}
	out := make([]float32, 0)
	var z []float64
	best := 0
	for k, w := range MixGrid {
		right, loss := 0, 0.0
		for i, pn := range net {
			if len(out) < len(pn) {
				out, z = make([]float32, len(pn)), make([]float64, len(pn))
			}
			model.Mix(out[:len(pn)], z, pn, base[i], w)
			if c, _ := metrics.Predict(out[:len(pn)]); c == gold[i] {
				right++
			}
			loss -= math.Log(max(float64(out[gold[i]]), math.SmallestNonzeroFloat32))
		}
		ms.Accuracy = append(ms.Accuracy, float64(right)/float64(max(len(net), 1)))
		ms.LogLoss = append(ms.LogLoss, round6(loss/float64(max(len(net), 1))))
		if ms.Accuracy[k] > ms.Accuracy[best] || ms.Accuracy[k] == ms.Accuracy[best] && ms.LogLoss[k] < ms.LogLoss[best] {
			best = k
		}
	}
	ms.Network, ms.Baseline = ms.Accuracy[0], ms.Accuracy[len(MixGrid)-1]
	ms.Mixed = ms.Network
	if ms.Accuracy[best] > ms.Network {
		ms.Mixed = ms.Accuracy[best]
		switch w := MixGrid[best]; w {
		case 1:
			ms.Scorer = model.Scorer{Kind: model.ScoreBaseline}
		default:
			ms.Scorer = model.Scorer{Kind: model.ScoreCombined, Weight: w}
		}
	}
	return ms
}
