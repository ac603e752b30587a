package elem

import "math"

const (
	epsTanh = 0x1p-90
	epsCosh = 0x1p-90
)

// tanhDD returns tanh x for 2⁻²⁷ ≤ |x| ≤ 22 as a double-double.
func tanhDD(x float64) (float64, float64) {
	h, l, m := expm1Core(float64(2 * math.Abs(x)))
	th, tl := mulPow2(h, m), mulPow2(l, m) // m ≤ 64: exact
	dh, dl := addDD1(th, tl, 2)
	qh, ql := divDD(th, tl, dh, dl)
	if x < 0 {
		qh, ql = -qh, -ql
	}
	return qh, ql
}

// coshDD returns cosh x for 2⁻²⁷ ≤ x ≤ 711 as (h + l)·2ᵏ.
func coshDD(x float64) (h, l float64, k int) {
	h, l, m := expCore(x, 0)
	if x >= 40 {
		return h, l, m - 1
	}
	eh, el := mulPow2(h, m), mulPow2(l, m) // m ≤ 58: exact
	ih, il := divDD(1, 0, eh, el)
	h, l = addDDn(eh, el, ih, il)
	return h, l, -1
}

// Tanh returns the hyperbolic tangent of x, correctly rounded: with
// t = e^(2|x|) − 1 from expm1Core, tanh|x| = t/(t + 2) (from A&S 4.5.3),
// a quotient of positive terms without cancellation. Tanh(±0) = ±0,
// Tanh(±Inf) = ±1, Tanh(NaN) = NaN.
func Tanh(x float64) float64 {
	ax := math.Abs(x)
	switch {
	case x != x:
		return x
	case ax < 0x1p-27:
		// tanh x = x − x³/3 + …, x³/3 below a quarter ulp of x.
		return x
	case ax > 22:
		// 1 − tanh|x| < 2e^(−44) < 2⁻⁶³: rounds to 1.
		return math.Copysign(1, x)
	}
	qh, ql := tanhDD(x)
	if r, ok := finish(qh, ql, 0, epsTanh); ok {
		return r
	}
	return slowTanh(x)
}

// Cosh returns the hyperbolic cosine of x, correctly rounded:
// (e^|x| + e^−|x|)/2 (A&S 4.5.2) with e^|x| from expCore and its
// reciprocal in double-double; beyond |x| = 40 the second term is below
// 2⁻¹¹⁵ of the first and e^|x|/2 is rounded directly, overflowing to +Inf
// past about 710.48. Cosh(±0) = 1, Cosh(±Inf) = +Inf, Cosh(NaN) = NaN.
func Cosh(x float64) float64 {
	ax := math.Abs(x)
	switch {
	case x != x:
		return x
	case ax > 711:
		return math.Inf(1)
	case ax < 0x1p-27:
		// cosh x = 1 + x²/2 + …, x²/2 below half an ulp of 1.
		return 1
	}
	h, l, k := coshDD(ax)
	if r, ok := finish(h, l, k, epsCosh); ok {
		return r
	}
	return slowCosh(x)
}
