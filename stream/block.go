package stream

import (
	"bytes"
	"fmt"
	"time"
)

// counts are one block's record counts; the writer adds them up in order.
type counts struct {
	records, written, dropped, malformed, notString, tooLong, noText,
	blank, crlf, invalidUTF8, passed, rejected, text, noWords int64
	words, known int64 // tokens of tagged texts, and those the model knows
}

func (c *counts) add(o *counts) {
	c.records += o.records
	c.written += o.written
	c.dropped += o.dropped
	c.malformed += o.malformed
	c.notString += o.notString
	c.tooLong += o.tooLong
	c.noText += o.noText
	c.blank += o.blank
	c.crlf += o.crlf
	c.invalidUTF8 += o.invalidUTF8
	c.passed += o.passed
	c.rejected += o.rejected
	c.text += o.text
	c.noWords += o.noWords
	c.words += o.words
	c.known += o.known
}

// lineErr is a problem with the block's line number line (from 0).
type lineErr struct {
	line int64
	err  error
}

// block is the unit of work: whole lines of one input, or one piece of an
// overlong line, with a sequence number. A block is owned by one stage at a
// time (cutter, worker, writer); the free list holds the rest, and its size
// is the window of blocks in flight.
type block struct {
	seq    uint64
	file   int
	in     []byte
	lastNL int // offset of the last '\n' in in, or -1 (cutter only)

	// raw marks a piece of a line longer than MaxLine: written untouched.
	// rawFirst is its first piece, rawEnd its last (ending in '\n').
	raw, rawFirst, rawEnd bool

	tagger *taggerState
	held   *heldTagger // the Switch's Tagger behind tagger, with a reference for this block; or nil
	reopen bool        // reopen the output file before writing this block
	err    error       // input error, reported after the block's lines

	// Filled in by the worker.
	out, rej []byte
	lines    int64
	n        counts
	tags     []int64 // per label, then unsure
	errs     []lineErr
	fault    *FaultError // the Tagger's memory faulted: the run ends before this block

	// CSV and TSV: the header of the block's input, and whether the block
	// starts that input (its first record is the header). A header that
	// cannot be used ends the run: hdrErr at the header's line hdrLine.
	hdr     *csvHeader
	header  bool
	hdrErr  error
	hdrLine int64
	kn      keyNote // text keys seen, while Options.Warn waits for a decision
}

func (b *block) reset() {
	b.in = b.in[:0]
	if cap(b.in) > maxKeepCap {
		b.in = nil
	}
	if cap(b.out) > maxKeepCap {
		b.out = nil
	}
	if cap(b.rej) > maxKeepCap {
		b.rej = nil
	}
	*b = block{in: b.in, out: b.out[:0], rej: b.rej[:0], tags: b.tags[:0], errs: b.errs[:0], lastNL: -1}
}

// cutter turns chunks into blocks: about BlockSize bytes each, cut after
// the last newline, never spanning two inputs. When the input pauses for
// cfg.pause, the whole lines read so far go out as a smaller block, so a
// live stream is answered at once.
type cutter struct {
	cfg       *config
	chunks    <-chan chunk
	chunkPool chan []byte
	free      chan *block
	work      chan<- *block
	stop      <-chan struct{} // caller's cancellation: stop cutting
	abort     <-chan struct{} // fatal error downstream

	seq     uint64
	gen     uint64
	tagger  *taggerState
	held    *heldTagger // the Switch's Tagger behind tagger, if any
	stopped bool        // ended by stop or abort, not by the end of input
	since   time.Time   // when cur got its first whole line

	// CSV and TSV: the quote state at the end of the bytes cut so far, and
	// the header of input hdrFile.
	cst     csvState
	hdr     *csvHeader
	hdrFile int
}

// lastBreak returns the offset of the last record boundary in data, which
// continues the input cut so far: the last newline, or for CSV and TSV the
// last newline outside quotes.
func (c *cutter) lastBreak(data []byte) int {
	if c.cfg.sep == 0 {
		return bytes.LastIndexByte(data, '\n')
	}
	k, s := csvCut(data, c.cst, c.cfg.sep)
	c.cst = s
	return k
}

// lastBreakIn is lastBreak for bytes that start at a record boundary and
// were scanned before: the state is left alone.
func (c *cutter) lastBreakIn(data []byte) int {
	if c.cfg.sep == 0 {
		return bytes.LastIndexByte(data, '\n')
	}
	k, _ := csvCut(data, csvFieldStart, c.cfg.sep)
	return k
}

