package model

import (
	"fmt"
	"math"
)

// Metadata keys of a multi-label model. A file without MetaMode is a
// single-label model (softmax over the labels, one tag per record).
const (
	MetaMode       = "mode"             // ModeSingle or ModeMulti
	MetaThresholds = "label_thresholds" // JSON array of numbers in [0, 1], one per label; multi mode only
)

// The values of MetaMode.
const (
	ModeSingle = "single"
	ModeMulti  = "multi"
)

// DefaultThreshold is a multi-label model's threshold for a label that
// training could not tune (no dev records, or none with that label): a
// sigmoid output of 0.5 is the point where the logit changes sign.
const DefaultThreshold = 0.5

// Mode returns ModeMulti for a multi-label model, else ModeSingle.
func (m *Model) Mode() string {
	if m.Multi {
		return ModeMulti
	}
	return ModeSingle
}

// checkMulti reports what is wrong with m's mode and thresholds.
func (m *Model) checkMulti() error {
	if !m.Multi {
		if m.Thresholds != nil {
			return fmt.Errorf("%w: %s: only a multi-label model has them", ErrMetadata, MetaThresholds)
		}
		return nil
	}
	if len(m.Thresholds) != len(m.Labels) {
		return fmt.Errorf("%w: %s: %d values for %d labels", ErrMetadata, MetaThresholds, len(m.Thresholds), len(m.Labels))
	}
	for i, t := range m.Thresholds {
		if !(t >= 0 && t <= 1) || math.IsNaN(t) {
			return fmt.Errorf("%w: %s: %v for label %s is not in [0, 1]", ErrMetadata, MetaThresholds, t, quoteCapped(m.Labels[i]))
		}
	}
	return nil
}

// putMulti writes m's mode and thresholds into meta (removing them for a
// single-label model, whose files have neither key).
func (m *Model) putMulti(meta map[string]string) error {
	if err := m.checkMulti(); err != nil {
		return err
	}
	delete(meta, MetaMode)
	delete(meta, MetaThresholds)
	if m.Multi {
		meta[MetaMode] = ModeMulti
		meta[MetaThresholds] = mustJSON(m.Thresholds)
	}
	return nil
}

// decodeMulti reads the mode and thresholds from m.Meta (after the labels).
func (m *Model) decodeMulti() error {
	mode, ok := m.Meta[MetaMode]
	switch {
	case !ok || mode == ModeSingle:
		if _, ok := m.Meta[MetaThresholds]; ok {
			return fmt.Errorf("%w: %s in a single-label model", ErrMetadata, MetaThresholds)
		}
		return nil
	case mode != ModeMulti:
		return fmt.Errorf("%w: mode %s, want %q or %q", ErrMetadata, quoteCapped(mode), ModeSingle, ModeMulti)
	}
	m.Multi = true
	if err := decodeMeta(m.Meta, MetaThresholds, &m.Thresholds); err != nil {
		return err
	}
	return m.checkMulti()
}

// sigmoid sets dst[i] to 1/(1+exp(-x[i])), in float64 so that neither
// tail overflows.
func sigmoid(dst, x []float32) {
	for i, v := range x {
		dst[i] = float32(1 / (1 + math.Exp(-float64(v))))
	}
}
