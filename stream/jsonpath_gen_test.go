package stream

import (
	"math/rand/v2"
	"strings"
	"testing"
)

// Pieces of generated JSON strings: escapes of every kind (surrogate
// pairs, lone surrogates, upper- and lower-case hex), raw UTF-8, and
// bytes that matter to a scanner inside a string.
var genAtoms = []string{
	"a", "b", "t", "x", "é", "😀", "/", " ", ".", "0", "1", "{", "}", "[", "]", ",", ":",
	`\u0061`, `\u0062`, `\u00e9`, `\u00E9`, `\ud83d\ude00`, `\uD83D\uDE00`, `\ud800`, `\udc00`,
	`\u0000`, `\u002e`, `\\`, `\"`, `\\\"`, `\/`, `\n`, `\t`, `\b`, `\f`, `\r`,
}

// Pieces of generated path segments: what the strings above decode to,
// and a few that they cannot.
var genSegAtoms = []string{"a", "b", "t", "x", "é", "😀", "\ufffd", "\\", `"`, "/", "\n", "\t", "\b", "\x00", " ", "{", "0", "1", "2"}

type jsonGen struct{ r *rand.Rand }

func (g jsonGen) space(sb *strings.Builder) {
	if g.r.IntN(3) == 0 {
		sb.WriteString([]string{" ", "\t", "\n ", "\r\n"}[g.r.IntN(4)])
	}
}

func (g jsonGen) str(sb *strings.Builder) {
	sb.WriteByte('"')
	for range g.r.IntN(3) {
		sb.WriteString(genAtoms[g.r.IntN(len(genAtoms))])
	}
	sb.WriteByte('"')
}

func (g jsonGen) object(sb *strings.Builder, depth int) {
	sb.WriteByte('{')
	for i := range g.r.IntN(4) {
		if i > 0 {
			sb.WriteByte(',')
		}
		g.space(sb)
		g.str(sb)
		g.space(sb)
		sb.WriteByte(':')
		g.value(sb, depth+1)
	}
	g.space(sb)
	sb.WriteByte('}')
}

func (g jsonGen) value(sb *strings.Builder, depth int) {
	g.space(sb)
	k := g.r.IntN(8)
	if depth > 3 {
		k = g.r.IntN(5)
	}
	switch k {
	case 0:
		sb.WriteString([]string{"true", "false", "null"}[g.r.IntN(3)])
	case 1:
		sb.WriteString([]string{"0", "-1", "1.5e3", "12", "-0.0", "1E-2"}[g.r.IntN(6)])
	case 2, 3, 4:
		g.str(sb)
	case 5, 6:
		g.object(sb, depth)
	case 7:
		sb.WriteByte('[')
		for i := range g.r.IntN(4) {
			if i > 0 {
				sb.WriteByte(',')
			}
			g.value(sb, depth+1)
		}
		g.space(sb)
		sb.WriteByte(']')
	}
	g.space(sb)
}

// Generated records (a fixed seed: the same records every run) with
// escaped keys, repeated keys and values of every kind, looked up by
// generated paths and compared with encoding/json (see checkPath).
func TestFindPathGenerated(t *testing.T) {
	n := 40000
	if testing.Short() {
		n = 5000
	}
	g := jsonGen{rand.New(rand.NewPCG(1, 2))}
	var s scanner
	for range n {
		var sb strings.Builder
		g.space(&sb)
		g.object(&sb, 0)
		b := []byte(sb.String())
		if ok, e := s.validObject(b); !ok {
			t.Fatalf("generated %q is invalid: %+v", b, e)
		}
		for range 4 {
			segs := make([]string, 1+g.r.IntN(3))
			for k := range segs {
				for range g.r.IntN(3) {
					segs[k] += genSegAtoms[g.r.IntN(len(genSegAtoms))]
				}
			}
			checkPath(t, b, strings.Join(segs, "."))
		}
		if t.Failed() {
			return
		}
	}
}
