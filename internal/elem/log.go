package elem

import (
	"math"
	"math/big"
	"sync"
)

// The logarithms (method in the package documentation): x = 2ᵉ·m with m in
// [√2/2, √2); ln m = y₀ + ln(1+t) where y₀ is a double approximation of
// ln m (the series of A&S 4.1.27 to eight terms, error below 2⁻⁴⁵) and
// t = m·e^(−y₀) − 1 = (m − 1) + m·(e^(−y₀) − 1) comes from the
// double-double expm1Core: one Newton step on eʸ = m, whose correction
// t − t²/2 (A&S 4.1.24) is exact to 2⁻¹³⁰. Then e·ln 2 is added in
// double-double.

const (
	epsLog   = 0x1p-90
	epsLog2  = 0x1p-90
	epsLog1p = 0x1p-90
)

type logTables struct {
	// ln 2 = l1 + l2h + l2l, l1 with 42 significant bits so that e·l1 is
	// exact for |e| < 2¹¹.
	l1, l2h, l2l float64
	// 1/ln 2 as a double-double.
	il2h, il2l float64
}

var logTab struct {
	once sync.Once
	t    logTables
}

func getLogTab() *logTables {
	logTab.once.Do(func() {
		t := &logTab.t
		_, ln2 := bigConsts(336)
		t.l1 = roundBits(ln2, 42)
		t.l2h, t.l2l = ddOf(nf(320).Sub(ln2, big.NewFloat(t.l1)))
		t.il2h, t.il2l = ddOf(nf(320).Quo(big.NewFloat(1), ln2))
	})
	return &logTab.t
}

// logSeed returns ln m to about 2⁻⁴⁵ for m in [0.7, 1.42]: with s =
// (m−1)/(m+1), |s| < 0.172, ln m = 2(s + s³/3 + … + s¹⁵/15).
func logSeed(m float64) float64 {
	s := (m - 1) / (m + 1)
	z := float64(s * s)
	p := 1.0 / 15
	p = 1.0/13 + float64(z*p)
	p = 1.0/11 + float64(z*p)
	p = 1.0/9 + float64(z*p)
	p = 1.0/7 + float64(z*p)
	p = 1.0/5 + float64(z*p)
	p = 1.0/3 + float64(z*p)
	p = 1 + float64(z*p)
	return float64(float64(2*s) * p)
}

// logCore returns ln m for m = mh + ml in [0.7, 1.42] given d = m − 1 as a
// double-double (exact): ln m = y₀ + t − t²/2 with t = d + m·expm1(−y₀).
// The absolute error is below 2⁻¹⁰³·|ln m| plus 2⁻¹⁰⁵·|d|: t is small
// (|t| < 2⁻⁴⁴) and carries the rounding errors of m·expm1(−y₀), which
// are relative to |y₀| ≈ |ln m|.
func logCore(mh, ml, dh, dl float64) (float64, float64) {
	y0 := logSeed(mh)
	eh, el, em := expm1Core(-y0)
	eh, el = mulPow2(eh, em), mulPow2(el, em)
	ph, pl := mulDD(mh, ml, eh, el)
	th, tl := addDD(dh, dl, ph, pl)
	corr := float64(float64(th*th) * -0.5)
	yh, yl := twoSum(y0, th)
	yl += tl + corr
	return fastTwoSum(yh, yl)
}

// splitLog returns e and m with x = 2ᵉ·m, m in [√2/2, √2), for x > 0
// finite (subnormal included); m is exact.
func splitLog(x float64) (int, float64) {
	e := 0
	if x < 0x1p-1022 {
		x = float64(x * 0x1p64)
		e = -64
	}
	b := math.Float64bits(x)
	e += int(b>>52&0x7ff) - 1023
	m := math.Float64frombits(b&^(0x7ff<<52) | 1023<<52) // in [1, 2)
	if m > math.Sqrt2 {
		m = float64(m * 0.5)
		e++
	}
	return e, m
}

