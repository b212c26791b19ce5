package train

import (
	"convtag/model"
	"math"
	"math/rand/v2"
	"slices"

	"convtag/model/internal/kernel"
)

// trPanel is the number of filters the convolution kernel computes at once;
// the packed weights are padded to a multiple of it. trRows is the number
// of windows it computes at once.
const (
	trPanel = kernel.ConvPanel
	trRows  = kernel.ConvRows
)

// netParams are the weights during training, with the convolutions in a
// working layout: conv[i][f*K + k*d + j] (K = w*d) is filter f's weight for
// component j of the window's k-th word, so that a window is one contiguous
// run of w embedding rows. packed holds the same weights regrouped for the
// kernel: packed[i][(q*K + t)*trPanel + c] is filter q*trPanel+c at position t,
// zero for padding filters.
type netParams struct {
	d, rows, F, Fpad int
	widths           []int
	maxW             int
	emb              []float32
	conv, convB      [][]float32
	packed           [][]float32
	hidW, hidB       []float32 // nil without a hidden layer
	H                int
	outW, outB       []float32
	outIn, C         int
	list             [][]float32 // every dense tensor, in a fixed order
	kern             *kernel.Set // the training kernels
	multi            bool        // one sigmoid per label (Model.Multi)
}

func paramsFrom(m *model.Model) *netParams {
	cfg := m.Config
	d, f := cfg.Dim, cfg.Filters
	p := &netParams{
		kern: kernel.Active, d: d, rows: m.Rows(), F: f, Fpad: (f + trPanel - 1) / trPanel * trPanel,
		widths: slices.Clone(cfg.Widths), maxW: cfg.MaxWidth(),
		emb:  slices.Clone(m.Emb),
		outW: slices.Clone(m.Out.W), outB: slices.Clone(m.Out.B), outIn: m.Out.In, C: m.Out.Out,
		multi: m.Multi,
	}
	for _, c := range m.Convs {
		w := c.Width
		wt := make([]float32, len(c.W))
		for fi := range f {
			for j := range d {
				for k := range w {
					wt[fi*w*d+k*d+j] = c.W[(fi*d+j)*w+k]
				}
			}
		}
		p.conv = append(p.conv, wt)
		p.convB = append(p.convB, slices.Clone(c.B))
		p.packed = append(p.packed, make([]float32, p.Fpad*w*d))
	}
	if m.Hidden != nil {
		p.hidW, p.hidB, p.H = slices.Clone(m.Hidden.W), slices.Clone(m.Hidden.B), m.Hidden.Out
	}
	p.list = p.denseList()
	return p
}

func (p *netParams) denseList() [][]float32 {
	var l [][]float32
	l = append(l, p.conv...)
	l = append(l, p.convB...)
	if p.hidW != nil {
		l = append(l, p.hidW, p.hidB)
	}
	return append(l, p.outW, p.outB)
}

func (p *netParams) trDense() [][]float32 { return p.list }

// pack refreshes the kernel layout from the working weights.
func (p *netParams) pack() { p.packPart(0, 1) }

// packPart does part j of n of pack's work (the panels q with q%n == j);
// the n parts may run concurrently.
func (p *netParams) packPart(j, n int) {
	for i, w := range p.widths {
		k := w * p.d
		src, dst := p.conv[i], p.packed[i]
		for q := j; q < p.Fpad/trPanel; q += n {
			// Written in order; the reads are trPanel sequential streams.
			out := dst[q*k*trPanel : (q+1)*k*trPanel]
			nf := min(trPanel, p.F-q*trPanel)
			for t := range k {
				o := out[t*trPanel : (t+1)*trPanel : (t+1)*trPanel]
				for c := range nf {
					o[c] = src[(q*trPanel+c)*k+t]
				}
				clear(o[nf:])
			}
		}
	}
}

