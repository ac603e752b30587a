package elem

import (
	"math"
	"math/big"
	"sync"
	"sync/atomic"
)

// The slow path: every function evaluated again in math/big arithmetic at
// a precision that doubles until the result rounds unambiguously (Ziv
// 1991). Each evaluator bigF(…, prec) returns a value whose relative error
// is below 2^-prec; it works internally at prec + 64 bits or more, with the
// error analysis beside each one.

// slowCalls counts the evaluations that took the slow path.
var slowCalls atomic.Uint64

// The constants π and ln 2 are computed once each, lazily, in two sets:
// 2048 bits for the fast paths' tables and the slow path at ordinary
// precisions, and constBits = 8192 for the rest. constBits bounds the
// precision of the slow path (maxPrec), with room for the trigonometric
// reduction of the largest arguments.
const (
	constBits = 8192
	maxPrec   = 4096
)

var constSets = [2]struct {
	once    sync.Once
	bits    uint
	pi, ln2 *big.Float
}{{bits: 2048}, {bits: constBits}}

// bigConsts returns π and ln 2 to at least need bits (or constBits).
func bigConsts(need uint) (pi, ln2 *big.Float) {
	c := &constSets[0]
	if need > c.bits {
		c = &constSets[1]
	}
	c.once.Do(func() {
		w := c.bits + 64
		// π/4 = 4 arctan(1/5) − arctan(1/239), each arctangent by its power
		// series (A&S 4.4.42) in fixed point with 64 guard bits.
		a := invSeries(5, w, true)
		a.Lsh(a, 4)
		b := invSeries(239, w, true)
		b.Lsh(b, 2)
		a.Sub(a, b)
		c.pi = fixedToFloat(a, w, c.bits)
		// ln 2 = 2 atanh(1/3) (A&S 4.1.27 at z = 2).
		d := invSeries(3, w, false)
		d.Lsh(d, 1)
		c.ln2 = fixedToFloat(d, w, c.bits)
	})
	return c.pi, c.ln2
}

// invSeries returns Σₖ (±1)ᵏ / ((2k+1)·n^(2k+1)) scaled by 2ʷ, truncated
// term by term: arctan(1/n) when alternate, atanh(1/n) otherwise. Each term
// is off by less than one unit, so the sum by less than its number of
// terms (w/2 at most), far inside the 64 guard bits.
func invSeries(n int64, w uint, alternate bool) *big.Int {
	t := new(big.Int).Lsh(big.NewInt(1), w)
	t.Quo(t, big.NewInt(n))
	sum := new(big.Int).Set(t)
	n2 := big.NewInt(n * n)
	term, d := new(big.Int), new(big.Int)
	for k := int64(1); ; k++ {
		t.Quo(t, n2)
		if t.Sign() == 0 {
			return sum
		}
		term.Quo(t, d.SetInt64(2*k+1))
		if alternate && k%2 == 1 {
			sum.Sub(sum, term)
		} else {
			sum.Add(sum, term)
		}
	}
}

func fixedToFloat(v *big.Int, w, prec uint) *big.Float {
	f := new(big.Float).SetPrec(prec).SetInt(v)
	return f.SetMantExp(f, -int(w))
}

// nf returns a new zero of precision prec (rounding to nearest even).
func nf(prec uint) *big.Float { return new(big.Float).SetPrec(prec) }

// bf returns x exactly (prec ≥ 53).
func bf(x float64, prec uint) *big.Float { return nf(prec).SetFloat64(x) }

// ziv rounds the value that eval approximates: eval(prec) must be within
// a relative 2^-prec of it. The precision doubles until the interval
// around the approximation rounds to one float64 (round to nearest even,
// which big.Float.Float64 implements with gradual underflow and overflow).
func ziv(eval func(prec uint) *big.Float) float64 {
	slowCalls.Add(1)
	var v *big.Float
	for prec := uint(128); prec <= maxPrec; prec *= 2 {
		v = eval(prec)
		if v.Sign() == 0 {
			return 0
		}
		// |v|·2^-prec < 2^(e-prec) for |v| < 2^e; the bound is doubled so
		// that the rounding of v ± d to prec+64 bits cannot narrow it.
		d := new(big.Float).SetMantExp(big.NewFloat(1), v.MantExp(nil)-int(prec)+1)
		lo := nf(prec+64).Sub(v, d)
		hi := nf(prec+64).Add(v, d)
		a, _ := lo.Float64()
		b, _ := hi.Float64()
		if a == b {
			return a
		}
	}
	f, _ := v.Float64()
	return f
}

