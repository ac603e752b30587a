package num

import (
	"crypto/sha256"
	"encoding/binary"
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"runtime"
	"testing"

	"github.com/plumbref/plumb/internal/expect/ensure"
)

// productCase is one product of the tests: sizes, transpositions, scalars and
// the row strides (wider than the matrices, so that a write outside a
// matrix is seen).
type productCase struct {
	m, n, k     int
	tA, tB      bool
	alpha, beta float64
}

func (g productCase) String() string {
	return fmt.Sprintf("m=%d n=%d k=%d tA=%v tB=%v α=%g β=%g", g.m, g.n, g.k, g.tA, g.tB, g.alpha, g.beta)
}

// operands returns A, B and C with their strides, A and B random
// (randFloat: exponents in [−60, 60], so that sums cancel and products
// round) and C random, or NaN when β = 0 (which must not read it). Only
// math/rand/v2's integer and Float64 draws are used, which are the same on
// every architecture.
func (g productCase) operands(r *rand.Rand) (a []float64, lda int, b []float64, ldb int, c []float64, ldc int) {
	ar, ac, br, bc := g.m, g.k, g.k, g.n
	if g.tA {
		ar, ac = g.k, g.m
	}
	if g.tB {
		br, bc = g.n, g.k
	}
	lda, ldb, ldc = ac+2, bc+1, g.n+3
	a, b, c = make([]float64, max(0, ar*lda-2)), make([]float64, max(0, br*ldb-1)), make([]float64, g.m*ldc)
	for i := range a {
		a[i] = randFloat(r)
	}
	for i := range b {
		b[i] = randFloat(r)
	}
	for i := range c {
		c[i] = randFloat(r)
		if g.beta == 0 && i%ldc < g.n {
			c[i] = math.NaN()
		}
	}
	return a, lda, b, ldb, c, ldc
}

// to32 rounds x to float32 with its exponent halved, so that no product or
// sum of the float32 tests overflows or underflows.
func to32(x []float64) []float32 {
	out := make([]float32, len(x))
	for i, v := range x {
		out[i] = float32(math.Ldexp(v, -math.Ilogb(v)/2))
		if v != v {
			out[i] = float32(v)
		}
	}
	return out
}

// tripleLoop is the definition MatrixProduct documents, written as plainly as it
// reads: for each element, β·c, then the products in ascending order.
func tripleLoop[T Float](g productCase, a []T, lda int, b []T, ldb int, c []T, ldc int) {
	alpha, beta := T(g.alpha), T(g.beta)
	for i := range g.m {
		for j := range g.n {
			var s T
			switch beta {
			case 0:
			case 1:
				s = c[i*ldc+j]
			default:
				s = T(beta * c[i*ldc+j])
			}
			for p := range g.k {
				var x, y T
				if g.tA {
					x = a[p*lda+i]
				} else {
					x = a[i*lda+p]
				}
				if g.tB {
					y = b[j*ldb+p]
				} else {
					y = b[p*ldb+j]
				}
				if alpha != 1 {
					x = T(alpha * x)
				}
				s += T(x * y)
			}
			c[i*ldc+j] = s
		}
	}
}

// at is element (i, j) of op(X) for X of row stride ld.
func at(x []float64, ld int, trans bool, i, j int) float64 {
	if trans {
		return x[j*ld+i]
	}
	return x[i*ld+j]
}

// productCases are the sizes of the tests: 1s, primes, the block sizes and one
// past them, in every transposition, with α = 1 and not, β = 0, 1 and
// neither; and random sizes.
func productCases(r *rand.Rand, random int) []productCase {
	sizes := [][3]int{{1, 1, 1}, {1, 1, 7}, {1, 5, 1}, {3, 1, 2}, {2, 4, 1}, {3, 5, 7}, {2, 4, panelDepth}, {2, 4, panelDepth + 1},
		{13, 17, 19}, {panelRows, panelCols, 3}, {panelRows + 1, panelCols + 1, 2*panelDepth + 3}, {1, 131, 263}, {97, 1, 5}, {67, 131, 0}}
	for range random {
		sizes = append(sizes, [3]int{1 + r.IntN(150), 1 + r.IntN(300), 1 + r.IntN(600)})
	}
	var cases []productCase
	for i, sz := range sizes {
		for t := range 4 {
			sc := [][2]float64{{1, 0}, {0.3, 1}, {1, -0.7}, {-1.5, 0}}[(i+t)%4]
			cases = append(cases, productCase{m: sz[0], n: sz[1], k: sz[2], tA: t&1 != 0, tB: t&2 != 0, alpha: sc[0], beta: sc[1]})
		}
	}
	return cases
}

