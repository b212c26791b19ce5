package stream

import (
	"fmt"
	"strconv"
	"unicode/utf8"
)

// here allocates per record once the buffers have grown.
type worker struct {
	cfg    *config
	ts     *taggerState
	sc     Scorer
	wc     WordCounter // sc, when it can count words; else nil
	find   textFinder
	sp     splicer
	key    []byte // the key watch's scratch
	fields []field
	order  []int
	probs  []float32    // the last Score's result, cut to the labels
	best   int          // index of the highest of probs
	empty  bool         // the last text scored had no words
	share  float32      // the last text's share of known words; -1 when unknown
	kc     KnownCounter // sc, when it can count known words; else nil
	passOK bool         // untagged records are written
	set    []int        // a MultiTagger's tags for the last record, best first
	joined []byte       // scratch: the tags or their probabilities joined with commas
	tagsV  []byte       // the tags array's bytes (fields[0].val may alias labelJSON, never written)
}

func newWorker(c *config) *worker {
	// newConfig made one already: the keys are good.
	f, _ := newTextFinder(c.o.Format, c.textKeys)
	w := &worker{cfg: c, find: *f, passOK: c.selects("")}
	w.fields = append(w.fields, c.tagKey, c.confKey)
	if c.o.Scores {
		w.fields = append(w.fields, c.scoresKey)
	}
	if c.o.Top > 0 {
		w.fields = append(w.fields, c.topKey)
	}
	if c.o.Why {
		w.fields = append(w.fields, c.whyKey)
	}
	if c.o.KnownKey != "" {
		w.fields = append(w.fields, c.knownKey)
	}
	return w
}

// process fills b.out (and b.rej) from b.in.
func (w *worker) process(b *block) {
	if b.tagger != w.ts {
		w.ts = b.tagger
		w.sc = w.ts.t.NewScorer()
		w.wc, _ = w.sc.(WordCounter)
		w.kc, _ = w.sc.(KnownCounter)
		w.fields[0] = w.cfg.tagKey
		if w.ts.multi {
			w.fields[0] = w.cfg.tagsKey
		}
	}
	if n := len(w.ts.labels); cap(b.tags) < n {
		b.tags = make([]int64, n)
	} else {
		b.tags = b.tags[:n]
		clear(b.tags)
	}
	if b.raw {
		if b.header && b.hdr.err != nil {
			b.hdrErr = b.hdr.err
			return
		}
		if b.rawFirst {
			b.n.records++
			b.n.tooLong++
			b.n.rejected++
			b.errs = append(b.errs, lineErr{0, w.tooLong()})
		}
		if b.rawEnd {
			b.lines = 1
		}
		switch {
		case w.cfg.o.Rejects != nil:
			b.rej = append(b.rej, b.in...)
		case w.passOK:
			b.out = append(b.out, b.in...)
			if b.rawFirst {
				b.n.written++
				b.n.passed++
			}
		case b.rawFirst:
			b.n.dropped++
		}
		return
	}
	if w.cfg.sep != 0 {
		w.rows(b)
		return
	}
	for i := 0; i < len(b.in); {
		line, term, next := nextLine(b.in, i)
		w.record(b, line, term)
		i = next
		b.lines++
	}
}

func (w *worker) record(b *block, line, term []byte) {
	b.n.records++
	if len(term) == 2 {
		b.n.crlf++
	}
	if len(line) > w.cfg.maxLine {
		// The cutter sends most overlong lines as raw pieces; one that
		// ended within the chunk that took it past the limit lands here.
		b.n.tooLong++
		w.problem(b, line, term, w.tooLong())
		return
	}
	r := w.find.find(line)
	switch r.kind {
	case foundBlank:
		b.n.blank++
		w.pass(b, line, term)
	case foundLine:
		w.textRecord(b, line, term)
	default:
		w.jsonRecord(b, line, term, &r)
	}
}