// snapshot copies the weights into dst (allocated when nil) and returns it.
func (p *netParams) snapshot(dst *netParams) *netParams {
	if dst == nil {
		dst = &netParams{d: p.d, widths: p.widths, F: p.F, C: p.C, H: p.H, outIn: p.outIn,
			emb: make([]float32, len(p.emb))}
		for i := range p.conv {
			dst.conv = append(dst.conv, make([]float32, len(p.conv[i])))
			dst.convB = append(dst.convB, make([]float32, len(p.convB[i])))
		}
		if p.hidW != nil {
			dst.hidW, dst.hidB = make([]float32, len(p.hidW)), make([]float32, len(p.hidB))
		}
		dst.outW, dst.outB = make([]float32, len(p.outW)), make([]float32, len(p.outB))
		dst.list = dst.denseList()
	}
	copy(dst.emb, p.emb)
	for i := range p.list {
		copy(dst.list[i], p.list[i])
	}
	return dst
}

// writeTo stores the weights into m in the file layout.
func (p *netParams) writeTo(m *model.Model) {
	d := p.d
	m.Emb = slices.Clone(p.emb)
	for i, w := range p.widths {
		c := &m.Convs[i]
		c.W = make([]float32, len(p.conv[i]))
		for f := range p.F {
			for j := range d {
				for k := range w {
					c.W[(f*d+j)*w+k] = p.conv[i][f*w*d+k*d+j]
				}
			}
		}
		c.B = slices.Clone(p.convB[i])
	}
	if m.Hidden != nil {
		m.Hidden.W, m.Hidden.B = slices.Clone(p.hidW), slices.Clone(p.hidB)
	}
	m.Out.W, m.Out.B = slices.Clone(p.outW), slices.Clone(p.outB)
}

// netGrads is a gradient: dense tensors shaped like netParams.list, and a
// sparse embedding gradient holding only the rows touched.
type netGrads struct {
	list [][]float32
	slot []int32 // per embedding row: 1 + index into rows, 0 when untouched
	rows []int32
	emb  []float32 // len(rows) * d
}

func newGrads(p *netParams) *netGrads {
	g := &netGrads{slot: make([]int32, p.rows)}
	for _, t := range p.list {
		g.list = append(g.list, make([]float32, len(t)))
	}
	return g
}

func (g *netGrads) trDense() [][]float32 { return g.list }

func (g *netGrads) resetSparse() {
	for _, r := range g.rows {
		g.slot[r] = 0
	}
	g.rows, g.emb = g.rows[:0], g.emb[:0]
}

// touch returns row r's gradient, zero on first use. The slice is valid
// until the next touch.
func (g *netGrads) touch(r int32, d int) []float32 {
	s := g.slot[r]
	if s == 0 {
		g.rows = append(g.rows, r)
		s = int32(len(g.rows))
		g.slot[r] = s
		n := len(g.emb)
		g.emb = slices.Grow(g.emb, d)[:n+d]
		clear(g.emb[n:])
	}
	o := int(s-1) * d
	return g.emb[o : o+d : o+d]
}

func (g *netGrads) embRow(si, d int) []float32 { return g.emb[si*d : (si+1)*d : (si+1)*d] }

// trainWorker is one goroutine's scratch and gradient buffer.
type trainWorker struct {
	g                     *netGrads
	x, dx                 []float32 // window rows: (n + maxW - 1 + trRows - 1) * d
	pre                   []float32 // (n rounded up to trRows) * Fpad
	feat, mask, in, dfeat []float32
	win                   []int32
	hid, dhid             []float32
	logits, dlog          []float32
	raw, y                []float32 // multi-label: the logits before the sigmoid, the 0/1 targets
	rows                  []int32
	loss                  float64
	correct, tokens       int
}

var trPad = []int32{0}

