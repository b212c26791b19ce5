package metrics

import "math"

// z95 is the standard normal quantile for a two-sided 95% interval,
// Φ⁻¹(0.975).
const z95 = 1.959963984540054

// FewRecords is the count below which a rate is marked as resting on few
// records (common practice: below about 30 the normal approximation
// behind most quick intervals is poor, and one record moves a rate by more
// than 3 points).
const FewRecords = 30

// Interval is a 95% confidence interval of a proportion.
type Interval struct {
	Low  Fraction `json:"low"`
	High Fraction `json:"high"`
}

// Wilson returns the 95% Wilson score interval of the proportion k/n
// (E. B. Wilson, "Probable inference, the law of succession, and
// statistical inference", JASA 22, 1927; the form below is Newcombe 1998,
// "Two-sided confidence intervals for the single proportion", method 3):
//
//	centre = (p + z²/2n) / (1 + z²/n)
//	half   = z / (1 + z²/n) · √(p(1−p)/n + z²/4n²)
//
// It stays inside [0, 1] and is sensible for p near 0 or 1 and small n,
// where the plain normal interval is not. Both ends are undefined for n = 0.
func Wilson(k, n int) Interval {
	if n <= 0 || k < 0 || k > n {
		return Interval{Fraction(math.NaN()), Fraction(math.NaN())}
	}
	p, nf, z2 := float64(k)/float64(n), float64(n), z95*z95
	d := 1 + z2/nf
	centre := (p + z2/(2*nf)) / d
	half := z95 / d * math.Sqrt(p*(1-p)/nf+z2/(4*nf*nf))
	lo, hi := max(0, centre-half), min(1, centre+half)
	// At k = 0 and k = n the exact ends are 0 and 1; rounding must not
	// move them.
	if k == 0 {
		lo = 0
	}
	if k == n {
		hi = 1
	}
	return Interval{Fraction(lo), Fraction(hi)}
}
