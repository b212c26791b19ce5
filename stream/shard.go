package stream

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
)

// Shard selects part K of N (1 <= K <= N) of one input file: for an
// uncompressed file, the records whose first byte lies in the byte range
// [(K−1)·size/N, K·size/N); for a zstd file of several independent frames
// (as pzstd writes), the records whose first decoded byte comes
// from a frame that begins in that range. The parts 1..N of a file hold each of its
// records exactly once, in order, so their outputs joined in order are the
// output of one run over the whole file. The zero value selects the whole
// input.
type Shard struct{ K, N int }

// ErrShardInput is an input that cannot be cut into parts.
var ErrShardInput = errors.New("stream: cannot be sharded")

// ParseShard reads "K/N".
func ParseShard(s string) (Shard, error) {
	a, b, ok := strings.Cut(s, "/")
	k, err1 := strconv.Atoi(strings.TrimSpace(a))
	n, err2 := strconv.Atoi(strings.TrimSpace(b))
	if !ok || err1 != nil || err2 != nil || n < 1 || k < 1 || k > n {
		return Shard{}, fmt.Errorf("shard %q: want K/N with 1 <= K <= N, e.g. 3/8", s)
	}
	return Shard{K: k, N: n}, nil
}

func (s Shard) String() string { return fmt.Sprintf("part %d/%d", s.K, s.N) }

// openShard opens name and returns the bytes of its part s: from the first
// record that starts at or after the part's first byte to the first that
// starts at or after the next part's. A record starts at offset 0 and after
// each newline. Only the bytes from each cut to the next newline are read
// to find it, never the whole file.
func openShard(name string, s Shard) (*input, error) {
	f, err := os.Open(name)
	if err != nil {
		return nil, err
	}
	fail := func(err error) (*input, error) { f.Close(); return nil, err }
	st, err := f.Stat()
	if err != nil {
		return fail(err)
	}
	if !st.Mode().IsRegular() {
		return fail(fmt.Errorf("%w: not a regular file (a part is a byte range of a file)", ErrShardInput))
	}
	size := st.Size()
	switch kind := sniff(bufio.NewReaderSize(io.NewSectionReader(f, 0, 64), 64)); kind {
	case "":
	case "zstd":
		in, err := openZstdShard(f, size, s)
		if err != nil {
			return fail(err)
		}
		return in, nil
	default:
		return fail(fmt.Errorf("%w: it is %s-compressed and its parts cannot be found without decoding all before them; shard by file instead (one task per file)", ErrShardInput, kind))
	}
	from, err := recordStart(f, size, cut(size, s.K-1, s.N))
	if err != nil {
		return fail(err)
	}
	to, err := recordStart(f, size, cut(size, s.K, s.N))
	if err != nil {
		return fail(err)
	}
	var r io.Reader = io.NewSectionReader(f, from, to-from)
	if from == 0 {
		r = skipBOM(bufio.NewReaderSize(r, 64<<10))
	}
	return &input{r: r, closer: func() { f.Close() }}, nil
}

// cut is the first byte of part k+1 of n (k from 0): k·size/n, without
// overflow for any file size.
func cut(size int64, k, n int) int64 {
	q, r := size/int64(n), size%int64(n)
	return q*int64(k) + r*int64(k)/int64(n)
}

// recordStart returns the offset of the first record starting at or after
// pos: pos itself when it is 0 or follows a newline, else the byte after
// the next newline (size when there is none).
func recordStart(f *os.File, size, pos int64) (int64, error) {
	if pos <= 0 {
		return 0, nil
	}
	if pos >= size {
		return size, nil
	}
	buf := make([]byte, 64<<10)
	for at := pos - 1; at < size; {
		n, err := f.ReadAt(buf, at)
		if i := bytes.IndexByte(buf[:n], '\n'); i >= 0 {
			return at + int64(i) + 1, nil
		}
		at += int64(n)
		if err == io.EOF || n == 0 {
			break
		}
		if err != nil {
			return 0, err
		}
	}
	return size, nil
}