// isqrt returns ⌊√n⌋ for small n.
func isqrt(n uint) uint {
	r := uint(math.Sqrt(float64(n)))
	for r*r > n {
		r--
	}
	for (r+1)*(r+1) <= n {
		r++
	}
	return r
}

// bigExp returns eˣ for |x| < 2¹⁴ (A&S 4.2.1): x = k·ln 2 + r with
// |r| ≤ ln 2/2, the series for e^(r/2ˢ), s squarings, and the scaling by
// 2ᵏ. With wp = prec + s + 64: r is known to an absolute 2^-(wp+50); the
// N < 500 terms and the squarings leave a relative error below
// 2^s·(2N+2)·2^-wp < 2^-(prec+54).
func bigExp(x *big.Float, prec uint) *big.Float {
	if x.Sign() == 0 {
		return nf(prec).SetInt64(1)
	}
	s := 8 + isqrt(prec)/2
	wp := prec + s + 64
	_, ln2 := bigConsts(wp + 80)
	q, _ := nf(64).Quo(x, ln2).Float64()
	k := int64(math.RoundToEven(q))
	r := nf(wp+64).Sub(x, nf(wp+64).Mul(nf(wp+64).SetInt64(k), ln2))
	r.SetMantExp(r, -int(s))
	r.SetPrec(wp)
	sum := nf(wp).SetInt64(1)
	term := nf(wp).SetInt64(1)
	nb := nf(64)
	for n := int64(1); ; n++ {
		term.Mul(term, r)
		term.Quo(term, nb.SetInt64(n))
		sum.Add(sum, term)
		if term.Sign() == 0 || term.MantExp(nil) < sum.MantExp(nil)-int(wp)-4 {
			break
		}
	}
	for range s {
		sum.Mul(sum, sum)
	}
	return sum.SetMantExp(sum, int(k))
}

// atanhSeries returns s + s³/3 + s⁵/5 + … at wp bits for |s| ≤ 1/3; the
// N < wp/3 terms leave a relative error below N·2^-wp.
func atanhSeries(s *big.Float, wp uint) *big.Float {
	sum := nf(wp).Set(s)
	if s.Sign() == 0 {
		return sum
	}
	z := nf(wp).Mul(s, s)
	term := nf(wp).Set(s)
	t := nf(wp)
	nb := nf(64)
	for k := int64(1); ; k++ {
		term.Mul(term, z)
		t.Quo(term, nb.SetInt64(2*k+1))
		sum.Add(sum, t)
		if t.Sign() == 0 || t.MantExp(nil) < sum.MantExp(nil)-int(wp)-4 {
			return sum
		}
	}
}

// bigLog returns ln a for a > 0: a = m·2ᵉ with m in [√2/2, √2), ln m =
// 2 atanh((m−1)/(m+1)) (A&S 4.1.27), whose argument is below 0.172 and is
// computed without cancellation (m − 1 is exact); then e·ln 2 is added,
// which at most halves the result when e ≠ 0. Relative error below
// 2^-(prec+50).
func bigLog(a *big.Float, prec uint) *big.Float {
	wp := prec + 64
	_, ln2 := bigConsts(wp + 16)
	m := nf(wp)
	e := a.MantExp(m)
	m.SetPrec(wp)
	if m.Cmp(big.NewFloat(math.Sqrt2/2)) < 0 {
		m.SetMantExp(m, 1)
		e--
	}
	one := big.NewFloat(1)
	s := nf(wp).Quo(nf(wp).Sub(m, one), nf(wp).Add(m, one))
	sum := atanhSeries(s, wp)
	sum.SetMantExp(sum, 1)
	if e != 0 {
		sum.Add(sum, nf(wp).Mul(nf(wp).SetInt64(int64(e)), ln2))
	}
	return sum
}

