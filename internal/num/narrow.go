package num

import "math"

// Narrow is a binary floating-point format narrower than float32 in which
// a port may keep its running sums: bfloat16 or IEEE 754 binary16. It is
// what the accumulation idioms of the kernel packages round to; the
// compare package's Format is the full description of the formats (and
// its Round the same rounding, which the tests check value by value).
type Narrow struct {
	prec int     // significand bits, the hidden bit included
	emin int     // exponent of the smallest normal value
	max  float64 // the largest finite value
}

// The narrow formats: bfloat16 (8 significand bits, float32's exponent
// range; no formal standard: binary32 with the low 16 fraction bits
// dropped) and binary16 (IEEE 754-2019 §3.6, table 3.5: 11 significand
// bits, largest finite value 65504).
var (
	BFloat16 = Narrow{prec: 8, emin: -126, max: 0x1.fep127}
	Binary16 = Narrow{prec: 11, emin: -14, max: 65504}
)

// Round returns x rounded to the nearest value of the format, ties to even
// (IEEE 754-2019 §4.3.1, roundTiesToEven), in one step from the float64
// value, subnormals included. A value whose rounding exceeds the largest
// finite value becomes ±Inf (the non-saturating rule, IEEE 754-2019
// §7.4); ±0, ±Inf and NaN are returned as they are.
func (f Narrow) Round(x float64) float64 {
	if x == 0 || math.IsNaN(x) || math.IsInf(x, 0) {
		return x
	}
	a := math.Abs(x)
	_, e2 := math.Frexp(a) // a = m·2^e2, m in [0.5, 1): the exponent is e2 − 1
	q := max(e2-1, f.emin) - (f.prec - 1)
	// a·2^−q is exact (a power-of-two scaling within float64's range) and
	// RoundToEven makes it an integer exactly: one rounding.
	v := math.Ldexp(math.RoundToEven(math.Ldexp(a, -q)), q)
	if v > f.max {
		v = math.Inf(1)
	}
	return math.Copysign(v, x)
}

// Add returns a + b rounded once to the format: the exact sum, not the
// float64 sum rounded again. The float64 sum s and its error e (s + e =
// a + b exactly, TwoSum) decide it: s rounds as the exact sum does unless s
// is exactly halfway between two values of the format and e ≠ 0, where the
// exact sum lies on e's side of the tie; s is then moved one float64 step
// towards e, which crosses no other value of the format.
func (f Narrow) Add(a, b float64) float64 {
	s, e := TwoSum(a, b)
	if e != 0 && s != 0 && f.isTie(s) {
		s = math.Nextafter(s, math.Inf(int(math.Copysign(1, e))))
	}
	return f.Round(s)
}

// isTie reports whether the finite nonzero x lies exactly halfway between
// two neighbouring values of the format.
func (f Narrow) isTie(x float64) bool {
	a := math.Abs(x)
	_, e2 := math.Frexp(a)
	q := max(e2-1, f.emin) - (f.prec - 1)
	t := math.Ldexp(a, -q) // exact
	return t-math.Floor(t) == 0.5
}
