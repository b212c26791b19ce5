package model

import (
	"fmt"
	"runtime"
	"sync"

	"convtag/model/internal/kernel"
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
	k := kernel.Active
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
						k.Dot4(wt[(c*w+tap)*d:(c*w+tap+1)*d], e, d, &out)
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
						t32[(r*w+tap)*f+c] = k.Dot(wt[(c*w+tap)*d:(c*w+tap+1)*d], e)
					}
				}
			}
		})
		folds[i] = FoldTable{Width: w}
		if half {
			folds[i].F16 = make([]uint16, len(t32))
			parallelRows(rows, func(lo, hi int) {
				for j := lo * w * f; j < hi*w*f; j++ {
					folds[i].F16[j] = kernel.F32ToF16(t32[j])
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
			p.k.FoldF16(t.F16, t.Width, f, rows, b, mx, win, p.acc)
		} else {
			p.k.FoldF32(t.F32, t.Width, f, rows, b, mx, win, p.acc)
		}
	}
}
