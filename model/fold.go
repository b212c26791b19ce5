package model

import (
	"fmt"
	"math"
	"runtime"
	"sync"
)

// FoldModel fills m.Fold with the folded convolution tables, replacing any
// already there. Since the embeddings are fixed at inference and a
// convolution is linear in them, each row's response at every tap of every
// filter can be computed once:
//
//	T[r][k][f] = sum_j W[f][j][k] * E[r][j]
//
// laid out [rows][width][F] per width. A text's pre-activations are then
// sums of w table rows (see the folded path in Predictor). With half set the
// tables are stored in IEEE 754 half precision (binary16), rounded to
// nearest, ties to even, which halves the memory the hot loop reads at the
// cost of about three decimal digits in each entry.
//
// FoldModel writes m and must be called before m is shared with other
// goroutines. It uses all of GOMAXPROCS and costs rows·Taps·F·d
// multiply-adds (about 22 G for 60,000 rows, d = 300, 3×100 filters).
func FoldModel(m *Model, half bool) {
	cfg := m.Config
	d, f := cfg.Dim, cfg.Filters
	rows := m.Rows()
	k := activeKernels
	folds := make([]FoldTable, len(m.Convs))
	for i, cv := range m.Convs {
		w := cv.Width
		wt := transposeConv(cv.W, f, d, w)
		t32 := make([]float32, rows*w*f)
		parallelRows(rows, func(lo, hi int) {
			var out [4]float32
			r := lo
			for ; r+4 <= hi; r += 4 {
				e := m.Emb[r*d : (r+4)*d]
				for tap := range w {
					for c := range f {
						k.dot4(wt[(c*w+tap)*d:(c*w+tap+1)*d], e, d, &out)
						for j, v := range out {
							t32[((r+j)*w+tap)*f+c] = v
						}
					}
				}
			}
			for ; r < hi; r++ {
				e := m.Emb[r*d : (r+1)*d]
				for tap := range w {
					for c := range f {
						t32[(r*w+tap)*f+c] = k.dot(wt[(c*w+tap)*d:(c*w+tap+1)*d], e)
					}
				}
			}
		})
		folds[i] = FoldTable{Width: w}
		if half {
			folds[i].F16 = make([]uint16, len(t32))
			parallelRows(rows, func(lo, hi int) {
				for j := lo * w * f; j < hi*w*f; j++ {
					folds[i].F16[j] = F32ToF16(t32[j])
				}
			})
		} else {
			folds[i].F32 = t32
		}
	}
	m.Fold = folds
}

// transposeConv returns the weights of a Conv1d layout [F][d][w] as
// [F][w][d], so that each filter's weights for one tap, and a whole
// window's weights in tap order, are contiguous.
func transposeConv(w []float32, f, d, width int) []float32 {
	t := make([]float32, len(w))
	for c := range f {
		for j := range d {
			for k := range width {
				t[(c*width+k)*d+j] = w[(c*d+j)*width+k]
			}
		}
	}
	return t
}

// parallelRows splits [0, n) into contiguous ranges, one per available
// core, and runs fn on each concurrently.
func parallelRows(n int, fn func(lo, hi int)) {
	parts := min(runtime.GOMAXPROCS(0), max(1, n/64))
	var wg sync.WaitGroup
	for i := range parts {
		lo, hi := n*i/parts, n*(i+1)/parts
		wg.Go(func() { fn(lo, hi) })
	}
	wg.Wait()
}

// checkFold reports whether m.Fold is consistent with the rest of m: one
// table per width, of the right width and exactly rows·w·F entries in one
// dtype. The folded kernels rely on it for memory safety.
func (m *Model) checkFold() error {
	if m.Fold == nil {
		return nil
	}
	if len(m.Fold) != len(m.Convs) {
		return fmt.Errorf("model: %d fold tables for %d widths", len(m.Fold), len(m.Convs))
	}
	for i, t := range m.Fold {
		w := m.Convs[i].Width
		want := m.Rows() * w * m.Config.Filters
		switch {
		case t.Width != w:
			return fmt.Errorf("model: fold.%d has width %d, convolution has %d", i, t.Width, w)
		case (t.F32 == nil) == (t.F16 == nil):
			return fmt.Errorf("model: fold.%d must hold exactly one of F32 and F16", i)
		case t.F32 != nil && len(t.F32) != want, t.F16 != nil && len(t.F16) != want:
			return fmt.Errorf("model: fold.%d has %d entries, want %d", i, max(len(t.F32), len(t.F16)), want)
		}
	}
	return nil
}

// forwardFolded pools every width's features from the fold tables, and
// their winners if withWin is set.
func (p *Predictor) forwardFolded(rows []int32, withWin bool) {
	f := p.m.Config.Filters
	for i, t := range p.m.Fold {
		mx, win := p.feat[i*f:(i+1)*f], []int32(nil)
		if withWin {
			win = p.win[i*f : (i+1)*f]
		}
		b := p.m.Convs[i].B
		if t.F16 != nil {
			p.k.foldF16(t.F16, t.Width, f, rows, b, mx, win, p.acc)
		} else {
			p.k.foldF32(t.F32, t.Width, f, rows, b, mx, win, p.acc)
		}
	}
}

// F32ToF16 converts x to IEEE 754 binary16 bits, rounding to nearest with
// ties to even (the standard's default rounding). Values too large for half
// precision become infinities; NaNs stay NaNs (quiet, sign and the top
// payload bits kept).
func F32ToF16(x float32) uint16 {
	b := math.Float32bits(x)
	sign := uint16(b>>16) & 0x8000
	exp := int(b>>23) & 0xff
	man := b & 0x7fffff
	if exp == 0xff {
		if man == 0 {
			return sign | 0x7c00
		}
		return sign | 0x7e00 | uint16(man>>13)
	}
	e := exp - 127 + 15 // biased half exponent
	if e >= 0x1f {
		return sign | 0x7c00
	}
	if e <= 0 {
		// Subnormal half (or zero): the value is M·2^(exp-150) with M the
		// 24-bit significand, and a half subnormal counts units of 2^-24.
		if e < -10 {
			return sign // below half the smallest subnormal
		}
		mm := man | 0x800000
		s := uint(14 - e)
		h := mm >> s
		rem, half := mm&(1<<s-1), uint32(1)<<(s-1)
		if rem > half || rem == half && h&1 == 1 {
			h++ // may carry into the smallest normal, which is right
		}
		return sign | uint16(h)
	}
	h := uint32(e)<<10 | man>>13
	rem := man & 0x1fff
	if rem > 0x1000 || rem == 0x1000 && h&1 == 1 {
		h++ // may carry into the exponent, up to infinity, which is right
	}
	return sign | uint16(h)
}

// F16ToF32 widens IEEE 754 binary16 bits to float32 exactly.
func F16ToF32(h uint16) float32 {
	sign := uint32(h&0x8000) << 16
	o := uint32(h&0x7fff) << 13 // exponent and fraction in place, exponent rebias pending
	switch o & 0x0f800000 {
	case 0x0f800000: // infinity or NaN: exponent 31 becomes 255
		o += (255 - 31) << 23
	case 0: // zero or subnormal: fraction·2^-24, exact in float32
		f := math.Float32frombits(o+113<<23) - math.Float32frombits(113<<23)
		return math.Float32frombits(math.Float32bits(f) | sign)
	default:
		o += (127 - 15) << 23
	}
	return math.Float32frombits(o | sign)
}
