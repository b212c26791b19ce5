package stream

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"sync"
	"sync/atomic"
	"time"
)

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
	if opts.Shard.N > 0 && (len(inputs) != 1 || inputs[0] == "-") {
		return stats, fmt.Errorf("%w: a part is taken of one named file, not of standard input or several files", ErrShardInput)
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
	go readInputs(inputs, stdin, func(n int) { bytesRead.Add(int64(n)) }, opts.Shard, chunkPool, chunks, quit)

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
		stop: ctx.Done(), abort: abortCtx.Done(), tagger: first, held: startHeld, gen: startGen, hdrFile: -1}
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
		if opts.Shard.N > 0 {
			name += " (" + opts.Shard.String() + ")" // lines count from the part's start
		}
		if name == "-" {
			name = "stdin"
		}
		for _, e := range b.errs {
			if opts.OnError != nil {
				opts.OnError(&RecordError{File: name, Line: lineBase + e.line + 1, Err: e.err})
			}
		}
		if b.hdrErr != nil {
			// Only the records before the header are in b.out: blank lines.
			if err := out.write(b.out); err != nil {
				return err
			}
			return &HeaderError{File: name, Line: lineBase + b.hdrLine + 1, Err: b.hdrErr}
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

	// receive takes the next block from ch, flushing the output first when
	// none is ready: the writer flushes whenever the input pauses.
	receive := func(ch <-chan *block) (*block, bool, error) {
		select {
		case b, ok := <-ch:
			return b, ok, nil
		default:
		}
		if err := flush(); err != nil {
			return nil, false, err
		}
		b, ok := <-ch
		return b, ok, nil
	}
	// next returns the next block to write, in sequence; nil at the end.
	var next func() (*block, error)
	if cfg.jobs == 1 {
		// The sequential path: this goroutine tags each block itself.
		defer panicOnFault()()
		wk := newWorker(cfg)
		next = func() (*block, error) {
			b, ok, err := receive(work)
			if !ok {
				return nil, err
			}
			wk.processSafe(b)
			return b, nil
		}
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
		next = func() (*block, error) {
			for {
				if b := ro.pop(); b != nil {
					return b, nil
				}
				b, ok, err := receive(done)
				if !ok {
					return nil, err
				}
				ro.put(b)
			}
		}
	}
	// The one writer path, whatever the number of workers.
	for {
		var b *block
		if b, werr = next(); b == nil || werr != nil {
			break
		}
		if werr = emit(b); werr != nil {
			break
		}
		recycle(b)
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
	stats.Words, stats.Known = tot.words, tot.known
	stats.Elapsed = time.Since(start)
	switch {
	case werr != nil:
		return stats, werr
	case c.stopped && ctx.Err() != nil:
		return stats, context.Cause(ctx)
	}
	return stats, inErr
}
