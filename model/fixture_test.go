package model

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"convtag/model/internal/kernel"
	"convtag/model/safetensors"
	"convtag/model/token"
)

// The -update flag rewrites golden files. Another test file of the package
// may define it too; whoever comes first owns it.
func init() {
	if flag.Lookup("update") == nil {
		flag.Bool("update", false, "rewrite golden files under testdata")
	}
}

func stUpdating() bool {
	f := flag.Lookup("update")
	return f != nil && f.Value.String() == "true"
}

// fixturePath is the tracked fixture model every test and check can open.
const fixturePath = "../testdata/fixture.safetensors"

// stFixtureWords is the fixture's vocabulary: words of an invented ferry
// service between invented islands.
var stFixtureWords = strings.Fields(`the a to at from is on when my of
	ferry sailing crossing departs arrives harbour pier timetable delayed
	cancelled tide morning evening varnholm lissel quorra brackney
	ticket fare refund booking seat cabin return single child discount
	pass paid price vehicle bicycle
	win prize free click offer cheap winner claim urgent`)

// stFixtureModel builds the fixture: d=16, widths 3, 4, 5 with 8 filters,
// 64 buckets, three labels, random weights from a fixed seed, and half
// precision fold tables computed by stFold (not by the CPU-dependent
// kernels, so the bytes are the same on every machine).
func stFixtureModel(t testing.TB) *Model {
	t.Helper()
	cfg := Config{Dim: 16, Widths: []int{3, 4, 5}, Filters: 8, Buckets: 64}
	m, err := New(cfg, token.Settings{}, []string{"schedule", "tickets", "spam"}, stFixtureWords, 20261201)
	if err != nil {
		t.Fatal(err)
	}
	stFold(m, true)
	return m
}

// stFold fills m.Fold per the contract, T[r][k][f] = sum_j W[f][j][k]·E[r][j],
// summing in float64 in a fixed order and rounding once to float32, then (if
// half) to binary16 with stHalf.
func stFold(m *Model, half bool) {
	d, nf, rows := m.Config.Dim, m.Config.Filters, m.Rows()
	m.Fold = make([]FoldTable, len(m.Convs))
	for i, c := range m.Convs {
		w := c.Width
		t32 := make([]float32, rows*w*nf)
		for r := range rows {
			for k := range w {
				for f := range nf {
					s := 0.0
					for j := range d {
						s += float64(c.W[(f*d+j)*w+k]) * float64(m.Emb[r*d+j])
					}
					t32[(r*w+k)*nf+f] = float32(s)
				}
			}
		}
		m.Fold[i].Width = w
		if !half {
			m.Fold[i].F32 = t32
			continue
		}
		m.Fold[i].F16 = make([]uint16, len(t32))
		for j, x := range t32 {
			m.Fold[i].F16[j] = stHalf(float64(x))
		}
	}
}

// stHalf rounds x to the nearest IEEE 754 binary16 value, ties to even,
// written from the standard's definition of the format (1 sign bit, 5
// exponent bits with bias 15, 10 fraction bits; subnormals in units of
// 2^-24) rather than by bit manipulation of float32. Finite inputs only.
func stHalf(x float64) uint16 {
	var sign uint16
	if math.Signbit(x) {
		sign, x = 0x8000, -x
	}
	if x == 0 {
		return sign
	}
	_, e := math.Frexp(x) // x = frac·2^e, frac in [0.5, 1)
	exp := e - 1          // x in [2^exp, 2^(exp+1))
	quantum := math.Ldexp(1, max(exp, -14)-10)
	q := math.RoundToEven(x/quantum) * quantum
	if q > 65504 { // the largest finite half
		return sign | 0x7c00
	}
	if q < math.Ldexp(1, -14) { // subnormal
		return sign | uint16(q/math.Ldexp(1, -24))
	}
	_, e = math.Frexp(q)
	exp = e - 1
	frac := q/math.Ldexp(1, exp) - 1
	return sign | uint16(exp+15)<<10 | uint16(math.Round(frac*1024))
}

