package vectors

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"testing"
	"testing/iotest"
)

func randomSet(rng *rand.Rand, n, d int) *Set {
	s := &Set{Dim: d}
	for i := range n {
		s.Words = append(s.Words, fmt.Sprintf("w%d_ö%c", i, 'a'+rune(i%26)))
	}
	s.Vecs = make([]float32, n*d)
	for i := range s.Vecs {
		s.Vecs[i] = float32(rng.NormFloat64())
	}
	s.Vecs[0] = float32(math.Copysign(0, -1))
	s.Vecs[1] = math.MaxFloat32
	s.Vecs[2] = math.SmallestNonzeroFloat32
	return s
}

func equalSets(t *testing.T, got, want *Set) {
	t.Helper()
	if got.Dim != want.Dim || !slices.Equal(got.Words, want.Words) || len(got.Vecs) != len(want.Vecs) {
		t.Fatalf("got dim %d, %d words, %d values; want dim %d, %d words, %d values",
			got.Dim, len(got.Words), len(got.Vecs), want.Dim, len(want.Words), len(want.Vecs))
	}
	for i := range got.Vecs {
		if math.Float32bits(got.Vecs[i]) != math.Float32bits(want.Vecs[i]) {
			t.Fatalf("value %d: got %v, want %v (bit-exact)", i, got.Vecs[i], want.Vecs[i])
		}
	}
}

func TestRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, tc := range []struct{ n, d int }{{3, 1}, {1, 7}, {50, 100}, {4, 300}} {
		want := randomSet(rng, tc.n, tc.d)
		for _, f := range []Format{Text, Binary} {
			t.Run(fmt.Sprintf("%v/%dx%d", f, tc.n, tc.d), func(t *testing.T) {
				var buf bytes.Buffer
				if err := want.Write(&buf, f); err != nil {
					t.Fatal(err)
				}
				// A reader that hands out one byte at a time exercises every
				// buffer-refill path.
				got, err := Read(iotest.OneByteReader(bytes.NewReader(buf.Bytes())))
				if err != nil {
					t.Fatal(err)
				}
				equalSets(t, got, want)
			})
		}
	}
}

func TestEmpty(t *testing.T) {
	for _, in := range []string{"0 5\n", "0 5", "0 5\n\n"} {
		s, err := Read(strings.NewReader(in))
		if err != nil || s.Len() != 0 || s.Dim != 5 {
			t.Errorf("Read(%q) = %v, %v; want an empty set of dimension 5", in, s, err)
		}
	}
}

// binRec is one binary record: word, space, little-endian float32 values.
func binRec(word string, vals ...float32) string {
	b := []byte(word + " ")
	for _, v := range vals {
		b = binary.LittleEndian.AppendUint32(b, math.Float32bits(v))
	}
	return string(b)
}

// The spellings that writers in the wild produce, all of which must read.
func TestVariants(t *testing.T) {
	want := &Set{Words: []string{"ferry", "harbour"}, Dim: 2, Vecs: []float32{0.5, -1.25, 3, 0.125}}
	for _, tc := range []struct{ name, in string }{
		{"text", "2 2\nferry 0.5 -1.25\nharbour 3 0.125\n"},
		{"text trailing blank (word2vec C)", "2 2\nferry 0.5 -1.25 \nharbour 3 0.125 \n"},
		{"text CRLF", "2 2\r\nferry 0.5 -1.25\r\nharbour 3 0.125\r\n"},
		{"text tabs", "2\t2\nferry\t0.5\t-1.25\nharbour\t3\t0.125\n"},
		{"text no final newline", "2 2\nferry 0.5 -1.25\nharbour 3.0e0 1.25E-1"},
		{"text exponent and plus", "2 2\nferry +5e-1 -1.25\nharbour 3. .125\n"},
		{"binary with newlines", "2 2\n" + binRec("ferry", 0.5, -1.25) + "\n" + binRec("harbour", 3, 0.125) + "\n"},
		{"binary without newlines", "2 2\n" + binRec("ferry", 0.5, -1.25) + binRec("harbour", 3, 0.125)},
		{"binary mixed", "2 2\n" + binRec("ferry", 0.5, -1.25) + binRec("harbour", 3, 0.125) + "\n"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got, err := Read(strings.NewReader(tc.in))
			if err != nil {
				t.Fatal(err)
			}
			equalSets(t, got, want)
		})
	}
}

