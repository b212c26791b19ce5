package model

import (
	"slices"
	"strings"
)

// Evidence is one word window's part in a prediction: the window of Width
// tokens starting at token Start, and what the filters it won add to a
// label's logit.
//
// With no hidden layer the logit of label c is
//
//	logit[c] = Out.B[c] + sum_f Out.W[c][f] * feat[f]
//
// and every positive feature feat[f] comes from exactly one window (its
// max-pool winner, see Predictor.Winners), so giving each window the sum of
// Out.W[c][f]*feat[f] over the filters it won splits logit[c] − Out.B[c]
// exactly among the windows.
//
// With a hidden layer, h = ReLU(Wh feat + bh), the network is still linear
// between its ReLU switches: for this input, with A the hidden units that
// are on, logit[c] = Out.B[c] + sum_{k in A} Out.W[c][k] bh[k] +
// sum_f (sum_{k in A} Out.W[c][k] Wh[k][f]) feat[f]. Each window gets its
// features' part of the last sum; the hidden biases' part is the Bias of
// Explanation. The split is exact for this input's logit but, unlike the
// linear case, it is a local one: taking a window away may switch hidden
// units on or off, so its effect is not exactly its Score (the same holds
// for a window that would win a filter once another is gone, in both
// cases).
type Evidence struct {
	Width int `json:"width"`
	Start int `json:"start"` // token position of the window's first word
	// Text is the window's tokens (as the tokenizer gives them: normalised,
	// placeholders for URLs and numbers) joined by spaces; a window running
	// past the last token is cut there (the rest is padding).
	Text string `json:"text"`
	// Score is what the window adds to the label's logit.
	Score float32 `json:"score"`
	// Share is Score over the sum of |Score| over all windows, so the
	// shares' magnitudes add up to 1 and a negative share speaks against
	// the label.
	Share   float32 `json:"share"`
	Filters int     `json:"filters"` // filters the window won
}

// Explanation is the decomposition of one label's logit.
type Explanation struct {
	Label int     `json:"label"`
	Logit float32 `json:"logit"`
	// Bias is the part no window accounts for: Out.B[label], plus the
	// hidden biases' share when there is a hidden layer.
	Bias float32 `json:"bias"`
	// Windows are the windows that won at least one filter, highest Score
	// first (ties: shorter, then earlier window first), at most the number
	// asked for.
	Windows []Evidence `json:"windows"`
}

// Explain predicts text as Predict does and splits the logit of label (the
// most probable label when label < 0) among the word windows that won the
// max-over-time pooling (see Evidence). It returns the probabilities (owned
// by p, as Predict's) and the explanation with the n windows of highest
// Score (all of them when n <= 0). Predict itself does none of this work.
func (p *Predictor) Explain(text []byte, label, n int) ([]float32, Explanation) {
	probs := p.Predict(text)
	if label < 0 || label >= len(probs) {
		label = 0
		for c, v := range probs {
			if v > probs[label] {
				label = c
			}
		}
	}
	return probs, p.explain(label, n)
}

// effectiveWeights returns the weight of each pooled feature in label's
// logit for the last prediction, and the logit's part that no feature
// accounts for.
func (p *Predictor) effectiveWeights(label int, w []float32) ([]float32, float32) {
	m := p.m
	o := &m.Out
	nf := m.Config.Features()
	w = slices.Grow(w[:0], nf)[:nf]
	bias := o.B[label]
	if h := m.Hidden; h != nil {
		clear(w)
		for k := range h.Out {
			if p.hid[k] <= 0 {
				continue
			}
			ok := o.W[label*o.In+k]
			bias += ok * h.B[k]
			row := h.W[k*h.In : (k+1)*h.In]
			for f := range w {
				w[f] += ok * row[f]
			}
		}
		return w, bias
	}
	copy(w, o.W[label*o.In:(label+1)*o.In])
	return w, bias
}

type windowKey struct{ width, start int }

func (p *Predictor) explain(label, n int) Explanation {
	m := p.m
	feat, win := p.Features(), p.Winners()
	w, bias := p.effectiveWeights(label, nil)
	ex := Explanation{Label: label, Logit: p.logits[label], Bias: bias}
	F := m.Config.Filters
	at := map[windowKey]int{}
	var total float32
	for i, width := range m.Config.Widths {
		for f := range F {
			j := i*F + f
			if win[j] < 0 || feat[j] == 0 {
				continue
			}
			k := windowKey{width, int(win[j])}
			idx, ok := at[k]
			if !ok {
				idx = len(ex.Windows)
				at[k] = idx
				ex.Windows = append(ex.Windows, Evidence{Width: width, Start: k.start})
			}
			s := w[j] * feat[j]
			ex.Windows[idx].Score += s
			ex.Windows[idx].Filters++
		}
	}
	for _, e := range ex.Windows {
		total += max(e.Score, -e.Score)
	}
	ntok := p.toks.Len()
	for i := range ex.Windows {
		e := &ex.Windows[i]
		if total > 0 {
			e.Share = e.Score / total
		}
		var b strings.Builder
		for t := e.Start; t < min(e.Start+e.Width, ntok); t++ {
			if t > e.Start {
				b.WriteByte(' ')
			}
			b.Write(p.toks.At(t))
		}
		e.Text = b.String()
	}
	slices.SortStableFunc(ex.Windows, func(a, b Evidence) int {
		switch {
		case a.Score > b.Score:
			return -1
		case a.Score < b.Score:
			return 1
		case a.Width != b.Width:
			return a.Width - b.Width
		}
		return a.Start - b.Start
	})
	if n > 0 && len(ex.Windows) > n {
		ex.Windows = ex.Windows[:n]
	}
	return ex
}