// stHalfValue is the value of binary16 bits h, from the same definition.
func stHalfValue(h uint16) float64 {
	sign := 1.0
	if h&0x8000 != 0 {
		sign = -1
	}
	exp, frac := int(h>>10&0x1f), float64(h&0x3ff)
	switch exp {
	case 0x1f:
		if frac != 0 {
			return math.NaN()
		}
		return sign * math.Inf(1)
	case 0:
		return sign * frac * math.Ldexp(1, -24)
	}
	return sign * (1 + frac/1024) * math.Ldexp(1, exp-15)
}

func TestHalfReference(t *testing.T) {
	// Values of the binary16 format of IEEE 754-2008 (emin = -14, emax = 15,
	// 11-bit significand); the bit patterns of 65504, 2^-24, 1/3 and the
	// rounding to infinity from 65520 up are the ones commonly listed for
	// the format (quoted from memory).
	tests := []struct {
		x float64
		h uint16
	}{
		{1, 0x3c00}, {-2, 0xc000}, {65504, 0x7bff}, {0.5, 0x3800},
		{math.Ldexp(1, -14), 0x0400}, {math.Ldexp(1, -24), 0x0001},
		{math.Ldexp(1023, -24), 0x03ff}, {1 + 1.0/1024, 0x3c01},
		{1 + 0.5/1024, 0x3c00},  // tie, to even
		{1 + 1.5/1024, 0x3c02},  // tie, to even
		{2047.5, 0x6800},        // tie between 2047 and 2048, to even
		{65519, 0x7bff},         // below the midpoint to 2^16
		{65520, 0x7c00},         // rounds to infinity
		{math.Ldexp(1, -26), 0}, // below half the smallest subnormal
		{math.Ldexp(3, -26), 1}, // above it
		{1.0 / 3, 0x3555},
		{math.Copysign(0, -1), 0x8000},
	}
	for _, tt := range tests {
		if h := stHalf(tt.x); h != tt.h {
			t.Errorf("stHalf(%v) = %#04x, want %#04x", tt.x, h, tt.h)
		}
		if tt.h&0x7c00 != 0x7c00 {
			if back := stHalf(stHalfValue(tt.h)); back != tt.h {
				t.Errorf("stHalf(stHalfValue(%#04x)) = %#04x", tt.h, back)
			}
		}
	}
}

func TestFixture(t *testing.T) {
	m := stFixtureModel(t)
	var buf bytes.Buffer
	if err := m.Encode(&buf, SaveOptions{}); err != nil {
		t.Fatal(err)
	}
	if stUpdating() {
		if err := m.Save(fixturePath, SaveOptions{}); err != nil {
			t.Fatal(err)
		}
	}
	tracked, err := os.ReadFile(fixturePath)
	if err != nil {
		t.Fatalf("%v (rebuild with: go test ./model -run TestFixture -update)", err)
	}
	if !bytes.Equal(tracked, buf.Bytes()) {
		t.Fatalf("%s differs from what the generator writes now (%d vs %d bytes); the writer must be deterministic; if the change is intended, rebuild with -update", fixturePath, len(tracked), buf.Len())
	}
	got, err := Open(fixturePath)
	if err != nil {
		t.Fatal(err)
	}
	defer got.Close()
	stSameModel(t, got, m)
	if err := got.Verify(); err != nil {
		t.Error(err)
	}
	if in := got.Info(); in.Vocabulary != len(stFixtureWords) || in.Rows != 1+len(stFixtureWords)+64 || !in.Folded || in.FoldDType != "F16" {
		t.Errorf("fixture info %+v", in)
	}
}

// stDigest is the Go side of testdata/safetensors_check.py's digest.
type stDigest struct {
	Alignment int               `json:"alignment"`
	Checksum  string            `json:"checksum"`
	Metadata  map[string]string `json:"metadata"`
	Tensors   []stTensorDigest  `json:"tensors"`
}

