package elem

import (
	"math"
	"math/big"
	"math/bits"
	"sync"
)

// The trigonometric functions (method in the package documentation):
// x = k·π/2 + r, |r| ≲ π/4, by Cody–Waite for |x| < 2¹⁹ (π/2 as a 33-bit
// head and a double-double tail) and by Payne–Hanek beyond, or wherever
// Cody–Waite leaves |r| < 2⁻¹²; then r = a + s with a = j/64 from a table
// of sin a and cos a in double-double, |s| ≤ 1/128, and the addition
// formulas (A&S 4.3.16, 4.3.17) with the series of sin s and cos s − 1
// (A&S 4.3.65, 4.3.66).

const epsTrig = 0x1p-90

type trigTables struct {
	sin, cos [53][2]float64 // sin(j/64), cos(j/64)
	// π/2 = p1 + r1 + r2, p1 with 33 significant bits (k·p1 exact for
	// k < 2²⁰), and π/2 as a double-double for the Payne–Hanek result.
	p1, r1, r2   float64
	pio2h, pio2l float64
	twoOverPi    [25]uint64 // bits of 2/π after the binary point, 64 a word, one zero word first
	s3h, s3l     float64    // −1/3!
	s5h, s5l     float64    // 1/5!
	s7, s9, s11  float64    // −1/7!, 1/9!, −1/11!
	s13          float64    // 1/13!
	c4h, c4l     float64    // 1/4!
	c6h, c6l     float64    // −1/6!
	c8, c10, c12 float64    // 1/8!, −1/10!, 1/12!
	c14          float64    // −1/14!
}

var trigTab struct {
	once sync.Once
	t    trigTables
}

func getTrigTab() *trigTables {
	trigTab.once.Do(func() {
		t := &trigTab.t
		pi, _ := bigConsts(1800)
		const prec = 320
		for j := range t.sin {
			s, c := sinCosSeries(ratio(int64(j), 64), prec)
			t.sin[j][0], t.sin[j][1] = ddOf(s)
			t.cos[j][0], t.cos[j][1] = ddOf(c)
		}
		half := nf(prec).SetMantExp(pi, -1)
		t.p1 = roundBits(half, 33)
		rest := nf(prec).Sub(half, big.NewFloat(t.p1))
		t.r1, t.r2 = ddOf(rest)
		t.pio2h, t.pio2l = ddOf(half)
		// 2/π to 24·64 bits after the point: ⌊2/π·2¹⁵³⁶⌋.
		top := nf(1700).Quo(big.NewFloat(2), nf(1700).Set(pi))
		top.SetMantExp(top, 24*64)
		z, _ := top.Int(nil)
		w := z.Bits() // little-endian words
		for i := range 24 {
			var v uint64
			if k := 23 - i; k < len(w) {
				v = uint64(w[k])
			}
			t.twoOverPi[1+i] = v
		}
		fact := func(n int64) *big.Float {
			f := nf(prec).SetInt64(1)
			for k := int64(2); k <= n; k++ {
				f.Mul(f, nf(64).SetInt64(k))
			}
			return f.Quo(big.NewFloat(1), f)
		}
		d := func(n int64, sign float64) (float64, float64) {
			h, l := ddOf(fact(n))
			return float64(sign * h), float64(sign * l)
		}
		one := func(n int64, sign float64) float64 {
			h, _ := fact(n).Float64()
			return float64(sign * h)
		}
		t.s3h, t.s3l = d(3, -1)
		t.s5h, t.s5l = d(5, 1)
		t.s7, t.s9, t.s11, t.s13 = one(7, -1), one(9, 1), one(11, -1), one(13, 1)
		t.c4h, t.c4l = d(4, 1)
		t.c6h, t.c6l = d(6, -1)
		t.c8, t.c10, t.c12, t.c14 = one(8, 1), one(10, -1), one(12, 1), one(14, -1)
	})
	return &trigTab.t
}

const (
	pio4       = 0x1.921fb54442d18p-1 // π/4 rounded
	twoOverPiD = 2 / math.Pi
	cwLimit    = 0x1p19
)

// reduceCW is the Cody–Waite reduction of 0 < x < 2¹⁹: k = round(x·2/π),
// r = x − k·p1 − k·r1 − k·r2 with x − k·p1 exact and the rest summed with
// error-free transformations. p1 + r1 + r2 is π/2 to 2⁻¹³⁹, so r has an
// absolute error below 2⁻¹¹⁷. ok is false when |r| < 2⁻¹², where that is
// not a relative 2⁻¹⁰⁵.
func reduceCW(t *trigTables, x float64) (q int, rh, rl float64, ok bool) {
	kf := math.RoundToEven(float64(x * twoOverPiD))
	a := x - float64(kf*t.p1)
	p, pe := twoProd(kf, t.r1)
	s, se := twoSum(a, -p)
	lo := (se - pe) - float64(kf*t.r2)
	rh, rl = twoSum(s, lo)
	return int(kf) & 3, rh, rl, math.Abs(rh) >= 0x1p-12
}

