package num

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
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
		require.Equal(t, a+b, s)
		require.Zero(t, exactSum(s, e).Cmp(exactSum(a, b)), "TwoSum(%g, %g) = %g + %g", a, b, s, e)
		if math.Abs(a) < math.Abs(b) {
			a, b = b, a
		}
		s, e = FastTwoSum(a, b)
		require.Zero(t, exactSum(s, e).Cmp(exactSum(a, b)), "FastTwoSum(%g, %g) = %g + %g", a, b, s, e)

		p, f := TwoProd(a, b)
		require.Equal(t, a*b, p)
		require.Zero(t, exactProd(a, b).Cmp(exactSum(p, f)), "TwoProd(%g, %g) = %g + %g", a, b, p, f)

		// float32: exponents within ±30, so that no error term underflows
		// (the one case the errors are not exact).
		a32, b32 := float32(math.Ldexp(a, -math.Ilogb(a)/2)), float32(math.Ldexp(b, -math.Ilogb(b)/2))
		s32, e32 := TwoSum(a32, b32)
		require.Zero(t, exactSum(float64(s32), float64(e32)).Cmp(exactSum(float64(a32), float64(b32))))
		p32, f32 := TwoProd(a32, b32)
		require.Zero(t, exactProd(float64(a32), float64(b32)).Cmp(exactSum(float64(p32), float64(f32))))
	}
	// A worked pair: 1 + 2⁻⁶⁰ rounds to 1 with error 2⁻⁶⁰, and
	// (1 + 2⁻³⁰)² = 1 + 2⁻²⁹ + 2⁻⁶⁰ rounds to 1 + 2⁻²⁹ with error 2⁻⁶⁰.
	s, e := TwoSum(1.0, 0x1p-60)
	assert.Equal(t, [2]float64{1, 0x1p-60}, [2]float64{s, e})
	p, f := TwoProd(1+0x1p-30, 1+0x1p-30)
	assert.Equal(t, [2]float64{1 + 0x1p-29, 0x1p-60}, [2]float64{p, f})
}

// An infinite or NaN result has error 0, so that a caller adding the error
// back does not turn an overflow into NaN.
func TestErrorFreeSpecialCases(t *testing.T) {
	inf, nan := math.Inf(1), math.NaN()
	for _, c := range [][2]float64{{inf, 1}, {math.MaxFloat64, math.MaxFloat64}, {nan, 1}, {inf, -inf}} {
		s, e := TwoSum(c[0], c[1])
		assert.Zero(t, e, "TwoSum%v", c)
		assert.True(t, math.IsInf(s, 0) || math.IsNaN(s))
		_, e = FastTwoSum(c[0], c[1])
		assert.Zero(t, e, "FastTwoSum%v", c)
		p, e := TwoProd(c[0], c[1]*2)
		assert.Zero(t, e, "TwoProd%v", c)
		assert.True(t, math.IsInf(p, 0) || math.IsNaN(p))
	}
}

// Gemm and GemmTiled agree with the plain triple loop, for every
// transposition and leading dimensions wider than the matrices, on sizes
// that cross GemmTiled's 64 × 192 tiles.
func TestGemm(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	for _, sz := range [][3]int{{1, 1, 1}, {3, 5, 7}, {70, 200, 9}, {65, 193, 130}} {
		m, n, k := sz[0], sz[1], sz[2]
		for _, tA := range []bool{false, true} {
			for _, tB := range []bool{false, true} {
				ar, ac, br, bc := m, k, k, n
				if tA {
					ar, ac = k, m
				}
				if tB {
					br, bc = n, k
				}
				lda, ldb, ldc := ac+2, bc+1, n+3
				a, b := make([]float64, ar*lda), make([]float64, br*ldb)
				for i := range a {
					a[i] = r.NormFloat64()
				}
				for i := range b {
					b[i] = r.NormFloat64()
				}
				at := func(i, p int) float64 { // op(A)[i][p]
					if tA {
						return a[p*lda+i]
					}
					return a[i*lda+p]
				}
				bt := func(p, j int) float64 {
					if tB {
						return b[j*ldb+p]
					}
					return b[p*ldb+j]
				}
				c0 := make([]float64, m*ldc)
				for i := range c0 {
					c0[i] = r.NormFloat64()
				}
				want := make([]float64, len(c0))
				for i := range m {
					for j := range n {
						var s float64
						for p := range k {
							s += at(i, p) * bt(p, j)
						}
						want[i*ldc+j] = 0.5*s + 2*c0[i*ldc+j]
					}
				}
				for name, f := range map[string]func(bool, bool, int, int, int, float64, []float64, int, []float64, int, float64, []float64, int){"Gemm": Gemm[float64], "GemmTiled": GemmTiled[float64]} {
					c := append([]float64(nil), c0...)
					f(tA, tB, m, n, k, 0.5, a, lda, b, ldb, 2, c, ldc)
					for i := range m {
						for j := range n {
							// k products and sums in any order: within k·2⁻⁵²
							// of the sum of magnitudes (Higham 2002, §3.1).
							var abs float64
							for p := range k {
								abs += math.Abs(at(i, p) * bt(p, j))
							}
							bound := float64(k+2) * 0x1p-52 * (0.5*abs + 2*math.Abs(c0[i*ldc+j]))
							require.InDelta(t, want[i*ldc+j], c[i*ldc+j], bound, "%s %v tA=%v tB=%v at (%d, %d)", name, sz, tA, tB, i, j)
						}
						for j := n; j < ldc && i*ldc+j < len(c); j++ {
							require.Equal(t, c0[i*ldc+j], c[i*ldc+j], "%s wrote outside the matrix", name)
						}
					}
				}
				// float32 through blas32: the product of the float32
				// inputs, within k + 2 float32 roundings of the sum of
				// magnitudes (Higham 2002, §3.1, with u = 2⁻²⁴).
				a32, b32, c32 := Convert[float32](a), Convert[float32](b), Convert[float32](c0)
				at32 := func(i, p int) float64 {
					if tA {
						return float64(a32[p*lda+i])
					}
					return float64(a32[i*lda+p])
				}
				bt32 := func(p, j int) float64 {
					if tB {
						return float64(b32[j*ldb+p])
					}
					return float64(b32[p*ldb+j])
				}
				c := append([]float32(nil), c32...)
				Gemm(tA, tB, m, n, k, float32(0.5), a32, lda, b32, ldb, 2, c, ldc)
				for i := range m {
					for j := range n {
						var s, abs float64
						for p := range k {
							x, y := at32(i, p), bt32(p, j)
							s += x * y
							abs += math.Abs(x * y)
						}
						w := 0.5*s + 2*float64(c32[i*ldc+j])
						bound := float64(k+2) * 0x1p-23 * (0.5*abs + 2*math.Abs(float64(c32[i*ldc+j])))
						require.InDelta(t, w, float64(c[i*ldc+j]), bound, "Gemm float32 %v tA=%v tB=%v at (%d, %d)", sz, tA, tB, i, j)
					}
				}
			}
		}
	}
}