type stTensorDigest struct {
	Name   string  `json:"name"`
	DType  string  `json:"dtype"`
	Shape  []int   `json:"shape"`
	Sum    float64 `json:"sum"`
	SHA256 string  `json:"sha256"`
	abs    float64 // sum of magnitudes, for the tolerance
}

func stDigestOf(t *testing.T, raw []byte) stDigest {
	t.Helper()
	meta, tensors, err := safetensors.Parse(raw)
	if err != nil {
		t.Fatal(err)
	}
	n := binary.LittleEndian.Uint64(raw)
	sum := sha256.Sum256(raw[8+n:])
	d := stDigest{Alignment: int((8 + n) % 8), Checksum: "sha256:" + hex.EncodeToString(sum[:]), Metadata: meta}
	for _, ts := range tensors {
		var vals []float64
		switch ts.DType {
		case "F32":
			for _, x := range safetensors.ViewF32(ts.Data) {
				vals = append(vals, float64(x))
			}
		case "F16":
			for _, x := range safetensors.ViewU16(ts.Data) {
				vals = append(vals, stHalfValue(x))
			}
		case "I32":
			for _, x := range safetensors.ViewI32(ts.Data) {
				vals = append(vals, float64(x))
			}
		case "I64":
			for _, x := range safetensors.ViewI64(ts.Data) {
				vals = append(vals, float64(x))
			}
		case "U8":
			for _, x := range ts.Data {
				vals = append(vals, float64(x))
			}
		default:
			t.Fatalf("tensor %s: no digest for dtype %s", ts.Name, ts.DType)
		}
		td := stTensorDigest{Name: ts.Name, DType: string(ts.DType), Shape: ts.Shape}
		for _, v := range vals {
			td.Sum += v
			td.abs += math.Abs(v)
		}
		h := sha256.Sum256(ts.Data)
		td.SHA256 = hex.EncodeToString(h[:])
		d.Tensors = append(d.Tensors, td)
	}
	return d
}

// stPython runs testdata/safetensors_check.py with Debian's python3 and
// numpy. Outside CI a missing interpreter or numpy skips the test; under
// CI=true it fails it.
func stPython(t *testing.T, args ...string) []byte {
	t.Helper()
	const python = "/usr/bin/python3"
	missing := func(why string) {
		if os.Getenv("CI") == "true" {
			t.Fatalf("reference reader unavailable under CI: %s (install python3-numpy)", why)
		}
		t.Skipf("reference reader unavailable: %s", why)
	}
	if _, err := os.Stat(python); err != nil {
		missing(err.Error())
	}
	if out, err := exec.Command(python, "-c", "import numpy").CombinedOutput(); err != nil {
		missing(fmt.Sprintf("import numpy: %v: %s", err, out))
	}
	cmd := exec.Command(python, append([]string{"../testdata/safetensors_check.py"}, args...)...)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("safetensors_check.py %v: %v: %s", args, err, stderr.String())
	}
	return out
}

func stCompareDigests(t *testing.T, ours, theirs stDigest) {
	t.Helper()
	if ours.Alignment != theirs.Alignment || ours.Checksum != theirs.Checksum || !equalMeta(ours.Metadata, theirs.Metadata) {
		t.Errorf("container: ours alignment %d checksum %s meta %d keys, reference alignment %d checksum %s meta %d keys",
			ours.Alignment, ours.Checksum, len(ours.Metadata), theirs.Alignment, theirs.Checksum, len(theirs.Metadata))
	}
	if len(ours.Tensors) != len(theirs.Tensors) {
		t.Fatalf("%d tensors, reference sees %d", len(ours.Tensors), len(theirs.Tensors))
	}
	for i, o := range ours.Tensors {
		r := theirs.Tensors[i]
		if o.Name != r.Name || o.DType != r.DType || !equalInts(o.Shape, r.Shape) || o.SHA256 != r.SHA256 {
			t.Errorf("tensor %d: ours %s %s %v %s, reference %s %s %v %s", i, o.Name, o.DType, o.Shape, o.SHA256[:12], r.Name, r.DType, r.Shape, r.SHA256[:12])
		}
		// The sums are of the same values in a different order: float64
		// rounding differs by at most n·eps·Σ|x|; 1e-12 relative is far
		// above that for these sizes and far below any wrong value.
		if math.Abs(o.Sum-r.Sum) > 1e-12*max(1, o.abs) {
			t.Errorf("tensor %s: sum %v, reference %v", o.Name, o.Sum, r.Sum)
		}
	}
}

