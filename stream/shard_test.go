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
