package stream

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/klauspost/compress/gzip"
	"github.com/klauspost/compress/zstd"
)

// shardFiles are inputs whose parts are easy to get wrong: no final
// newline, CRLF lines, blank lines, one record longer than several parts,
// fewer records than parts, a BOM, an empty file.
func shardFiles(t *testing.T) map[string][]byte {
	r := rand.New(rand.NewPCG(1, 2))
	var mixed bytes.Buffer
	for i := range 400 {
		switch i % 7 {
		case 0:
			mixed.WriteString("\n")
		case 1:
			mixed.WriteString("{\"text\":\"crlf line\"}\r\n")
		default:
			mixed.WriteString("{\"text\":\"" + strings.Repeat("w", r.IntN(300)) + "\"}\n")
		}
	}
	big := "{\"text\":\"" + strings.Repeat("long ", 2<<20) + "\"}\n" // 10 MiB
	return map[string][]byte{
		"mixed":         mixed.Bytes(),
		"no final nl":   []byte("{\"text\":\"a\"}\n{\"text\":\"b\"}\n{\"text\":\"c\"}"),
		"one record":    []byte("{\"text\":\"alone\"}\n"),
		"big record":    []byte("{\"text\":\"before\"}\n" + big + "{\"text\":\"after\"}\n"),
		"bom":           append([]byte{0xef, 0xbb, 0xbf}, []byte("{\"text\":\"x\"}\n{\"text\":\"y\"}\n")...),
		"empty":         nil,
		"only newlines": []byte("\n\n\n\n\n"),
	}
}

// TestShardPartsJoinToTheWhole: for every N up to 9 and each file, the
// parts' byte ranges tile the file exactly, each part starts on a record,
// and the outputs of Run over parts 1..N joined in order are byte-identical
// to one Run over the whole file, at -j 1 and -j 3.
func TestShardPartsJoinToTheWhole(t *testing.T) {
	dir := t.TempDir()
	for name, data := range shardFiles(t) {
		path := filepath.Join(dir, strings.ReplaceAll(name, " ", "_")+".jsonl")
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		for _, jobs := range []int{1, 3} {
			opts := Options{Tagger: nullTagger{}, Jobs: jobs, BlockSize: 4096}
			var whole bytes.Buffer
			if _, err := Run(context.Background(), opts, []string{path}, nil, &whole); err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			for n := 1; n <= 9; n++ {
				var joined, raw bytes.Buffer
				for k := 1; k <= n; k++ {
					in, err := openShard(path, Shard{k, n})
					if err != nil {
						t.Fatalf("%s %d/%d: %v", name, k, n, err)
					}
					part, _ := io.ReadAll(in.r)
					in.closer()
					raw.Write(part)
					o := opts
					o.Shard = Shard{k, n}
					if _, err := Run(context.Background(), o, []string{path}, nil, &joined); err != nil {
						t.Fatalf("%s %d/%d: %v", name, k, n, err)
					}
				}
				if want := bytes.TrimPrefix(data, bom); !bytes.Equal(raw.Bytes(), want) {
					t.Errorf("%s N=%d: the parts' bytes do not tile the file (%d of %d bytes)", name, n, raw.Len(), len(want))
				}
				if !bytes.Equal(joined.Bytes(), whole.Bytes()) {
					t.Errorf("%s N=%d -j %d: joined parts differ from the whole (%d vs %d bytes)", name, n, jobs, joined.Len(), whole.Len())
				}
			}
		}
	}
}

// TestShardRange checks the rule itself on a small file: part K holds the
// records whose first byte is in [(K−1)·size/N, K·size/N).
func TestShardRange(t *testing.T) {
	data := []byte("aa\nbbbb\nc\n\ndddddd\n") // records start at 0, 3, 8, 10, 11
	path := filepath.Join(t.TempDir(), "r.txt")
	os.WriteFile(path, data, 0o644)
	starts := []int64{0, 3, 8, 10, 11}
	size := int64(len(data))
	for n := 1; n <= 12; n++ {
		for k := 1; k <= n; k++ {
			lo, hi := (int64(k)-1)*size/int64(n), int64(k)*size/int64(n)
			var want []byte
			for i, s := range starts {
				if s >= lo && s < hi {
					end := size
					if i+1 < len(starts) {
						end = starts[i+1]
					}
					want = append(want, data[s:end]...)
				}
			}
			in, err := openShard(path, Shard{k, n})
			if err != nil {
				t.Fatal(err)
			}
			got, _ := io.ReadAll(in.r)
			in.closer()
			if !bytes.Equal(got, want) {
				t.Errorf("%d/%d: %q, want %q", k, n, got, want)
			}
		}
	}
}

