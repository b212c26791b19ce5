package main

import (
	"strconv"

	"convtag/model"
	"convtag/stream"
)

// whyTagger is a stream.Tagger whose scorers also explain each tag: after
// Score, AppendWhy appends the JSON array of the n word windows that
// weighed most for the most probable label (model.Predictor.Explain).
// It is what `tag --why N` needs; the plain modelTagger does none of this
// work.
type whyTagger struct {
	m *model.Model
	n int
}

func (t whyTagger) Labels() []string { return t.m.Labels }

func (t whyTagger) NewScorer() stream.Scorer { return &whyScorer{p: t.m.NewPredictor(), n: t.n} }

// whyScorer scores like predictorScorer and keeps the last explanation.
type whyScorer struct {
	p  *model.Predictor
	n  int
	ex model.Explanation
}

func (s *whyScorer) Score(text []byte) []float32 {
	probs, ex := s.p.Explain(text, -1, s.n)
	s.ex = ex
	return probs
}

// Words is the last text's token count (stream.WordCounter).
func (s *whyScorer) Words() int { return s.p.TokenCount() }

// Known is the last text's count of words the model knows
// (stream.KnownCounter).
func (s *whyScorer) Known() int { return s.p.KnownCount() }

// AppendWhy appends the last text's evidence as a JSON array, best first:
// [{"ngram":"…","position":P,"width":W,"share":S}, …], position counting
// tokens from 0 and share the window's signed part of the tagged label's
// score (see model.Evidence).
func (s *whyScorer) AppendWhy(dst []byte) []byte {
	dst = append(dst, '[')
	for i, e := range s.ex.Windows {
		if i > 0 {
			dst = append(dst, ',')
		}
		dst = append(dst, `{"ngram":`...)
		dst = appendJSONString(dst, e.Text)
		dst = append(dst, `,"position":`...)
		dst = strconv.AppendInt(dst, int64(e.Start), 10)
		dst = append(dst, `,"width":`...)
		dst = strconv.AppendInt(dst, int64(e.Width), 10)
		dst = append(dst, `,"share":`...)
		dst = strconv.AppendFloat(dst, float64(e.Share), 'f', 3, 32)
		dst = append(dst, '}')
	}
	return append(dst, ']')
}

// appendJSONString appends s as a JSON string. Tokens are valid UTF-8.
func appendJSONString(dst []byte, s string) []byte {
	const hex = "0123456789abcdef"
	dst = append(dst, '"')
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c == '"' || c == '\\':
			dst = append(dst, '\\', c)
		case c < 0x20:
			dst = append(dst, '\\', 'u', '0', '0', hex[c>>4], hex[c&15])
		default:
			dst = append(dst, c)
		}
	}
	return append(dst, '"')
}