func TestErrors(t *testing.T) {
	for _, tc := range []struct {
		name, in string
		want     error
		line     int
		msg      string // a substring of the message
	}{
		{"empty", "", ErrHeader, 1, "empty file"},
		{"one field", "12\n", ErrHeader, 1, "1 fields"},
		{"headerless text", "ferry 0.5 1\n", ErrHeader, 1, "header line"},
		{"bad count", "x 3\n", ErrHeader, 1, "count"},
		{"negative count", "-1 3\n", ErrHeader, 1, "count"},
		{"zero dim", "1 0\n", ErrHeader, 1, "dimension"},
		{"huge dim", "1 99999999\n", ErrHeader, 1, "dimension"},
		{"too few", "2 2\nferry 1 2\n", ErrCount, 3, "after 1 of the header's 2"},
		{"too many", "1 2\nferry 1 2\nquay 3 4\n", ErrCount, 3, "more data"},
		{"blank line inside", "2 2\nferry 1 2\n\nquay 3 4\n", ErrCount, 3, "empty line"},
		{"short line", "1 2\nferry 1\n", ErrDim, 2, "1 values, want 2"},
		{"long line", "1 2\nferry 1 2 3\n", ErrDim, 2, "3 values, want 2"},
		{"no values", "1 2\nferry\n", ErrDim, 2, "no values"},
		{"nan", "1 2\nferry 1 nan\n", ErrValue, 2, "value 2"},
		{"NaN", "1 2\nferry NaN 1\n", ErrValue, 2, "value 1"},
		{"inf", "1 2\nferry 1 -Inf\n", ErrValue, 2, "finite"},
		{"float32 overflow", "1 2\nferry 1 1e39\n", ErrValue, 2, "1e39"},
		{"garbage value", "1 2\nferry 1 1.2.3\n", ErrValue, 2, "1.2.3"},
		{"duplicate", "3 1\nferry 1\nquay 2\nferry 3\n", ErrDuplicate, 4, "first on line 2"},
		{"leading blank", "1 1\n ferry 1\n", ErrWord, 2, "empty word"},
		{"bin truncated vector", "1 2\n" + binRec("ferry", 1, 2)[:9], ErrCount, 2, "inside the vector"},
		{"bin truncated word", "2 2\n" + binRec("ferry", 1, 2) + "qu", ErrCount, 3, "inside word"},
		{"bin too few", "2 2\n" + binRec("ferry", 1, 2) + "\n", ErrCount, 3, "after 1 of the header's 2"},
		{"bin too many", "1 2\n" + binRec("ferry", 1, 2) + "\n" + binRec("quay", 3, 4), ErrCount, 3, "more data"},
		{"bin nan", "1 2\n" + binRec("ferry", 1, float32(math.NaN())), ErrValue, 2, "NaN"},
		{"bin inf", "1 2\n" + binRec("ferry", float32(math.Inf(1)), 1), ErrValue, 2, "+Inf"},
		{"bin duplicate", "2 2\n" + binRec("ferry", 1, 2) + binRec("ferry", 3, 4), ErrDuplicate, 3, "first on line 2"},
		{"bin tab in word", "1 2\n" + binRec("fer\try", 1, 2), ErrWord, 2, "blank"},
		{"bin long word", "1 1\n" + binRec(strings.Repeat("x", MaxWordBytes+1), 1), ErrWord, 2, "longer than"},
		{"no separator", "1 1\n" + strings.Repeat("\x01", 200000), ErrTooLong, 2, "longer than"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s, err := Read(strings.NewReader(tc.in))
			var pe *ParseError
			if !errors.As(err, &pe) {
				t.Fatalf("Read = %v, %v; want a *ParseError", s, err)
			}
			if !errors.Is(err, tc.want) || pe.Line != tc.line || !strings.Contains(err.Error(), tc.msg) {
				t.Errorf("error %q (line %d); want %v on line %d mentioning %q", err, pe.Line, tc.want, tc.line, tc.msg)
			}
			if strings.Contains(err.Error(), "\n") {
				t.Errorf("error %q spans lines", err)
			}
		})
	}
}

