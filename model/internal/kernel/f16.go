package kernel

import "math"

// F16Hardware holds the CPU's own half-precision conversions (F16C), the
// reference tests check F32ToF16 and F16ToF32 against. n is a multiple of 8.
type F16Hardware struct {
	ToF16 func(dst *uint16, src *float32, n int)
	ToF32 func(dst *float32, src *uint16, n int)
}

// HWF16 is the CPU's conversions, or nil where there are none (or with
// -tags purego).
var HWF16 *F16Hardware

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