// MatrixProduct and MatrixProductSerial are the triple loop of their documentation, bit for
// bit, in float64 and float32, and write nothing outside C's n columns.
func TestMatrixProductIsTheTripleLoop(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	random := 12
	if testing.Short() {
		random = 3
	}
	for _, g := range productCases(r, random) {
		a, lda, b, ldb, c0, ldc := g.operands(r)
		want := append([]float64(nil), c0...)
		tripleLoop(g, a, lda, b, ldb, want, ldc)
		for name, f := range map[string]func(bool, bool, int, int, int, float64, []float64, int, []float64, int, float64, []float64, int){"MatrixProduct": MatrixProduct[float64], "MatrixProductSerial": MatrixProductSerial[float64]} {
			c := append([]float64(nil), c0...)
			f(g.tA, g.tB, g.m, g.n, g.k, g.alpha, a, lda, b, ldb, g.beta, c, ldc)
			for i := range c {
				if math.Float64bits(c[i]) != math.Float64bits(want[i]) {
					t.Fatalf("%s %v: C[%d][%d] = %v; the triple loop gives %v", name, g, i/ldc, i%ldc, c[i], want[i])
				}
			}
		}
		a32, b32, c32 := to32(a), to32(b), to32(c0)
		want32 := append([]float32(nil), c32...)
		tripleLoop(g, a32, lda, b32, ldb, want32, ldc)
		c := append([]float32(nil), c32...)
		MatrixProduct(g.tA, g.tB, g.m, g.n, g.k, float32(g.alpha), a32, lda, b32, ldb, float32(g.beta), c, ldc)
		for i := range c {
			if math.Float32bits(c[i]) != math.Float32bits(want32[i]) {
				t.Fatalf("MatrixProduct float32 %v: C[%d][%d] = %v; the triple loop gives %v", g, i/ldc, i%ldc, c[i], want32[i])
			}
		}
	}
}

// The product is within the documented bound of the exact one, computed in
// math/big: γ_{k+3}·(|β·c| + Σ_p |α·a_ip·b_pj|), which covers the rounding
// of α·a, of each product, of each of the k additions and of β·c. The
// inputs' exponents span [−60, 60], so that the sums cancel.
func TestMatrixProductAccuracy(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	random := 4
	if testing.Short() {
		random = 1
	}
	const prec = 4000 // enough for any sum of these products, exactly
	exact := func(x float64) *big.Float { return new(big.Float).SetPrec(prec).SetFloat64(x) }
	worst := map[int]float64{}
	for _, g := range productCases(r, random) {
		if g.m*g.n*g.k > 400000 {
			continue // big.Float is slow; the triple-loop test covers the rest
		}
		a, lda, b, ldb, c0, ldc := g.operands(r)
		c := append([]float64(nil), c0...)
		MatrixProduct(g.tA, g.tB, g.m, g.n, g.k, g.alpha, a, lda, b, ldb, g.beta, c, ldc)
		a32, b32, c32 := to32(a), to32(b), to32(c0)
		cs := append([]float32(nil), c32...)
		MatrixProduct(g.tA, g.tB, g.m, g.n, g.k, float32(g.alpha), a32, lda, b32, ldb, float32(g.beta), cs, ldc)
		for _, bits := range []int{64, 32} {
			u := 0x1p-53
			A, B, C := a, b, c0
			if bits == 32 {
				u = 0x1p-24
				A, B, C = Convert[float64](a32), Convert[float64](b32), Convert[float64](c32)
			}
			alpha, beta := g.alpha, g.beta
			if bits == 32 {
				alpha, beta = float64(float32(alpha)), float64(float32(beta))
			}
			for i := range g.m {
				for j := range g.n {
					s := new(big.Float).SetPrec(prec)
					var mag float64
					if beta != 0 {
						ci := C[i*ldc+j]
						s.Mul(exact(beta), exact(ci))
						mag = math.Abs(beta * ci)
					}
					for p := range g.k {
						x, y := at(A, lda, g.tA, i, p), at(B, ldb, g.tB, p, j)
						s.Add(s, new(big.Float).SetPrec(prec).Mul(new(big.Float).SetPrec(prec).Mul(exact(alpha), exact(x)), exact(y)))
						mag += math.Abs(alpha * x * y)
					}
					got := c[i*ldc+j]
					if bits == 32 {
						got = float64(cs[i*ldc+j])
					}
					diff, _ := new(big.Float).Sub(exact(got), s).Float64()
					n := float64(g.k + 3)
					bound := n * u / (1 - n*u) * mag
					if math.Abs(diff) > bound {
						t.Fatalf("float%d %v: C[%d][%d] = %v, off the exact product by %g; want at most %g", bits, g, i, j, got, diff, bound)
					}
					if mag > 0 {
						worst[bits] = max(worst[bits], math.Abs(diff)/mag/u)
					}
				}
			}
		}
	}
	t.Logf("worst error over Σ|terms|, in units u: float64 %.2f, float32 %.2f", worst[64], worst[32])
}

