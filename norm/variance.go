package norm

import (
	"math"

	"github.com/plumbref/plumb/internal/num"
)

// This file holds the one-pass variance of the float32 idiom
// VarianceOnePass (see Variance); the reference's two passes are in
// kernel.go.

// onePassRow is normalizeRow with the statistics of the one-pass idiom
// (VarianceOnePass): on the row scaled by 2^−base (exact, base from the
// largest |x|, so that only the cancellation differs from a port's
// unscaled arithmetic), Σx and Σx² are accumulated in T in one pass, and
//
//	μ = Σx/d,  σ² = max(Σx²/d − μ², 0),  x̂ = (x − μ)/r,
//
// r from σ² and ε as EpsilonPlacement says. The statistics are returned in
// normalizeRow's scaled form, so the backward uses them unchanged.
func onePassRow[T num.Float](x []T, amax T, eps float64, place EpsilonPlacement, nh []T) rowStat[T] {
	base := 0
	if amax > 0 {
		base = exponent(float64(amax))
	}
	var s1, s2 T
	for i, v := range x {
		u := ldexp(v, -base)
		nh[i] = u
		s1 += u
		s2 += T(u * u) // the conversion keeps each square rounded: no fusion
	}
	n := T(len(x))
	mu := s1 / n
	va := max(s2/n-T(mu*mu), 0)
	var dmax T
	for i := range nh {
		nh[i] -= mu
		dmax = max(dmax, T(math.Abs(float64(nh[i]))))
	}
	ke := (exponent(eps) + 1) / 2 // ≈ exponent of √ε
	if place == EpsilonAddedToRoot {
		ke = exponent(eps)
	}
	k := ke
	if dmax > 0 {
		k = max(k, exponent(float64(dmax))+base)
	}
	for i := range nh {
		nh[i] = ldexp(nh[i], base-k)
	}
	return finishRow(nh, ldexp(va, 2*(base-k)), k, eps, place)
}

// varianceOf is the variance form the instantiation T computes: the
// float32 twins follow o.Variance, the float64 reference always takes two
// passes.
func varianceOf[T num.Float](o Options) Variance {
	var z T
	if _, ok := any(z).(float32); ok {
		return o.Variance
	}
	return VarianceTwoPass
}
