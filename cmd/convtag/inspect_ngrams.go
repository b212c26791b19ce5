package main

import (
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"

	"convtag/model"
	"convtag/stream"
)

// sampleFlags are inspect's --ngrams settings.
type sampleFlags struct {
	ngrams   int
	samples  []string
	textKeys []string
}

// sampleReport is what inspect --ngrams found in the sample.
type sampleReport struct {
	Files   []string                 `json:"files"`
	Texts   int                      `json:"texts"`
	Skipped int64                    `json:"skipped"`
	Labels  map[string][]model.NGram `json:"labels"`
	Filters []model.FilterWindows    `json:"filters"`
	order   []string
}

func (s *sampleFlags) check() error {
	switch {
	case s.ngrams < 0:
		return usageErr("--ngrams 10 --sample FILE", "inspect: --ngrams %d: want a positive number", s.ngrams)
	case s.ngrams > 0 && len(s.samples) == 0:
		return usageErr("convtag inspect MODEL --ngrams 10 --sample chat.jsonl --text-key text", "inspect: --ngrams needs a --sample FILE of texts")
	case s.ngrams == 0 && len(s.samples) > 0:
		return usageErr("convtag inspect MODEL --ngrams 10 --sample FILE", "inspect: --sample without --ngrams")
	}
	return nil
}

// survey runs the sample through m and keeps, per label, the n-grams that
// most raise its score and, per filter, its strongest windows.
func (s *sampleFlags) survey(a *app, m *model.Model) (*sampleReport, error) {
	sv := m.NewSurvey(s.ngrams)
	st, err := stream.ScanTexts(s.samples, stream.TextOptions{TextKeys: s.textKeys, Stdin: a.stdin}, func(text []byte) error {
		sv.Add(text)
		return nil
	})
	for _, p := range st.Problems {
		fmt.Fprintf(a.stderr, "convtag: %s\n", p)
	}
	if st.Skipped > 0 {
		fmt.Fprintf(a.stderr, "convtag: %d sample records skipped (malformed or without text)\n", st.Skipped)
	}
	if err != nil {
		var ie *stream.InputError
		if errors.As(err, &ie) {
			return nil, withCode(exitFailure, err)
		}
		return nil, withCode(exitFailure, fmt.Errorf("inspect: %w", err))
	}
	if sv.Texts() == 0 {
		return nil, withCode(exitFailure, fmt.Errorf("inspect: no texts in %s", strings.Join(s.samples, ", ")))
	}
	r := &sampleReport{Files: s.samples, Texts: sv.Texts(), Skipped: st.Skipped, Labels: map[string][]model.NGram{}, order: m.Labels}
	for c, list := range sv.Labels(s.ngrams) {
		r.Labels[m.Labels[c]] = append([]model.NGram{}, list...)
	}
	r.Filters = sv.Filters()
	return r, nil
}

func (r *sampleReport) writeText(w io.Writer) error {
	var b strings.Builder
	fmt.Fprintf(&b, "\nsample: %d texts from %s\n", r.Texts, strings.Join(r.Files, ", "))
	b.WriteString("\nn-grams that most raise each label's score (mean score in logit units over the texts where the window won a filter, and how many texts)\n")
	for _, l := range r.order {
		fmt.Fprintf(&b, "  %s\n", l)
		t := table{indent: "    "}
		for _, g := range r.Labels[l] {
			t.add(strconv.Quote(g.Text), strconv.FormatFloat(float64(g.Mean), 'f', 3, 32), strconv.Itoa(g.Count))
		}
		t.write(&b)
	}
	b.WriteString("\nstrongest windows per filter (activation after ReLU)\n")
	t := table{indent: "  ", left: true}
	for _, f := range r.Filters {
		var ws []string
		for _, x := range f.Windows {
			ws = append(ws, strconv.Quote(x.Text)+" "+strconv.FormatFloat(float64(x.Activation), 'f', 2, 32))
		}
		if len(ws) == 0 {
			ws = []string{"(never on in the sample)"}
		}
		t.add(fmt.Sprintf("width %d filter %d", f.Width, f.Filter), strings.Join(ws, ", "))
	}
	t.write(&b)
	_, err := io.WriteString(w, b.String())
	return err
}