// rows tags the CSV or TSV records of b: the header gets the names of the
// two columns added, every other record its tag and confidence, after its
// last field and before its line break; the bytes before stay as they
// were.
func (w *worker) rows(b *block) {
	sep := w.cfg.sep
	header := b.header
	for i := 0; i < len(b.in); {
		rec, term, next, inner := nextCSV(b.in, i, sep)
		i = next
		b.n.records++
		if len(term) == 2 {
			b.n.crlf++
		}
		switch {
		case len(rec) == 0:
			b.n.blank++
			w.pass(b, rec, term)
		case header:
			header = false
			if b.hdr.err != nil {
				b.hdrErr, b.hdrLine = b.hdr.err, b.lines
				return
			}
			b.out = append(b.out, rec...)
			b.out = appendCSVField(append(b.out, sep), []byte(w.fields[0].name), sep)
			b.out = appendCSVField(append(b.out, sep), []byte(w.cfg.confKey.name), sep)
			b.out = append(b.out, term...)
			b.n.written++
		case len(rec) > w.cfg.maxLine:
			b.n.tooLong++
			w.problem(b, rec, term, w.tooLong())
		default:
			w.row(b, rec, term)
		}
		b.lines += 1 + int64(inner)
	}
}

// row tags one CSV or TSV data record.
func (w *worker) row(b *block, rec, term []byte) {
	r := w.find.findRow(rec, b.hdr)
	if r.kind == foundMalformed {
		b.n.malformed++
		w.problem(b, rec, term, w.find.err(r))
		return
	}
	tag, ok := w.score(b, r.text)
	if !ok {
		return
	}
	w.setFields(tag)
	sep := w.cfg.sep
	b.out = append(b.out, rec...)
	if w.ts.multi {
		b.out = appendCSVField(append(b.out, sep), w.joinTags(), sep)
		b.out = appendCSVField(append(b.out, sep), w.joinConfs(), sep)
		b.out = append(b.out, term...)
		b.n.written++
		return
	}
	b.out = appendCSVField(append(b.out, sep), []byte(w.ts.labels[tag]), sep)
	b.out = append(append(b.out, sep), w.fields[1].val...)
	b.out = append(b.out, term...)
	b.n.written++
}

func (w *worker) tooLong() error {
	if w.cfg.o.Rejects != nil {
		return fmt.Errorf("%w (over %d bytes): sent to the rejects", ErrTooLong, w.cfg.maxLine)
	}
	return fmt.Errorf("%w (over %d bytes): passed through untouched", ErrTooLong, w.cfg.maxLine)
}

// pass writes a record unchanged and untagged, unless Keep leaves it out.
func (w *worker) pass(b *block, line, term []byte) {
	if !w.passOK {
		b.n.dropped++
		return
	}
	b.out = append(append(b.out, line...), term...)
	b.n.written++
	b.n.passed++
}

// problem reports a record that cannot be tagged and passes it through or
// to the rejects.
func (w *worker) problem(b *block, line, term []byte, err error) {
	b.n.rejected++
	b.errs = append(b.errs, lineErr{b.lines, err})
	if w.cfg.o.Rejects != nil {
		b.rej = append(append(b.rej, line...), term...)
		return
	}
	w.pass(b, line, term)
}

// jsonRecord tags, passes or rejects a JSON record, as find saw it.
func (w *worker) jsonRecord(b *block, line, term []byte, r *found) {
	if r.kind == foundMalformed {
		b.n.malformed++
		w.problem(b, line, term, w.find.err(*r))
		return
	}
	// A JSON text sequence's record separator stays in the record, before
	// the object.
	obj := line[r.lead:]
	if w.cfg.o.Warn != nil && !w.cfg.keyDone.Load() {
		w.key = b.kn.note(obj, r.keyed, w.key)
	}
	switch r.kind {
	case foundNotString:
		b.n.notString++
		w.problem(b, line, term, w.find.err(*r))
		return
	case foundNoText:
		b.n.noText++
		w.pass(b, line, term)
		return
	}
	tag, ok := w.score(b, r.text)
	if !ok {
		return
	}
	w.setFields(tag)
	b.out = append(b.out, line[:r.lead]...)
	b.out = w.sp.splice(b.out, obj, w.find.scan.members, w.fields)
	b.out = append(b.out, term...)
	b.n.written++
}