// A header claiming two billion vectors of the largest dimension must not
// make the reader allocate for them before they arrive.
func TestCraftedCountAllocatesLittle(t *testing.T) {
	in := fmt.Sprintf("%d %d\nferry 1", MaxCount, MaxDim)
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	_, err := Read(strings.NewReader(in))
	runtime.ReadMemStats(&after)
	if !errors.Is(err, ErrDim) {
		t.Fatalf("err = %v, want ErrDim", err)
	}
	// The buffers are sized by MaxDim (4·MaxDim bytes for a binary vector,
	// twice for the peek buffer) plus a 4 MiB initial capacity for the
	// values: about 6 MiB at most; far below count·dim·4 = 512 TiB.
	if got := after.TotalAlloc - before.TotalAlloc; got > 16<<20 {
		t.Errorf("allocated %d bytes for a file of %d bytes", got, len(in))
	}
}

func TestForcedFormat(t *testing.T) {
	// The bytes "1111" are the float32 2.5946632e-09: a binary vector made
	// only of digits, which the sniffer takes for the text value 1111.
	in := "1 1\nferry 1111"
	s, err := Read(strings.NewReader(in))
	if err != nil || s.Vecs[0] != 1111 {
		t.Fatalf("sniffed read: %v, %v; want the text value 1111", s, err)
	}
	if _, err := ReadFormat(strings.NewReader("1 1\n"+strings.Repeat("\x01", 200000)), Binary); !errors.Is(err, ErrWord) || !strings.Contains(err.Error(), "no space") {
		t.Errorf("binary without a space: %v, want ErrWord saying no space", err)
	}
	s, err = ReadFormat(strings.NewReader(in), Binary)
	if err != nil {
		t.Fatal(err)
	}
	if want := math.Float32frombits(0x31313131); s.Vecs[0] != want {
		t.Errorf("got %v, want %v", s.Vecs[0], want)
	}
}

func TestValidate(t *testing.T) {
	for _, tc := range []struct {
		name string
		s    Set
		msg  string
	}{
		{"dim", Set{Dim: 0}, "dimension"},
		{"length", Set{Words: []string{"a"}, Dim: 2, Vecs: []float32{1}}, "1 values"},
		{"space", Set{Words: []string{"a b"}, Dim: 1, Vecs: []float32{1}}, "blank"},
		{"empty", Set{Words: []string{""}, Dim: 1, Vecs: []float32{1}}, "empty word"},
		{"duplicate", Set{Words: []string{"a", "a"}, Dim: 1, Vecs: []float32{1, 2}}, "duplicate"},
		{"nan", Set{Words: []string{"a"}, Dim: 1, Vecs: []float32{float32(math.NaN())}}, "NaN"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			err := tc.s.WriteText(new(bytes.Buffer))
			if err == nil || !strings.Contains(err.Error(), tc.msg) {
				t.Errorf("WriteText: %v, want an error mentioning %q", err, tc.msg)
			}
			if err2 := tc.s.WriteBinary(new(bytes.Buffer)); fmt.Sprint(err2) != fmt.Sprint(err) {
				t.Errorf("WriteBinary: %v, want %v", err2, err)
			}
		})
	}
}

// gensim runs script with Debian's python3 and gensim (package
// python3-gensim), which reads and writes these formats with its own code:
// KeyedVectors.load_word2vec_format and save_word2vec_format. Under CI=true
// a missing gensim fails the test.
func gensim(t *testing.T, script string, args ...string) string {
	t.Helper()
	const py = "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import gensim").Run(); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("gensim reference missing (apt-get install python3-gensim): %v", err)
		}
		t.Skipf("gensim reference missing (apt-get install python3-gensim): %v", err)
	}
	cmd := exec.Command(py, append([]string{"-c", script}, args...)...)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("python: %v\n%s", err, stderr.String())
	}
	return string(out)
}