func TestShardRefuses(t *testing.T) {
	dir := t.TempDir()
	gz := filepath.Join(dir, "a.jsonl.gz")
	var b bytes.Buffer
	zw := gzip.NewWriter(&b)
	zw.Write([]byte("{\"text\":\"x\"}\n"))
	zw.Close()
	os.WriteFile(gz, b.Bytes(), 0o644)
	plain := filepath.Join(dir, "a.jsonl")
	os.WriteFile(plain, []byte("{\"text\":\"x\"}\n"), 0o644)
	for _, c := range []struct {
		inputs []string
		has    string
	}{
		{[]string{gz}, "gzip-compressed"},
		{[]string{"-"}, "standard input"},
		{[]string{plain, plain}, "several files"},
	} {
		var seen []error
		o := Options{Tagger: nullTagger{}, Shard: Shard{1, 2}, OnError: func(e error) { seen = append(seen, e) }}
		_, err := Run(context.Background(), o, c.inputs, strings.NewReader(""), io.Discard)
		if err == nil && len(seen) > 0 {
			err = seen[0]
		}
		if !errors.Is(err, ErrShardInput) || !strings.Contains(err.Error(), c.has) {
			t.Errorf("%v: %v, want ErrShardInput saying %q", c.inputs, err, c.has)
		}
	}
	for _, s := range []string{"0/3", "4/3", "3", "a/b", "1/0"} {
		if _, err := ParseShard(s); err == nil {
			t.Errorf("ParseShard(%q) accepted", s)
		}
	}
	if s, err := ParseShard("3/8"); err != nil || s != (Shard{3, 8}) {
		t.Errorf("ParseShard(3/8) = %v, %v", s, err)
	}
}

