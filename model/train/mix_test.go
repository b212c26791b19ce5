package train

import (
	"testing"

	"convtag/model"
)

func TestChooseMix(t *testing.T) {
	gold := []int{0, 1, 0, 1}
	right := [][]float32{{0.9, 0.1}, {0.2, 0.8}, {0.7, 0.3}, {0.4, 0.6}}
	wrong := [][]float32{{0.1, 0.9}, {0.8, 0.2}, {0.3, 0.7}, {0.6, 0.4}}
	f64 := func(p [][]float32) [][]float64 {
		out := make([][]float64, len(p))
		for i, r := range p {
			out[i] = []float64{float64(r[0]), float64(r[1])}
		}
		return out
	}
	// Each side half right: the first two by the network, the last two by
	// the baseline, with the network unsure where it is wrong.
	netHalf := [][]float32{{0.9, 0.1}, {0.1, 0.9}, {0.45, 0.55}, {0.55, 0.45}}
	baseHalf := [][]float32{{0.45, 0.55}, {0.55, 0.45}, {0.9, 0.1}, {0.1, 0.9}}
	for _, tc := range []struct {
		name      string
		net, base [][]float32
		want      model.Scorer
	}{
		{"network right, baseline wrong", right, wrong, model.Scorer{}},
		{"both right: the network, no gain", right, right, model.Scorer{}},
		{"baseline right, network wrong", wrong, right, model.Scorer{Kind: model.ScoreBaseline}},
		{"each half right", netHalf, baseHalf, model.Scorer{Kind: model.ScoreCombined, Weight: 0.5}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			ms := ChooseMix(tc.net, f64(tc.base), gold)
			if ms.Scorer != tc.want {
				t.Errorf("scorer %+v, want %+v (grid accuracy %v, log-loss %v)", ms.Scorer, tc.want, ms.Accuracy, ms.LogLoss)
			}
			if len(ms.Accuracy) != len(MixGrid) || ms.Mixed < ms.Network {
				t.Errorf("figures %+v", ms)
			}
		})
	}
}