// objectStart reports whether obj begins the way a JSON object does: '{',
// then a quoted key or '}' (spaces allowed between). Under InputAuto a
// line that begins so but is not valid is a broken record (malformed), any
// other line starting with '{' is text.
func objectStart(obj []byte) bool {
	i := skipSpace(obj, 0)
	if i >= len(obj) || obj[i] != '{' {
		return false
	}
	i = skipSpace(obj, i+1)
	return i < len(obj) && (obj[i] == '"' || obj[i] == '}')
}

func (w *worker) textRecord(b *block, line, term []byte) {
	b.n.text++
	tag, ok := w.score(b, line)
	if !ok {
		return
	}
	w.setFields(tag)
	if w.cfg.o.Emit == EmitJSONL {
		b.out = append(b.out, `{"text":`...)
		b.out = appendString(b.out, line)
		for _, f := range w.fields {
			b.out = append(append(append(append(b.out, ','), f.key...), ':'), f.val...)
		}
		b.out = append(b.out, '}')
	} else if w.ts.multi {
		b.out = append(append(b.out, w.joinTags()...), '\t')
		b.out = append(append(b.out, w.joinConfs()...), '\t')
		b.out = append(b.out, line...)
	} else {
		b.out = append(b.out, w.ts.labels[tag]...)
		b.out = append(b.out, '\t')
		b.out = append(b.out, w.fields[1].val...)
		b.out = append(b.out, '\t')
		b.out = append(b.out, line...)
	}
	b.out = append(b.out, term...)
	b.n.written++
}

// score tags text, counts the tag and reports whether the record is
// selected. w.probs and w.best hold the scores for setFields.
func (w *worker) score(b *block, text []byte) (int, bool) {
	if !utf8.Valid(text) {
		b.n.invalidUTF8++
	}
	probs := w.sc.Score(text)
	n := min(len(probs), len(w.ts.labels)-1)
	w.empty = w.wc != nil && w.wc.Words() == 0
	w.share = -1
	if w.kc != nil {
		n, k := w.kc.Words(), w.kc.Known()
		b.n.words += int64(n)
		b.n.known += int64(k)
		if n > 0 {
			w.share = float32(k) / float32(n)
		}
	}
	if w.empty {
		// No words: the model's answer for an empty input says nothing
		// about this record.
		b.n.noWords++
		n = 0
	}
	w.probs = probs[:n]
	best := 0
	for i := 1; i < n; i++ {
		if probs[i] > probs[best] {
			best = i
		}
	}
	w.best = best
	if w.ts.multi {
		return w.scoreMulti(b)
	}
	tag := best
	if n == 0 || float64(probs[best]) < w.ts.minConf[best] {
		tag = len(w.ts.labels) - 1
	}
	b.tags[tag]++
	if !w.ts.selected[tag] {
		b.n.dropped++
		return tag, false
	}
	return tag, true
}

// scoreMulti picks a MultiTagger's tags from w.probs: every label at or
// above its threshold, highest probability first (ties in label order).
func (w *worker) scoreMulti(b *block) (int, bool) {
	w.set = w.set[:0]
	for l, p := range w.probs {
		if float64(p) >= w.ts.minConf[l] {
			w.set = append(w.set, l)
		}
	}
	// Insertion sort, stable: labels are few.
	for i := 1; i < len(w.set); i++ {
		for j := i; j > 0 && w.probs[w.set[j]] > w.probs[w.set[j-1]]; j-- {
			w.set[j], w.set[j-1] = w.set[j-1], w.set[j]
		}
	}
	unsure := len(w.ts.labels) - 1
	if len(w.set) == 0 {
		b.tags[unsure]++
	}
	for _, l := range w.set {
		b.tags[l]++
	}
	if !w.ts.selectsSet(w.cfg, w.set) {
		b.n.dropped++
		return unsure, false
	}
	return unsure, true
}