// bigLog1p returns ln(1+x): for |x| < 1/2 as 2 atanh(x/(2+x)), relative to
// the result without cancellation; otherwise ln of 1+x rounded to wp bits,
// whose relative error 2^-wp moves the logarithm (at least 0.4 in
// magnitude) by an absolute 2^-wp.
func bigLog1p(x float64, prec uint) *big.Float {
	wp := prec + 64
	xb := bf(x, wp)
	if math.Abs(x) < 0.5 {
		s := nf(wp).Quo(xb, nf(wp).Add(big.NewFloat(2), xb))
		sum := atanhSeries(s, wp)
		return sum.SetMantExp(sum, 1)
	}
	return bigLog(nf(wp).Add(xb, big.NewFloat(1)), wp)
}

// bigExpm1 returns eˣ − 1: for |x| < 1/2 by the series without its first
// term (the alternating terms for x < 0 lose at most one bit); otherwise
// as eˣ − 1, which loses at most two bits.
func bigExpm1(x float64, prec uint) *big.Float {
	wp := prec + 64
	xb := bf(x, wp)
	if math.Abs(x) < 0.5 {
		sum := nf(wp).Set(xb)
		term := nf(wp).Set(xb)
		nb := nf(64)
		for n := int64(2); ; n++ {
			term.Mul(term, xb)
			term.Quo(term, nb.SetInt64(n))
			sum.Add(sum, term)
			if term.Sign() == 0 || term.MantExp(nil) < sum.MantExp(nil)-int(wp)-4 {
				return sum
			}
		}
	}
	e := bigExp(xb, wp)
	return e.Sub(e, big.NewFloat(1))
}

// sinCosSeries returns sin r and cos r for |r| ≤ 0.9 by their series
// (A&S 4.3.65, 4.3.66), each of whose terms is smaller than the one before
// from the first on, at wp bits.
func sinCosSeries(r *big.Float, wp uint) (s, c *big.Float) {
	z := nf(wp).Mul(r, r)
	s = nf(wp).Set(r)
	c = nf(wp).SetInt64(1)
	ts := nf(wp).Set(r)
	tc := nf(wp).SetInt64(1)
	nb := nf(64)
	for n := int64(1); ; n++ {
		ts.Mul(ts, z)
		ts.Quo(ts, nb.SetInt64((2*n)*(2*n+1)))
		ts.Neg(ts)
		s.Add(s, ts)
		tc.Mul(tc, z)
		tc.Quo(tc, nb.SetInt64((2*n-1)*(2*n)))
		tc.Neg(tc)
		c.Add(c, tc)
		if tc.Sign() == 0 || (tc.MantExp(nil) < c.MantExp(nil)-int(wp)-4 &&
			(ts.Sign() == 0 || ts.MantExp(nil) < s.MantExp(nil)-int(wp)-4)) {
			return s, c
		}
	}
}

// bigSinCos returns sin x and cos x. The reduction x = k·π/2 + r is
// carried out at W = prec + E + 192 bits for |x| < 2ᴱ: k·π/2 and the
// difference are then known to an absolute 2^-(prec+190), and no float64
// comes closer than 2⁻⁶³ to a multiple of π/2, so r keeps a relative
// error below 2^-(prec+120).
func bigSinCos(x float64, prec uint) (s, c *big.Float) {
	ax := math.Abs(x)
	e := 0
	if ax >= 1 {
		e = exponent(ax) + 1
	}
	w := prec + uint(e) + 192
	wp := prec + 64
	pi, _ := bigConsts(w)
	halfPi := nf(w).Set(pi)
	halfPi.SetMantExp(halfPi, -1)
	xb := bf(ax, w)
	q := nf(w).Quo(xb, halfPi)
	q.Add(q, big.NewFloat(0.5))
	k, _ := q.Int(nil) // ⌊x/(π/2) + 1/2⌋, x ≥ 0
	kf := nf(w).SetInt(k)
	r := nf(w).Sub(xb, nf(w).Mul(kf, halfPi))
	r.SetPrec(wp)
	sr, cr := sinCosSeries(r, wp)
	quad := new(big.Int).And(k, big.NewInt(3)).Int64()
	switch quad {
	case 0:
		s, c = sr, cr
	case 1:
		s, c = cr, sr.Neg(sr)
	case 2:
		s, c = sr.Neg(sr), cr.Neg(cr)
	case 3:
		s, c = cr.Neg(cr), sr
	}
	if x < 0 {
		s.Neg(s)
	}
	return s, c
}

