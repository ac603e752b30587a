package elem

import (
	"math"
	"math/big"
	"sync"
)

// The exponential family (method in the package documentation): x =
// n·ln2/4096 + r with n = 4096m + 64i + j, i and j in [−32, 31], so that
// eˣ = 2ᵐ · 2^(i/64) · 2^(j/4096) · eʳ with |r| ≤ ln2/8192 (Tang 1989's
// table-driven reduction, here with two tables of 64 double-double
// entries and a Cody–Waite split of ln2/4096).

const (
	epsExp   = 0x1p-92 // relative error bound of expCore (measured below 2⁻¹⁰²)
	epsExpm1 = 0x1p-90
)

type expTables struct {
	t1, t2 [64][2]float64 // 2^(i/64), 2^(j/4096) for i, j = index − 32
	d1, d2 [64][2]float64 // the same minus one
	// ln2/4096 = l1 + l2h + l2l, l1 with 30 significant bits so that n·l1
	// is exact for |n| < 2²³.
	l1, l2h, l2l float64
	c6h, c6l     float64 // 1/6
	c24h, c24l   float64 // 1/24
	c120         float64 // 1/120, 1/720, 1/5040, 1/40320
	c720, c5040  float64
	c40320       float64
}

var expTab struct {
	once sync.Once
	t    expTables
}

// ddOf splits v into hi + lo, hi = v rounded to float64, lo the remainder
// rounded: |v − (hi+lo)| ≤ 2⁻¹⁰⁶·|v|.
func ddOf(v *big.Float) (hi, lo float64) {
	hi, _ = v.Float64()
	r := new(big.Float).SetPrec(v.Prec()+64).Sub(v, big.NewFloat(hi))
	lo, _ = r.Float64()
	return hi, lo
}

// roundBits returns v rounded to the nearest float64 of at most n
// significant bits.
func roundBits(v *big.Float, n uint) float64 {
	f, _ := new(big.Float).SetPrec(n).Set(v).Float64()
	return f
}

// ratio returns p/q as a big.Float of 256 bits.
func ratio(p, q int64) *big.Float {
	return nf(256).Quo(nf(256).SetInt64(p), nf(256).SetInt64(q))
}

func getExpTab() *expTables {
	expTab.once.Do(func() {
		t := &expTab.t
		const prec = 320
		// c = 2^(1/4096) by twelve square roots of 2.
		c := nf(prec).SetInt64(2)
		for range 12 {
			c.Sqrt(c)
		}
		fill := func(tab, dtab *[64][2]float64, step *big.Float) {
			inv := nf(prec).Quo(big.NewFloat(1), step)
			pos, neg := nf(prec).SetInt64(1), nf(prec).SetInt64(1)
			for k := 0; k <= 32; k++ {
				if k < 32 {
					tab[32+k][0], tab[32+k][1] = ddOf(pos)
					dtab[32+k][0], dtab[32+k][1] = ddOf(nf(prec).Sub(pos, big.NewFloat(1)))
				}
				tab[32-k][0], tab[32-k][1] = ddOf(neg)
				dtab[32-k][0], dtab[32-k][1] = ddOf(nf(prec).Sub(neg, big.NewFloat(1)))
				pos.Mul(pos, step)
				neg.Mul(neg, inv)
			}
		}
		fill(&t.t2, &t.d2, c)
		c64 := nf(prec).Set(c)
		for range 6 {
			c64.Mul(c64, c64)
		}
		fill(&t.t1, &t.d1, c64)
		_, ln2 := bigConsts(prec + 16)
		l := nf(prec).SetMantExp(ln2, -12)
		t.l1 = roundBits(l, 30)
		t.l2h, t.l2l = ddOf(nf(prec).Sub(l, big.NewFloat(t.l1)))
		t.c6h, t.c6l = ddOf(ratio(1, 6))
		t.c24h, t.c24l = ddOf(ratio(1, 24))
		t.c120, _ = ratio(1, 120).Float64()
		t.c720, _ = ratio(1, 720).Float64()
		t.c5040, _ = ratio(1, 5040).Float64()
		t.c40320, _ = ratio(1, 40320).Float64()
	})
	return &expTab.t
}

// invLn2x4096 is 4096/ln 2 to double precision; its error only moves n.
const invLn2x4096 = 4096 / math.Ln2

// expReduce returns n = round((xh+xl)·4096/ln2) and r = xh + xl − n·ln2/4096
// as a double-double, for |xh| < 2¹⁰ and |xl| ≤ 2⁻⁴⁰. The products n·l1
// are exact; the rest is summed with error-free transformations, leaving
// an absolute error below 2⁻¹²⁰ in r.
func expReduce(t *expTables, xh, xl float64) (n int, rh, rl float64) {
	kf := math.RoundToEven(float64(xh * invLn2x4096))
	a, ae := twoSum(xh, -float64(kf*t.l1))
	p, pe := twoProd(kf, t.l2h)
	s, se := twoSum(a, -p)
	s, e2 := twoSum(s, xl)
	lo := (((se + e2) + ae) - pe) - float64(kf*t.l2l)
	rh, rl = twoSum(s, lo)
	return int(kf), rh, rl
}

// expSplit returns m, i, j with n = 4096m + 64i + j, i and j in [−32, 31].
func expSplit(n int) (m, i, j int) {
	j = ((n + 32) & 63) - 32
	n1 := (n - j) >> 6
	i = ((n1 + 32) & 63) - 32
	return (n1 - i) >> 6, i, j
}

