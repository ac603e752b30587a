package elem

import "math"

// Double-double arithmetic: a value is the unevaluated sum hi + lo of two
// float64, |lo| ≤ ulp(hi)/2 once normalized, about 106 significant bits.
// Every product that meets an addition is written float64(a*b), so that no
// architecture fuses it into a multiply-add; math.FMA appears only where
// the fused, correctly rounded operation is meant (the error of a product).

// twoSum returns s = fl(a+b) and e with s + e = a + b exactly (Knuth,
// TAOCP vol. 2, §4.2.2, Theorem B; six operations, no branch).
func twoSum(a, b float64) (s, e float64) {
	s = a + b
	bb := s - a
	e = (a - (s - bb)) + (b - bb)
	return s, e
}

// fastTwoSum is twoSum for |a| ≥ |b| or a = 0 (Dekker 1971, three
// operations).
func fastTwoSum(a, b float64) (s, e float64) {
	s = a + b
	e = b - (s - a)
	return s, e
}

// twoProd returns p = fl(a·b) and e with p + e = a·b exactly, barring
// underflow of e (Dekker 1971; the error term as one correctly rounded
// fused multiply-add, which math.FMA computes on every architecture).
func twoProd(a, b float64) (p, e float64) {
	p = float64(a * b)
	e = math.FMA(a, b, -p)
	return p, e
}

// mulDD returns (ah+al)·(bh+bl), relative error below 2⁻¹⁰⁴.
func mulDD(ah, al, bh, bl float64) (float64, float64) {
	p, e := twoProd(ah, bh)
	e += float64(ah*bl) + float64(al*bh)
	return fastTwoSum(p, e)
}

// mulDD1 returns (ah+al)·b, relative error below 2⁻¹⁰⁵.
func mulDD1(ah, al, b float64) (float64, float64) {
	p, e := twoProd(ah, b)
	e += float64(al * b)
	return fastTwoSum(p, e)
}

// sqrDD returns (ah+al)².
func sqrDD(ah, al float64) (float64, float64) {
	p, e := twoProd(ah, ah)
	e += float64(2 * float64(ah*al))
	return fastTwoSum(p, e)
}

// addDD returns (ah+al) + (bh+bl) with a relative error below 2⁻¹⁰⁴ even
// under cancellation (both parts summed with twoSum).
func addDD(ah, al, bh, bl float64) (float64, float64) {
	s, e := twoSum(ah, bh)
	t, f := twoSum(al, bl)
	e += t
	s, e = fastTwoSum(s, e)
	e += f
	return fastTwoSum(s, e)
}

// addDD1 returns (ah+al) + b, as addDD.
func addDD1(ah, al, b float64) (float64, float64) {
	s, e := twoSum(ah, b)
	e += al
	return fastTwoSum(s, e)
}

// divDD returns (ah+al)/(bh+bl), relative error below 2⁻¹⁰³: a quotient,
// its remainder computed exactly enough, and two corrections.
func divDD(ah, al, bh, bl float64) (float64, float64) {
	q1 := ah / bh
	ph, pl := mulDD1(bh, bl, q1)
	rh, rl := addDD(ah, al, -ph, -pl)
	q2 := rh / bh
	ph, pl = mulDD1(bh, bl, q2)
	rh, _ = addDD(rh, rl, -ph, -pl)
	q3 := rh / bh
	q1, q2 = fastTwoSum(q1, q2)
	return addDD1(q1, q2, q3)
}

// pow2 returns 2ᵏ for -1022 ≤ k ≤ 1023.
func pow2(k int) float64 {
	return math.Float64frombits(uint64(k+1023) << 52)
}

// mulPow2 returns x·2ᵏ, exact whenever the result is a float64 (it
// overflows to ±Inf like any product), for |k| up to a few thousand: the
// scaling goes in steps whose factors are normal numbers, so that only the
// last step can round.
func mulPow2(x float64, k int) float64 {
	for k > 1023 {
		x = float64(x * pow2(1023))
		k -= 1023
	}
	for k < -1022 {
		x = float64(x * pow2(-1022))
		k += 1022
	}
	return float64(x * pow2(k))
}

// exponent returns the unbiased binary exponent of a normal x ≠ 0:
// 2^e ≤ |x| < 2^(e+1).
func exponent(x float64) int {
	return int(math.Float64bits(x)>>52&0x7ff) - 1023
}

// finish is the rounding test (Ziv 1991): (hi+lo)·2ᵏ approximates a real
// value v with |v − (hi+lo)·2ᵏ| ≤ eps·|hi|·2ᵏ. If every real number of that
// interval rounds to the same float64 (round to nearest, ties to even,
// gradual underflow and overflow included), finish returns it and true;
// otherwise false, and the caller evaluates again more precisely. The
// scaled value hi must be a normal number well inside the range
// (|hi| ≥ 2⁻⁹⁰⁰), eps at least 2⁻¹⁰⁴.
func finish(hi, lo float64, k int, eps float64) (float64, bool) {
	hi, lo = fastTwoSum(hi, lo)
	if hi == 0 {
		return 0, lo == 0
	}
	err := float64(eps * math.Abs(hi))
	if exponent(hi)+k >= -1022 {
		// A normal result: the interval rounds to hi on the grid of
		// unbounded exponent. Doubling err covers the rounding of lo ± err.
		a, b := lo+float64(2*err), lo-float64(2*err)
		if hi+a != hi || hi+b != hi {
			return 0, false
		}
		return mulPow2(hi, k), true
	}
	// A subnormal result: round to the multiple of u = 2^(-1074-k), the
	// spacing of subnormal numbers in the scaled domain. |hi| < 2⁵²u, so
	// adding and subtracting c = 2⁵²u rounds |hi| to that grid exactly.
	sign := 1.0
	ah, bl := hi, lo
	if hi < 0 {
		sign, ah, bl = -1, -hi, -lo
	}
	u := pow2(-1074 - k)
	c := float64(u * 0x1p52)
	q := (ah + c) - c
	rem := (ah - q) + bl // ah − q is exact
	half := float64(u * 0.5)
	tol := float64(2*err) + float64(math.Abs(rem)*0x1p-50)
	switch {
	case rem+tol < half && rem-tol > -half:
	case rem-tol > half && rem+tol < float64(3*half):
		q += u
	case rem+tol < -half && rem-tol > float64(-3*half):
		q -= u
	default:
		return 0, false
	}
	return float64(sign * mulPow2(q, k)), true
}

// addDDn returns (ah+al) + (bh+bl) when the sum does not cancel (|a+b| at
// least about max(|a|, |b|)/2): relative error below 2⁻¹⁰⁴ then.
func addDDn(ah, al, bh, bl float64) (float64, float64) {
	s, e := twoSum(ah, bh)
	e += al + bl
	return fastTwoSum(s, e)
}