// bigSqrtPi returns √π at wp bits.
func bigSqrtPi(wp uint) *big.Float {
	pi, _ := bigConsts(wp)
	return nf(wp).Sqrt(nf(wp).Set(pi))
}

// bigErf returns erf x, or erfc x when comp. erf |x| comes from the series
// of positive terms erf x = (2/√π)·e^(−x²)·Σ 2ⁿx^(2n+1)/(1·3⋯(2n+1))
// (A&S 7.1.6), whose N terms (N < 4000) leave a relative error below
// N·2^-wp. erfc x = 1 − erf x for x > 0 loses log₂(erf/erfc) bits, less
// than x²·log₂e + log₂(√π(x+√(x²+2))/2) by the bound A&S 7.1.13; the
// working precision grows by as much. erfc x = 1 + erf|x| for x < 0.
func bigErf(x float64, prec uint, comp bool) *big.Float {
	ax := math.Abs(x)
	extra := uint(0)
	if comp && x > 0 {
		extra = uint(float64(float64(ax*ax)*math.Log2E)) + 16
	}
	wp := prec + extra + 64
	xb := bf(ax, wp)
	x2 := nf(wp).Mul(xb, xb) // exact: wp ≥ 106
	z := nf(wp).SetMantExp(x2, 1)
	sum := nf(wp).Set(xb)
	term := nf(wp).Set(xb)
	nb := nf(64)
	for n := int64(0); ; n++ {
		term.Mul(term, z)
		term.Quo(term, nb.SetInt64(2*n+3))
		sum.Add(sum, term)
		if float64(n) > float64(ax*ax) && (term.Sign() == 0 || term.MantExp(nil) < sum.MantExp(nil)-int(wp)-4) {
			break
		}
	}
	e := bigExp(nf(wp).Neg(x2), wp)
	sum.Mul(sum, e)
	sum.Quo(sum, bigSqrtPi(wp))
	sum.SetMantExp(sum, 1)
	one := big.NewFloat(1)
	switch {
	case comp && x > 0:
		return sum.Sub(one, sum)
	case comp:
		return sum.Add(one, sum)
	case x < 0:
		return sum.Neg(sum)
	}
	return sum
}

// bigTanh returns tanh x = t/(t+2), t = e^(2|x|) − 1 (from A&S 4.5.3),
// with the sign of x; no cancellation.
func bigTanh(x float64, prec uint) *big.Float {
	wp := prec + 64
	t := bigExpm1(float64(2*math.Abs(x)), wp)
	r := nf(wp).Quo(t, nf(wp).Add(t, big.NewFloat(2)))
	if x < 0 {
		r.Neg(r)
	}
	return r
}

// bigCosh returns cosh x = (eˣ + e⁻ˣ)/2 (A&S 4.5.2): a sum of positive
// terms.
func bigCosh(x float64, prec uint) *big.Float {
	wp := prec + 64
	e := bigExp(bf(math.Abs(x), wp), wp)
	r := nf(wp).Quo(big.NewFloat(1), e)
	r.Add(r, e)
	return r.SetMantExp(r, -1)
}

// bigPow returns xʸ = e^(y·ln x) for x > 0: ln x to a relative
// 2^-(prec+128), so that y·ln x, below 2¹¹ in magnitude where the result
// is finite and nonzero, is off by an absolute 2^-(prec+100).
func bigPow(x, y float64, prec uint) *big.Float {
	wp := prec + 64
	l := bigLog(bf(x, 64), wp+32)
	w := nf(wp+48).Mul(l, bf(y, 64))
	return bigExp(w, wp)
}

