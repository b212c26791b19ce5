// Command foldgen writes ../fold_amd64.s, the folded convolution kernels:
// one template instantiated for each element type (F32, F16), vector set
// (AVX-512, AVX2) and chunk width (8, 4 or 1 vectors), so that the ten
// variants cannot drift apart by hand edits. Run it with go generate in
// model/internal/kernel; TestUpToDate regenerates the file in memory and
// compares it with the committed one.
package main

import (
	"bytes"
	"flag"
	"fmt"
	"os"
	"strings"
	"text/template"
)

// variant is one kernel: its element type, vector set and chunk width.
type variant struct {
	F16 bool // table of halves, widened with VCVTPH2PS; else F32
	Z   bool // AVX-512 (zmm, mask registers); else AVX2 (ymm)
	V   int  // vectors of filters per chunk: 8 (AVX-512 only), 4 or 1
}

// variants is the file's order.
var variants = []variant{
	{false, true, 8}, {false, true, 4}, {false, true, 1},
	{true, true, 8}, {true, true, 4}, {true, true, 1},
	{false, false, 4}, {false, false, 1},
	{true, false, 4}, {true, false, 1},
}

// vec is one vector of a chunk, with everything the template prints for it.
type vec struct {
	Sum, Max, Win, Half string // registers
	Mask                string // "K4".."K7" for a masked vector of an x8 kernel, else ""
	Bias, Tab, Out      int    // byte offsets in bias/mx/win, in the table row
}

func (v variant) Name() string {
	t, isa := "F32", "AVX2"
	if v.F16 {
		t = "F16"
	}
	if v.Z {
		isa = "AVX512"
	}
	return fmt.Sprintf("fold%s%sx%d", t, isa, v.V)
}

// Label is the prefix of the kernel's labels, e.g. f16z8.
func (v variant) Label() string {
	t, isa := "f32", "y"
	if v.F16 {
		t = "f16"
	}
	if v.Z {
		isa = "z"
	}
	return fmt.Sprintf("%s%s%d", t, isa, v.V)
}

func (v variant) TabType() string {
	if v.F16 {
		return "uint16"
	}
	return "float32"
}

// Vecs lists the chunk's vectors. AVX-512: sums Z0-Z7, maxima Z8-Z15,
// winners Z16-Z23, widened halves Z26-Z29 in turn; AVX2: sums Y0-Y3,
// maxima Y4-Y7, winners Y8-Y11, widened halves Y14.
func (v variant) Vecs() []vec {
	r, lanes, maxAt, winAt := "Y", 8, 4, 8
	if v.Z {
		r, lanes, maxAt, winAt = "Z", 16, 8, 16
	}
	var vs []vec
	for i := range v.V {
		x := vec{
			Sum:  fmt.Sprintf("%s%d", r, i),
			Max:  fmt.Sprintf("%s%d", r, maxAt+i),
			Win:  fmt.Sprintf("%s%d", r, winAt+i),
			Half: "Y14",
			Bias: i * lanes * 4,
			Out:  i * lanes * 4,
			Tab:  i * lanes * 4,
		}
		if v.F16 {
			x.Tab = i * lanes * 2
		}
		if v.Z {
			x.Half = fmt.Sprintf("Z%d", 26+i%4)
		}
		if v.V == 8 && i >= 4 {
			x.Mask = fmt.Sprintf("K%d", i)
		}
		vs = append(vs, x)
	}
	return vs
}

var tmpl = template.Must(template.New("fold").Parse(header + kernel))

// generate returns the whole of fold_amd64.s.
func generate() ([]byte, error) {
	var b bytes.Buffer
	if err := tmpl.ExecuteTemplate(&b, "header", nil); err != nil {
		return nil, err
	}
	for i, v := range variants {
		if i > 0 {
			b.WriteByte('\n')
		}
		if err := tmpl.ExecuteTemplate(&b, "kernel", v); err != nil {
			return nil, err
		}
	}
	if strings.Contains(b.String(), "<no value>") {
		return nil, fmt.Errorf("template printed a missing value")
	}
	return b.Bytes(), nil
}

func main() {
	out := flag.String("o", "fold_amd64.s", "file to write")
	flag.Parse()
	src, err := generate()
	if err == nil {
		err = os.WriteFile(*out, src, 0o644)
	}
	if err != nil {
		fmt.Fprintln(os.Stderr, "foldgen:", err)
		os.Exit(1)
	}
}
