package quant

import (
	"math"
	"math/big"
	"slices"

	"github.com/plumbref/plumb/compare"
)

// exactSum accumulates a sum of products of float64 values with no
// rounding at all: the sum is v·2^e, v a big integer. Each finite float64
// is m·2^k with m an integer of at most 53 bits (math.Frexp), so a product
// is an integer of at most 106 bits times a power of two, and a sum of them
// is an integer once the terms are aligned on the smallest exponent.
type exactSum struct {
	v      big.Int
	e      int
	any    bool
	naive  float64 // the float64 sum of the products, for non-finite terms
	finite bool    // every term so far was finite
	t      big.Int
}

func newExactSum() *exactSum { return &exactSum{finite: true} }

// split returns m and k with x = m·2^k, m an integer.
func split(x float64) (int64, int) {
	frac, exp := math.Frexp(x)
	return int64(math.Ldexp(frac, 53)), exp - 53
}

// addProduct adds sign·x·y·2^shift, sign ±1.
func (s *exactSum) addProduct(x, y float64, sign, shift int) {
	if math.IsNaN(x) || math.IsNaN(y) || math.IsInf(x, 0) || math.IsInf(y, 0) {
		s.finite = false
	}
	p := x * y
	s.naive += float64(float64(sign) * math.Ldexp(p, shift)) // no fused multiply-add
	if !s.finite || x == 0 || y == 0 {
		return
	}
	mx, kx := split(x)
	my, ky := split(y)
	s.t.SetInt64(mx)
	s.t.Mul(&s.t, big.NewInt(my))
	if sign < 0 {
		s.t.Neg(&s.t)
	}
	e := kx + ky + shift
	switch {
	case !s.any:
		s.v.Set(&s.t)
		s.e, s.any = e, true
		return
	case e < s.e:
		s.v.Lsh(&s.v, uint(s.e-e))
		s.e = e
	case e > s.e:
		s.t.Lsh(&s.t, uint(e-s.e))
	}
	s.v.Add(&s.v, &s.t)
}

// round returns the sum rounded once to f, to nearest with ties to even, and
// with f's overflow (compare.Format.Round). With a non-finite term the sum
// has no exact value and is the float64 sum of the products (NaN, or ±Inf
// as IEEE 754 arithmetic gives it), rounded to f.
//
// A format narrower than float64 is reached in one rounding through
// float64 rounded to odd: the float64 truncation of the sum, its last bit
// set when the truncation was inexact. Rounding that to a format of p ≤ 51
// bits gives the exact sum rounded once to it (Boldo and Melquiond 2008,
// "Emulation of FMA and correctly rounded sums: proved algorithms using
// rounding to odd", IEEE Trans. Computers 57(4), Theorem 1), for sums whose
// magnitude is 0 or at least 2^−1022, where float64 is normal; every
// smaller sum rounds to ±0 in every format narrower than float64 anyway,
// as their smallest subnormal is 2^−149 or more.
func (s *exactSum) round(f compare.Format) float64 {
	if !s.finite {
		return f.Round(s.naive)
	}
	if !s.any || s.v.Sign() == 0 {
		return 0
	}
	var z big.Float
	z.SetInt(&s.v) // exact: the precision is the integer's length
	z.SetMantExp(&z, s.e)
	if f == compare.Float64 {
		v, _ := z.Float64() // to nearest, ties to even, subnormals and overflow included
		return v
	}
	var t big.Float
	t.SetPrec(53).SetMode(big.ToZero).Set(&z)
	v, _ := t.Float64()
	if t.Acc() != big.Exact && !math.IsInf(v, 0) {
		v = math.Float64frombits(math.Float64bits(v) | 1)
	}
	return f.Round(v)
}

// roundRat returns the exact rational r rounded once to f, to nearest with
// ties to even, with f's overflow (sat: saturating), through float64
// rounded to odd (Boldo and Melquiond 2008, Theorem 1; f has at most 24
// significand bits). A value below 2^−1022 in magnitude rounds to ±0 or to
// the smallest subnormal of every such format the same way from its float64
// rounding, as their smallest subnormals are 2^−149 or more.
func roundRat(r *big.Rat, f compare.Format, sat bool) float64 {
	var t big.Float
	t.SetPrec(53).SetMode(big.ToZero).SetRat(r)
	v, _ := t.Float64()
	if t.Acc() != big.Exact && !math.IsInf(v, 0) && v != 0 {
		v = math.Float64frombits(math.Float64bits(v) | 1)
	}
	if sat {
		return f.RoundSaturating(v)
	}
	return f.Round(v)
}

// nearestRat returns the integer nearest the rational r, ties broken by
// mode; values beyond ±1024 come back as ±1025 (every caller clamps to its
// codes).
func nearestRat(r *big.Rat, mode Rounding) int {
	lim := big.NewRat(1024, 1)
	switch {
	case r.Cmp(lim) > 0:
		return 1025
	case r.Cmp(lim.Neg(lim)) < 0:
		return -1025
	}
	// floor(r) and the remainder r − floor(r) in [0, 1).
	n, d := r.Num(), r.Denom()
	var k, m big.Int
	k.DivMod(n, d, &m) // Euclidean: m ≥ 0, so k = floor(r)
	fl := int(k.Int64())
	twice := new(big.Int).Lsh(&m, 1)
	switch c := twice.Cmp(d); {
	case c < 0:
		return fl
	case c > 0:
		return fl + 1
	case mode == HalfAway:
		if fl >= 0 {
			return fl + 1
		}
		return fl
	case fl%2 != 0:
		return fl + 1
	}
	return fl
}

// rankOf returns the nearest-rank position ⌈p·n/100⌉ (at least 1) of the
// p-th percentile among n sorted values, computed exactly (p, a float64,
// is a rational).
func rankOf(p float64, n int) int {
	var r big.Rat
	r.SetFloat64(p)
	r.Mul(&r, big.NewRat(int64(n), 100))
	var k, m big.Int
	k.DivMod(r.Num(), r.Denom(), &m)
	rank := int(k.Int64())
	if m.Sign() != 0 {
		rank++
	}
	return max(rank, 1)
}

// percentile returns the nearest-rank p-th percentile of |v| (v not empty).
func percentile(v []float64, p float64) float64 {
	a := make([]float64, len(v))
	for i, x := range v {
		a[i] = math.Abs(x)
	}
	slices.Sort(a)
	return a[min(rankOf(p, len(a)), len(a))-1]
}
