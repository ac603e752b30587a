package norm

import (
	"math"

	"github.com/plumbref/plumb/internal/num"
)

// This file holds the generic bodies: written once over num.Float, called
// with float64 by the reference entry points and with float32 by the
// yardstick instantiations.

// ldexp returns x·2^k in T. For float32 the product is formed exactly in
// float64 and rounded once to T.
func ldexp[T num.Float](x T, k int) T { return T(math.Ldexp(float64(x), k)) }

// exponent returns e with 2^(e−1) ≤ |x| < 2^e for finite nonzero x.
func exponent(x float64) int {
	_, e := math.Frexp(x)
	return e
}

// mean2 returns the mean of v as an unevaluated sum hi+lo, accurate to about
// twice the working precision: the sum is the compensated sum of Ogita,
// Rump & Oishi 2005 ("Accurate Sum and Dot Product", SIAM J. Sci. Comput.
// 26(6), Sum2), and the division by n keeps its exact
// remainder, hi·n + r = s with r computed by one fused multiply-add.
func mean2[T num.Float](v []T) (hi, lo T) {
	var s, c T
	for _, x := range v {
		var e T
		s, e = num.TwoSum(s, x)
		c += e
	}
	n := T(len(v))
	hi = s / n
	r := T(math.FMA(-float64(hi), float64(n), float64(s)))
	lo = (r + c) / n
	return hi, lo
}

// rowStat describes one normalised row. The row's deviations (x − μ for
// LayerNorm, x for RMSNorm) are 2^k·u with max|u| ≤ 1, and the denominator
// is 2^k·r; rho is the scaled root mean square √mean(u²), which the
// backward of the epsilon-added-to-the-root form needs.
type rowStat[T num.Float] struct {
	k      int
	r, rho T
	m, eps T // scaled mean square and scaled epsilon
	finite bool
}

// normalizeRow writes the normalised row x̂ = (x − μ)/r (center) or x/r
// into nh and returns the row's statistics. nh must have len(x) elements.
//
// Scaling: the deviations are scaled by an exact power of two 2^−k chosen
// from the larger of max|deviation| and the size of epsilon (√ε when ε is
// inside the root, ε when it is added to the root), so that neither the
// squares nor the scaled epsilon overflow or underflow unless they are
// negligible beside the other term.
//
// With variance = VarianceOnePass (and center) the statistics are those of
// onePassRow instead.
func normalizeRow[T num.Float](x []T, center bool, eps float64, place EpsilonPlacement, variance Variance, nh []T) rowStat[T] {
	var amax T
	for _, v := range x {
		f := float64(v)
		if math.IsNaN(f) || math.IsInf(f, 0) {
			for i := range nh {
				nh[i] = T(math.NaN())
			}
			return rowStat[T]{}
		}
		amax = max(amax, T(math.Abs(f)))
	}
	if center && variance == VarianceOnePass {
		return onePassRow(x, amax, eps, place, nh)
	}

	// base: the deviations are 2^base · nh before the final scaling.
	base := 0
	copy(nh, x)
	constant := true
	for _, v := range x {
		constant = constant && v == x[0]
	}
	if center && constant {
		// The deviations are exactly 0; the compensated mean would find
		// that too in every case tried, but here it holds by construction.
		clear(nh)
	} else if center && amax > 0 {
		base = exponent(float64(amax))
		for i := range nh {
			nh[i] = ldexp(nh[i], -base)
		}
		hi, lo := mean2(nh)
		for i := range nh {
			// nh[i] − hi is exact when the two are within a factor two
			// (Sterbenz), which is the case of cancellation; lo then
			// carries the rest of the mean.
			nh[i] = (nh[i] - hi) - lo
		}
	}
	var dmax T
	for _, v := range nh {
		dmax = max(dmax, T(math.Abs(float64(v))))
	}

	var ke int
	if place == EpsilonAddedToRoot {
		ke = exponent(eps)
	} else {
		ke = (exponent(eps) + 1) / 2 // ≈ exponent of √ε
	}
	k := ke
	if dmax > 0 {
		k = max(k, exponent(float64(dmax))+base)
	}
	var ss T
	for i := range nh {
		u := ldexp(nh[i], base-k)
		nh[i] = u
		ss += T(u * u) // the conversion keeps each square rounded: no fusion
	}
	return finishRow(nh, ss/T(len(nh)), k, eps, place)
}

