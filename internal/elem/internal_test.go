package elem

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// finish either declines or returns the float64 to which every point of
// its interval rounds: checked against big.Float rounding of the interval
// ends, on values built to lie near rounding boundaries — midpoints of
// normal and subnormal numbers, powers of two, the overflow threshold.
func TestFinishRoundsTheInterval(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 5))
	n := 200000
	if testing.Short() {
		n = 20000
	}
	declined := 0
	for range n {
		hi := logUniform(r, -60, 60, true)
		if r.IntN(8) == 0 {
			hi = math.Copysign(math.Ldexp(1, r.IntN(100)-50), hi) // a power of two
		}
		// lo near ±ulp/2, ±ulp/4 or 0, perturbed by a few 2⁻¹⁰⁰·|hi|
		ulp := math.Ldexp(1, exponent(hi)-52)
		base := []float64{0, 0.5, -0.5, 0.25, -0.25}[r.IntN(5)]
		lo := float64(base*ulp) + float64(float64(r.NormFloat64()*math.Abs(hi))*0x1p-100)
		k := 0
		switch r.IntN(4) {
		case 0:
			k = -1074 - exponent(hi) + r.IntN(60) // subnormal results
		case 1:
			k = 1023 - exponent(hi) // next to the overflow threshold
		}
		eps := math.Ldexp(1, -90-r.IntN(14))
		got, ok := finish(hi, lo, k, eps)
		if !ok {
			declined++
			continue
		}
		v := new(big.Float).SetPrec(2200).SetFloat64(hi)
		v.Add(v, big.NewFloat(lo))
		e := new(big.Float).SetPrec(2200).Abs(new(big.Float).SetFloat64(hi))
		e.Mul(e, big.NewFloat(eps))
		a := new(big.Float).SetPrec(2200).Sub(v, e)
		b := new(big.Float).SetPrec(2200).Add(v, e)
		a.SetMantExp(a, k)
		b.SetMantExp(b, k)
		fa, _ := a.Float64()
		fb, _ := b.Float64()
		ensure.True(t, sameFloat(fa, got) && sameFloat(fb, got),
			"finish(%v, %v, %d, %v) = %v, but the interval rounds to %v … %v", hi, lo, k, eps, got, fa, fb)
	}
	t.Logf("declined %d of %d (built to be close)", declined, n)
	expect.Greater(t, declined, n/20)
	expect.Less(t, declined, n/2)
}

// The erfcx table is built by Taylor steps from erfcx(27.75) down to 0,
// where erfcx(0) = 1: the chain's error after 152 steps is there to see.
func TestErfChainReachesOne(t *testing.T) {
	tab := getErfTab()
	d := new(big.Float).SetPrec(erfPrec).Sub(tab.chainZero, big.NewFloat(1))
	f, _ := d.Float64()
	t.Logf("erfcx(0) from the chain: 1 %+g", f)
	expect.Less(t, math.Abs(f), 0x1p-280)
	// and each node's value against the slow path's erfc (e^(x0²) erfc x0)
	for k := 0; k < erfNodes; k += 10 {
		x0 := tab.x0[k]
		ref := bigErf(x0, 200, true)
		x2 := new(big.Float).SetPrec(300).Mul(bf(x0, 64), bf(x0, 64))
		ref.Mul(ref, bigExp(x2, 200))
		expect.Less(t, relErr(tab.node[k].dd[0][0], tab.node[k].dd[0][1], 0, ref), 0x1p-104, "erfcx(%v)", x0)
	}
}

// The two reductions agree where both apply, and Payne–Hanek agrees with
// the math/big reduction at any magnitude.
func TestReductions(t *testing.T) {
	tab := getTrigTab()
	r := rand.New(rand.NewPCG(9, 9))
	n := 20000
	if testing.Short() {
		n = 2000
	}
	for range n {
		x := uniformIn(r, pio4, cwLimit)
		if r.IntN(2) == 0 {
			x = logUniform(r, 0, 18, false)
		}
		q1, h1, l1, ok := reduceCW(tab, x)
		if !ok {
			continue
		}
		q2, h2, l2 := reducePH(tab, x)
		ensure.Equal(t, q1, q2, "quadrant of %v", x)
		ref := new(big.Float).SetPrec(300).SetFloat64(h2)
		ref.Add(ref, big.NewFloat(l2))
		ensure.Less(t, relErr(h1, l1, 0, ref), 0x1p-100, "Cody–Waite and Payne–Hanek differ at %v", x)
	}
	pi, _ := bigConsts(1400)
	for range n / 10 {
		x := logUniform(r, -10, 1023, false)
		q, h, l := reducePH(tab, x)
		// x − (4j + q)·π/2 at enough precision
		w := uint(1300)
		half := new(big.Float).SetPrec(w).SetMantExp(pi, -1)
		k, _ := new(big.Float).SetPrec(w).Quo(bf(x, 64), half).Int(nil)
		rem := new(big.Float).SetPrec(w).Sub(bf(x, 64), new(big.Float).SetPrec(w).Mul(new(big.Float).SetInt(k), half))
		if rem.Cmp(new(big.Float).SetMantExp(half, -1)) > 0 { // round to the nearest multiple
			k.Add(k, big.NewInt(1))
			rem.Sub(rem, half)
		}
		ensure.Equal(t, int(new(big.Int).And(k, big.NewInt(3)).Int64()), q, "quadrant of %v", x)
		ensure.Less(t, relErr(h, l, 0, rem), 0x1p-100, "Payne–Hanek at %v", x)
	}
	// the double nearest a multiple of π/2 (6381956970095103·2⁷⁹⁷)
	x := 6381956970095103 * 0x1p797
	_, h, _ := reducePH(tab, x)
	expect.InDelta(t, 4.6871659242546276e-19, math.Abs(h), 1e-30)
}