// firstBreak returns the offset of the first record boundary in data,
// which continues an overlong record, or -1.
func (c *cutter) firstBreak(data []byte) int {
	if c.cfg.sep == 0 {
		return bytes.IndexByte(data, '\n')
	}
	k, s := csvCutFirst(data, c.cst, c.cfg.sep, true)
	c.cst = s
	return k
}

// header notes, on the first block of each CSV or TSV input with a
// record in it, that its first record is the header, and stamps every block with its input's
// header.
func (c *cutter) header(b *block) {
	if b.file != c.hdrFile {
		// A block of blank lines only (shipped when a live input paused
		// before its header came) leaves the header to a later block.
		c.hdr = nil
		if h := c.parseHeader(b); h != nil {
			c.hdrFile, c.hdr, b.header = b.file, h, true
		}
	}
	b.hdr = c.hdr
}

// parseHeader parses the first record of b, or returns nil when b holds
// none (only blank lines, or nothing).
func (c *cutter) parseHeader(b *block) *csvHeader {
	if b.raw {
		return &csvHeader{err: fmt.Errorf("%w (over %d bytes)", ErrTooLong, c.cfg.maxLine)}
	}
	for i := 0; i < len(b.in); {
		rec, _, next, _ := nextCSV(b.in, i, c.cfg.sep)
		if len(rec) > 0 {
			h := parseHeader(rec, c.cfg.sep, c.cfg.textKeys, "")
			for _, k := range []string{c.cfg.tagKey.name, c.cfg.confKey.name} {
				if _, dup := h.names[k]; dup && h.err == nil {
					h.err = fmt.Errorf("%w: %q, which tag adds (choose another name for it)", ErrDupColumn, k)
				}
			}
			return h
		}
		i = next
	}
	return nil
}

func (c *cutter) take() *block {
	select {
	case b := <-c.free:
		return b
	case <-c.stop:
	case <-c.abort:
	}
	c.stopped = true
	return nil
}

// send stamps b with its sequence number and tagger and hands it on.
func (c *cutter) send(b *block) bool {
	b.seq = c.seq
	c.seq++
	if sw := c.cfg.sw; sw != nil {
		h, g := sw.acquire()
		if g != c.gen {
			c.gen = g
			b.reopen = true
		}
		if h != nil {
			if h != c.held {
				c.held = h
				c.tagger = newTaggerState(h.t, c.cfg)
			}
			b.held = h // the writer drops this reference after writing b
		}
	}
	b.tagger = c.tagger
	if c.cfg.sep != 0 {
		c.header(b)
	}
	select {
	case c.work <- b:
		return true
	case <-c.abort:
		c.stopped = true
		return false
	}
}

// stopNow sends the whole lines of cur, on cancellation.
func (c *cutter) stopNow(cur *block) {
	c.stopped = true
	if cur.lastNL >= 0 {
		cur.in = cur.in[:cur.lastNL+1]
		c.send(cur)
	}
}

// ship sends cur[:k] and returns a new block holding the rest of cur.
func (c *cutter) ship(cur *block, k int) *block {
	next := c.take()
	if next == nil {
		return nil
	}
	next.file = cur.file
	next.in = append(next.in, cur.in[k:]...)
	next.lastNL = c.lastBreakIn(next.in) // the ramp-up cuts before the last boundary
	cur.in = cur.in[:k]
	if !c.send(cur) {
		return nil
	}
	return next
}

// run cuts until the input ends or stop or abort, then closes work.
func (c *cutter) run() {
	defer close(c.work)
	cur := c.take()
	if cur == nil {
		return
	}
	long := false // inside a line longer than MaxLine
	timer := time.NewTimer(time.Hour)
	timer.Stop()
	for {
		var ch chunk
		var ok bool
		select {
		case ch, ok = <-c.chunks:
		default:
			if cur.lastNL >= 0 {
				timer.Reset(c.cfg.pause)
				select {
				case ch, ok = <-c.chunks:
					timer.Stop()
				case <-timer.C:
					if cur = c.ship(cur, cur.lastNL+1); cur == nil {
						return
					}
					continue
				case <-c.stop:
					c.stopNow(cur)
					return
				case <-c.abort:
					c.stopped = true
					return
				}
			} else {
				select {
				case ch, ok = <-c.chunks:
				case <-c.stop:
					c.stopNow(cur)
					return
				case <-c.abort:
					c.stopped = true
					return
				}
			}
		}
		if !ok {
			if len(cur.in) > 0 || long { // cannot happen: inputs end with eof chunks
				cur.in = cur.in[:0]
			}
			return
		}
		cur.file = ch.file
		if ch.buf != nil {
			cur, long = c.add(cur, ch.buf, long)
			c.chunkPool <- ch.buf[:0]
			if cur == nil {
				return
			}
			// Input that trickles in faster than the pause still goes out
			// within maxWait of its first whole line.
			if cur.lastNL >= 0 && time.Since(c.since) >= c.cfg.maxWait {
				if cur = c.ship(cur, cur.lastNL+1); cur == nil {
					return
				}
			}
		}
		select {
		case <-c.stop:
			if !ch.eof {
				c.stopNow(cur)
				return
			}
		default:
		}
		if ch.eof {
			if cur, long = c.endInput(cur, ch, long); cur == nil {
				return
			}
		}
	}
}