func newTrainWorker(p *netParams) *trainWorker {
	nf := len(p.widths) * p.F
	return &trainWorker{
		g:    newGrads(p),
		feat: make([]float32, nf), mask: make([]float32, nf), in: make([]float32, nf), dfeat: make([]float32, nf),
		win: make([]int32, nf),
		hid: make([]float32, p.H), dhid: make([]float32, p.H),
		logits: make([]float32, p.C), dlog: make([]float32, p.C),
		raw: make([]float32, p.C), y: make([]float32, p.C),
	}
}

func (w *trainWorker) reset() {
	for _, t := range w.g.list {
		clear(t)
	}
	w.g.resetSparse()
	w.loss, w.correct, w.tokens = 0, 0, 0
}

// forward computes the class probabilities of rows into w.logits (which it
// returns, softmaxed, or for a multi-label network each logit's sigmoid,
// with the logits kept in w.raw). With dropout > 0 it drops pooled features with a
// generator seeded by (seed, exSeed).
func (w *trainWorker) forward(p *netParams, rows []int32, dropout float64, seed, exSeed uint64) []float32 {
	if len(rows) == 0 {
		rows = trPad
	}
	w.rows = rows
	n, d := len(rows), p.d
	nx := n + p.maxW - 1 + trRows - 1
	w.x = trGrow(w.x, nx*d)
	clear(w.x[n*d:])
	for q, r := range rows {
		copy(w.x[q*d:(q+1)*d], p.emb[int(r)*d:int(r+1)*d])
	}
	nb := (n + trRows - 1) / trRows
	w.pre = trGrow(w.pre, nb*trRows*p.Fpad)
	for i, wd := range p.widths {
		k := wd * d
		np, q := p.Fpad/trPanel, 0
		for ; q+1 < np; q += 2 {
			b := p.packed[i][q*k*trPanel : (q+2)*k*trPanel]
			for rb := range nb {
				p.kern.Conv2(w.x[rb*trRows*d:], d, b, k, w.pre[rb*trRows*p.Fpad+q*trPanel:], p.Fpad)
			}
		}
		if q < np {
			b := p.packed[i][q*k*trPanel : (q+1)*k*trPanel]
			for rb := range nb {
				p.kern.Conv(w.x[rb*trRows*d:], d, b, k, w.pre[rb*trRows*p.Fpad+q*trPanel:], p.Fpad)
			}
		}
		off := i * p.F
		bias := p.convB[i]
		for f := range p.F {
			best, arg := float32(math.Inf(-1)), int32(-1)
			for t := range n {
				if v := w.pre[t*p.Fpad+f]; v > best {
					best, arg = v, int32(t)
				}
			}
			if v := best + bias[f]; v > 0 {
				w.feat[off+f], w.win[off+f] = v, arg
			} else {
				w.feat[off+f], w.win[off+f] = 0, -1
			}
		}
	}
	if dropout > 0 {
		rng := rand.New(rand.NewPCG(seed, exSeed))
		keep := float32(1 / (1 - dropout))
		for i, v := range w.feat {
			if rng.Float64() < dropout {
				w.mask[i], w.in[i] = 0, 0
			} else {
				w.mask[i], w.in[i] = keep, v*keep
			}
		}
	} else {
		for i := range w.mask {
			w.mask[i] = 1
		}
		copy(w.in, w.feat)
	}
	x := w.in
	if p.hidW != nil {
		trDense(w.hid, p.hidW, p.hidB, x)
		for i, v := range w.hid {
			w.hid[i] = max(v, 0)
		}
		x = w.hid
	}
	trDense(w.logits, p.outW, p.outB, x)
	if p.multi {
		copy(w.raw, w.logits)
		trSigmoid(w.logits)
	} else {
		trSoftmax(w.logits)
	}
	return w.logits
}