// powExact returns xʸ rounded, and true, when xʸ is a dyadic rational
// (x > 0 finite, y finite): the only values that can be exact midpoints
// between two float64, on which no precision decides. With x = X·2ᵃ, X
// odd: for X = 1, xʸ = 2^(a·y) is rational exactly when a·y is an integer;
// for X > 1, xʸ is rational only for y > 0 with y = p/2^q and X a perfect
// 2^q-th power Z^(2^q), and then xʸ = Zᵖ·2^(a·y) needs a·y integral; a
// midpoint has at most 54 significant bits, so X ≥ 3 allows q ≤ 5 and
// y ≤ 54/log₂3 < 35. Every other xʸ is irrational or has too many bits,
// and the precision loop of ziv ends.
func powExact(x, y float64) (float64, bool) {
	mant, e := math.Frexp(x)               // x = mant·2ᵉ, mant in [0.5, 1)
	m := uint64(float64(mant * (1 << 53))) // exact
	a := e - 53
	for m&1 == 0 {
		m >>= 1
		a++
	}
	ab := nf(256).Mul(big.NewFloat(float64(a)), bf(y, 64)) // exact
	if !ab.IsInt() {
		return 0, false
	}
	ay, _ := ab.Int64()
	if m == 1 {
		switch {
		case ay > 1024:
			return math.Inf(1), true
		case ay < -1075:
			return 0, true
		}
		v, _ := new(big.Float).SetMantExp(big.NewFloat(1), int(ay)).Float64()
		return v, true
	}
	if y <= 0 || y > 40 {
		return 0, false
	}
	// y = p/2^q
	q := 0
	for yy := y; yy != math.Trunc(yy); yy = float64(yy * 2) {
		q++
		if q > 5 {
			return 0, false
		}
	}
	p := int64(float64(y * float64(int64(1)<<q))) // exact
	z := new(big.Int).SetUint64(m)
	r := new(big.Int)
	for range q {
		r.Sqrt(z)
		if new(big.Int).Mul(r, r).Cmp(z) != 0 {
			return 0, false
		}
		z.Set(r)
	}
	z.Exp(z, big.NewInt(p), nil)
	v := new(big.Float).SetPrec(uint(z.BitLen()) + 1).SetInt(z)
	v.SetMantExp(v, int(ay))
	f, _ := v.Float64()
	return f, true
}

// The slow path of each function: its value for an argument the fast
// path could not round, by ziv and the evaluator above.

func slowExp(x float64) float64 {
	return ziv(func(prec uint) *big.Float { return bigExp(bf(x, 64), prec) })
}

func slowExpm1(x float64) float64 {
	return ziv(func(prec uint) *big.Float { return bigExpm1(x, prec) })
}

func slowLog(x float64) float64 {
	return ziv(func(prec uint) *big.Float { return bigLog(bf(x, 64), prec) })
}

func slowLog2(x float64) float64 {
	return ziv(func(prec uint) *big.Float {
		_, ln2 := bigConsts(prec + 80)
		v := bigLog(bf(x, 64), prec+8)
		return v.Quo(v, ln2)
	})
}

func slowLog1p(x float64) float64 {
	return ziv(func(prec uint) *big.Float { return bigLog1p(x, prec) })
}

func slowSin(x float64) float64 {
	return ziv(func(prec uint) *big.Float { s, _ := bigSinCos(x, prec); return s })
}

func slowCos(x float64) float64 {
	return ziv(func(prec uint) *big.Float { _, c := bigSinCos(x, prec); return c })
}

func slowTanh(x float64) float64 {
	return ziv(func(prec uint) *big.Float { return bigTanh(x, prec) })
}

func slowCosh(x float64) float64 {
	return ziv(func(prec uint) *big.Float { return bigCosh(x, prec) })
}

func slowErf(x float64) float64 {
	return ziv(func(prec uint) *big.Float { return bigErf(x, prec, false) })
}

func slowErfc(x float64) float64 {
	return ziv(func(prec uint) *big.Float { return bigErf(x, prec, true) })
}

// slowPow is |x|ʸ for x > 0 finite, y finite: exact when it is a dyadic
// rational (powExact), else by ziv.
func slowPow(x, y float64) float64 {
	if r, ok := powExact(x, y); ok {
		slowCalls.Add(1)
		return r
	}
	return ziv(func(prec uint) *big.Float { return bigPow(x, y, prec) })
}