// TestSafetensorsReference checks the fixture against an independent reader
// (testdata/safetensors_check.py: the format's specification implemented
// with Python's struct and json and numpy.frombuffer), and that we read a
// file that independent writer made (unpadded header, tensors listed out of
// data order, unaligned buffer).
func TestSafetensorsReference(t *testing.T) {
	t.Run("fixture", func(t *testing.T) {
		raw, err := os.ReadFile(fixturePath)
		if err != nil {
			t.Fatal(err)
		}
		var ref stDigest
		if err := json.Unmarshal(stPython(t, "read", fixturePath), &ref); err != nil {
			t.Fatal(err)
		}
		ours := stDigestOf(t, raw)
		stCompareDigests(t, ours, ref)
		if ref.Alignment != 0 {
			t.Errorf("reference finds the data buffer at offset ≡ %d mod 8", ref.Alignment)
		}
		if ref.Checksum != ref.Metadata[MetaChecksum] {
			t.Errorf("reference computes %s, metadata says %s", ref.Checksum, ref.Metadata[MetaChecksum])
		}
	})
	t.Run("written by numpy", func(t *testing.T) {
		path := filepath.Join(t.TempDir(), "numpy.safetensors")
		var ref stDigest
		if err := json.Unmarshal(stPython(t, "write", path), &ref); err != nil {
			t.Fatal(err)
		}
		raw, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		ours := stDigestOf(t, raw)
		stCompareDigests(t, ours, ref)
		if ours.Alignment == 0 {
			t.Error("the reference file should exercise an unaligned data buffer")
		}
	})
}

// TestFixtureFoldMatchesFoldModel checks the fixture's fold tables, made by
// the float64 reference stFold, against FoldModel's (the CPU's kernels, in
// float32): F32 entries agree to float32 rounding of a 16-term dot product,
// and F16 entries are the same half or a neighbour (the two sums may round
// to opposite sides of a half-way point). It also checks FoldModel's
// binary16 conversion against the independent stHalf.
func TestFixtureFoldMatchesFoldModel(t *testing.T) {
	m, err := Open(fixturePath)
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	for _, half := range []bool{false, true} {
		k := &Model{Config: m.Config, Emb: m.Emb, Convs: m.Convs, Vocab: m.Vocab}
		FoldModel(k, half)
		ref := &Model{Config: m.Config, Emb: m.Emb, Convs: m.Convs, Vocab: m.Vocab}
		stFold(ref, half)
		for i := range k.Fold {
			if half {
				for j, h := range k.Fold[i].F16 {
					// One unit in the last place of a half is 2^-10 of its
					// magnitude (2^-24 for subnormals).
					a, b := stHalfValue(h), stHalfValue(m.Fold[i].F16[j])
					if math.Abs(a-b) > math.Ldexp(max(math.Abs(a), math.Abs(b)), -10)+math.Ldexp(1, -24) {
						t.Fatalf("fold.%d[%d]: FoldModel %#04x, fixture %#04x", i, j, h, m.Fold[i].F16[j])
					}
				}
				continue
			}
			for j, x := range k.Fold[i].F32 {
				if r := ref.Fold[i].F32[j]; math.Abs(float64(x-r)) > 1e-6*(1+math.Abs(float64(r))) {
					t.Fatalf("fold.%d[%d]: FoldModel %v, reference %v", i, j, x, r)
				}
				if got, want := kernel.F32ToF16(x), stHalf(float64(x)); got != want {
					t.Fatalf("kernel.F32ToF16(%v) = %#04x, reference %#04x", x, got, want)
				}
			}
		}
	}
}
