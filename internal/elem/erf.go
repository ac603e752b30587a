package elem

import (
	"math"
	"math/big"
	"sync"
)

// The error functions (method in the package documentation). For
// |x| < 1/16, erf x = (2x/√π)·Σ (−1)ⁿx²ⁿ/(n!(2n+1)) (A&S 7.1.5) to eleven
// terms. For 1/16 ≤ x < 28, erfc x = e^(−x²)·erfcx(x), e^(−x²) from
// expCore of the exact double-double x², and erfcx = e^(x²)·erfc from a
// table of Taylor polynomials: 151 nodes x₀ (spacing 1/16 below 4, 1/8 to
// 8, 1/4 to 16, 1/2 to 28), each with 20 coefficients, the first 10 in
// double-double. erfcx solves y' = 2xy − 2/√π, so its Taylor coefficients
// obey (n+1)aₙ₊₁ = 2x₀aₙ + 2aₙ₋₁; the table is built once, at first use,
// in math/big at 320 bits, from erfcx(27.75) by its asymptotic series
// (A&S 7.1.23) and then node to node downwards by the Taylor series,
// the direction in which the other solution of the recurrence, e^(x²),
// decays. Then erf x = 1 − erfc x for 1/16 ≤ |x| < 6 (cancelling at most
// four bits), erfc x = 1 − erf x for |x| < 1/16 and 2 − erfc|x| for
// x ≤ −1/16.

const (
	epsErf  = 0x1p-88
	epsErfc = 0x1p-88

	erfNodes = 151
	erfK     = 20 // coefficients a node
	erfD     = 10 // of which in double-double
	erfPrec  = 320
)

type erfNode struct {
	dd   [erfD][2]float64 // a₀ … a₉
	tail [erfK - erfD]float64
}

type erfTables struct {
	node   [erfNodes]erfNode
	x0     [erfNodes]float64
	series [11][2]float64 // (−1)ⁿ/(n!(2n+1)), the last five low parts zero
	tsph   float64        // 2/√π
	tspl   float64
	// erfcx(0) as the chain of Taylor steps reaches it: 1 to about 2⁻³⁰⁰
	// (a check of the construction, for the tests).
	chainZero *big.Float
}

var erfTab struct {
	once sync.Once
	t    erfTables
}

// erfIndex returns the node of x in [1/16, 28) and its centre.
func erfIndex(x float64) (int, float64) {
	var k int
	var lo, h float64
	switch {
	case x < 4:
		k, lo, h = int(float64(x*16))-1, 0.0625, 0.0625
		return k, lo + float64(float64(float64(k)+0.5)*h)
	case x < 8:
		lo, h = 4, 0.125
		k = int(float64((x - lo) * 8))
		return 63 + k, lo + float64(float64(float64(k)+0.5)*h)
	case x < 16:
		lo, h = 8, 0.25
		k = int(float64((x - lo) * 4))
		return 95 + k, lo + float64(float64(float64(k)+0.5)*h)
	}
	lo, h = 16, 0.5
	k = int(float64((x - lo) * 2))
	return 127 + k, lo + float64(float64(float64(k)+0.5)*h)
}

// erfcxAsymptotic returns erfcx(x) = (1/(x√π))·Σ (−1)ᵐ(2m−1)!!/(2x²)ᵐ
// (A&S 7.1.23) for large x, summed while the terms decrease; the error is
// below the first omitted term.
func erfcxAsymptotic(x *big.Float, wp uint) *big.Float {
	z := nf(wp).Mul(x, x)
	z.SetMantExp(z, 1)
	sum := nf(wp).SetInt64(1)
	term := nf(wp).SetInt64(1)
	for m := int64(1); ; m++ {
		next := nf(wp).Mul(term, nf(64).SetInt64(2*m-1))
		next.Quo(next, z)
		next.Neg(next)
		if next.MantExp(nil) < sum.MantExp(nil)-int(wp)-8 {
			break
		}
		if new(big.Float).Abs(next).Cmp(new(big.Float).Abs(term)) >= 0 {
			panic("elem: asymptotic series of erfcx diverges before converging")
		}
		term = next
		sum.Add(sum, term)
	}
	d := nf(wp).Mul(x, bigSqrtPi(wp))
	return sum.Quo(sum, d)
}

