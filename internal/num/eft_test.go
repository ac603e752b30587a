package num

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// exact returns x + y, or x·y, in exact (big) arithmetic.
func exactSum(x, y float64) *big.Float {
	return new(big.Float).SetPrec(2200).Add(big.NewFloat(x).SetPrec(2200), big.NewFloat(y).SetPrec(2200))
}

func exactProd(x, y float64) *big.Float {
	return new(big.Float).SetPrec(2200).Mul(big.NewFloat(x).SetPrec(2200), big.NewFloat(y).SetPrec(2200))
}

// randFloat draws a float64 of random sign, mantissa and an exponent in
// [-60, 60], so that sums cancel and products round.
func randFloat(r *rand.Rand) float64 {
	return math.Ldexp(r.Float64()+0.5, r.IntN(121)-60) * float64(1-2*r.IntN(2))
}

// s + e is a + b exactly, and s is the rounded sum: the definition of the
// error-free transformations (Knuth, TAOCP vol. 2, §4.2.2, Theorem B;
// Dekker 1971), checked in math/big.
func TestTwoSumIsExact(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	for range 20000 {
		a, b := randFloat(r), randFloat(r)
		s, e := TwoSum(a, b)
		ensure.Equal(t, a+b, s)
		ensure.Zero(t, exactSum(s, e).Cmp(exactSum(a, b)), "TwoSum(%g, %g) = %g + %g", a, b, s, e)
		if math.Abs(a) < math.Abs(b) {
			a, b = b, a
		}
		s, e = FastTwoSum(a, b)
		ensure.Zero(t, exactSum(s, e).Cmp(exactSum(a, b)), "FastTwoSum(%g, %g) = %g + %g", a, b, s, e)

		p, f := TwoProd(a, b)
		ensure.Equal(t, a*b, p)
		ensure.Zero(t, exactProd(a, b).Cmp(exactSum(p, f)), "TwoProd(%g, %g) = %g + %g", a, b, p, f)

		// float32: exponents within ±30, so that no error term underflows
		// (the one case the errors are not exact).
		a32, b32 := float32(math.Ldexp(a, -math.Ilogb(a)/2)), float32(math.Ldexp(b, -math.Ilogb(b)/2))
		s32, e32 := TwoSum(a32, b32)
		ensure.Zero(t, exactSum(float64(s32), float64(e32)).Cmp(exactSum(float64(a32), float64(b32))))
		p32, f32 := TwoProd(a32, b32)
		ensure.Zero(t, exactProd(float64(a32), float64(b32)).Cmp(exactSum(float64(p32), float64(f32))))
	}
	// A worked pair: 1 + 2⁻⁶⁰ rounds to 1 with error 2⁻⁶⁰, and
	// (1 + 2⁻³⁰)² = 1 + 2⁻²⁹ + 2⁻⁶⁰ rounds to 1 + 2⁻²⁹ with error 2⁻⁶⁰.
	s, e := TwoSum(1.0, 0x1p-60)
	expect.Equal(t, [2]float64{1, 0x1p-60}, [2]float64{s, e})
	p, f := TwoProd(1+0x1p-30, 1+0x1p-30)
	expect.Equal(t, [2]float64{1 + 0x1p-29, 0x1p-60}, [2]float64{p, f})
}

// An infinite or NaN result has error 0, so that a caller adding the error
// back does not turn an overflow into NaN.
func TestErrorFreeSpecialCases(t *testing.T) {
	inf, nan := math.Inf(1), math.NaN()
	for _, c := range [][2]float64{{inf, 1}, {math.MaxFloat64, math.MaxFloat64}, {nan, 1}, {inf, -inf}} {
		s, e := TwoSum(c[0], c[1])
		expect.Zero(t, e, "TwoSum%v", c)
		expect.True(t, math.IsInf(s, 0) || math.IsNaN(s))
		_, e = FastTwoSum(c[0], c[1])
		expect.Zero(t, e, "FastTwoSum%v", c)
		p, e := TwoProd(c[0], c[1]*2)
		expect.Zero(t, e, "TwoProd%v", c)
		expect.True(t, math.IsInf(p, 0) || math.IsNaN(p))
	}
}
