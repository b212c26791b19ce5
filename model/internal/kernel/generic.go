package kernel

func foldGenericF32(tab []float32, w, f int, rows []int32, bias, mx []float32, win []int32, acc []float32) {
	n := len(rows)
	mx, bias, acc = mx[:f], bias[:f], acc[:f]
	clear(mx)
	if win != nil {
		win = win[:f]
		for c := range win {
			win[c] = -1
		}
	}
	for p := range n {
		copy(acc, bias)
		for k := range min(w, n-p) {
			off := (int(rows[p+k])*w + k) * f
			t := tab[off : off+f]
			a := acc[:len(t)]
			for c, v := range t {
				a[c] += v
			}
		}
		if win == nil {
			for c, v := range acc {
				if v > mx[c] {
					mx[c] = v
				}
			}
			continue
		}
		for c, v := range acc {
			if v > mx[c] {
				mx[c], win[c] = v, int32(p)
			}
		}
	}
}

func foldGenericF16(tab []uint16, w, f int, rows []int32, bias, mx []float32, win []int32, acc []float32) {
	n := len(rows)
	mx, bias, acc = mx[:f], bias[:f], acc[:f]
	clear(mx)
	if win != nil {
		win = win[:f]
		for c := range win {
			win[c] = -1
		}
	}
	for p := range n {
		copy(acc, bias)
		for k := range min(w, n-p) {
			off := (int(rows[p+k])*w + k) * f
			t := tab[off : off+f]
			a := acc[:len(t)]
			for c, h := range t {
				a[c] += F16ToF32(h)
			}
		}
		if win == nil {
			for c, v := range acc {
				if v > mx[c] {
					mx[c] = v
				}
			}
			continue
		}
		for c, v := range acc {
			if v > mx[c] {
				mx[c], win[c] = v, int32(p)
			}
		}
	}
}

func dotGeneric(a, b []float32) float32 {
	b = b[:len(a)]
	var s0, s1, s2, s3 float32
	i := 0
	for ; i+4 <= len(a); i += 4 {
		s0 += a[i] * b[i]
		s1 += a[i+1] * b[i+1]
		s2 += a[i+2] * b[i+2]
		s3 += a[i+3] * b[i+3]
	}
	for ; i < len(a); i++ {
		s0 += a[i] * b[i]
	}
	return (s0 + s1) + (s2 + s3)
}

func dot4Generic(a, x []float32, stride int, out *[4]float32) {
	for i := range out {
		out[i] = dotGeneric(a, x[i*stride:])
	}
}

// chunkPlan covers columns [0, f) (f >= vw) with chunks of vectors of vw
// lanes, calling run(c, v, masks) for v vectors starting at column c:
//
//   - v = 4 or 1: whole vectors. A last partial chunk is moved left to end
//     at f, overlapping its predecessor: the overlapped columns are
//     recomputed with the same additions in the same order, so they get
//     the same values again.
//   - v = 8 (only with wide set): vectors 0-3 whole, vectors 4-7 limited to
//     the lanes set in masks (16 bits per vector, vector 4 lowest), so a
//     remainder of 4·vw+1 .. 8·vw columns takes one pass over the text.
func chunkPlan(f, vw int, wide bool, run func(c, v int, masks uint64)) {
	c := 0
	if wide {
		for f-c > 8*vw {
			run(c, 4, 0)
			c += 4 * vw
		}
		if r := f - c; r > 4*vw {
			var masks uint64
			for v := range 4 {
				lanes := min(max(r-4*vw-v*vw, 0), vw)
				masks |= (1<<lanes - 1) << (16 * v)
			}
			run(c, 8, masks)
			return
		}
	}
	for ; c+4*vw <= f; c += 4 * vw {
		run(c, 4, 0)
	}
	left := f - c
	switch {
	case left == 0:
		return
	case left > 2*vw && f >= 4*vw:
		run(f-4*vw, 4, 0) // one pass over the text beats three
		return
	}
	for ; c+vw <= f; c += vw {
		run(c, 1, 0)
	}
	if c < f {
		run(f-vw, 1, 0)
	}
}