// joinTags returns the last record's tags joined with commas (the scratch
// w.joined, valid until joinConfs or the next record).
func (w *worker) joinTags() []byte {
	v := w.joined[:0]
	for k, l := range w.set {
		if k > 0 {
			v = append(v, ',')
		}
		v = append(v, w.ts.labels[l]...)
	}
	w.joined = v
	return v
}

// joinConfs returns the probabilities of the last record's tags, in the
// order of joinTags, joined with commas.
func (w *worker) joinConfs() []byte {
	v := w.joined[:0]
	for k, l := range w.set {
		if k > 0 {
			v = append(v, ',')
		}
		v = appendConf(v, w.probs[l])
	}
	w.joined = v
	return v
}

// setFields fills the values of w.fields for tag from w.probs (for a
// MultiTagger, from w.set).
func (w *worker) setFields(tag int) {
	conf := float32(0)
	if len(w.probs) > 0 {
		conf = w.probs[w.best]
	}
	if w.ts.multi {
		v, c := append(w.tagsV[:0], '['), append(w.fields[1].val[:0], '{')
		for k, l := range w.set {
			if k > 0 {
				v, c = append(v, ','), append(c, ',')
			}
			v = append(v, w.ts.labelJSON[l]...)
			c = appendConf(append(append(c, w.ts.labelJSON[l]...), ':'), w.probs[l])
		}
		w.tagsV = append(v, ']')
		w.fields[0].val, w.fields[1].val = w.tagsV, append(c, '}')
	} else {
		w.fields[0].val = w.ts.labelJSON[tag]
		w.fields[1].val = appendConf(w.fields[1].val[:0], conf)
	}
	i := 2
	if w.cfg.o.Scores {
		v := append(w.fields[i].val[:0], '{')
		for l, p := range w.probs {
			if l > 0 {
				v = append(v, ',')
			}
			v = append(append(v, w.ts.labelJSON[l]...), ':')
			v = appendConf(v, p)
		}
		w.fields[i].val = append(v, '}')
		i++
	}
	if top := w.cfg.o.Top; top > 0 {
		w.order = w.order[:0]
		for l := range w.probs {
			w.order = append(w.order, l)
		}
		top = min(top, len(w.order))
		// Partial selection sort: labels are few. Ties keep label order.
		for k := range top {
			m := k
			for j := k + 1; j < len(w.order); j++ {
				if w.probs[w.order[j]] > w.probs[w.order[m]] {
					m = j
				}
			}
			w.order[k], w.order[m] = w.order[m], w.order[k]
		}
		v := append(w.fields[i].val[:0], '[')
		for k, l := range w.order[:top] {
			if k > 0 {
				v = append(v, ',')
			}
			v = append(append(v, w.cfg.topTagKey...), w.ts.labelJSON[l]...)
			v = appendConf(append(v, w.cfg.topConfKeyBytes...), w.probs[l])
			v = append(v, '}')
		}
		w.fields[i].val = append(v, ']')
		i++
	}
	if w.cfg.o.Why {
		if ex, ok := w.sc.(Explainer); ok && !w.empty {
			w.fields[i].val = ex.AppendWhy(w.fields[i].val[:0])
		} else {
			w.fields[i].val = append(w.fields[i].val[:0], "[]"...)
		}
		i++
	}
	if w.cfg.o.KnownKey != "" {
		if w.share < 0 {
			w.fields[i].val = append(w.fields[i].val[:0], "null"...)
		} else {
			w.fields[i].val = appendConf(w.fields[i].val[:0], w.share)
		}
	}
}

// appendConf appends p rounded to 4 decimals; NaN is written as 0 so the
// output stays valid JSON.
func appendConf(dst []byte, p float32) []byte {
	if p != p {
		p = 0
	}
	return strconv.AppendFloat(dst, float64(p), 'f', 4, 32)
}

func kindName(c byte) string {
	switch c {
	case '{':
		return "an object"
	case '[':
		return "an array"
	case 't', 'f':
		return "a boolean"
	}
	return "a number"
}