// example runs forward and backward for e, adding its gradient, scaled by
// cw*scale, into w.g.
func (w *trainWorker) example(p *netParams, e *Example, cw, scale float32, dropout float64, seed, exSeed uint64) {
	probs := w.forward(p, e.Rows, dropout, seed, exSeed)
	w.tokens += len(w.rows)
	w.loss += float64(cw) * -math.Log(max(float64(probs[e.Label]), 1e-30))
	if trArgmax(probs) == e.Label {
		w.correct++
	}
	s := cw * scale
	for c, v := range probs {
		w.dlog[c] = v * s
	}
	w.dlog[e.Label] -= s
	w.backward(p)
}

// backward adds the gradient of the loss whose logit gradient is w.dlog.
func (w *trainWorker) backward(p *netParams) {
	gl := w.g.list
	nc := len(p.conv)
	goutW, goutB := gl[len(gl)-2], gl[len(gl)-1]
	x := w.in
	if p.hidW != nil {
		x = w.hid
	}
	trDenseBack(p.kern, goutW, goutB, w.dlog, x)
	if p.hidW != nil {
		clear(w.dhid)
		trDenseInput(p.kern, w.dhid, p.outW, w.dlog)
		for i, v := range w.hid {
			if v <= 0 {
				w.dhid[i] = 0
			}
		}
		trDenseBack(p.kern, gl[2*nc], gl[2*nc+1], w.dhid, w.in)
		clear(w.dfeat)
		trDenseInput(p.kern, w.dfeat, p.hidW, w.dhid)
	} else {
		clear(w.dfeat)
		trDenseInput(p.kern, w.dfeat, p.outW, w.dlog)
	}
	n, d := len(w.rows), p.d
	w.dx = trGrow(w.dx, (n+p.maxW-1)*d)
	clear(w.dx)
	for i, wd := range p.widths {
		k := wd * d
		gw, gb := gl[i], gl[nc+i]
		off := i * p.F
		for f := range p.F {
			t := w.win[off+f]
			g := w.dfeat[off+f] * w.mask[off+f]
			if t < 0 || g == 0 {
				continue
			}
			gb[f] += g
			o := int(t) * d
			p.kern.Axpy(g, w.x[o:o+k], gw[f*k:(f+1)*k])
			p.kern.Axpy(g, p.conv[i][f*k:(f+1)*k], w.dx[o:o+k])
		}
	}
	for q, r := range w.rows {
		if r != 0 {
			trAdd(p.kern, w.g.touch(r, d), w.dx[q*d:(q+1)*d])
		}
	}
}

// dense sets y = W x + b for W of shape [len(y)][len(x)].
func trDense(y, wt, b, x []float32) {
	in := len(x)
	for o := range y {
		y[o] = b[o] + trDot(wt[o*in:(o+1)*in], x)
	}
}

// trDenseBack adds the weight and bias gradients of y = W x + b given dy.
func trDenseBack(k *kernel.Set, gw, gb, dy, x []float32) {
	in := len(x)
	for o, g := range dy {
		gb[o] += g
		if g != 0 {
			k.Axpy(g, x, gw[o*in:(o+1)*in])
		}
	}
}

// trDenseInput adds W^T dy to dx.
func trDenseInput(k *kernel.Set, dx, wt, dy []float32) {
	in := len(dx)
	for o, g := range dy {
		if g != 0 {
			k.Axpy(g, wt[o*in:(o+1)*in], dx)
		}
	}
}

func trSoftmax(x []float32) {
	m := x[0]
	for _, v := range x {
		m = max(m, v)
	}
	var s float64
	for i, v := range x {
		e := math.Exp(float64(v - m))
		x[i] = float32(e)
		s += e
	}
	for i := range x {
		x[i] = float32(float64(x[i]) / s)
	}
}

func trGrow(s []float32, n int) []float32 {
	if cap(s) < n {
		return make([]float32, n, n+n/4)
	}
	return s[:n]
}

func trDot(a, b []float32) float32 {
	var s float32
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

// trSigmoid sets each x[i] to 1/(1+exp(-x[i])).
func trSigmoid(x []float32) {
	for i, v := range x {
		x[i] = float32(1 / (1 + math.Exp(-float64(v))))
	}
}
