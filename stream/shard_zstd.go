package stream

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"

	"github.com/klauspost/compress/zstd"
)

// zstdFrames lists the offsets at which the zstd frames of f begin (and
// size at the end), walking the frame and block headers of RFC 8878
// (sections 3.1.1 and 3.1.1.2) without decoding any block: a few bytes
// are read per block. Skippable frames (section 3.1.2) are listed too; they
// decode to nothing.
func zstdFrames(f *os.File, size int64) ([]int64, error) {
	var offs []int64
	var hdr [18]byte
	bad := func(at int64, what string) error {
		return fmt.Errorf("%w: zstd frame at byte %d: %s", ErrShardInput, at, what)
	}
	for at := int64(0); at < size; {
		offs = append(offs, at)
		if _, err := f.ReadAt(hdr[:8], at); err != nil && !(errors.Is(err, io.EOF) && size-at >= 8) {
			return nil, bad(at, "cut short")
		}
		magic := binary.LittleEndian.Uint32(hdr[:4])
		if magic&0xfffffff0 == 0x184d2a50 {
			at += 8 + int64(binary.LittleEndian.Uint32(hdr[4:8]))
			continue
		}
		if magic != 0xfd2fb528 {
			return nil, bad(at, "not a frame")
		}
		fhd := hdr[4]
		single := fhd&0x20 != 0
		pos := at + 5
		if !single {
			pos++ // window descriptor
		}
		pos += [4]int64{0, 1, 2, 4}[fhd&3] // dictionary id
		switch fcs := fhd >> 6; {
		case fcs == 0 && single:
			pos++
		case fcs > 0:
			pos += [4]int64{0, 2, 4, 8}[fcs]
		}
		for {
			var bh [3]byte
			if _, err := f.ReadAt(bh[:], pos); err != nil {
				return nil, bad(at, "a block header is cut")
			}
			h := uint32(bh[0]) | uint32(bh[1])<<8 | uint32(bh[2])<<16
			last, typ, n := h&1 != 0, (h>>1)&3, int64(h>>3)
			switch typ {
			case 1: // RLE: one byte repeated n times
				n = 1
			case 3:
				return nil, bad(at, "reserved block type")
			}
			pos += 3 + n
			if pos > size {
				return nil, bad(at, "a block runs past the end")
			}
			if last {
				break
			}
		}
		if fhd&4 != 0 {
			pos += 4 // content checksum
		}
		at = pos
	}
	return append(offs, size), nil
}

// openZstdShard returns part s of a zstd file made of several frames: the
// records whose first decoded byte comes from a frame that begins in the
// part's byte range. A record may run across frames (pzstd cuts its input
// at any byte), so the part skips a record begun in an earlier frame and
// finishes its own last record from the frames after it.
func openZstdShard(f *os.File, size int64, s Shard) (*input, error) {
	offs, err := zstdFrames(f, size)
	if err != nil {
		return nil, err
	}
	frames := offs[:len(offs)-1]
	if len(frames) < 2 && s.N > 1 {
		return nil, fmt.Errorf("%w: it is one zstd frame, which cannot be cut without decoding all before the cut; write it in independent frames (pzstd) or shard by file instead", ErrShardInput)
	}
	first := len(frames)
	for i, o := range frames {
		if o >= cut(size, s.K-1, s.N) {
			first = i
			break
		}
	}
	end := len(frames)
	for i, o := range frames {
		if o >= cut(size, s.K, s.N) {
			end = i
			break
		}
	}
	dec := func(from, to int) (io.ReadCloser, error) {
		zr, err := zstd.NewReader(io.NewSectionReader(f, offs[from], offs[to]-offs[from]), zstd.WithDecoderConcurrency(1))
		if err != nil {
			return nil, err
		}
		return zr.IOReadCloser(), nil
	}
	// Does the part begin in the middle of a record? Only the last byte
	// of the content before it tells: decode the frames before, back to
	// one that holds any content.
	midRecord := false
	for i := first - 1; i >= 0; i-- {
		r, err := dec(i, i+1)
		if err != nil {
			return nil, err
		}
		last, n, err := lastByte(r)
		r.Close()
		if err != nil {
			return nil, fmt.Errorf("%w (zstd: %v)", ErrTruncated, err)
		}
		if n > 0 {
			midRecord = last != '\n'
			break
		}
	}
	own, err := dec(first, end)
	if err != nil {
		return nil, err
	}
	p := &zstdPart{own: bufio.NewReaderSize(own, 64<<10), skip: midRecord, rest: func() (io.ReadCloser, error) { return dec(end, len(frames)) }}
	p.closers = append(p.closers, own)
	var r io.Reader = p
	if first == 0 {
		r = skipBOM(bufio.NewReaderSize(p, 64<<10))
	}
	return &input{r: r, kind: "zstd", closer: func() {
		for _, c := range p.closers {
			c.Close()
		}
		f.Close()
	}}, nil
}

// lastByte reads r to its end and returns its last byte and its length.
func lastByte(r io.Reader) (byte, int64, error) {
	buf := make([]byte, 64<<10)
	var last byte
	var n int64
	for {
		k, err := r.Read(buf)
		if k > 0 {
			last, n = buf[k-1], n+int64(k)
		}
		if err == io.EOF {
			return last, n, nil
		}
		if err != nil {
			return 0, n, err
		}
	}
}

// zstdPart reads a part's own decoded content, without a leading record
// begun before it (skip), and then, when its last record is not finished,
// the frames after it up to the end of that record.
type zstdPart struct {
	own     *bufio.Reader
	skip    bool
	rest    func() (io.ReadCloser, error)
	after   *bufio.Reader
	last    byte
	wrote   bool
	done    bool
	closers []io.Closer
}

func (p *zstdPart) Read(b []byte) (int, error) {
	if p.skip {
		// Up to and including the first newline of the part's own
		// content; a part without one holds no record start.
		if _, err := p.own.ReadSlice('\n'); err != nil {
			for errors.Is(err, bufio.ErrBufferFull) {
				_, err = p.own.ReadSlice('\n')
			}
			if err != nil {
				if err == io.EOF {
					p.done = true
					return 0, io.EOF
				}
				return 0, err
			}
		}
		p.skip = false
	}
	if p.done {
		return 0, io.EOF
	}
	if p.after == nil {
		n, err := p.own.Read(b)
		if n > 0 {
			p.last, p.wrote = b[n-1], true
		}
		if err != io.EOF {
			return n, err
		}
		if !p.wrote || p.last == '\n' {
			p.done = true
			return n, io.EOF
		}
		r, err2 := p.rest()
		if err2 != nil {
			return n, err2
		}
		p.closers = append(p.closers, r)
		p.after = bufio.NewReaderSize(r, 64<<10)
		if n > 0 {
			return n, nil
		}
	}
	// The end of the part's last record, from the frames after it.
	line, err := p.after.ReadSlice('\n')
	n := copy(b, line)
	if n < len(line) {
		// b is shorter than the rest of the record: put the remainder
		// back by reading it again next time (bufio keeps it buffered).
		return n, p.unread(line[n:])
	}
	switch {
	case err == nil:
		p.done = true
		return n, nil
	case errors.Is(err, bufio.ErrBufferFull):
		return n, nil
	case err == io.EOF:
		p.done = true
		return n, io.EOF
	}
	return n, err
}

// unread keeps bytes that did not fit the caller's buffer for the next
// Read, in front of what the frames after the part still hold.
func (p *zstdPart) unread(rest []byte) error {
	p.after = bufio.NewReaderSize(io.MultiReader(bytes.NewReader(bytes.Clone(rest)), p.after), 64<<10)
	return nil
}