func getErfTab() *erfTables {
	erfTab.once.Do(buildErfTab)
	return &erfTab.t
}

func buildErfTab() {
	t := &erfTab.t
	const wp = erfPrec
	for k := range erfNodes {
		switch {
		case k < 63:
			t.x0[k] = float64(2*k+3) / 32
		case k < 95:
			t.x0[k] = 4 + float64(2*(k-63)+1)/16
		case k < 127:
			t.x0[k] = 8 + float64(2*(k-95)+1)/8
		default:
			t.x0[k] = 16 + float64(2*(k-127)+1)/4
		}
	}
	sqrtPi := bigSqrtPi(wp)
	twoOverSqrtPi := nf(wp).Quo(big.NewFloat(2), sqrtPi)
	t.tsph, t.tspl = ddOf(twoOverSqrtPi)
	fact := big.NewInt(1)
	for n := range t.series {
		if n > 0 {
			fact.Mul(fact, big.NewInt(int64(n)))
		}
		d := nf(wp).SetInt(fact)
		d.Mul(d, nf(64).SetInt64(int64(2*n+1)))
		c := nf(wp).Quo(big.NewFloat(1), d)
		if n%2 == 1 {
			c.Neg(c)
		}
		t.series[n][0], t.series[n][1] = ddOf(c)
		if n > 5 {
			t.series[n][1] = 0
		}
	}
	v := erfcxAsymptotic(bf(t.x0[erfNodes-1], 64), wp)
	a := make([]*big.Float, 0, 256)
	for k := erfNodes - 1; k >= 0; k-- {
		x0 := bf(t.x0[k], 64)
		twoX := nf(wp).SetMantExp(x0, 1)
		var next float64 // the node below, or 0 after the last
		if k > 0 {
			next = t.x0[k-1]
		}
		step := bf(next-t.x0[k], 64) // exact, negative
		a = a[:0]
		a = append(a, v)
		a1 := nf(wp).Mul(twoX, v)
		a = append(a, a1.Sub(a1, twoOverSqrtPi))
		sum := nf(wp).Set(v)
		pw := nf(wp).SetInt64(1)
		small := 0
		for n := 1; ; n++ {
			pw.Mul(pw, step)
			term := nf(wp).Mul(a[n], pw)
			sum.Add(sum, term)
			if term.Sign() == 0 || term.MantExp(nil) < sum.MantExp(nil)-int(wp)-8 {
				small++
			} else {
				small = 0
			}
			if n >= erfK && small >= 4 {
				break
			}
			// (n+1)·aₙ₊₁ = 2x₀·aₙ + 2·aₙ₋₁
			an := nf(wp).Mul(twoX, a[n])
			an.Add(an, nf(wp).SetMantExp(a[n-1], 1))
			an.Quo(an, nf(64).SetInt64(int64(n+1)))
			a = append(a, an)
		}
		nd := &t.node[k]
		for n := range erfK {
			if n < erfD {
				nd.dd[n][0], nd.dd[n][1] = ddOf(a[n])
			} else {
				nd.tail[n-erfD], _ = a[n].Float64()
			}
		}
		v = sum
	}
	t.chainZero = v
}

// erfcxEval returns erfcx(x) for x in [1/16, 28) from the table, as a
// double-double with a relative error below 2⁻¹⁰².
func erfcxEval(t *erfTables, x float64) (float64, float64) {
	k, x0 := erfIndex(x)
	d := x - x0 // exact: x0 is a multiple of half the spacing
	nd := &t.node[k]
	p := nd.tail[erfK-erfD-1]
	for n := erfK - erfD - 2; n >= 0; n-- {
		p = nd.tail[n] + float64(p*d)
	}
	ph, pl := p, 0.0
	for n := erfD - 1; n >= 0; n-- {
		ph, pl = mulDD1(ph, pl, d)
		ph, pl = addDDn(nd.dd[n][0], nd.dd[n][1], ph, pl)
	}
	return ph, pl
}

