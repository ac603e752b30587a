// Package elem is the project's own elementwise functions: Exp, Expm1,
// Log, Log2, Log1p, Pow, Sin, Cos, Sincos, Tanh, Cosh, Erf and Erfc of a
// float64, each correctly rounded (to nearest, ties to even, gradual
// underflow and overflow included) for every argument, and therefore the
// same bits on every architecture and build. The math package's versions
// differ in the last bit between machines (assembly on some, multiply-adds
// fused by the compiler on arm64, ppc64le, s390x and amd64 with
// GOAMD64=v3) and, in places, by many ulps (see math_test.go); a
// reference implementation needs results that depend on nothing but the
// arguments.
//
// The code is pure Go: no assembly, and no product that the compiler may
// fuse into a multiply-add — every floating-point product is rounded
// explicitly with float64(…), which fusion_test.go checks in the source;
// math.FMA, correctly rounded on every architecture, appears only where
// the fused operation is meant (the error term of a product). Correct
// rounding makes the results independent even of that discipline: they
// are the unique nearest float64 of the exact value.
//
// # Method
//
// Each function has a fast path in double-double arithmetic (a value is an
// unevaluated sum hi + lo of two float64, about 106 bits; error-free sums
// by Knuth's TwoSum, TAOCP vol. 2, §4.2.2, Theorem B, and Dekker's
// FastTwoSum; products by Dekker's 1971 double-length multiplication, "A
// floating-point technique for extending the available precision", with
// the error term from one fused multiply-add; the relative error bounds of
// double-double sums and products as in Joldes, Muller & Popescu 2017,
// "Tight and rigorous error bounds for basic building blocks of
// double-word arithmetic"). The fast path's result comes with a relative
// error bound eps (2⁻⁹² to 2⁻⁸⁶, each at least 2⁹ above the largest error
// measured in accuracy_test.go); the rounding test of Ziv 1991 ("Fast
// evaluation of elementary mathematical functions with correctly rounded
// last bit", ACM TOMS 17(3)) returns the rounded value when the whole
// interval of radius eps rounds to it, in the normal or the subnormal
// range. Otherwise — for about 2⁻³⁶ of random arguments (2⁻³² for Pow),
// and for the published hard-to-round cases — the slow path evaluates the
// function again in math/big at 128 bits and more, doubling the precision
// until the interval of its own error bound rounds unambiguously. π and
// ln 2 are computed once each, lazily, to 2048 bits and, should a slow
// path need more, to 8192: π/4 = 4·arctan(1/5) − arctan(1/239) and ln 2 =
// 2·atanh(1/3), each by its series (A&S 4.4.42 and 4.1.27; A&S is
// Abramowitz & Stegun, eds., 1964, "Handbook of Mathematical Functions",
// cited by equation number throughout). The only values on which no
// precision decides are exact midpoints between two float64; among these
// functions only xʸ can take them, and Pow computes its exact dyadic
// results exactly. The tables the fast paths use are computed in math/big
// at the first call of a function (about 8 ms for Erf and Erfc, 1 to 2 ms
// for the others, natively).
//
// Exp and Expm1: x = n·ln2/4096 + r with a three-part Cody–Waite split of
// ln2/4096 (Cody & Waite 1980, "Software Manual for the Elementary
// Functions"), n = 4096m + 64i + j, and eˣ = 2ᵐ · 2^(i/64) · 2^(j/4096) ·
// eʳ from two tables of 64 double-double entries (Tang 1989,
// "Table-driven implementation of the exponential function in IEEE
// floating-point arithmetic", ACM TOMS 15(2), here with two levels);
// eʳ − 1 for |r| ≤ 2⁻¹³·⁴ by its series (A&S 4.2.1) to r⁸/8!. Expm1 near 0
// uses (T − 1) + T·(eʳ − 1) with T − 1 tabulated, which does not cancel.
//
// Log, Log2 and Log1p: x = 2ᵉ·m with m in [√2/2, √2); a double seed y₀ ≈
// ln m from 2·atanh((m−1)/(m+1)) (A&S 4.1.27) to 2⁻⁴⁵, then one Newton
// step ln m = y₀ + ln(1 + t), t = (m − 1) + m·(e^(−y₀) − 1) from Expm1's
// double-double core and ln(1+t) = t − t²/2 (A&S 4.1.24); plus e·ln 2
// with ln 2 in three parts. Log2 divides by ln 2 in double-double and is
// exact for powers of two; Log1p forms 1 + x exactly as a double-double.
//
// Pow: xʸ = e^(y·ln x) with ln x from Log's double-double path and y·ln x
// as a double-double fed to Exp's core; special cases as math.Pow (C99
// Annex F), a negative base with an integral exponent allowed. Exact
// results: x = X·2ᵃ, X odd, and xʸ dyadic only for X = 1 with a·y
// integral, or y = p/2^q > 0 with X a perfect 2^q-th power; these are
// computed exactly in math/big and rounded.
//
// Sin, Cos and Sincos: x = k·π/2 + r by Cody–Waite (π/2 as a 33-bit head
// and a double-double tail) for |x| < 2¹⁹, and by Payne–Hanek beyond
// (Payne & Hanek 1983, "Radian reduction for trigonometric functions",
// ACM SIGNUM Newsletter 18(1)): 256 bits of 2/π selected by the exponent
// of x, multiplied by its integer mantissa in 64-bit words, whose low
// bits are x·2/π mod 4; also wherever Cody–Waite leaves |r| < 2⁻¹², where
// its absolute error would be large relatively. Then r = a + s with
// a = j/64, sin a and cos a tabulated in double-double, |s| ≤ 1/128, the
// series of sin s and cos s − 1 (A&S 4.3.65, 4.3.66) to s¹³ and s¹⁴, and
// the addition formulas (A&S 4.3.16, 4.3.17).
//
// Tanh and Cosh: tanh|x| = t/(t + 2) with t = e^(2|x|) − 1 from Expm1's
// core (from A&S 4.5.3), a quotient of positive terms; cosh x =
// (e^|x| + e^−|x|)/2 (A&S 4.5.2) with e^|x| from Exp's core and its
// reciprocal in double-double.
//
// Erf and Erfc: for |x| < 1/16 the series erf x = (2/√π) Σ
// (−1)ⁿx^(2n+1)/(n!(2n+1)) (A&S 7.1.5) to eleven terms. For 1/16 ≤ x < 28,
// erfc x = e^(−x²)·erfcx(x) with e^(−x²) from Exp's core applied to the
// exact double-double x², and erfcx(x) = e^(x²)·erfc x from 151 Taylor
// polynomials of 20 terms (the first 10 coefficients in double-double)
// centred on nodes 1/16 apart below 4, 1/8 to 8, 1/4 to 16 and 1/2 to 28.
// erfcx satisfies y' = 2xy − 2/√π (from erfc' = −(2/√π)e^(−x²)), so its
// Taylor coefficients at x₀ obey (n+1)aₙ₊₁ = 2x₀aₙ + 2aₙ₋₁; the table is
// built at 320 bits from erfcx(27.75) by the asymptotic series (A&S
// 7.1.23) and then node to node downwards by the Taylor series — the
// direction in which the recurrence's other solution, e^(x²), decays; the
// chain reaches erfcx(0) = 1 to 2⁻³¹⁸. Then erf x = 1 − erfc x for
// 1/16 ≤ |x| < 6, erfc x = 1 − erf x for |x| < 1/16 and erfc x =
// 2 − erfc|x| for x ≤ −1/16. The slow path sums erf x = (2/√π)e^(−x²) Σ
// 2ⁿx^(2n+1)/(1·3⋯(2n+1)) (A&S 7.1.6), whose terms are all positive, and
// forms 1 − erf x with as many extra bits as the bound of A&S 7.1.13 says
// the subtraction cancels (over a thousand near x = 27).
//
// # Special cases
//
// Those of the math package: NaN gives NaN; Exp(+Inf) = +Inf, Exp(−Inf) =
// 0; Expm1(−Inf) = −1; Log(0) = Log2(0) = −Inf, Log(x < 0) = NaN,
// Log1p(−1) = −Inf, Log1p(x < −1) = NaN; Sin(±Inf) = Cos(±Inf) = NaN;
// Tanh(±Inf) = ±1, Cosh(±Inf) = +Inf; Erf(±Inf) = ±1, Erfc(+Inf) = 0,
// Erfc(−Inf) = 2; ±0 is kept by Expm1, Log1p, Sin, Tanh and Erf; Pow's
// cases are listed at Pow. Results beyond the range overflow to ±Inf and
// underflow, gradually, to ±0, as correct rounding has them.
//
// # Accuracy
//
// Correctly rounded, 0 ulp, for every argument: checked bit for bit
// against mpmath at 50 significant digits (testdata/elem, written by
// testdata/gen/elem.py: dense samples of each domain, special values and
// published hard-to-round cases) on amd64 with GOAMD64=v1 and v3, arm64,
// ppc64le and s390x; against the slow path on random and fuzzed
// arguments; and the fast paths' error bounds against math/big. (The slow
// path stops doubling at 4096 bits and returns its rounding there; the
// hardest known cases of these functions need fewer than 256.)
package elem