// get64 returns the 64 bits of 2/π after the binary point that start at
// bit i (the first fractional bit is i = 1; bits at i ≤ 0 are zero),
// for i ≥ −63.
func get64(t *trigTables, i int) uint64 {
	q := i - 1 + 64
	w, s := q>>6, uint(q&63)
	if s == 0 {
		return t.twoOverPi[w]
	}
	var next uint64
	if w+1 < len(t.twoOverPi) {
		next = t.twoOverPi[w+1]
	}
	return t.twoOverPi[w]<<s | next>>(64-s)
}

// reducePH is the Payne–Hanek reduction (Payne & Hanek 1983) of x ≥ 2⁻¹⁰
// finite: with x = M·2ᴱ (M an integer below 2⁵³), the bits of 2/π worth
// less than 4 after multiplication by x — a window of 256 bits starting
// at bit E − 1 — times M give x·2/π mod 4 as a 256-bit fixed-point number
// whose two top bits are the quadrant; the rest, rounded to the nearest
// integer, is r·2/π, normalised and converted to a double-double, and
// multiplied by π/2. The bits of 2/π past the window add less than 2⁻²⁰¹
// to x·2/π, and no float64 lies closer than 2⁻⁶³ to a multiple of π/2,
// so r keeps a relative error below 2⁻¹⁰³.
func reducePH(t *trigTables, x float64) (q int, rh, rl float64) {
	b := math.Float64bits(x)
	e := int(b>>52&0x7ff) - 1023 - 52
	m := b&(1<<52-1) | 1<<52
	i := e - 1
	w0, w1, w2, w3 := get64(t, i), get64(t, i+64), get64(t, i+128), get64(t, i+192)
	// The low 256 bits of m·(w0 w1 w2 w3).
	h3, f3 := bits.Mul64(m, w3)
	h2, l2 := bits.Mul64(m, w2)
	h1, l1 := bits.Mul64(m, w1)
	_, l0 := bits.Mul64(m, w0)
	f2, c := bits.Add64(l2, h3, 0)
	f1, c := bits.Add64(l1, h2, c)
	f0, _ := bits.Add64(l0, h1, c)
	q = int(f0 >> 62)
	f0 &= 1<<62 - 1
	neg := false
	if f0>>61 != 0 {
		// fraction ≥ 1/2: round up the quadrant; the magnitude of the
		// negative remainder is 2²⁵⁴ − fraction.
		q++
		neg = true
		var bw uint64
		f3, bw = bits.Sub64(0, f3, 0)
		f2, bw = bits.Sub64(0, f2, bw)
		f1, bw = bits.Sub64(0, f1, bw)
		f0, _ = bits.Sub64(1<<62, f0, bw)
	}
	// Normalise the 254-bit magnitude (value f·2⁻²⁵⁴) to 128 bits.
	shift := 0
	for f0 == 0 {
		f0, f1, f2, f3 = f1, f2, f3, 0
		shift += 64
	}
	lz := bits.LeadingZeros64(f0)
	u1, u2 := f0, f1
	if lz > 0 {
		u1 = f0<<lz | f1>>(64-lz)
		u2 = f1<<lz | f2>>(64-lz)
	}
	shift += lz
	// The fraction is (u1 + u2·2⁻⁶⁴)·2^(192−shift)·2⁻²⁵⁴, to 2⁻¹²⁷ relative.
	gh := float64(u1 &^ 0x7ff) // top 53 bits, exact
	gl := float64(u1&0x7ff) + float64(float64(u2>>11)*0x1p-53)
	gh, gl = fastTwoSum(gh, gl)
	sc := -62 - shift
	gh, gl = mulPow2(gh, sc), mulPow2(gl, sc)
	rh, rl = mulDD(gh, gl, t.pio2h, t.pio2l)
	if neg {
		rh, rl = -rh, -rl
	}
	return q & 3, rh, rl
}

// reduce returns the quadrant q (mod 4) and r with x = (4n + q)·π/2 + r,
// for x ≥ 0 finite.
func reduce(t *trigTables, x float64) (q int, rh, rl float64) {
	if x <= pio4 {
		return 0, x, 0
	}
	if x < cwLimit {
		if q, rh, rl, ok := reduceCW(t, x); ok {
			return q, rh, rl
		}
	}
	return reducePH(t, x)
}