// addELn2 returns e·ln 2 + (yh + yl) in double-double (the sum cancels at
// most one bit when e ≠ 0, since |ln m| ≤ ln2/2).
func addELn2(t *logTables, e int, yh, yl float64) (float64, float64) {
	if e == 0 {
		return yh, yl
	}
	fe := float64(e)
	a := float64(fe * t.l1) // exact
	p, pe := twoProd(fe, t.l2h)
	hh, hl := fastTwoSum(a, p)
	hl += pe + float64(fe*t.l2l)
	return addDD(hh, hl, yh, yl)
}

// logDD returns ln x for x > 0 finite as a double-double, relative error
// below 2⁻¹⁰², and the split (e, m) it used.
func logDD(x float64) (h, l float64, e int, m float64) {
	t := getLogTab()
	e, m = splitLog(x)
	yh, yl := logCore(m, 0, m-1, 0) // m − 1 exact (Sterbenz)
	h, l = addELn2(t, e, yh, yl)
	return h, l, e, m
}

// logEdge gives a logarithm's value where x alone decides it: NaN and +Inf
// return themselves, x < 0 gives NaN, ±0 gives −Inf.
func logEdge(x float64) (float64, bool) {
	switch {
	case x != x || x == math.Inf(1):
		return x, true
	case x < 0:
		return math.NaN(), true
	case x == 0:
		return math.Inf(-1), true
	}
	return 0, false
}

// Log returns the natural logarithm of x, correctly rounded. Log(+Inf) =
// +Inf, Log(±0) = −Inf, Log(x < 0) = NaN, Log(NaN) = NaN, Log(1) = +0.
func Log(x float64) float64 {
	if r, ok := logEdge(x); ok {
		return r
	}
	if x == 1 {
		return 0
	}
	h, l, _, _ := logDD(x)
	if r, ok := finish(h, l, 0, epsLog); ok {
		return r
	}
	return slowLog(x)
}

// Log2 returns the binary logarithm of x, correctly rounded; exact for
// powers of two. Special cases as Log.
func Log2(x float64) float64 {
	if r, ok := logEdge(x); ok {
		return r
	}
	h, l, exact := log2DD(x)
	if exact {
		return h
	}
	if r, ok := finish(h, l, 0, epsLog2); ok {
		return r
	}
	return slowLog2(x)
}

// log2DD returns log₂ x for x > 0 finite as a double-double: e + ln m/ln 2
// (exact, and true, for a power of two).
func log2DD(x float64) (h, l float64, exact bool) {
	t := getLogTab()
	e, m := splitLog(x)
	if m == 1 {
		return float64(e), 0, true
	}
	yh, yl := logCore(m, 0, m-1, 0)
	qh, ql := mulDD(yh, yl, t.il2h, t.il2l)
	h, l = addDD(float64(e), 0, qh, ql)
	return h, l, false
}

// log1pDD returns ln(1+x) for x > −1 finite, |x| ≥ 2⁻⁶⁰, as a
// double-double.
func log1pDD(x float64) (float64, float64) {
	t := getLogTab()
	// 1 + x = ah + al exactly, scaled to m in [√2/2, √2).
	ah, al := twoSum(1, x)
	e, mh := splitLog(ah)
	ml := mulPow2(al, -e)
	var dh, dl float64
	if e == 0 {
		dh, dl = x, 0 // m − 1 = x exactly
		mh, ml = ah, al
	} else {
		dh, dl = twoSum(mh-1, ml) // mh − 1 exact (Sterbenz)
	}
	yh, yl := logCore(mh, ml, dh, dl)
	return addELn2(t, e, yh, yl)
}

// Log1p returns ln(1+x), correctly rounded, accurate for x near 0.
// Log1p(+Inf) = +Inf, Log1p(±0) = ±0, Log1p(−1) = −Inf, Log1p(x < −1) =
// NaN, Log1p(NaN) = NaN.
func Log1p(x float64) float64 {
	switch {
	case x != x || x == math.Inf(1):
		return x
	case x < -1:
		return math.NaN()
	case x == -1:
		return math.Inf(-1)
	case math.Abs(x) < 0x1p-60:
		// ln(1+x) = x − x²/2 + …: x²/2 is below a quarter ulp of x.
		return x
	}
	h, l := log1pDD(x)
	if r, ok := finish(h, l, 0, epsLog1p); ok {
		return r
	}
	return slowLog1p(x)
}
