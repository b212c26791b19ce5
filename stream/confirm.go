package stream

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
)

// The replies of rsyslog's omprog confirmation protocol (omprog's
// confirmMessages, described in rsyslog's plugins/external/INTERFACE.md):
// one line each; any other line is a failure, and rsyslog keeps the
// message (or the transaction) in its queue and sends it again later.
const (
	ReplyOK          = "OK"           // started, message written, or transaction mark done
	ReplyDeferCommit = "DEFER_COMMIT" // message taken into the open transaction, not yet written
)

// The transaction marks omprog sends with useTransactions by default
// (its beginTransactionMark and commitTransactionMark settings).
const (
	DefaultBeginMark  = "BEGIN TRANSACTION"
	DefaultCommitMark = "COMMIT TRANSACTION"
)

// maxReply bounds an error reply: omprog reads a reply line into a
// 4,096-byte buffer and restarts a program whose reply is longer.
const maxReply = 1000

// ConfirmOptions are the protocol settings of Confirm. The zero value
// uses omprog's default marks and does not sync.
type ConfirmOptions struct {
	// BeginMark and CommitMark are the lines that open and commit a
	// transaction (DefaultBeginMark, DefaultCommitMark when empty). A
	// message line equal to a mark is taken as the mark: a JSON template
	// never renders one.
	BeginMark, CommitMark string
	// Fsync syncs the output file (and a Rejects writer that has a Sync
	// method) to stable storage before each reply that commits records:
	// per message outside a transaction, once per transaction inside one.
	Fsync bool
	// Note, if set, is told of a repair made on opening the output: the
	// cut last line a killed run left (never confirmed, so sent again) is
	// removed.
	Note func(msg string)
}

// protoKind is what a line of omprog's input is.
type protoKind int

const (
	protoMessage protoKind = iota
	protoBegin
	protoCommit
)

// protoReader splits omprog's input into messages and transaction marks.
// A message is one line with its '\n'; a last line without one (the pipe
// closed mid-message) is returned as it is.
type protoReader struct {
	r             *bufio.Reader
	begin, commit []byte
	line          int64 // lines read so far
	buf           []byte
}

func newProtoReader(r io.Reader, begin, commit string) *protoReader {
	if begin == "" {
		begin = DefaultBeginMark
	}
	if commit == "" {
		commit = DefaultCommitMark
	}
	return &protoReader{r: bufio.NewReaderSize(r, 64<<10), begin: []byte(begin), commit: []byte(commit)}
}

// next returns the next line's kind and, for a message, its bytes (valid
// until the next call). At the end it returns io.EOF; a read error is
// returned as it is.
func (p *protoReader) next() (protoKind, []byte, error) {
	p.buf = p.buf[:0]
	for {
		chunk, err := p.r.ReadSlice('\n')
		p.buf = append(p.buf, chunk...)
		if err == bufio.ErrBufferFull {
			continue
		}
		if err != nil && (err != io.EOF || len(p.buf) == 0) {
			return protoMessage, nil, err
		}
		break
	}
	p.line++
	if body, ok := bytes.CutSuffix(p.buf, []byte{'\n'}); ok {
		switch {
		case bytes.Equal(body, p.begin):
			return protoBegin, nil, nil
		case bytes.Equal(body, p.commit):
			return protoCommit, nil, nil
		}
	}
	return protoMessage, p.buf, nil
}

// confirmOut is Confirm's output file: appended to in place, each
// transaction's records in one write, under an exclusive lock (flock, so
// several omprog instances may share the file and a start-up repair never
// takes another's write in progress for a cut line). After a failed write
// the file is cut back to its size before it and closed; the next write
// opens it again.
type confirmOut struct {
	path  string
	f     *os.File
	fsync bool
	note  func(string)
}

// open opens the file for appending if it is not open, and removes a cut
// last line left by a killed run.
func (o *confirmOut) open() error {
	if o.f != nil {
		return nil
	}
	f, err := os.OpenFile(o.path, os.O_WRONLY|os.O_CREATE|os.O_APPEND, 0o666)
	if err != nil {
		return fmt.Errorf("open output: %w", err)
	}
	if err := lockFile(f); err != nil {
		f.Close()
		return fmt.Errorf("lock output %s: %w", o.path, err)
	}
	defer unlockFile(f)
	if err := o.repair(f); err != nil {
		f.Close()
		return err
	}
	o.f = f
	return nil
}