// TestZstdShardsJoinToTheWhole: a zstd file of several frames, written by
// Debian's pzstd (frames cut at any byte, so records straddle them) and
// built by hand from frames of whole and of cut records, an empty frame
// and a skippable one, is sharded by frames: the parts joined in
// order give the whole run's output for every N, and the decoded bytes of
// the parts tile the decoded file.
func TestZstdShardsJoinToTheWhole(t *testing.T) {
	dir := t.TempDir()
	var data bytes.Buffer
	r := rand.New(rand.NewPCG(3, 4))
	for i := range 40000 { // ~4.5 MB: pzstd cuts several frames
		fmt.Fprintf(&data, "{\"text\":\"record %d %s\"}\n", i, strings.Repeat("x", r.IntN(200)))
	}
	plain := filepath.Join(dir, "in.jsonl")
	os.WriteFile(plain, data.Bytes(), 0o644)
	files := map[string]string{}
	// By hand: frames ending mid-record, an empty frame, a skippable frame.
	enc, _ := zstd.NewWriter(nil)
	var hand bytes.Buffer
	b := data.Bytes()
	cuts := []int{0, 1000, 1000, 57321, 100000, 200013, len(b)}
	for i := 0; i+1 < len(cuts); i++ {
		hand.Write(enc.EncodeAll(b[cuts[i]:cuts[i+1]], nil))
		if i == 2 {
			hand.Write([]byte{0x50, 0x2a, 0x4d, 0x18, 3, 0, 0, 0, 'a', 'b', 'c'})
		}
	}
	files["by hand"] = filepath.Join(dir, "hand.jsonl.zst")
	os.WriteFile(files["by hand"], hand.Bytes(), 0o644)
	if pz, err := exec.LookPath("pzstd"); err == nil {
		p := filepath.Join(dir, "p.jsonl.zst")
		if out, err := exec.Command(pz, "-q", "-1", "-p", "2", plain, "-o", p).CombinedOutput(); err != nil {
			t.Fatalf("pzstd: %v %s", err, out)
		}
		files["pzstd"] = p
	} else if os.Getenv("CI") != "" {
		t.Fatal("pzstd is not installed (Debian package zstd)")
	}
	opts := Options{Tagger: nullTagger{}, Jobs: 2, BlockSize: 8192}
	var whole bytes.Buffer
	if _, err := Run(context.Background(), opts, []string{plain}, nil, &whole); err != nil {
		t.Fatal(err)
	}
	for name, path := range files {
		f, _ := os.Open(path)
		st, _ := f.Stat()
		offs, err := zstdFrames(f, st.Size())
		f.Close()
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if len(offs) < 3 {
			t.Fatalf("%s: %d frames: the case tests nothing", name, len(offs)-1)
		}
		for _, n := range []int{1, 2, 3, 5, 8, 13} {
			var joined, raw bytes.Buffer
			for k := 1; k <= n; k++ {
				in, err := openShard(path, Shard{k, n})
				if err != nil {
					t.Fatalf("%s %d/%d: %v", name, k, n, err)
				}
				part, err := io.ReadAll(in.r)
				in.closer()
				if err != nil {
					t.Fatalf("%s %d/%d: %v", name, k, n, err)
				}
				raw.Write(part)
				o := opts
				o.Shard = Shard{k, n}
				if _, err := Run(context.Background(), o, []string{path}, nil, &joined); err != nil {
					t.Fatalf("%s %d/%d: %v", name, k, n, err)
				}
			}
			if !bytes.Equal(raw.Bytes(), data.Bytes()) {
				t.Errorf("%s N=%d: the parts' decoded bytes do not tile the file (%d of %d)", name, n, raw.Len(), data.Len())
			}
			if !bytes.Equal(joined.Bytes(), whole.Bytes()) {
				t.Errorf("%s N=%d: joined parts differ from the whole run", name, n)
			}
		}
	}
	// One frame cannot be cut.
	one := filepath.Join(dir, "one.jsonl.zst")
	os.WriteFile(one, enc.EncodeAll(b, nil), 0o644)
	if _, err := openShard(one, Shard{1, 2}); !errors.Is(err, ErrShardInput) || !strings.Contains(err.Error(), "one zstd frame") {
		t.Errorf("one frame: %v", err)
	}
}

// randomShardFile is a random input: JSON and text records, blank and
// CRLF lines, runs of newlines, now and then a record longer than many
// parts, a BOM or no final newline.
func randomShardFile(r *rand.Rand) []byte {
	var b bytes.Buffer
	if r.IntN(5) == 0 {
		b.Write(bom)
	}
	for range r.IntN(120) {
		switch r.IntN(9) {
		case 0:
			b.WriteString("\n")
		case 1:
			b.WriteString("{\"text\":\"crlf " + strings.Repeat("c", r.IntN(40)) + "\"}\r\n")
		case 2:
			b.WriteString(strings.Repeat("plain words ", r.IntN(10)) + "\n")
		case 3:
			if r.IntN(4) == 0 {
				b.WriteString("{\"text\":\"" + strings.Repeat("long ", 200+r.IntN(2000)) + "\"}\n")
			}
		case 4:
			b.WriteString("\r\n")
		default:
			fmt.Fprintf(&b, "{\"id\":%d,\"text\":\"%s\"}\n", r.IntN(1000), strings.Repeat("w", r.IntN(80)))
		}
	}
	if r.IntN(3) == 0 {
		b.WriteString("{\"text\":\"no final newline\"}")
	}
	return b.Bytes()
}