// expPoly returns eʳ − 1 for |r| ≤ 2⁻¹³·⁴ as a double-double: r + r²/2 +
// r³·(1/6 + r·(1/24 + r·q(r))) (A&S 4.2.1 to the term r⁸/8!), with 1/6
// and 1/24 in double-double (a double 1/24, or a double r·(1/24 + …),
// would leave 2⁻⁶⁸ in the bracket and 2⁻⁹⁷ in the result). Relative
// error below 2⁻¹⁰⁴.
func expPoly(t *expTables, rh, rl float64) (float64, float64) {
	r2h, r2l := sqrDD(rh, rl)
	q := t.c120 + float64(rh*(t.c720+float64(rh*(t.c5040+float64(rh*t.c40320)))))
	wh, wl := addDD1(t.c24h, t.c24l, float64(rh*q))
	vh, vl := mulDD(rh, rl, wh, wl)
	ch, cl := addDDn(t.c6h, t.c6l, vh, vl)
	r3h, r3l := mulDD(r2h, r2l, rh, rl)
	uh, ul := mulDD(r3h, r3l, ch, cl)
	ph, pl := addDDn(rh, rl, float64(r2h*0.5), float64(r2l*0.5))
	return addDDn(ph, pl, uh, ul)
}

// expCore returns eˣ for x = xh + xl (|xh| < 2¹⁰, |xl| ≤ 2⁻⁴⁰) as
// (h + l)·2ᵐ with h near 1, relative error below epsExp.
func expCore(xh, xl float64) (h, l float64, m int) {
	t := getExpTab()
	n, rh, rl := expReduce(t, xh, xl)
	m, i, j := expSplit(n)
	ph, pl := expPoly(t, rh, rl)
	a, b := &t.t1[i+32], &t.t2[j+32]
	th, tl := mulDD(a[0], a[1], b[0], b[1])
	uh, ul := mulDD(th, tl, ph, pl)
	h, l = addDDn(th, tl, uh, ul)
	return h, l, m
}

// expm1Core returns eˣ − 1 for |x| < 2¹⁰ as (h + l)·2ᵐ. For |x| below
// about ln2/2 (m = 0 in the split of n) it is (T − 1) + T·(eʳ − 1), T =
// 2^(i/64)·2^(j/4096), with T − 1 from the tables minus one, so that no
// cancellation occurs (T − 1 and T·(eʳ−1) differ in sign only when
// |T − 1| ≥ 2|T·(eʳ−1)|); elsewhere eˣ·2⁻ᵐ − 2⁻ᵐ, which cancels at most
// two bits.
func expm1Core(x float64) (h, l float64, m int) {
	t := getExpTab()
	n, rh, rl := expReduce(t, x, 0)
	m, i, j := expSplit(n)
	ph, pl := expPoly(t, rh, rl)
	if m == 0 {
		a, b := &t.t1[i+32], &t.t2[j+32]
		da, db := &t.d1[i+32], &t.d2[j+32]
		var th, tl, dh, dl float64
		switch {
		case i == 0 && j == 0:
			return ph, pl, 0
		case i == 0:
			th, tl, dh, dl = b[0], b[1], db[0], db[1]
		case j == 0:
			th, tl, dh, dl = a[0], a[1], da[0], da[1]
		default:
			th, tl = mulDD(a[0], a[1], b[0], b[1])
			// T − 1 = d1 + d2 + d1·d2
			ch, cl := mulDD(da[0], da[1], db[0], db[1])
			dh, dl = addDD(da[0], da[1], db[0], db[1])
			dh, dl = addDD(dh, dl, ch, cl)
		}
		uh, ul := mulDD(th, tl, ph, pl)
		h, l = addDD(dh, dl, uh, ul)
		return h, l, 0
	}
	a, b := &t.t1[i+32], &t.t2[j+32]
	th, tl := mulDD(a[0], a[1], b[0], b[1])
	uh, ul := mulDD(th, tl, ph, pl)
	h, l = addDDn(th, tl, uh, ul)
	if m < 110 {
		h, l = addDD1(h, l, -pow2(-m))
	}
	return h, l, m
}

// Exp returns eˣ, correctly rounded. Exp(+Inf) = +Inf, Exp(−Inf) = 0,
// Exp(NaN) = NaN; results beyond the float64 range overflow to +Inf and
// underflow (gradually) to 0.
func Exp(x float64) float64 {
	switch {
	case x != x:
		return x
	case x >= 710:
		return math.Inf(1)
	case x < -746:
		return 0
	}
	h, l, m := expCore(x, 0)
	if r, ok := finish(h, l, m, epsExp); ok {
		return r
	}
	return slowExp(x)
}

// Expm1 returns eˣ − 1, correctly rounded, accurate for x near 0.
// Expm1(+Inf) = +Inf, Expm1(−Inf) = −1, Expm1(±0) = ±0, Expm1(NaN) = NaN.
func Expm1(x float64) float64 {
	switch {
	case x != x:
		return x
	case x >= 710:
		return math.Inf(1)
	case x < -38:
		// eˣ < 2⁻⁵⁴·⁸: −1 + eˣ rounds to −1.
		return -1
	case math.Abs(x) < 0x1p-54:
		// eˣ − 1 = x + x²/2 + …, and x²/2 is below a quarter of an ulp of
		// x: the result rounds to x (±0 included).
		return x
	}
	h, l, m := expm1Core(x)
	if r, ok := finish(h, l, m, epsExpm1); ok {
		return r
	}
	return slowExpm1(x)
}