// repair cuts f back to its last newline. A record is confirmed only
// after it was written whole, so a cut line was never confirmed: rsyslog
// still holds it and sends it again.
func (o *confirmOut) repair(f *os.File) error {
	st, err := f.Stat()
	if err != nil || !st.Mode().IsRegular() || st.Size() == 0 {
		return nil
	}
	size := st.Size()
	var last [1]byte
	if _, err := readAt(o.path, last[:], size-1); err != nil || last[0] == '\n' {
		return err
	}
	keep, err := lastNewline(o.path, size)
	if err != nil {
		return fmt.Errorf("repair output %s: %w", o.path, err)
	}
	if err := f.Truncate(keep); err != nil {
		return fmt.Errorf("repair output %s: %w", o.path, err)
	}
	if o.note != nil {
		o.note(fmt.Sprintf("%s: removed the cut last line (%d bytes) an earlier run left; it was never confirmed, so rsyslog sends it again", o.path, size-keep))
	}
	return nil
}

func readAt(path string, p []byte, off int64) (int, error) {
	f, err := os.Open(path)
	if err != nil {
		return 0, err
	}
	defer f.Close()
	return f.ReadAt(p, off)
}

// lastNewline returns the offset just after the last '\n' in the first
// size bytes of the file at path (0 when there is none).
func lastNewline(path string, size int64) (int64, error) {
	f, err := os.Open(path)
	if err != nil {
		return 0, err
	}
	defer f.Close()
	buf := make([]byte, 64<<10)
	for end := size; end > 0; {
		start := max(0, end-int64(len(buf)))
		n, err := f.ReadAt(buf[:end-start], start)
		if err != nil && !(err == io.EOF && int64(n) == end-start) {
			return 0, err
		}
		if i := bytes.LastIndexByte(buf[:n], '\n'); i >= 0 {
			return start + int64(i) + 1, nil
		}
		end = start
	}
	return 0, nil
}

// write appends p whole. On an error it cuts the file back to where p
// began and closes it.
func (o *confirmOut) write(p []byte) error {
	if err := o.open(); err != nil {
		return err
	}
	if len(p) == 0 {
		return nil
	}
	if err := lockFile(o.f); err != nil {
		return o.fail(-1, fmt.Errorf("lock output %s: %w", o.path, err))
	}
	defer func() {
		if o.f != nil {
			unlockFile(o.f)
		}
	}()
	st, err := o.f.Stat()
	if err != nil {
		return o.fail(-1, fmt.Errorf("write %s: %w", o.path, err))
	}
	if _, err := o.f.Write(p); err != nil {
		return o.fail(st.Size(), err)
	}
	return nil
}

// sync syncs what was written, with fsync; on an error the file is closed
// (and opened again by the next write).
func (o *confirmOut) sync() error {
	if !o.fsync || o.f == nil {
		return nil
	}
	if err := o.f.Sync(); err != nil {
		return o.fail(-1, fmt.Errorf("sync %s: %w", o.path, err))
	}
	return nil
}

func (o *confirmOut) fail(size int64, err error) error {
	if size >= 0 {
		o.f.Truncate(size) // best effort: a later open repairs a cut line too
		unlockFile(o.f)
	}
	o.f.Close()
	o.f = nil
	return err
}

// reopen closes the file, so the next write opens the path again (a log
// rotator may have moved it away).
func (o *confirmOut) reopen() error {
	if o.f == nil {
		return nil
	}
	err := o.f.Close()
	o.f = nil
	if err != nil {
		return fmt.Errorf("close output %s: %w", o.path, err)
	}
	return o.open()
}

func (o *confirmOut) close() error {
	if o.f == nil {
		return nil
	}
	err := o.f.Close()
	o.f = nil
	return err
}

// replyLine makes err one failure reply: a single line that omprog cannot
// take for a success, and short enough for its reply buffer.
func replyLine(err error) string {
	s := "error: " + strings.Map(func(r rune) rune {
		if r == '\n' || r == '\r' {
			return ' '
		}
		return r
	}, err.Error())
	if len(s) > maxReply {
		s = s[:maxReply]
	}
	return s
}