// checkShards checks the parts of the file at path (holding data) for N
// parts against the rule and against one Run over the whole file (whole):
// part K's bytes are exactly the records whose first byte lies in
// [(K−1)·size/N, K·size/N) (a record starts at 0 and after each newline;
// a BOM at the start is not part of the first record's bytes), and the
// outputs of Run over parts 1..N, joined in order, are whole.
func checkShards(t *testing.T, path string, data []byte, n int, opts Options, whole []byte) {
	t.Helper()
	size := int64(len(data))
	starts := []int64{0}
	for i, c := range data {
		if c == '\n' && int64(i+1) < size {
			starts = append(starts, int64(i+1))
		}
	}
	var joined bytes.Buffer
	for k := 1; k <= n; k++ {
		lo, hi := (int64(k)-1)*size/int64(n), int64(k)*size/int64(n)
		var want []byte
		for i, s := range starts {
			if s >= lo && s < hi && size > 0 {
				end := size
				if i+1 < len(starts) {
					end = starts[i+1]
				}
				want = append(want, data[s:end]...)
			}
		}
		if lo == 0 {
			want = bytes.TrimPrefix(want, bom)
		}
		in, err := openShard(path, Shard{k, n})
		if err != nil {
			t.Fatalf("%d/%d: %v", k, n, err)
		}
		got, err := io.ReadAll(in.r)
		in.closer()
		if err != nil || !bytes.Equal(got, want) {
			t.Fatalf("%d/%d of %d bytes: %q, want %q (%v)", k, n, size, got, want, err)
		}
		o := opts
		o.Shard = Shard{k, n}
		if _, err := Run(context.Background(), o, []string{path}, nil, &joined); err != nil {
			t.Fatalf("%d/%d: %v", k, n, err)
		}
	}
	if !bytes.Equal(joined.Bytes(), whole) {
		t.Fatalf("N=%d, %d bytes: joined parts differ from the whole run (%d vs %d bytes)", n, size, joined.Len(), len(whole))
	}
}

// TestShardProperty: for random files and every N from 1 to 64, the parts
// follow the rule and join to the whole run (checkShards).
func TestShardProperty(t *testing.T) {
	dir := t.TempDir()
	r := rand.New(rand.NewPCG(17, 64))
	files := 8
	if testing.Short() {
		files = 2
	}
	for i := range files {
		data := randomShardFile(r)
		path := filepath.Join(dir, fmt.Sprintf("f%d.jsonl", i))
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		opts := Options{Tagger: nullTagger{}, Jobs: 1 + i%4/3*2, BlockSize: 512 << (i % 4)}
		var whole bytes.Buffer
		if _, err := Run(context.Background(), opts, []string{path}, nil, &whole); err != nil {
			t.Fatal(err)
		}
		for n := 1; n <= 64; n++ {
			checkShards(t, path, data, n, opts, whole.Bytes())
		}
	}
}

// FuzzShard: any bytes, cut into any number of parts up to 64, follow the
// rule and join to the whole run (checkShards).
func FuzzShard(f *testing.F) {
	f.Add([]byte("a\nbb\n\nccc"), uint8(3))
	f.Add([]byte("{\"text\":\"x\"}\r\n\r\n{\"text\":\"y\"}\n"), uint8(7))
	f.Add(append(append([]byte{}, bom...), "x\ny\n"...), uint8(2))
	f.Add([]byte("\n\n\n\n"), uint8(63))
	f.Add([]byte(strings.Repeat("z", 5000)+"\nq\n"), uint8(9))
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, data []byte, n uint8) {
		if len(data) > 1<<16 {
			return
		}
		path := filepath.Join(dir, "in.txt")
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		if len(data) >= 4 && (bytes.HasPrefix(data, []byte{0x1f, 0x8b}) || bytes.HasPrefix(data, []byte{0x28, 0xb5, 0x2f, 0xfd}) || bytes.HasPrefix(data, []byte("BZh"))) {
			return // compressed: refused or cut at frames, checked elsewhere
		}
		opts := Options{Tagger: nullTagger{}, Jobs: 1, BlockSize: 256}
		var whole bytes.Buffer
		if _, err := Run(context.Background(), opts, []string{path}, nil, &whole); err != nil {
			return // input the whole run refuses is not a sharding question
		}
		checkShards(t, path, data, 1+int(n)%64, opts, whole.Bytes())
	})
}
