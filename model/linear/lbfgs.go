package linear

import (
	"math"

	"gonum.org/v1/gonum/floats"
)

// lbfgsMemory is the number of correction pairs kept, the common choice
// (Nocedal and Wright suggest 3 to 20; scikit-learn's lbfgs keeps 10).
const lbfgsMemory = 10

// minimize runs L-BFGS (Nocedal and Wright, "Numerical Optimization", 2nd
// ed., 2006: algorithm 7.4, the two-loop recursion, within algorithm 7.5)
// with a backtracking line search for the Armijo condition (their
// algorithm 3.1, c1 = 1e-4, halving), from x (overwritten with the result)
// until the largest gradient component is below tol or iters iterations
// have run. It returns the final largest gradient component.
//
// This small solver stands in for gonum's optimize package, whose import
// would pull in golang.org/x/tools through gonum's stat/distmv. Every step
// is a fixed sequence of float64 operations, so the result is
// bit-for-bit reproducible.
//
// A correction pair with non-positive curvature (s·y <= 0, which a convex
// objective gives only through rounding) is not stored, so the implied
// Hessian stays positive definite and every direction descends.
func minimize(fg func(x, g []float64) float64, x0 []float64, tol float64, iters int) (gmax float64, done int) {
	n := len(x0)
	x := x0
	defer func() { copy(x0, x) }()
	g := make([]float64, n)
	f := fg(x, g)
	type pair struct {
		s, y []float64
		rho  float64
	}
	var mem []pair
	d := make([]float64, n)
	xn := make([]float64, n)
	gn := make([]float64, n)
	alpha := make([]float64, lbfgsMemory)
	for it := 0; ; it++ {
		gmax = floats.Norm(g, math.Inf(1))
		if gmax < tol || it >= iters {
			return gmax, it
		}
		// d = -H g by the two-loop recursion, H0 = gamma I.
		copy(d, g)
		for k := len(mem) - 1; k >= 0; k-- {
			alpha[k] = mem[k].rho * floats.Dot(mem[k].s, d)
			floats.AddScaled(d, -alpha[k], mem[k].y)
		}
		gamma := 1 / floats.Norm(g, 2) // the first step has length 1
		if k := len(mem) - 1; k >= 0 {
			gamma = floats.Dot(mem[k].s, mem[k].y) / floats.Dot(mem[k].y, mem[k].y)
		}
		floats.Scale(gamma, d)
		for k := range mem {
			beta := mem[k].rho * floats.Dot(mem[k].y, d)
			floats.AddScaled(d, alpha[k]-beta, mem[k].s)
		}
		floats.Scale(-1, d)
		slope := floats.Dot(g, d)
		if !(slope < 0) {
			// Rounding spoilt the direction: restart from steepest descent.
			mem = mem[:0]
			floats.ScaleTo(d, -1/floats.Norm(g, 2), g)
			slope = floats.Dot(g, d)
		}
		step, fn := 1.0, 0.0
		for {
			floats.AddScaledTo(xn, x, step, d)
			fn = fg(xn, gn)
			if fn <= f+1e-4*step*slope {
				break
			}
			step /= 2
			if step < 1e-20 {
				// No decrease representable along d: as close as float64
				// gets from here.
				return gmax, it
			}
		}
		var p pair
		if len(mem) == lbfgsMemory {
			p = mem[0]
			copy(mem, mem[1:])
			mem = mem[:lbfgsMemory-1]
		} else {
			p = pair{s: make([]float64, n), y: make([]float64, n)}
		}
		floats.SubTo(p.s, xn, x)
		floats.SubTo(p.y, gn, g)
		if sy := floats.Dot(p.s, p.y); sy > 0 {
			p.rho = 1 / sy
			mem = append(mem, p)
		}
		x, xn = xn, x
		g, gn = gn, g
		f = fn
	}
}