// Confirm tags the messages that rsyslog's omprog sends on stdin with
// confirmMessages on, writes them to the file opts.Output (appended to in
// place; required), and answers on replies as the protocol asks:
//
//   - "OK" once the tagger is ready and the output file open (or an error
//     line and the return of the error, when it cannot be opened);
//   - outside a transaction, "OK" for each message once its record is
//     written (and synced with Fsync);
//   - with useTransactions, "OK" for the begin mark, "DEFER_COMMIT" for
//     each message once its record is written, and "OK" for the commit
//     mark once the transaction's records are synced (with Fsync);
//   - an error line instead when a write or sync fails: the file is cut
//     back to before the failed write, and rsyslog sends the message or
//     the transaction again.
//
// Each record is written before its reply even in a transaction, where
// the protocol would allow holding it until the commit: rsyslog (to
// 8.2302 at least, its issue 2420) retries only the failed message of a
// transaction cut short, not the ones it was told were deferred, so a
// deferred record not yet written would be lost when convtag is killed
// mid-transaction. A transaction still saves the sync per message.
//
// Problem records are written (or go to opts.Rejects) and confirmed, and
// passed to OnError with their line of stdin. Only uncompressed JSON
// Lines or text lines are supported; opts.Compress must be CompressNone,
// or CompressAuto with a name without a compression suffix.
//
// Confirm returns nil at the end of the input; a write error is answered
// and the run goes on, and Confirm returns it at the end. When ctx is
// cancelled it returns context.Cause(ctx) once the message in hand is
// written.
func Confirm(ctx context.Context, opts Options, co ConfirmOptions, stdin io.Reader, replies io.Writer) (Stats, error) {
	stats := Stats{Tags: map[string]int64{}}
	if opts.Output == "" || opts.Output == "-" {
		return stats, errors.New("stream: confirmed tagging needs an output file")
	}
	if opts.Format == InputCSV || opts.Format == InputTSV {
		return stats, errors.New("stream: confirmed tagging takes JSON Lines or text lines, not CSV or TSV")
	}
	if c := opts.Compress; c == CompressGzip || c == CompressZstd || c == CompressAuto && (strings.HasSuffix(opts.Output, ".gz") || strings.HasSuffix(opts.Output, ".zst")) {
		return stats, errors.New("stream: confirmed tagging writes an uncompressed file (a cut compressed file could not be repaired)")
	}
	cfg, err := newConfig(opts)
	if err != nil {
		return stats, err
	}
	rw := bufio.NewWriter(replies)
	reply := func(s string) error {
		rw.WriteString(s)
		rw.WriteByte('\n')
		if err := rw.Flush(); err != nil {
			return fmt.Errorf("reply: %w", err)
		}
		return nil
	}
	var (
		held       *heldTagger
		gen        uint64
		started    bool
		ts         *taggerState
		sw         = cfg.sw
		out        = &confirmOut{path: opts.Output, fsync: co.Fsync, note: co.Note}
		rejSync, _ = opts.Rejects.(interface{ Sync() error })
		tot        counts
		werr       error
	)
	defer out.close()
	// pick takes the Switch's current Tagger, and reopens the output when
	// the Switch was Set since the last record (rotation, reload).
	pick := func() error {
		if sw == nil {
			if ts == nil {
				ts = newTaggerState(opts.Tagger, cfg)
			}
			return nil
		}
		h, g := sw.acquire()
		switch {
		case h != nil && h != held:
			if held != nil {
				held.release()
			}
			held, ts = h, newTaggerState(h.t, cfg)
		case h != nil:
			h.release()
		}
		if ts == nil {
			ts = newTaggerState(opts.Tagger, cfg)
		}
		reopen := started && g != gen
		gen, started = g, true
		if reopen {
			return out.reopen()
		}
		return nil
	}
	defer func() {
		if held != nil {
			held.release()
		}
	}()
	pick()
	if len(ts.labels) < 2 {
		return stats, errors.New("stream: tagger has no labels")
	}
	if err := out.open(); err != nil {
		reply(replyLine(err))
		return stats, err
	}
	if err := reply(ReplyOK); err != nil {
		return stats, err
	}

	defer panicOnFault()()
	wk := newWorker(cfg)
	b := &block{lastNL: -1}
	// record tags and writes one message; it returns the write error.
	record := func(msg []byte, line int64) error {
		defer b.reset()
		b.in = append(b.in, msg...)
		if b.in[len(b.in)-1] != '\n' {
			b.in = append(b.in, '\n')
		}
		if err := pick(); err != nil {
			return err
		}
		b.tagger = ts
		wk.processSafe(b)
		if b.fault != nil {
			return b.fault
		}
		if err := out.write(b.out); err != nil {
			return err
		}
		if opts.Rejects != nil && len(b.rej) > 0 {
			if _, err := opts.Rejects.Write(b.rej); err != nil {
				return fmt.Errorf("write rejects: %w", err)
			}
		}
		tot.add(&b.n)
		for i, n := range b.tags {
			if n > 0 {
				stats.Tags[ts.labels[i]] += n
			}
		}
		for _, e := range b.errs {
			if opts.OnError != nil {
				opts.OnError(&RecordError{File: "stdin", Line: line, Err: e.err})
			}
		}
		stats.Bytes += int64(len(msg))
		return nil
	}
	sync := func() error {
		if err := out.sync(); err != nil {
			return err
		}
		if co.Fsync && rejSync != nil {
			if err := rejSync.Sync(); err != nil {
				return fmt.Errorf("sync rejects: %w", err)
			}
		}
		return nil
	}
	answer := func(err error, ok string) error {
		if err == nil {
			return reply(ok)
		}
		if werr == nil {
			werr = err
		}
		if opts.OnError != nil {
			opts.OnError(err)
		}
		return reply(replyLine(err))
	}

	type event struct {
		kind protoKind
		line []byte
		err  error
	}
	pr := newProtoReader(stdin, co.BeginMark, co.CommitMark)
	events := make(chan event)
	taken := make(chan struct{})
	quit := make(chan struct{})
	defer close(quit)
	go func() {
		for {
			k, l, err := pr.next()
			select {
			case events <- event{k, l, err}:
			case <-quit:
				return
			}
			if err != nil {
				return
			}
			select {
			case <-taken: // l is consumed: the buffer may be reused
			case <-quit:
				return
			}
		}
	}()

	inTx := false
	var txErr error // a record of the open transaction that failed
	var rerr error
	for rerr == nil {
		var ev event
		cancelled := false
		select {
		case ev = <-events:
		case <-ctx.Done():
			cancelled = true
		}
		if cancelled {
			break
		}
		if ev.err != nil {
			if ev.err != io.EOF {
				rerr = fmt.Errorf("read stdin: %w", ev.err)
			}
			break
		}
		switch ev.kind {
		case protoBegin:
			inTx, txErr = true, nil
			rerr = reply(ReplyOK)
		case protoCommit:
			err := txErr
			if err == nil {
				err = sync()
			}
			inTx, txErr = false, nil
			rerr = answer(err, ReplyOK)
		default:
			err := record(ev.line, pr.line)
			if inTx {
				if err != nil {
					txErr = err
				}
				rerr = answer(err, ReplyDeferCommit)
				break
			}
			if err == nil {
				err = sync()
			}
			rerr = answer(err, ReplyOK)
		}
		taken <- struct{}{}
	}
	if err := out.close(); err != nil && werr == nil {
		werr = fmt.Errorf("close output %s: %w", opts.Output, err)
	}
	stats.Records, stats.Written, stats.Dropped = tot.records, tot.written, tot.dropped
	stats.Rejected, stats.Malformed, stats.NotString, stats.TooLong = tot.rejected, tot.malformed, tot.notString, tot.tooLong
	stats.NoText, stats.Blank, stats.CRLF, stats.InvalidUTF8, stats.Passed = tot.noText, tot.blank, tot.crlf, tot.invalidUTF8, tot.passed
	stats.Text, stats.NoWords = tot.text, tot.noWords
	stats.Words, stats.Known = tot.words, tot.known
	switch {
	case werr != nil:
		return stats, werr
	case rerr != nil:
		return stats, rerr
	case ctx.Err() != nil:
		return stats, context.Cause(ctx)
	}
	return stats, nil
}