// The parallel MatrixProduct gives the same bits for every GOMAXPROCS, and those of
// MatrixProductSerial, on a product of many blocks.
func TestMatrixProductSameBitsAnyGOMAXPROCS(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	g := productCase{m: 3*panelRows + 5, n: 4*panelCols + 3, k: panelDepth + 7, tA: true, alpha: 0.3, beta: 1}
	a, lda, b, ldb, c0, ldc := g.operands(r)
	want := append([]float64(nil), c0...)
	MatrixProductSerial(g.tA, g.tB, g.m, g.n, g.k, g.alpha, a, lda, b, ldb, g.beta, want, ldc)
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, procs := range []int{1, 2, 3, 8} {
		runtime.GOMAXPROCS(procs)
		c := append([]float64(nil), c0...)
		MatrixProduct(g.tA, g.tB, g.m, g.n, g.k, g.alpha, a, lda, b, ldb, g.beta, c, ldc)
		for i := range c {
			ensure.Equal(t, math.Float64bits(want[i]), math.Float64bits(c[i]), "GOMAXPROCS=%d: C[%d][%d]", procs, i/ldc, i%ldc)
		}
	}
}

// The same product gives the same bits on every architecture and build:
// the digest of a fixed product, float64 and float32, is written here. CI
// runs this test on amd64 (GOAMD64 v1 and v3), arm64 and s390x.
func TestMatrixProductSameBitsEverywhere(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 10))
	h := sha256.New()
	for _, g := range []productCase{
		{m: 67, n: 133, k: 265, alpha: 0.3, beta: -0.7}, // sizes past the blocks, fixed
		{m: 37, n: 41, k: 300, tA: true, tB: true, alpha: 1, beta: 0},
		{m: 3, n: 29, k: 70, tB: true, alpha: 0.3, beta: 1}, // fewer rows than fewRows: not packed
	} {
		a, lda, b, ldb, c, ldc := g.operands(r)
		for i := range c {
			if c[i] != c[i] {
				c[i] = 0
			}
		}
		c32 := to32(c)
		MatrixProduct(g.tA, g.tB, g.m, g.n, g.k, g.alpha, a, lda, b, ldb, g.beta, c, ldc)
		MatrixProduct(g.tA, g.tB, g.m, g.n, g.k, float32(g.alpha), to32(a), lda, to32(b), ldb, float32(g.beta), c32, ldc)
		for i := range c {
			_ = binary.Write(h, binary.LittleEndian, math.Float64bits(c[i]))
			_ = binary.Write(h, binary.LittleEndian, math.Float32bits(c32[i]))
		}
	}
	const want = "7ac7e71ca7758ba5d698d287bdf17f569be09cc8e6240e679b1c09bb3250307a"
	if got := fmt.Sprintf("%x", h.Sum(nil)); got != want {
		t.Errorf("%s: the digest of the fixed products is %s; want %s", runtime.GOARCH, got, want)
	}
}