// sinCosCore returns sin r and cos r for |r| ≤ 0.8 as double-doubles,
// relative error below 2⁻¹⁰⁰: r = a + s, a = j/64, |s| ≤ 1/128;
// sin s = s + s·z·Q(z) and cos s − 1 = z·(−1/2 + z·R(z)), z = s², each
// with the leading two coefficients of Q and R in double-double; then
// sin r = sin a + (cos a·sin s + sin a·(cos s − 1)) and
// cos r = cos a + (cos a·(cos s − 1) − sin a·sin s).
func sinCosCore(t *trigTables, rh, rl float64) (sh, sl, ch, cl float64) {
	neg := rh < 0
	if neg {
		rh, rl = -rh, -rl
	}
	j := int(float64(rh*64) + 0.5)
	a := float64(j) / 64
	xh, xl := twoSum(rh-a, rl) // rh − a exact
	zh, zl := sqrDD(xh, xl)
	// sin s
	w := t.s7 + float64(zh*(t.s9+float64(zh*(t.s11+float64(zh*t.s13)))))
	w1h, w1l := addDD1(t.s5h, t.s5l, float64(zh*w))
	w2h, w2l := mulDD(zh, zl, w1h, w1l)
	qh, ql := addDD(t.s3h, t.s3l, w2h, w2l)
	uh, ul := mulDD(zh, zl, qh, ql)
	vh, vl := mulDD(xh, xl, uh, ul)
	Sh, Sl := addDDn(xh, xl, vh, vl)
	// cos s − 1
	wc := t.c8 + float64(zh*(t.c10+float64(zh*(t.c12+float64(zh*t.c14)))))
	x1h, x1l := addDD1(t.c6h, t.c6l, float64(zh*wc))
	x2h, x2l := mulDD(zh, zl, x1h, x1l)
	Rh, Rl := addDD(t.c4h, t.c4l, x2h, x2l)
	y1h, y1l := mulDD(zh, zl, Rh, Rl)
	y2h, y2l := addDD1(y1h, y1l, -0.5)
	Ch, Cl := mulDD(zh, zl, y2h, y2l)
	if j == 0 {
		sh, sl = Sh, Sl
		ch, cl = addDD1(Ch, Cl, 1)
	} else {
		sa, ca := &t.sin[j], &t.cos[j]
		a1h, a1l := mulDD(ca[0], ca[1], Sh, Sl)
		a2h, a2l := mulDD(sa[0], sa[1], Ch, Cl)
		a1h, a1l = addDD(a1h, a1l, a2h, a2l)
		sh, sl = addDD(sa[0], sa[1], a1h, a1l)
		b1h, b1l := mulDD(ca[0], ca[1], Ch, Cl)
		b2h, b2l := mulDD(sa[0], sa[1], Sh, Sl)
		b1h, b1l = addDD(b1h, b1l, -b2h, -b2l)
		ch, cl = addDD(ca[0], ca[1], b1h, b1l)
	}
	if neg {
		sh, sl = -sh, -sl
	}
	return sh, sl, ch, cl
}

// sinCosDD returns sin x and cos x for finite x with |x| ≥ 2⁻²⁷ as
// double-doubles.
func sinCosDD(x float64) (sh, sl, ch, cl float64) {
	t := getTrigTab()
	q, rh, rl := reduce(t, math.Abs(x))
	s1, s2, c1, c2 := sinCosCore(t, rh, rl)
	switch q {
	case 0:
		sh, sl, ch, cl = s1, s2, c1, c2
	case 1:
		sh, sl, ch, cl = c1, c2, -s1, -s2
	case 2:
		sh, sl, ch, cl = -s1, -s2, -c1, -c2
	default:
		sh, sl, ch, cl = -c1, -c2, s1, s2
	}
	if x < 0 {
		sh, sl = -sh, -sl
	}
	return sh, sl, ch, cl
}

// Sin returns the sine of x (radians), correctly rounded for every finite
// x. Sin(±0) = ±0, Sin(±Inf) = NaN, Sin(NaN) = NaN.
func Sin(x float64) float64 {
	switch {
	case x != x || math.IsInf(x, 0):
		return math.NaN()
	case math.Abs(x) < 0x1p-27:
		// sin x = x − x³/6 + …, x³/6 below a quarter ulp of x.
		return x
	}
	sh, sl, _, _ := sinCosDD(x)
	if r, ok := finish(sh, sl, 0, epsTrig); ok {
		return r
	}
	return slowSin(x)
}

// Cos returns the cosine of x (radians), correctly rounded for every
// finite x. Cos(±Inf) = NaN, Cos(NaN) = NaN.
func Cos(x float64) float64 {
	switch {
	case x != x || math.IsInf(x, 0):
		return math.NaN()
	case math.Abs(x) < 0x1p-27:
		// cos x = 1 − x²/2 + …, x²/2 below half an ulp below 1.
		return 1
	}
	_, _, ch, cl := sinCosDD(x)
	if r, ok := finish(ch, cl, 0, epsTrig); ok {
		return r
	}
	return slowCos(x)
}

// Sincos returns Sin(x), Cos(x), sharing the argument reduction.
func Sincos(x float64) (sin, cos float64) {
	switch {
	case x != x || math.IsInf(x, 0):
		return math.NaN(), math.NaN()
	case math.Abs(x) < 0x1p-27:
		return x, 1
	}
	sh, sl, ch, cl := sinCosDD(x)
	var ok bool
	if sin, ok = finish(sh, sl, 0, epsTrig); !ok {
		sin = slowSin(x)
	}
	if cos, ok = finish(ch, cl, 0, epsTrig); !ok {
		cos = slowCos(x)
	}
	return sin, cos
}
