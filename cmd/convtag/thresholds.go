package main

import (
	"encoding/json"
	"fmt"
	"maps"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"

	"convtag/stream"
)

// neverKept is the per-label minimum confidence of a label whose target
// precision eval could not reach: above any probability, so every record
// of that label is tagged unsure (stream.Options.MinConfidenceFor).
const neverKept = 2

// confidenceRule is what --min-confidence and --thresholds say: a minimum
// confidence for every label, and overrides per label.
type confidenceRule struct {
	all      float64
	allSet   bool
	perLabel map[string]float64
}

// parseMinConfidence reads --min-confidence: "P", or "LABEL=P[,LABEL=P…]"
// with at most one bare "P" among them for the other labels. Each P is a
// probability from 0 to 1.
func parseMinConfidence(s string) (confidenceRule, error) {
	r := confidenceRule{perLabel: map[string]float64{}}
	if strings.TrimSpace(s) == "" {
		return r, nil
	}
	for _, item := range strings.Split(s, ",") {
		item = strings.TrimSpace(item)
		label, val, named := strings.Cut(item, "=")
		if !named {
			val, label = label, ""
		}
		p, err := strconv.ParseFloat(strings.TrimSpace(val), 64)
		if err != nil || !(p >= 0 && p <= 1) { // NaN fails both
			return r, usageErr("convtag tag --min-confidence 0.7, or spam=0.9,tickets=0.7,0.6", "--min-confidence %q: want a probability from 0 to 1", item)
		}
		switch label = strings.TrimSpace(label); {
		case !named:
			if r.allSet {
				return r, usageErr("convtag tag --min-confidence spam=0.9,0.6", "--min-confidence %q: more than one value without a label", s)
			}
			r.all, r.allSet = p, true
		case label == "":
			return r, usageErr("convtag tag --min-confidence spam=0.9", "--min-confidence %q: no label before '='", item)
		default:
			if _, dup := r.perLabel[label]; dup {
				return r, usageErr("convtag tag --min-confidence spam=0.9", "--min-confidence: %q given twice", label)
			}
			r.perLabel[label] = p
		}
	}
	return r, nil
}

// evalThresholds is the part of "convtag eval --json --target-precision P"
// that --thresholds reads: target.per_label[].{label, threshold, reached}.
type evalThresholds struct {
	Target *struct {
		Precision float64 `json:"precision"`
		PerLabel  []struct {
			Label     string   `json:"label"`
			Threshold *float64 `json:"threshold"`
			Reached   bool     `json:"reached"`
		} `json:"per_label"`
	} `json:"target"`
}

// readThresholds reads the per-label thresholds eval wrote to path. A
// label whose target was not reached gets neverKept: its records are all
// tagged unsure, which is what keeping the promise of the target asks.
func readThresholds(path string) (map[string]float64, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, withCode(exitFailure, fmt.Errorf("--thresholds: %w", err))
	}
	var e evalThresholds
	if err := json.Unmarshal(b, &e); err != nil {
		return nil, usageErr("convtag eval --json --target-precision 0.9 -m MODEL dev.jsonl > thresholds.json", "--thresholds %s: not eval's JSON: %v", path, err)
	}
	if e.Target == nil || len(e.Target.PerLabel) == 0 {
		return nil, usageErr("convtag eval --json --target-precision 0.9 -m MODEL dev.jsonl > thresholds.json", "--thresholds %s: no target thresholds (eval --json needs --target-precision)", path)
	}
	out := map[string]float64{}
	for _, l := range e.Target.PerLabel {
		switch {
		case !l.Reached:
			out[l.Label] = neverKept
		case l.Threshold == nil || !(*l.Threshold >= 0 && *l.Threshold <= 1):
			return nil, usageErr("convtag eval --json --target-precision 0.9 -m MODEL dev.jsonl > thresholds.json", "--thresholds %s: label %q has no usable threshold", path, l.Label)
		default:
			out[l.Label] = *l.Threshold
		}
	}
	return out, nil
}

// applyConfidence puts the thresholds file (if any) and then the
// --min-confidence rule (which overrides it) into o, checking every label
// named against the model's.
func applyConfidence(o *stream.Options, rule confidenceRule, thresholdsFile string, labels []string) error {
	per := map[string]float64{}
	if thresholdsFile != "" {
		fromFile, err := readThresholds(thresholdsFile)
		if err != nil {
			return err
		}
		for l := range fromFile {
			if !slices.Contains(labels, l) {
				return usageErr("convtag eval --json --target-precision 0.9 -m MODEL dev.jsonl > thresholds.json", "--thresholds %s: label %q is not the model's (its tags: %s); was it written for another model?", thresholdsFile, l, strings.Join(labels, ", "))
			}
		}
		maps.Copy(per, fromFile)
	}
	for l := range rule.perLabel {
		if !slices.Contains(labels, l) {
			return usageErr("convtag inspect", "--min-confidence: no label %q in the model (its tags: %s)", l, strings.Join(labels, ", "))
		}
	}
	maps.Copy(per, rule.perLabel)
	o.MinConfidence = rule.all
	if len(per) > 0 {
		o.MinConfidenceFor = per
	}
	return nil
}

// describeThresholds words the rule for --stats: "0.7", or
// "spam 0.9, tickets 0.7, others 0.6".
func describeThresholds(o stream.Options) string {
	if len(o.MinConfidenceFor) == 0 {
		return strconv.FormatFloat(o.MinConfidence, 'g', -1, 64)
	}
	var parts []string
	for _, l := range slices.Sorted(maps.Keys(o.MinConfidenceFor)) {
		v := o.MinConfidenceFor[l]
		s := strconv.FormatFloat(v, 'g', -1, 64)
		if v > 1 || math.IsInf(v, 1) {
			s = "never kept"
		}
		parts = append(parts, l+" "+s)
	}
	return strings.Join(parts, ", ") + ", others " + strconv.FormatFloat(o.MinConfidence, 'g', -1, 64)
}