// firstBlock is the size of the first block. Blocks then double up to
// the configured size, so the first records of a large input are written
// within milliseconds of the start instead of after a whole block.
const firstBlock = 16 << 10

// limit is the size at which the current block is sent.
func (c *cutter) limit() int {
	if c.seq >= 16 {
		return c.cfg.blockSize
	}
	return min(c.cfg.blockSize, firstBlock<<c.seq)
}

// add appends data to cur, sending blocks as they fill.
func (c *cutter) add(cur *block, data []byte, long bool) (*block, bool) {
	for len(data) > 0 {
		if long {
			piece := data
			nl := c.firstBreak(data)
			if nl >= 0 {
				piece, long = data[:nl+1], false
			}
			if !c.sendRaw(cur.file, piece, false, nl >= 0) {
				return nil, false
			}
			data = data[len(piece):]
			continue
		}
		n := len(cur.in)
		cur.in = append(cur.in, data...)
		if k := c.lastBreak(data); k >= 0 {
			if cur.lastNL < 0 {
				c.since = time.Now()
			}
			cur.lastNL = n + k
		}
		data = nil
		for len(cur.in) >= c.limit() {
			if cur.lastNL >= 0 {
				k := cur.lastNL + 1
				if lim := c.limit(); k > lim {
					// Cut at the last newline within the limit, so that the
					// ramp-up of the first blocks holds for big reads too.
					if j := c.lastBreakIn(cur.in[:lim]); j >= 0 {
						k = j + 1
					}
				}
				if cur = c.ship(cur, k); cur == nil {
					return nil, false
				}
				continue
			}
			if len(cur.in) <= c.cfg.maxLine {
				break // a long line: let the block grow
			}
			// One line past MaxLine: pass it through in pieces.
			cur.raw, cur.rawFirst = true, true
			next := c.take()
			if next == nil {
				return nil, false
			}
			next.file = cur.file // before send: cur then belongs to a worker
			if !c.send(cur) {
				return nil, false
			}
			cur, long = next, true
		}
	}
	return cur, long
}

// sendRaw sends a piece of an overlong line in a block of its own.
func (c *cutter) sendRaw(file int, piece []byte, first, end bool) bool {
	b := c.take()
	if b == nil {
		return false
	}
	b.file = file
	b.in = append(b.in, piece...)
	b.raw, b.rawFirst, b.rawEnd = true, first, end
	return c.send(b)
}

// endInput finishes an input: its last line gets a '\n' if it has none, so
// the next input starts a new record; a failed input keeps only its whole
// lines and carries the error in an empty block after them.
func (c *cutter) endInput(cur *block, ch chunk, long bool) (*block, bool) {
	c.cst = csvFieldStart // the next input starts afresh
	if long {
		if !c.sendRaw(cur.file, []byte{'\n'}, false, true) {
			return nil, false
		}
	}
	if ch.err != nil {
		cur.in = cur.in[:cur.lastNL+1]
	} else if len(cur.in) > 0 && cur.in[len(cur.in)-1] != '\n' {
		cur.in = append(cur.in, '\n')
		cur.lastNL = len(cur.in) - 1
	}
	if len(cur.in) > 0 {
		if cur = c.ship(cur, len(cur.in)); cur == nil {
			return nil, false
		}
	}
	if ch.err != nil {
		next := c.take()
		if next == nil {
			return nil, false
		}
		cur.file, cur.err = ch.file, ch.err
		if !c.send(cur) {
			return nil, false
		}
		cur = next
	}
	return cur, false
}
