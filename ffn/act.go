package ffn

import (
	"math"

	"github.com/plumbref/plumb/internal/num"
)

// The generic bodies of the activations and their derivatives. Each is
// written once; the exported float64 functions are the reference, and
// Activate32, ActivateGrad32 and the float32 layers run the float32
// instantiation of the same body. Transcendental
// functions are plumb's float64 ones (internal/elem's Exp and Erfc, correctly
// rounded); the float32 body
// rounds their results to float32, as a float32 math library accurate to
// about one unit in the last place would give.

func isInf[T num.Float](x T) bool { return math.IsInf(float64(x), 0) }

// signedZero is 0 with the sign of x: the limit of a function that tends to
// 0 from the side of x's sign.
func signedZero[T num.Float](x T) T { return T(math.Copysign(0, float64(x))) }

func relu[T num.Float](x T) T {
	if x > 0 || x != x {
		return x
	}
	return 0
}

func reluDeriv[T num.Float](x T) T {
	switch {
	case x != x:
		return x
	case x > 0:
		return 1
	}
	return 0
}

func sigmoid[T num.Float](x T) T { return sigmoidSum(x, 0) }

// σ′(x) = σ(x)·σ(−x): both factors are accurate relative to their values,
// where σ(x)·(1 − σ(x)) would lose 1 − σ(x) to cancellation for large x.
func sigmoidDeriv[T num.Float](x T) T { return sigmoidSum(x, 0) * sigmoidSum(-x, 0) }

// gatedBySigmoid is x·σ(t) for t = th + tl, the common body of Swish and
// the sigmoid approximation of GELU (t = βx, or 1.702x).
func gatedBySigmoid[T num.Float](x, th, tl T) T {
	s := sigmoidSum(th, tl)
	if isInf(x) && s == 0 {
		return signedZero(x)
	}
	return x * s
}

// gatedBySigmoidDeriv is d/dx x·σ(βx) = σ(t)·(1 + t·σ(−t)), t = βx.
func gatedBySigmoidDeriv[T num.Float](th, tl T) T {
	s := sigmoidSum(th, tl)
	if isInf(th) {
		return s
	}
	return s * (1 + T(th*sigmoidSum(-th, -tl)))
}

func swish[T num.Float](x, beta T) T {
	switch {
	case beta != beta || isInf(beta):
		return T(math.NaN())
	case beta == 0:
		return x * 0.5
	}
	th, tl := num.TwoProd(x, beta)
	return gatedBySigmoid(x, th, tl)
}

func swishDeriv[T num.Float](x, beta T) T {
	switch {
	case beta != beta || isInf(beta) || x != x:
		return T(math.NaN())
	case beta == 0:
		return 0.5
	}
	th, tl := num.TwoProd(x, beta)
	return gatedBySigmoidDeriv(th, tl)
}

func geluSigmoid[T num.Float](x T) T {
	th, tl := mulConst(x, sigSlopeHi, sigSlopeLo)
	return gatedBySigmoid(x, th, tl)
}

func geluSigmoidDeriv[T num.Float](x T) T {
	th, tl := mulConst(x, sigSlopeHi, sigSlopeLo)
	return gatedBySigmoidDeriv(th, tl)
}

func gelu[T num.Float](x T) T {
	if isInf(x) {
		if x > 0 {
			return x
		}
		return signedZero(x)
	}
	return x * cdf(x)
}

func geluDeriv[T num.Float](x T) T {
	if isInf(x) {
		if x > 0 {
			return 1
		}
		return 0
	}
	return cdf(x) + T(x*pdf(x))
}

// tanhBound is where the tanh approximation has saturated: for x ≥ 30 its
// value rounds to x and its slope to 1; for x ≤ −30 both are below the
// smallest subnormal (e^{−1974}), in float64 and float32 alike.
const tanhBound = 30

// tanhArg returns t = 2·√(2/π)·(x + 0.044715·x³) as hi + lo, for |x| < 30.
// With it ½x(1 + tanh(t/2)) = x·σ(t), which has no cancellation for
// negative x.
func tanhArg[T num.Float](x T) (T, T) {
	s, sl := num.TwoProd(x, x)
	c, cl := num.TwoProd(s, x)
	cl += T(sl * x)
	kh, kl := split[T](cubicHi, cubicLo)
	p, pl := num.TwoProd(c, kh)
	pl += T(c*kl) + T(cl*kh)
	q, ql := num.TwoSum(x, p)
	ql += pl
	gh, gl := split[T](twoSqrt2OverPiHi, twoSqrt2OverPiLo)
	t, tl := num.TwoProd(q, gh)
	tl += T(q*gl) + T(ql*gh)
	return t, tl
}

func geluTanh[T num.Float](x T) T {
	switch {
	case x >= tanhBound:
		return x
	case x <= -tanhBound:
		return signedZero(x)
	}
	th, tl := tanhArg(x)
	return x * sigmoidSum(th, tl)
}

// d/dx x·σ(t) = σ(t)·(1 + x·σ(−t)·t′), t′ = 2√(2/π)(1 + 3·0.044715·x²).
func geluTanhDeriv[T num.Float](x T) T {
	switch {
	case x >= tanhBound:
		return 1
	case x <= -tanhBound:
		return signedZero(x)
	}
	th, tl := tanhArg(x)
	tp := T(twoSqrt2OverPi) * (1 + T(T(3*cubic)*T(x*x)))
	return sigmoidSum(th, tl) * (1 + T(T(x*sigmoidSum(-th, -tl))*tp))
}
