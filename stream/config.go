package stream

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sync/atomic"
	"time"
)

// config is Options with defaults applied and keys pre-encoded.
type config struct {
	o                                   Options
	textKeys                            []string // Options.TextKeys or the default
	sep                                 byte     // CSV or TSV separator; 0 for lines
	tagKey, confKey, tagsKey            field    // names and encoded keys; values unused
	scoresKey, topKey, whyKey, knownKey field
	unsure                              string
	jobs, blockSize, maxLine            int
	pause, maxWait                      time.Duration
	minConf                             float64
	sw                                  *Switch
	keep, drop                          map[string]bool
	topTagKey, topConfKeyBytes          []byte // `{"tag":` and `,"confidence":` for --top entries

	keyDone atomic.Bool // the wrong-key check is decided: workers stop noting keys
}

func newConfig(o Options) (*config, error) {
	if o.Tagger == nil {
		return nil, errors.New("stream: no tagger")
	}
	c := &config{o: o, sw: o.Switch}
	if _, err := newTextFinder(o.Format, o.TextKeys); err != nil {
		return nil, err
	}
	c.textKeys = textKeysOrDefault(o.TextKeys)
	c.sep = csvSep(o.Format)
	if c.sep != 0 && (o.Scores || o.Top > 0 || o.Why || o.KnownKey != "") {
		return nil, errors.New("stream: scores, top, why and the known-word share are for JSON output, not CSV or TSV")
	}
	mk := func(name, def string) field {
		if name == "" {
			name = def
		}
		return field{name: name, key: appendString(nil, []byte(name))}
	}
	c.tagKey = mk(o.TagKey, "tag")
	c.tagsKey = mk(o.TagsKey, "tags")
	c.confKey = mk(o.ConfidenceKey, "confidence")
	c.scoresKey = mk(o.ScoresKey, "scores")
	c.topKey = mk(o.TopKey, "top")
	c.whyKey = mk(o.WhyKey, "why")
	c.knownKey = mk(o.KnownKey, "known")
	used := []string{c.tagKey.name, c.confKey.name}
	if o.Scores {
		used = append(used, c.scoresKey.name)
	}
	if o.Top > 0 {
		used = append(used, c.topKey.name)
	}
	if o.Why {
		used = append(used, c.whyKey.name)
	}
	if o.KnownKey != "" {
		used = append(used, c.knownKey.name)
	}
	for i, k := range used {
		if slices.Contains(used[:i], k) {
			return nil, fmt.Errorf("stream: key %q used twice", k)
		}
	}
	// A MultiTagger's records get the tags key instead of the tag key.
	if slices.Contains(used[1:], c.tagsKey.name) {
		return nil, fmt.Errorf("stream: key %q used twice", c.tagsKey.name)
	}
	c.topTagKey = append(append([]byte{'{'}, c.tagKey.key...), ':')
	c.topConfKeyBytes = append(append([]byte{','}, c.confKey.key...), ':')
	c.unsure = o.UnsureTag
	if c.unsure == "" {
		c.unsure = "unsure"
	}
	c.jobs = o.Jobs
	if c.jobs <= 0 {
		c.jobs = runtime.GOMAXPROCS(0)
	}
	c.blockSize = cmp0(o.BlockSize, DefaultBlockSize)
	c.maxLine = max(cmp0(o.MaxLine, DefaultMaxLine), 1)
	c.pause = o.Pause
	if c.pause <= 0 {
		c.pause = DefaultPause
	}
	c.maxWait = 10 * c.pause
	if o.MinConfidence < 0 || o.MinConfidence > 1 || math.IsNaN(o.MinConfidence) {
		return nil, fmt.Errorf("stream: minimum confidence %v out of range 0..1", o.MinConfidence)
	}
	c.minConf = o.MinConfidence
	for l, v := range o.MinConfidenceFor {
		if !(v >= 0 && v <= 2) { // NaN fails both
			return nil, fmt.Errorf("stream: minimum confidence %v for %q out of range", v, l)
		}
	}
	if o.Top < 0 {
		return nil, fmt.Errorf("stream: top %d is negative", o.Top)
	}
	set := func(tags []string) map[string]bool {
		if len(tags) == 0 {
			return nil
		}
		m := map[string]bool{}
		for _, t := range tags {
			m[t] = true
		}
		return m
	}
	c.keep, c.drop = set(o.Keep), set(o.Drop)
	return c, nil
}

func cmp0(v, def int) int {
	if v <= 0 {
		return def
	}
	return v
}

// taggerState is a Tagger with what workers derive from its labels: made
// once per Tagger, shared read-only by the blocks it tags.
type taggerState struct {
	t         Tagger
	labels    []string  // the Tagger's labels, then the unsure tag
	labelJSON [][]byte  // each of labels as a JSON string
	selected  []bool    // each of labels: written (Keep/Drop)
	minConf   []float64 // each of the Tagger's labels: its minimum confidence (multi: its threshold)
	// multi: a MultiTagger; inKeep and inDrop say, per label, whether
	// Keep and Drop list it.
	multi          bool
	inKeep, inDrop []bool
}

func newTaggerState(t Tagger, c *config) *taggerState {
	ts := &taggerState{t: t}
	ts.labels = append(append([]string(nil), t.Labels()...), c.unsure)
	for _, l := range ts.labels {
		ts.labelJSON = append(ts.labelJSON, appendString(nil, []byte(l)))
		ts.selected = append(ts.selected, c.selects(l))
	}
	var stored []float64
	if mt, ok := t.(MultiTagger); ok {
		stored = mt.Thresholds()
	}
	ts.multi = stored != nil
	for i, l := range ts.labels[:len(ts.labels)-1] {
		v, ok := c.o.MinConfidenceFor[l]
		switch {
		case ok:
		case ts.multi && c.minConf == 0 && i < len(stored):
			v = stored[i]
		default:
			v = c.minConf
		}
		ts.minConf = append(ts.minConf, v)
	}
	for _, l := range ts.labels {
		ts.inKeep = append(ts.inKeep, c.keep[l])
		ts.inDrop = append(ts.inDrop, c.drop[l])
	}
	return ts
}

// selectsSet reports whether a MultiTagger's record with the tags set
// (indices into labels; none means the unsure tag) is written.
func (ts *taggerState) selectsSet(c *config, set []int) bool {
	if len(set) == 0 {
		return ts.selected[len(ts.labels)-1]
	}
	keep := c.keep == nil
	for _, l := range set {
		if ts.inDrop[l] {
			return false
		}
		keep = keep || ts.inKeep[l]
	}
	return keep
}

// selects reports whether a record with tag (or "" for an untagged one) is
// written.
func (c *config) selects(tag string) bool {
	if c.keep != nil && (tag == "" || !c.keep[tag]) {
		return false
	}
	return !c.drop[tag]
}

// worker tags blocks. Each worker owns its scratch and its Scorer; nothing

// textKeysOrDefault is keys, or the default text key when there are none.
func textKeysOrDefault(keys []string) []string {
	if len(keys) == 0 {
		return []string{"text"}
	}
	return keys
}
