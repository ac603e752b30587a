package posenc

import (
	"math"

	"github.com/plumbref/plumb/internal/elem"
	"github.com/plumbref/plumb/internal/num"
)

// This file holds the double-double arithmetic that the frequency and angle
// computations use: a value is the unevaluated sum hi + lo of two float64
// with |lo| ≤ ulp(hi)/2, about 106 significant bits. The algorithms are the
// classical error-free transformations (Dekker 1971, "A floating-point
// technique for extending the available precision", Numer. Math. 18;
// Knuth, TAOCP vol. 2, §4.2.2, Theorem B); products use math.FMA for the
// exact low part (internal/num's TwoSum, FastTwoSum, TwoProd). Every
// product that must be rounded is written float64(x*y) so that no
// architecture fuses it into an FMA: the results are bit-identical
// everywhere.

type dd struct{ hi, lo float64 }

func ddFrom(x float64) dd { return dd{x, 0} }

func ddAdd(a, b dd) dd {
	s, e := num.TwoSum(a.hi, b.hi)
	t, f := num.TwoSum(a.lo, b.lo)
	e += t
	s, e = num.FastTwoSum(s, e)
	e += f
	s, e = num.FastTwoSum(s, e)
	return dd{s, e}
}

func ddNeg(a dd) dd { return dd{-a.hi, -a.lo} }

func ddSub(a, b dd) dd { return ddAdd(a, ddNeg(b)) }

func ddMul(a, b dd) dd {
	p, e := num.TwoProd(a.hi, b.hi)
	e += float64(a.hi*b.lo) + float64(a.lo*b.hi)
	p, e = num.FastTwoSum(p, e)
	return dd{p, e}
}

// ddMulF multiplies by a float64.
func ddMulF(a dd, b float64) dd {
	p, e := num.TwoProd(a.hi, b)
	e += float64(a.lo * b)
	p, e = num.FastTwoSum(p, e)
	return dd{p, e}
}

// ddDiv is a / b by long division: three float64 quotient digits.
func ddDiv(a, b dd) dd {
	q1 := a.hi / b.hi
	r := ddSub(a, ddMulF(b, q1))
	q2 := r.hi / b.hi
	r = ddSub(r, ddMulF(b, q2))
	q3 := r.hi / b.hi
	s, e := num.FastTwoSum(q1, q2)
	return ddAdd(dd{s, e}, ddFrom(q3))
}

// ddScale multiplies by 2^k exactly (barring underflow).
func ddScale(a dd, k int) dd { return dd{math.Ldexp(a.hi, k), math.Ldexp(a.lo, k)} }

// Constants to 106 bits; the low parts are the float64 nearest to the
// remainder, computed with mpmath at 60 digits.
var (
	ddLn2   = dd{0x1.62e42fefa39efp-1, 0x1.abc9e3b39803fp-56}
	ddTwoPi = dd{0x1.921fb54442d18p+2, 0x1.1a62633145c07p-52}
)

// ddExp is e^a to about 2^-100 relative, for a.hi in the float64 range of
// math.Exp. Reduction: a = k ln2 + r, |r| ≤ ln2/2, then r/1024, a Taylor
// series for e^t − 1 (|t| < 3.4e-4, twelve terms: the first omitted term
// is below 1e-45), then ten squarings of the form (e^t − 1)(e^t + 1).
func ddExp(a dd) dd {
	if a.hi > 709.8 {
		return dd{math.Inf(1), 0}
	}
	if a.hi < -745.2 {
		return dd{}
	}
	k := math.Round(a.hi / ddLn2.hi)
	r := ddSub(a, ddMulF(ddLn2, k))
	t := ddScale(r, -10)
	// s = e^t − 1 = t + t²/2! + … + t^12/12!
	s := t
	term := t
	for n := 2; n <= 12; n++ {
		term = ddDiv(ddMul(term, t), ddFrom(float64(n)))
		s = ddAdd(s, term)
	}
	// e^{2t} − 1 = (e^t − 1)(e^t − 1 + 2)
	for range 10 {
		s = ddMul(s, ddAdd(s, ddFrom(2)))
	}
	return ddScale(ddAdd(s, ddFrom(1)), int(k))
}

// ddLog is ln x for x > 0: one Newton step y ← y + x·e^{−y} − 1 from the
// float64 logarithm doubles its ~53 correct bits.
func ddLog(x dd) dd {
	y := ddFrom(elem.Log(x.hi))
	return ddAdd(y, ddSub(ddMul(x, ddExp(ddNeg(y))), ddFrom(1)))
}

// ddFloor is the largest integer ≤ a.
func ddFloor(a dd) float64 {
	f := math.Floor(a.hi)
	if f == a.hi {
		// a.hi is an integer; a.lo decides.
		return f + math.Floor(a.lo)
	}
	return f
}

// ddCeil is the smallest integer ≥ a.
func ddCeil(a dd) float64 { return -ddFloor(ddNeg(a)) }

// ddLess reports a < b.
func ddLess(a, b dd) bool { return a.hi < b.hi || (a.hi == b.hi && a.lo < b.lo) }

// sincosDD returns sin and cos of the angle a.hi + a.lo. With |a.lo| ≤
// ulp(a.hi)/2 the addition formulas are exact in real arithmetic:
// sin(h+l) = sin h cos l + cos h sin l; each term is then rounded once.
func sincosDD(a dd) (sin, cos float64) {
	sh, ch := elem.Sincos(a.hi)
	sl, cl := elem.Sincos(a.lo)
	sin = float64(sh*cl) + float64(ch*sl)
	cos = float64(ch*cl) - float64(sh*sl)
	return sin, cos
}

// angle is the product m·θ of an integer position and a double-double
// frequency, as a double-double: the float64 product's rounding error is
// recovered exactly with FMA.
func angle(m int, theta dd) dd {
	fm := float64(m)
	p, e := num.TwoProd(fm, theta.hi)
	e += float64(fm * theta.lo)
	p, e = num.FastTwoSum(p, e)
	return dd{p, e}
}