// finishRow completes the statistics of a row whose centred values nh are
// scaled by 2^−k and whose mean square (of the scaled values) is m: it
// places ε (scaled to match), forms r and divides nh by it.
func finishRow[T num.Float](nh []T, m T, k int, eps float64, place EpsilonPlacement) rowStat[T] {
	st := rowStat[T]{k: k, finite: true, m: m, rho: T(math.Sqrt(float64(m)))}
	if place == EpsilonAddedToRoot {
		st.eps = T(math.Ldexp(eps, -k))
		st.r = st.rho + st.eps
	} else {
		st.eps = T(math.Ldexp(eps, -2*k))
		st.r = T(math.Sqrt(float64(m + st.eps)))
	}
	for i := range nh {
		nh[i] /= st.r
	}
	return st
}

// gammaOf returns the effective weight γ_j: 1 with no weight, w_j, or 1 + w_j.
func gammaOf[T num.Float](w []T, j int, form WeightForm) T {
	if w == nil {
		return 1
	}
	if form == WeightOnePlus {
		return 1 + w[j]
	}
	return w[j]
}

// forward normalises every row of x (rows of d elements) and applies the
// weight and bias: y = γ ∘ x̂ + β.
func forward[T num.Float](x []T, d int, w, b []T, center bool, o Options) []T {
	y := make([]T, len(x))
	for lo := 0; lo < len(x); lo += d {
		row := y[lo : lo+d]
		normalizeRow(x[lo:lo+d], center, o.Epsilon, o.Placement, varianceOf[T](o), row)
		for j := range row {
			v := T(gammaOf(w, j, o.Weight) * row[j]) // rounded before the bias: no fusion
			if b != nil {
				v += b[j]
			}
			row[j] = v
		}
	}
	return y
}

// grads holds the gradients of one call in T.
type grads[T num.Float] struct {
	dx, dw, db []T
}

// backward returns the gradients of L with respect to x, the weight and the
// bias, given dy = ∂L/∂y, from the closed form
//
//	g = dy ∘ γ
//	∂L/∂x = (g − [mean(g)] − c · x̂ · mean(g ∘ x̂)) / r
//
// where the bracketed term is present for LayerNorm only, c = 1 when ε is
// inside the root and c = r/ρ when it is added to the root (ρ = √mean(dev²),
// r = ρ + ε); the c-term is 0 when ρ = 0, its limit.
func backward[T num.Float](x []T, d int, w, b, dy []T, center bool, o Options) grads[T] {
	var gr grads[T]
	gr.dx = make([]T, len(x))
	if w != nil {
		gr.dw = make([]T, d)
	}
	if b != nil {
		gr.db = make([]T, d)
	}
	nh := make([]T, d)
	g := make([]T, d)
	for lo := 0; lo < len(x); lo += d {
		st := normalizeRow(x[lo:lo+d], center, o.Epsilon, o.Placement, varianceOf[T](o), nh)
		dyr := dy[lo : lo+d]
		for j := range g {
			g[j] = dyr[j] * gammaOf(w, j, o.Weight)
			if gr.dw != nil {
				gr.dw[j] += T(dyr[j] * nh[j])
			}
			if gr.db != nil {
				gr.db[j] += dyr[j]
			}
		}
		dx := gr.dx[lo : lo+d]
		if !st.finite {
			for j := range dx {
				dx[j] = T(math.NaN())
			}
			continue
		}
		// Where the deviations span one dimension, RMSNorm of one element
		// and LayerNorm of two, dy is always parallel to x̂ and the general
		// form would get ε/(s² + ε) as 1 − s²/(s² + ε), by cancellation,
		// though the function is well conditioned there. Directly, with
		// δ the deviation (x for RMSNorm, (x₀ − x₁)/2 for LayerNorm) and
		// r its denominator: d(δ/r)/dδ = ε/r³ (in the root) or ε/r²
		// (added to the root), and ∂L/∂x₀ = −∂L/∂x₁ = (g₀ − g₁)/2 times
		// that for LayerNorm.
		if (!center && d == 1) || (center && d == 2) {
			f := st.eps / st.r
			if o.Placement == EpsilonInRoot {
				f = st.eps / (st.m + st.eps)
			}
			if d == 1 {
				dx[0] = ldexp(T(g[0]*f)/st.r, -st.k)
				continue
			}
			dx[0] = ldexp(T(T(g[0]-g[1])/2*f)/st.r, -st.k)
			dx[1] = -dx[0]
			continue
		}
		var sg, sgn T
		for j := range g {
			sg += g[j]
			sgn += T(g[j] * nh[j])
		}
		n := T(d)
		mg, mgn := sg/n, sgn/n
		if !center {
			mg = 0
		}
		c := T(1)
		if o.Placement == EpsilonAddedToRoot {
			if st.rho == 0 {
				c = 0 // x̂ = 0 too; the term's limit is 0
			} else {
				c = st.r / st.rho
			}
		}
		cm := c * mgn
		for j := range dx {
			v := (g[j] - mg) - T(cm*nh[j])
			dx[j] = ldexp(v/st.r, -st.k)
		}
	}
	return gr
}
