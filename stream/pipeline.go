package stream

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"
	"unicode/utf8"
)

// config is Options with defaults applied and keys pre-encoded.
type config struct {
	o                          Options
	paths                      [][]string
	tagKey, confKey            field // names and encoded keys; values unused
	scoresKey, topKey, whyKey  field
	unsure                     string
	jobs, blockSize, maxLine   int
	pause, maxWait             time.Duration
	minConf                    float64
	sw                         *Switch
	keep, drop                 map[string]bool
	topTagKey, topConfKeyBytes []byte // `{"tag":` and `,"confidence":` for --top entries

	keyDone atomic.Bool // the wrong-key check is decided: workers stop noting keys
}

func newConfig(o Options) (*config, error) {
	if o.Tagger == nil {
		return nil, errors.New("stream: no tagger")
	}
	c := &config{o: o, sw: o.Switch}
	keys := o.TextKeys
	if len(keys) == 0 {
		keys = []string{"text"}
	}
	for _, k := range keys {
		if k == "" {
			return nil, errors.New("stream: empty text key")
		}
		c.paths = append(c.paths, strings.Split(k, "."))
	}
	mk := func(name, def string) field {
		if name == "" {
			name = def
		}
		return field{name: name, key: appendString(nil, []byte(name))}
	}
	c.tagKey = mk(o.TagKey, "tag")
	c.confKey = mk(o.ConfidenceKey, "confidence")
	c.scoresKey = mk(o.ScoresKey, "scores")
	c.topKey = mk(o.TopKey, "top")
	c.whyKey = mk(o.WhyKey, "why")
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
	for i, k := range used {
		if slices.Contains(used[:i], k) {
			return nil, fmt.Errorf("stream: key %q used twice", k)
		}
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
	labels    []string // the Tagger's labels, then the unsure tag
	labelJSON [][]byte // each of labels as a JSON string
	selected  []bool   // each of labels: written (Keep/Drop)
}

func newTaggerState(t Tagger, c *config) *taggerState {
	ts := &taggerState{t: t}
	ts.labels = append(append([]string(nil), t.Labels()...), c.unsure)
	for _, l := range ts.labels {
		ts.labelJSON = append(ts.labelJSON, appendString(nil, []byte(l)))
		ts.selected = append(ts.selected, c.selects(l))
	}
	return ts
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
// here allocates per record once the buffers have grown.
type worker struct {
	cfg    *config
	ts     *taggerState
	sc     Scorer
	wc     WordCounter // sc, when it can count words; else nil
	scan   scanner
	sp     splicer
	text   []byte
	key    []byte
	fields []field
	order  []int
	probs  []float32 // the last Score's result, cut to the labels
	best   int       // index of the highest of probs
	empty  bool      // the last text scored had no words
	passOK bool      // untagged records are written
}

func newWorker(c *config) *worker {
	w := &worker{cfg: c, passOK: c.selects("")}
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
	return w
}

// process fills b.out (and b.rej) from b.in.
func (w *worker) process(b *block) {
	if b.tagger != w.ts {
		w.ts = b.tagger
		w.sc = w.ts.t.NewScorer()
		w.wc, _ = w.sc.(WordCounter)
	}
	if n := len(w.ts.labels); cap(b.tags) < n {
		b.tags = make([]int64, n)
	} else {
		b.tags = b.tags[:n]
		clear(b.tags)
	}
	if b.raw {
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
	if isBlank(line) {
		b.n.blank++
		w.pass(b, line, term)
		return
	}
	switch w.cfg.o.Format {
	case InputJSONL:
		w.jsonRecord(b, line, term)
	case InputText:
		w.textRecord(b, line, term)
	default:
		if looksJSON(line) {
			w.jsonRecord(b, line, term)
		} else {
			w.textRecord(b, line, term)
		}
	}
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

func (w *worker) jsonRecord(b *block, line, term []byte) {
	// A JSON text sequence's record separator stays in the record, before
	// the object.
	lead := seqPrefix(line)
	obj := line[lead:]
	if ok, e := w.scan.validObject(obj); !ok {
		if w.cfg.o.Format == InputAuto && lead == 0 && !objectStart(obj) {
			// Braces in prose ("{sigh} my card was declined"), not a
			// broken record: a text line.
			w.textRecord(b, line, term)
			return
		}
		b.n.malformed++
		w.problem(b, line, term, fmt.Errorf("%w: %s at column %d", ErrMalformed, e.msg, lead+e.off+1))
		return
	}
	w.text = w.text[:0]
	found, badPath, badKind := false, -1, byte(0)
	start := skipSpace(obj, 0)
	for p, path := range w.cfg.paths {
		s, e, ok, key := findPath(obj, start, path, w.key)
		w.key = key
		if !ok {
			continue
		}
		sep := len(w.text)
		if found {
			w.text = append(w.text, ' ')
		}
		switch obj[s] {
		case '"':
			w.text = appendUnescaped(w.text, obj[s+1:e-1])
			found = true
			continue
		case '[': // the journal's bytes of a text that is not UTF-8
			var isBytes bool
			if w.text, isBytes = appendByteArray(w.text, obj, s); isBytes {
				found = true
				continue
			}
		}
		w.text = w.text[:sep]
		if obj[s] != 'n' { // null adds nothing
			badPath, badKind = p, obj[s]
		}
	}
	if w.cfg.o.Warn != nil && !w.cfg.keyDone.Load() {
		w.key = b.kn.note(obj, found || badPath >= 0, w.key)
	}
	if !found {
		if badPath >= 0 {
			b.n.notString++
			w.problem(b, line, term, fmt.Errorf("%w: %q holds %s", ErrNotString, w.cfg.o.textKey(badPath), kindName(badKind)))
			return
		}
		b.n.noText++
		w.pass(b, line, term)
		return
	}
	tag, ok := w.score(b, w.text)
	if !ok {
		return
	}
	w.setFields(tag)
	b.out = append(b.out, line[:lead]...)
	b.out = w.sp.splice(b.out, obj, w.fields)
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
	tag := best
	if n == 0 || float64(probs[best]) < w.cfg.minConf {
		tag = len(w.ts.labels) - 1
	}
	b.tags[tag]++
	if !w.ts.selected[tag] {
		b.n.dropped++
		return tag, false
	}
	return tag, true
}

// setFields fills the values of w.fields for tag from w.probs.
func (w *worker) setFields(tag int) {
	conf := float32(0)
	if len(w.probs) > 0 {
		conf = w.probs[w.best]
	}
	w.fields[0].val = w.ts.labelJSON[tag]
	w.fields[1].val = appendConf(w.fields[1].val[:0], conf)
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

// textKeysOrDefault is keys, or the default text key when there are none.
func textKeysOrDefault(keys []string) []string {
	if len(keys) == 0 {
		return []string{"text"}
	}
	return keys
}

func (o *Options) textKey(i int) string {
	if len(o.TextKeys) == 0 {
		return "text"
	}
	return o.TextKeys[i]
}

// Run tags the records of inputs (file names; "-" is stdin, and no names
// means stdin alone) as one stream, in order, and writes them to
// opts.Output or, when that is empty, to stdout. A nil stdin means os.Stdin.
//
// Problems with single records are passed to opts.OnError and counted; the
// run goes on. An input that cannot be opened or ends early is reported
// the same way, after its last whole line, and Run goes on with the next
// input and returns the first such error at the end. A write error ends the
// run at once (it unwraps to ErrOutputClosed when the reader went away).
// When ctx is cancelled, Run stops reading, writes the blocks already read
// (whole lines only), flushes, and returns context.Cause(ctx).
//
// Run returns after every goroutine it started has ended, except the one
// reading the input when it is blocked in a Read of an idle pipe at
// cancellation: that one ends at its next Read.
func Run(ctx context.Context, opts Options, inputs []string, stdin io.Reader, stdout io.Writer) (Stats, error) {
	start := time.Now()
	stats := Stats{Tags: map[string]int64{}}
	cfg, err := newConfig(opts)
	if err != nil {
		return stats, err
	}
	if len(inputs) == 0 {
		inputs = []string{"-"}
	}
	startTagger, startGen := opts.Tagger, uint64(0)
	var startHeld *heldTagger
	if sw := cfg.sw; sw != nil {
		startHeld, startGen = sw.acquire()
		if startHeld != nil {
			startTagger = startHeld.t
		}
	}
	first := newTaggerState(startTagger, cfg)
	if startHeld != nil {
		// Held only while reading its labels: the cutter takes a
		// reference of its own for each block, and keeps startHeld only
		// to know that first was made from it.
		startHeld.release()
	}
	if len(first.labels) < 2 {
		return stats, errors.New("stream: tagger has no labels")
	}
	out, err := newWriter(opts.Output, opts.Compress, opts.Append, stdout)
	if err != nil {
		return stats, err
	}
	var rej *bufio.Writer
	if opts.Rejects != nil {
		rej = bufio.NewWriterSize(opts.Rejects, writeBuffer)
	}

	quit := make(chan struct{})
	defer close(quit)
	var bytesRead atomic.Int64
	chunkPool := make(chan []byte, 4)
	for range cap(chunkPool) {
		chunkPool <- make([]byte, 0, chunkSize)
	}
	chunks := make(chan chunk, cap(chunkPool))
	go readInputs(inputs, stdin, func(n int) { bytesRead.Add(int64(n)) }, chunkPool, chunks, quit)

	window := max(2, cfg.jobs*blocksPerWorker)
	free := make(chan *block, window)
	all := make([]*block, window)
	for i := range all {
		// Sized so that a full block does not grow by doubling.
		all[i] = &block{lastNL: -1, in: make([]byte, 0, cfg.blockSize+chunkSize)}
		free <- all[i]
	}
	abortCtx, abort := context.WithCancelCause(context.Background())
	defer abort(nil)
	work := make(chan *block, cfg.jobs)
	kw := &keyWatch{warn: opts.Warn, paths: textKeysOrDefault(opts.TextKeys), done: &cfg.keyDone}
	c := &cutter{cfg: cfg, chunks: chunks, chunkPool: chunkPool, free: free, work: work,
		stop: ctx.Done(), abort: abortCtx.Done(), tagger: first, held: startHeld, gen: startGen}
	var wg sync.WaitGroup
	wg.Go(c.run)

	// The writer's side: everything below runs on this goroutine.
	var (
		tot      counts
		curFile  = -1
		lineBase int64
		inErr    error
		werr     error
	)
	emit := func(b *block) error {
		if b.fault != nil {
			return b.fault
		}
		if b.reopen {
			if err := out.reopen(); err != nil {
				return err
			}
		}
		if b.file != curFile {
			curFile, lineBase = b.file, 0
		}
		tot.add(&b.n)
		kw.add(&b.kn)
		stats.Bytes += int64(len(b.in))
		for i, n := range b.tags {
			if n > 0 {
				stats.Tags[b.tagger.labels[i]] += n
			}
		}
		name := inputs[b.file]
		if name == "-" {
			name = "stdin"
		}
		for _, e := range b.errs {
			if opts.OnError != nil {
				opts.OnError(&RecordError{File: name, Line: lineBase + e.line + 1, Err: e.err})
			}
		}
		lineBase += b.lines
		if err := out.write(b.out); err != nil {
			return err
		}
		if rej != nil && len(b.rej) > 0 {
			if _, err := rej.Write(b.rej); err != nil {
				return fmt.Errorf("write rejects: %w", err)
			}
		}
		if b.err != nil {
			e := &InputError{File: name, Line: lineBase, Err: b.err}
			if inErr == nil {
				inErr = e
			}
			if opts.OnError != nil {
				opts.OnError(e)
			}
		}
		if opts.Progress != nil {
			opts.Progress(bytesRead.Load(), tot.written)
		}
		return nil
	}
	flush := func() error {
		if rej != nil {
			if err := rej.Flush(); err != nil {
				return fmt.Errorf("write rejects: %w", err)
			}
		}
		return out.flush()
	}
	recycle := func(b *block) {
		if b.held != nil {
			b.held.release() // b is written: the last use of its Tagger
		}
		b.reset()
		free <- b
	}

	if cfg.jobs == 1 {
		restore := panicOnFault()
		wk := newWorker(cfg)
		for {
			var b *block
			var ok bool
			select {
			case b, ok = <-work:
			default:
				if werr = flush(); werr != nil {
					break
				}
				b, ok = <-work
			}
			if werr != nil || !ok {
				break
			}
			wk.processSafe(b)
			if werr = emit(b); werr != nil {
				break
			}
			recycle(b)
		}
		restore()
	} else {
		done := make(chan *block, window)
		var workers sync.WaitGroup
		for range cfg.jobs {
			workers.Go(func() {
				defer panicOnFault()()
				wk := newWorker(cfg)
				for b := range work {
					wk.processSafe(b)
					select {
					case done <- b:
					case <-abortCtx.Done():
						return
					}
				}
			})
		}
		wg.Go(func() { workers.Wait(); close(done) })
		ro := newReorder(window)
		for {
			b := ro.pop()
			if b == nil {
				var ok bool
				select {
				case b, ok = <-done:
				default:
					if werr = flush(); werr != nil {
						break
					}
					b, ok = <-done
				}
				if werr != nil || !ok {
					break
				}
				ro.put(b)
				continue
			}
			if werr = emit(b); werr != nil {
				break
			}
			recycle(b)
		}
	}
	if werr != nil {
		abort(werr)
	}
	wg.Wait()
	// Blocks that were never written hold their Tagger still.
	for _, b := range all {
		if b.held != nil {
			b.held.release()
			b.held = nil
		}
	}
	var fault *FaultError
	if werr == nil || errors.As(werr, &fault) {
		// After a fault the blocks before it are written: flush them.
		if err := flush(); err != nil && werr == nil {
			werr = err
		}
	}
	// A replaced Output file is put in place only when every input was
	// read and written; otherwise it is left as it was.
	commit := werr == nil && inErr == nil && !(c.stopped && ctx.Err() != nil)
	if err := out.finish(commit); werr == nil && err != nil {
		werr = err
	}
	if werr == nil && !c.stopped {
		kw.finish()
	}

	stats.Records, stats.Written, stats.Dropped = tot.records, tot.written, tot.dropped
	stats.Rejected, stats.Malformed, stats.NotString, stats.TooLong = tot.rejected, tot.malformed, tot.notString, tot.tooLong
	stats.NoText, stats.Blank, stats.CRLF, stats.InvalidUTF8, stats.Passed = tot.noText, tot.blank, tot.crlf, tot.invalidUTF8, tot.passed
	stats.Text, stats.NoWords = tot.text, tot.noWords
	stats.Elapsed = time.Since(start)
	switch {
	case werr != nil:
		return stats, werr
	case c.stopped && ctx.Err() != nil:
		return stats, context.Cause(ctx)
	}
	return stats, inErr
}