// Files we write are read by gensim, and files gensim writes are read by
// us, to the same values. gensim's text writer uses "%f"-style decimals, so
// text values from it are compared to float32 rounding of its own printout.
func TestGensim(t *testing.T) {
	dir := t.TempDir()
	rng := rand.New(rand.NewPCG(3, 4))
	want := randomSet(rng, 20, 9)
	want.Vecs[1], want.Vecs[2] = 1e30, 1e-30 // gensim's text writer cannot spell MaxFloat32 exactly
	for _, f := range []Format{Text, Binary} {
		var buf bytes.Buffer
		if err := want.Write(&buf, f); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, "ours."+f.String()), buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	// gensim reads both our files and prints every value exactly (hex of
	// the float32 widened to float64), then writes both formats itself
	// from the vectors it read from our binary file.
	out := gensim(t, `
import sys
from gensim.models import KeyedVectors
d = sys.argv[1]
for fmt in ("text", "binary"):
    kv = KeyedVectors.load_word2vec_format(d + "/ours." + fmt, binary=fmt == "binary")
    print("#", fmt)
    for w in kv.index_to_key:
        print(w, *[float(x).hex() for x in kv[w]])
kv.save_word2vec_format(d + "/theirs.bin", binary=True)
kv.save_word2vec_format(d + "/theirs.txt", binary=False)
`, dir)
	for _, part := range strings.Split(out, "# ")[1:] {
		f, body, _ := strings.Cut(part, "\n")
		lines := strings.Split(strings.TrimSpace(body), "\n")
		if len(lines) != want.Len() {
			t.Fatalf("%v: gensim read %d words, want %d", f, len(lines), want.Len())
		}
		for i, line := range lines {
			fields := strings.Fields(line)
			if fields[0] != want.Words[i] || len(fields) != want.Dim+1 {
				t.Fatalf("%v: gensim line %d: %q", f, i, line)
			}
			for j, h := range fields[1:] {
				v, err := strconv.ParseFloat(h, 64)
				if err != nil {
					t.Fatal(err)
				}
				if float32(v) != want.Vec(i)[j] {
					t.Fatalf("%v: gensim has %s %d = %v, we wrote %v", f, want.Words[i], j, v, want.Vec(i)[j])
				}
			}
		}
	}
	b, err := os.ReadFile(filepath.Join(dir, "theirs.bin"))
	if err != nil {
		t.Fatal(err)
	}
	got, err := Read(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	equalSets(t, got, want)
	b, err = os.ReadFile(filepath.Join(dir, "theirs.txt"))
	if err != nil {
		t.Fatal(err)
	}
	got, err = Read(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	if got.Dim != want.Dim || !slices.Equal(got.Words, want.Words) {
		t.Fatalf("gensim text: %d words of dim %d", got.Len(), got.Dim)
	}
	for i, v := range got.Vecs {
		// gensim prints "%f"-like decimals with 6 or more significant
		// digits; allow a relative error of 1e-5 (and 1e-6 absolute).
		if d := math.Abs(float64(v - want.Vecs[i])); d > 1e-5*math.Abs(float64(want.Vecs[i]))+1e-6 {
			t.Fatalf("gensim text value %d: %v, want %v", i, v, want.Vecs[i])
		}
	}
}

func FuzzRead(f *testing.F) {
	f.Add([]byte("2 2\nferry 0.5 -1.25\nharbour 3 0.125\n"))
	f.Add([]byte("2 2\n" + binRec("ferry", 0.5, -1.25) + "\n" + binRec("harbour", 3, 0.125)))
	f.Add([]byte("1 2\nferry 1 nan\n"))
	f.Add([]byte("2147483647 65536\nferry 1"))
	f.Add([]byte("0 3\n"))
	f.Fuzz(func(t *testing.T, in []byte) {
		s, err := Read(bytes.NewReader(in))
		if err != nil {
			var pe *ParseError
			if !errors.As(err, &pe) {
				t.Fatalf("error %v is not a *ParseError", err)
			}
			return
		}
		if err := s.Validate(); err != nil {
			t.Fatalf("read a set that does not validate: %v", err)
		}
		for _, f := range []Format{Text, Binary} {
			var buf bytes.Buffer
			if err := s.Write(&buf, f); err != nil {
				t.Fatal(err)
			}
			// Binary is forced: a vector of digit-like bytes sniffs as
			// text (see TestForcedFormat).
			read := ReadFormat
			if f == Text {
				read = func(r io.Reader, _ Format) (*Set, error) { return Read(r) }
			}
			got, err := read(&buf, f)
			if err != nil {
				t.Fatalf("%v round trip: %v", f, err)
			}
			equalSets(t, got, s)
		}
	})
}
