package elem

import "math"

// epsPow bounds the relative error of the fast path of Pow: ln|x| to
// 2⁻¹⁰², times |y·ln x| ≤ 2¹⁰ where the result is finite and nonzero,
// leaves an absolute error of 2⁻⁹² in the exponent.
const epsPow = 0x1p-86

// isOddInt reports whether y is an odd integer.
func isOddInt(y float64) bool {
	if math.Abs(y) >= 1<<53 {
		return false // every float64 this large is even
	}
	yi := math.Trunc(y)
	return yi == y && math.Mod(yi, 2) != 0
}

// powDD returns xʸ for x > 0 finite, y finite, as (h + l)·2ᵐ; over is
// +1 when y·ln x > 710 (the result overflows) and −1 when it is below
// −746 (it rounds to 0).
func powDD(x, y float64) (h, l float64, m, over int) {
	lh, ll, _, _ := logDD(x)
	wh, wl := twoProd(y, lh)
	wl += float64(y * ll)
	wh, wl = fastTwoSum(wh, wl)
	switch {
	case wh > 710:
		return 0, 0, 0, 1
	case wh < -746:
		return 0, 0, 0, -1
	}
	h, l, m = expCore(wh, wl)
	return h, l, m, 0
}

// Pow returns xʸ, correctly rounded, with the special cases of math.Pow
// (C99 Annex F):
//
//	Pow(x, ±0) = 1 for any x
//	Pow(1, y) = 1 for any y
//	Pow(x, 1) = x for any x
//	Pow(NaN, y) = NaN
//	Pow(x, NaN) = NaN
//	Pow(±0, y) = ±Inf for y an odd integer < 0
//	Pow(±0, −Inf) = +Inf
//	Pow(±0, +Inf) = +0
//	Pow(±0, y) = +Inf for finite y < 0 and not an odd integer
//	Pow(±0, y) = ±0 for y an odd integer > 0
//	Pow(±0, y) = +0 for finite y > 0 and not an odd integer
//	Pow(−1, ±Inf) = 1
//	Pow(x, +Inf) = +Inf for |x| > 1
//	Pow(x, −Inf) = +0 for |x| > 1
//	Pow(x, +Inf) = +0 for |x| < 1
//	Pow(x, −Inf) = +Inf for |x| < 1
//	Pow(+Inf, y) = +Inf for y > 0
//	Pow(+Inf, y) = +0 for y < 0
//	Pow(−Inf, y) = Pow(−0, −y)
//	Pow(x, y) = NaN for finite x < 0 and finite non-integer y
//
// A negative base with an integral exponent gives ±|x|ʸ.
func Pow(x, y float64) float64 {
	switch {
	case y == 0 || x == 1:
		return 1
	case y == 1:
		return x
	case x != x || y != y:
		return math.NaN()
	case x == 0:
		switch {
		case y < 0:
			if isOddInt(y) {
				return math.Copysign(math.Inf(1), x)
			}
			return math.Inf(1)
		case isOddInt(y):
			return x
		}
		return 0
	case math.IsInf(y, 0):
		switch {
		case x == -1:
			return 1
		case (math.Abs(x) < 1) == math.IsInf(y, 1):
			return 0
		}
		return math.Inf(1)
	case math.IsInf(x, 0):
		if math.IsInf(x, -1) {
			return Pow(math.Copysign(0, -1), -y)
		}
		if y > 0 {
			return math.Inf(1)
		}
		return 0
	}
	sign := 1.0
	if x < 0 {
		if y != math.Trunc(y) {
			return math.NaN()
		}
		if isOddInt(y) {
			sign = -1
		}
		x = -x
	}
	h, l, m, over := powDD(x, y)
	switch over {
	case 1:
		return float64(sign * math.Inf(1))
	case -1:
		return float64(sign * 0)
	}
	if r, ok := finish(h, l, m, epsPow); ok {
		return float64(sign * r)
	}
	return float64(sign * slowPow(x, y))
}
