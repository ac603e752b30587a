package ffn

import (
	"math"

	"github.com/plumbref/plumb/internal/elem"
	"github.com/plumbref/plumb/internal/num"
)

// This file holds the error-free transformations the activations use to
// keep their tails accurate relative to the value: an argument such as
// −x/√2 or 1.702·x is carried as an unevaluated sum hi + lo, so that the
// exponential or erfc of it does not inherit the rounding error of the
// product, which it would multiply by the size of the argument (e^{t(1+δ)}
// has relative error |t|·δ, erfc(z(1+δ)) about 2z²·δ).

// Constants of the formulas, to 50 digits [mpmath], split into the nearest
// float64 (…Hi, written as an exact hexadecimal literal) and the rest
// (…Lo, computed exactly by the compiler from the untyped constants).
const (
	invSqrt2   = 0.70710678118654752440084436210484903928483593768847 // 1/√2
	invSqrt2Hi = 0x1.6a09e667f3bcdp-1
	invSqrt2Lo = float64(invSqrt2 - invSqrt2Hi)

	// 2·√(2/π), the tanh approximation's factor doubled (1 + tanh u = 2σ(2u)).
	twoSqrt2OverPi   = 1.5957691216057307117597842397375274738034345246597
	twoSqrt2OverPiHi = 0x1.9884533d43651p+0
	twoSqrt2OverPiLo = float64(twoSqrt2OverPi - twoSqrt2OverPiHi)

	// 0.044715, the cubic coefficient of the tanh approximation
	// (Hendrycks & Gimpel 2016, §2), exactly as printed.
	cubic   = 0.044715
	cubicHi = 0x1.6e4e26d4801f7p-5
	cubicLo = float64(cubic - cubicHi)

	// 1.702, the slope of the sigmoid approximation, exactly as printed.
	sigSlope   = 1.702
	sigSlopeHi = 0x1.b3b645a1cac08p+0
	sigSlopeLo = float64(sigSlope - sigSlopeHi)

	invSqrt2Pi    = 0.39894228040143267793994605993438186847585863116493 // 1/√(2π)
	twoOverSqrtPi = 1.1283791670955125738961589031215451716881012586580  // 2/√π
)

// split returns a constant c = hi64 + lo64 as the pair (hi, lo) in T: hi is
// c rounded to T, lo the remainder rounded to T. For float64 that is
// (hi64, lo64); for float32 the remainder also holds hi64 − float32(hi64),
// which float64 represents exactly.
func split[T num.Float](hi64, lo64 float64) (T, T) {
	h := T(hi64)
	return h, T(lo64 + (hi64 - float64(h)))
}

// mulConst returns x·c as hi + lo for a constant c given as hi64 + lo64.
func mulConst[T num.Float](x T, hi64, lo64 float64) (T, T) {
	ch, cl := split[T](hi64, lo64)
	hi, lo := num.TwoProd(x, ch)
	return hi, lo + T(x*cl)
}

// expSum is e^{hi+lo} for |lo| ≤ ulp(hi): e^{hi}·(1 + lo), whose error from
// the dropped lo²/2 is far below the rounding of e^{hi}.
func expSum[T num.Float](hi, lo T) T {
	e := T(elem.Exp(float64(hi)))
	if e == 0 || math.IsInf(float64(e), 0) || lo == 0 {
		return e
	}
	return T(e*lo) + e
}

// sigmoidSum is σ(hi + lo) = 1/(1 + e^{−t}) for t ≥ 0 and e^{t}/(1 + e^{t})
// for t < 0: the exponential is always of a non-positive number, so it
// never overflows and the result is accurate relative to its value in both
// tails. NaN gives NaN.
func sigmoidSum[T num.Float](hi, lo T) T {
	if hi >= 0 {
		return 1 / (1 + expSum(-hi, -lo))
	}
	e := expSum(hi, lo)
	return e / (1 + e)
}

// cdf is Φ(x) = ½·erfc(−x/√2), with −x/√2 carried as hi + lo: erfc(z_hi
// + z_lo) = erfc(z_hi) − z_lo·(2/√π)·e^{−z_hi²} to first order.
func cdf[T num.Float](x T) T {
	zh, zl := mulConst(-x, invSqrt2Hi, invSqrt2Lo)
	z := float64(zh)
	c := elem.Erfc(z)
	if zl != 0 && c != 0 {
		c -= float64(float64(zl) * twoOverSqrtPi * elem.Exp(-z*z))
	}
	return T(c) * 0.5
}

// pdf is φ(x) = e^{−x²/2}/√(2π) with x² carried exactly as hi + lo.
func pdf[T num.Float](x T) T {
	sh, sl := num.TwoProd(x, x)
	return expSum(-sh*0.5, -sl*0.5) * T(invSqrt2Pi)
}