// erfcPos returns erfc x for x in [1/16, 28) as (h + l)·2ᵐ.
func erfcPos(t *erfTables, x float64) (h, l float64, m int) {
	zh, zl := twoProd(x, x)
	eh, el, m := expCore(-zh, -zl)
	gh, gl := erfcxEval(t, x)
	h, l = mulDD(eh, el, gh, gl)
	return h, l, m
}

// erfSmall returns erf x for 2⁻⁶⁰ ≤ |x| < 1/16 as a double-double.
func erfSmall(t *erfTables, x float64) (float64, float64) {
	zh, zl := twoProd(x, x)
	s := &t.series
	p := s[10][0]
	for n := 9; n > 5; n-- {
		p = s[n][0] + float64(p*zh)
	}
	ph, pl := p, 0.0
	for n := 5; n >= 0; n-- {
		ph, pl = mulDD(ph, pl, zh, zl)
		ph, pl = addDDn(s[n][0], s[n][1], ph, pl)
	}
	ph, pl = mulDD1(ph, pl, x)
	return mulDD(ph, pl, t.tsph, t.tspl)
}

// erfDD returns erf x for 0 < |x| < 6 as (h + l)·2ᵏ.
func erfDD(x float64) (h, l float64, k int) {
	t := getErfTab()
	ax := math.Abs(x)
	switch {
	case ax < 0x1p-60:
		// erf x = (2/√π)·x·(1 − x²/3 + …), x²/3 below 2⁻¹²¹; scaled by
		// 2²⁰⁰ so that no product underflows.
		h, l = mulDD1(t.tsph, t.tspl, float64(x*0x1p200))
		return h, l, -200
	case ax < 0.0625:
		h, l = erfSmall(t, x)
		return h, l, 0
	}
	ch, cl, m := erfcPos(t, ax)
	ch, cl = mulPow2(ch, m), mulPow2(cl, m)
	h, l = addDD1(-ch, -cl, 1)
	if x < 0 {
		h, l = -h, -l
	}
	return h, l, 0
}

// erfcDD returns erfc x for 2⁻⁶⁰ ≤ |x|, −6 < x ≤ 27.3, as (h + l)·2ᵏ.
func erfcDD(x float64) (h, l float64, k int) {
	t := getErfTab()
	ax := math.Abs(x)
	switch {
	case ax < 0.0625:
		sh, sl := erfSmall(t, x)
		h, l = addDD1(-sh, -sl, 1)
		return h, l, 0
	case x > 0:
		return erfcPos(t, x)
	}
	ch, cl, m := erfcPos(t, ax)
	ch, cl = mulPow2(ch, m), mulPow2(cl, m)
	h, l = addDD1(-ch, -cl, 2)
	return h, l, 0
}

// Erf returns the error function of x, correctly rounded. Erf(±0) = ±0,
// Erf(±Inf) = ±1, Erf(NaN) = NaN.
func Erf(x float64) float64 {
	ax := math.Abs(x)
	switch {
	case x != x:
		return x
	case ax >= 6:
		// erfc 6 < 2⁻⁵⁴: erf rounds to ±1.
		return math.Copysign(1, x)
	case x == 0:
		return x
	}
	h, l, k := erfDD(x)
	if r, ok := finish(h, l, k, epsErf); ok {
		return r
	}
	return slowErf(x)
}

// Erfc returns the complementary error function 1 − erf x, correctly
// rounded, accurate where it is small. Erfc(+Inf) = 0, Erfc(−Inf) = 2,
// Erfc(NaN) = NaN; it underflows to 0 past x ≈ 27.226.
func Erfc(x float64) float64 {
	ax := math.Abs(x)
	switch {
	case x != x:
		return x
	case x > 27.3:
		// erfc 27.3 < 2⁻¹⁰⁸⁰: rounds to 0.
		return 0
	case x <= -6:
		// 2 − erfc 6 rounds to 2.
		return 2
	case ax < 0x1p-60:
		// 1 − (2/√π)x with |x| < 2⁻⁶⁰ rounds to 1.
		return 1
	}
	h, l, k := erfcDD(x)
	if r, ok := finish(h, l, k, epsErfc); ok {
		return r
	}
	return slowErfc(x)
}