// NGram is an n-gram of a sample with what it does for one label.
type NGram struct {
	Text string `json:"text"`
	// Mean is its mean Score for the label over the records where it won
	// at least one filter; Count is the number of those records.
	Mean  float32 `json:"mean_score"`
	Count int     `json:"count"`
}

// Window is a window of a sample with one filter's activation.
type Window struct {
	Text       string  `json:"text"`
	Activation float32 `json:"activation"`
}

// FilterWindows are one filter's strongest windows.
type FilterWindows struct {
	Feature int      `json:"feature"` // index into Features
	Width   int      `json:"width"`
	Filter  int      `json:"filter"` // within its width
	Windows []Window `json:"windows"`
}

// Survey collects, over sample texts, which windows raise each label's
// score and which windows each filter responds to most. It holds a
// Predictor and must not be used by two goroutines at once. Its memory
// grows with the distinct winning windows of the sample.
type Survey struct {
	p     *Predictor
	n     int
	sums  []map[string]*ngramSum // per label
	best  [][]Window             // per feature, the strongest distinct windows, at most n
	texts int
}

type ngramSum struct {
	sum   float64
	count int
}

// NewSurvey returns a Survey of m that keeps the n strongest windows of
// each filter.
func (m *Model) NewSurvey(n int) *Survey {
	s := &Survey{p: m.NewPredictor(), n: max(n, 1)}
	s.sums = make([]map[string]*ngramSum, len(m.Labels))
	for c := range s.sums {
		s.sums[c] = map[string]*ngramSum{}
	}
	s.best = make([][]Window, m.Config.Features())
	return s
}

// Texts is the number of texts added.
func (s *Survey) Texts() int { return s.texts }

// Add runs text through the network and records its winning windows.
func (s *Survey) Add(text []byte) {
	s.texts++
	p := s.p
	p.Predict(text)
	for c := range s.sums {
		ex := p.explain(c, 0)
		for _, e := range ex.Windows {
			g := s.sums[c][e.Text]
			if g == nil {
				g = &ngramSum{}
				s.sums[c][e.Text] = g
			}
			g.sum += float64(e.Score)
			g.count++
		}
	}
	feat, win := p.Features(), p.Winners()
	F := p.m.Config.Filters
	ntok := p.toks.Len()
	for j, v := range feat {
		if win[j] < 0 || v == 0 {
			continue
		}
		width := p.m.Config.Widths[j/F]
		start := int(win[j])
		var b strings.Builder
		for t := start; t < min(start+width, ntok); t++ {
			if t > start {
				b.WriteByte(' ')
			}
			b.Write(p.toks.At(t))
		}
		s.best[j] = keepBest(s.best[j], Window{Text: b.String(), Activation: v}, s.n)
	}
}

// keepBest adds w to the list of at most n distinct windows, strongest
// first.
func keepBest(list []Window, w Window, n int) []Window {
	for i, x := range list {
		if x.Text == w.Text {
			if w.Activation <= x.Activation {
				return list
			}
			list = slices.Delete(list, i, i+1)
			break
		}
	}
	i, _ := slices.BinarySearchFunc(list, w, func(a, b Window) int {
		switch {
		case a.Activation > b.Activation:
			return -1
		case a.Activation < b.Activation:
			return 1
		}
		return strings.Compare(a.Text, b.Text)
	})
	if i >= n {
		return list
	}
	list = slices.Insert(list, i, w)
	if len(list) > n {
		list = list[:n]
	}
	return list
}

// Labels returns, for each label, the n n-grams of the sample with the
// highest mean Score (ties: more frequent, then in byte order).
func (s *Survey) Labels(n int) [][]NGram {
	out := make([][]NGram, len(s.sums))
	for c, sums := range s.sums {
		var list []NGram
		for t, g := range sums {
			list = append(list, NGram{Text: t, Mean: float32(g.sum / float64(g.count)), Count: g.count})
		}
		slices.SortFunc(list, func(a, b NGram) int {
			switch {
			case a.Mean > b.Mean:
				return -1
			case a.Mean < b.Mean:
				return 1
			case a.Count != b.Count:
				return b.Count - a.Count
			}
			return strings.Compare(a.Text, b.Text)
		})
		if n > 0 && len(list) > n {
			list = list[:n]
		}
		out[c] = list
	}
	return out
}

// Filters returns every filter's strongest distinct windows in the sample,
// in feature order; a filter that no window of the sample switched on has
// none.
func (s *Survey) Filters() []FilterWindows {
	F := s.p.m.Config.Filters
	out := make([]FilterWindows, len(s.best))
	for j, b := range s.best {
		out[j] = FilterWindows{Feature: j, Width: s.p.m.Config.Widths[j/F], Filter: j % F, Windows: slices.Clone(b)}
	}
	return out
}