// The tables against math/big: exp's 2^(i/64) and 2^(j/4096), the sine
// and cosine of j/64.
func TestTables(t *testing.T) {
	et := getExpTab()
	_, ln2 := bigConsts(400)
	for i := -32; i < 32; i++ {
		for _, c := range []struct {
			v     [2]float64
			d     [2]float64
			scale int
		}{{et.t1[i+32], et.d1[i+32], -6}, {et.t2[i+32], et.d2[i+32], -12}} {
			a := new(big.Float).SetPrec(300).SetMantExp(ln2, c.scale)
			a.Mul(a, big.NewFloat(float64(i)))
			ref := bigExp(a, 250)
			expect.Less(t, relErr(c.v[0], c.v[1], 0, ref), 0x1p-105)
			if i != 0 {
				ref.Sub(ref, big.NewFloat(1))
				expect.Less(t, relErr(c.d[0], c.d[1], 0, ref), 0x1p-105)
			}
		}
	}
	tt := getTrigTab()
	for j := range tt.sin {
		s, c := bigSinCos(float64(j)/64, 250)
		if j > 0 {
			expect.Less(t, relErr(tt.sin[j][0], tt.sin[j][1], 0, s), 0x1p-105)
		}
		expect.Less(t, relErr(tt.cos[j][0], tt.cos[j][1], 0, c), 0x1p-105)
	}
}

// powExact finds the exact cases, rounds them, and declines the rest.
func TestPowExact(t *testing.T) {
	for _, c := range []struct {
		x, y, want float64
		ok         bool
	}{
		{9, 0.5, 3, true},
		{2, -1075, 0, true},
		{2, -1074.5, 0, false}, // 2^-1074.5 is irrational
		{0.25, 0.25, math.Sqrt2 / 2, false},
		{3, 3, 27, true},
		{3, -1, 0, false},
		{1 << 40, 1.0 / 1024, 0, false},
		{65536, 0.0625, 2, true},
		{129140163, 0.03125, 0, false}, // 3¹⁷ is no 32nd power
	} {
		got, ok := powExact(c.x, c.y)
		expect.Equal(t, c.ok, ok, "powExact(%v, %v)", c.x, c.y)
		if ok {
			expect.Equal(t, c.want, got, "powExact(%v, %v)", c.x, c.y)
		}
	}
}

// The error-free transformations are exact.
func TestEFT(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	exact := func(a, b float64, mul bool) *big.Float {
		x, y := new(big.Float).SetPrec(2200).SetFloat64(a), new(big.Float).SetPrec(2200).SetFloat64(b)
		if mul {
			return x.Mul(x, y)
		}
		return x.Add(x, y)
	}
	sum := func(s, e float64) *big.Float { return exact(s, e, false) }
	for range 10000 {
		a, b := logUniform(r, -60, 60, true), logUniform(r, -60, 60, true)
		s, e := twoSum(a, b)
		ensure.Zero(t, sum(s, e).Cmp(exact(a, b, false)))
		p, f := twoProd(a, b)
		ensure.Zero(t, sum(p, f).Cmp(exact(a, b, true)))
		if math.Abs(a) < math.Abs(b) {
			a, b = b, a
		}
		s, e = fastTwoSum(a, b)
		ensure.Zero(t, sum(s, e).Cmp(exact(a, b, false)))
	}
}

// The two sets of constants agree, and round to math.Pi and math.Ln2.
func TestConstants(t *testing.T) {
	pi1, ln1 := bigConsts(100)
	pi2, ln2 := bigConsts(constBits)
	ensure.Equal(t, uint(2048), pi1.Prec())
	ensure.Equal(t, uint(constBits), pi2.Prec())
	for _, c := range [][2]*big.Float{{pi1, pi2}, {ln1, ln2}} {
		d := new(big.Float).SetPrec(constBits).Sub(c[0], c[1])
		expect.True(t, d.Sign() == 0 || d.MantExp(nil) <= c[1].MantExp(nil)-2047, "the sets differ by %g", d)
	}
	p, _ := pi1.Float64()
	l, _ := ln1.Float64()
	expect.Equal(t, math.Pi, p)
	expect.Equal(t, math.Ln2, l)
}

// ziv raises the precision until it decides: values within 2⁻³⁰⁰ of a
// midpoint need 512 bits, and round to the side they are on.
func TestZivEscalates(t *testing.T) {
	near := func(sign int) func(prec uint) *big.Float {
		return func(prec uint) *big.Float {
			// 1 + 2⁻⁵³ ± 2⁻³⁰⁰, rounded to prec + 64 bits like an evaluator
			v := new(big.Float).SetPrec(prec + 64).SetInt64(1<<53 + 1)
			v.SetMantExp(v, -53)
			d := new(big.Float).SetMantExp(big.NewFloat(float64(sign)), -300)
			return v.Add(v, d)
		}
	}
	before := slowCalls.Load()
	expect.Equal(t, 1+0x1p-52, ziv(near(1)))
	expect.Equal(t, 1.0, ziv(near(-1)))
	expect.Equal(t, uint64(2), slowCalls.Load()-before)
}
