package main

import "convtag/model"

// multiThresholds is a multi-label model's stored per-label thresholds,
// or nil for a single-label model: what stream.MultiTagger asks for.
func multiThresholds(m *model.Model) []float64 {
	if !m.Multi {
		return nil
	}
	return m.Thresholds
}

// Thresholds makes a multi-label model's tagger a stream.MultiTagger.
func (t modelTagger) Thresholds() []float64 { return multiThresholds(t.m) }

// Thresholds makes a multi-label model's tagger a stream.MultiTagger.
func (t whyTagger) Thresholds() []float64 { return multiThresholds(t.m) }
