package norm

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
)

// layerFn runs the forward of one kind: LayerNorm with bias, or RMSNorm.
type layerFn func(x, w, b []float64, d int, o Options) []float64

func lnFwd(t *testing.T) layerFn {
	return func(x, w, b []float64, d int, o Options) []float64 {
		y, err := LayerNorm(x, d, w, b, o)
		ensure.NoError(t, err)
		return y
	}
}

func rmsFwd(t *testing.T) layerFn {
	return func(x, w, _ []float64, d int, o Options) []float64 {
		y, err := RMSNorm(x, d, w, o)
		ensure.NoError(t, err)
		return y
	}
}

// loss is L = Σ dy ∘ y, whose gradient with respect to y is dy.
func loss(y, dy []float64) float64 {
	s := 0.0
	for i := range y {
		s += y[i] * dy[i]
	}
	return s
}

// centralDiff returns the central-difference gradient of L with respect
// to every element of v, the other arguments held fixed by f.
func centralDiff(v []float64, f func() float64) []float64 {
	g := make([]float64, len(v))
	for i := range v {
		keep := v[i]
		h := 1e-5 * max(1, math.Abs(keep))
		v[i] = keep + h
		up := f()
		v[i] = keep - h
		down := f()
		v[i] = keep
		g[i] = (up - down) / (2 * h)
	}
	return g
}

// TestFiniteDifferences checks every backward against central differences
// of its own forward, for every option, on random rows (fixed seed).
// Tolerance 1e-7 normwise: with step h = 1e-5 the truncation error is
// O(h²·|y”'|) ≈ 1e-10 and the rounding error O(2⁻⁵³·|L|/h) ≈ 1e-10 on
// these sizes, so 1e-7 leaves a wide margin yet would catch any wrong term
// of the closed form (those give errors of order 1e-1).
func TestFiniteDifferences(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	const tol = 1e-7
	for _, layer := range []bool{true, false} {
		for _, o := range allOptions(1e-3) {
			for _, d := range []int{1, 2, 7} {
				name := fmt.Sprintf("layer=%v/%v/%v/d=%d", layer, o.Placement, o.Weight, d)
				t.Run(name, func(t *testing.T) {
					rows := 3
					x := uniform(r, d*rows, -2, 2)
					w := uniform(r, d, 0.5, 1.5)
					b := uniform(r, d, -0.5, 0.5)
					dy := uniform(r, d*rows, -1, 1)
					fwd, bias := rmsFwd(t), []float64(nil)
					if layer {
						fwd, bias = lnFwd(t), b
					}
					L := func() float64 { return loss(fwd(x, w, bias, d, o), dy) }
					var g Grads
					var err error
					if layer {
						g, err = LayerNormBackward(x, d, w, dy, o)
					} else {
						g, err = RMSNormBackward(x, d, w, dy, o)
					}
					ensure.NoError(t, err)
					fx := centralDiff(x, L)
					fw := centralDiff(w, L)
					e := golden.NormwiseRelErr(g.X, fx)
					if d == 1 && layer {
						// ∂L/∂x is exactly 0 (y = b), and so is the difference.
						expect.Equal(t, make([]float64, d*rows), g.X)
						expect.LessOrEqual(t, e, 1e-9, "absolute, since the reference is 0")
					} else {
						expect.LessOrEqual(t, e, tol, "dx")
					}
					expect.LessOrEqual(t, golden.NormwiseRelErr(g.Weight, fw), tol, "dweight")
					if layer {
						fb := centralDiff(b, L)
						expect.LessOrEqual(t, golden.NormwiseRelErr(g.Bias, fb), tol, "dbias")
					}
				})
			}
		}
	}
}

// TestScaleInvariance: RMSNorm(2ʲx) with ε·4ʲ (in the root) or ε·2ʲ (added
// to the root) is bit-identical to RMSNorm(x) with ε, since the kernel
// scales by exact powers of two; this holds from 1e-300 to 1e300. For
// LayerNorm the same holds, the mean being scaled exactly too.
func TestScaleInvariance(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	const d, rows = 16, 3
	x := uniform(r, d*rows, -1, 1)
	w := uniform(r, d, 0.5, 1.5)
	for _, o := range allOptions(1e-4) {
		ref, err := RMSNorm(x, d, w, o)
		ensure.NoError(t, err)
		refL, err := LayerNorm(x, d, w, nil, o)
		ensure.NoError(t, err)
		for _, j := range []int{-990, -500, -1, 1, 37, 900} {
			xs := make([]float64, len(x))
			for i := range x {
				xs[i] = math.Ldexp(x[i], j)
			}
			os := o
			os.Epsilon = math.Ldexp(o.Epsilon, 2*j)
			if o.Placement == EpsilonAddedToRoot {
				os.Epsilon = math.Ldexp(o.Epsilon, j)
			}
			if os.Epsilon == 0 || math.IsInf(os.Epsilon, 0) {
				continue // ε itself out of range
			}
			got, err := RMSNorm(xs, d, w, os)
			ensure.NoError(t, err)
			expect.Equal(t, ref, got, "RMSNorm 2^%d, %v", j, o.Placement)
			gotL, err := LayerNorm(xs, d, w, nil, os)
			ensure.NoError(t, err)
			expect.Equal(t, refL, gotL, "LayerNorm 2^%d, %v", j, o.Placement)
		}
	}
}

// TestLayerNormMoments: the output of LayerNorm without gain and bias has
// mean 0 and variance s²/(s²+ε) (in the root) or s²/(s+ε)² (added), to a
// few units of rounding (bound 1e-14 for the mean, relative 1e-14 for the
// variance); shifting a row by c changes the output by at most the
// rounding of the shifted inputs; and ∂L/∂x sums to 0 over each row
// because y does not change when every x_j moves together.
func TestLayerNormMoments(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	for _, o := range allOptions(1e-2) {
		for _, d := range []int{2, 5, 64} {
			x := uniform(r, d, -3, 3)
			y, err := LayerNorm(x, d, nil, nil, o)
			ensure.NoError(t, err)
			mu, s2 := 0.0, 0.0
			for _, v := range x {
				mu += v
			}
			mu /= float64(d)
			for _, v := range x {
				s2 += (v - mu) * (v - mu)
			}
			s2 /= float64(d)
			my, vy := 0.0, 0.0
			for _, v := range y {
				my += v
				vy += v * v
			}
			my /= float64(d)
			vy /= float64(d)
			wantVar := s2 / (s2 + o.Epsilon)
			if o.Placement == EpsilonAddedToRoot {
				wantVar = s2 / ((math.Sqrt(s2) + o.Epsilon) * (math.Sqrt(s2) + o.Epsilon))
			}
			expect.InDelta(t, 0, my, 1e-14, "mean of y, d=%d", d)
			expect.InEpsilon(t, wantVar, vy, 1e-14, "variance of y, d=%d", d)

			// Shift by a power of two so the shifted inputs are exact.
			xs := make([]float64, d)
			for i := range x {
				xs[i] = x[i] + 1024
			}
			ys, err := LayerNorm(xs, d, nil, nil, o)
			ensure.NoError(t, err)
			// The shifted inputs are rounded to a spacing of 2⁻⁴², so the
			// outputs may differ by about 2⁻⁴²/σ ≈ 1e-12 relative.
			expect.LessOrEqual(t, golden.NormwiseRelErr(ys, y), 1e-11, "shift, d=%d", d)

			dy := uniform(r, d, -1, 1)
			g, err := LayerNormBackward(x, d, nil, dy, o)
			ensure.NoError(t, err)
			s, a := 0.0, 0.0
			for _, v := range g.X {
				s += v
				a += math.Abs(v)
			}
			expect.LessOrEqual(t, math.Abs(s), 1e-14*a, "Σ ∂L/∂x, d=%d", d)
		}
	}
}

// trials is n, or short under go test -short.
func trials(n, short int) int {
	if testing.Short() {
		return short
	}
	return n
}

// TestRandomShapes: for random shapes and values (fixed seed), every
// output has the input's shape, finite inputs give finite outputs, and
// |x̂_j| ≤ √d (from Σ x̂² ≤ d, with ε > 0).
func TestRandomShapes(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 12))
	for range trials(300, 50) {
		d := 1 + r.IntN(40)
		rows := r.IntN(5)
		scale := math.Pow(10, float64(r.IntN(601)-300))
		x := uniform(r, d*rows, -scale, scale)
		o := Options{Epsilon: math.Pow(10, float64(r.IntN(601)-300)), Placement: EpsilonPlacement(r.IntN(2))}
		for _, layer := range []bool{true, false} {
			var y []float64
			var err error
			if layer {
				y, err = LayerNorm(x, d, nil, nil, o)
			} else {
				y, err = RMSNorm(x, d, nil, o)
			}
			ensure.NoError(t, err)
			ensure.Len(t, y, len(x))
			for i, v := range y {
				ensure.False(t, math.IsNaN(v) || math.IsInf(v, 0), "element %d of d=%d scale=%g ε=%g", i, d, scale, o.Epsilon)
				ensure.LessOrEqual(t, math.Abs(v), math.Sqrt(float64(d))*(1+1e-14))
			}
		}
	}
}

// TestConstantRows: a constant row of any length and value gives y = b
// exactly and ∂L/∂w = 0 exactly in LayerNorm (fixed seed).
func TestConstantRows(t *testing.T) {
	r := rand.New(rand.NewPCG(15, 16))
	for range trials(200, 40) {
		d := 1 + r.IntN(300)
		c := (r.Float64() - 0.5) * math.Ldexp(1, r.IntN(2000)-1000)
		x := make([]float64, 2*d)
		for i := range x {
			x[i] = c
		}
		w := uniform(r, d, 0.5, 1.5)
		b := uniform(r, d, -1, 1)
		for _, o := range allOptions(1e-5) {
			y, err := LayerNorm(x, d, w, b, o)
			ensure.NoError(t, err)
			ensure.Equal(t, append(append([]float64{}, b...), b...), y, "d=%d c=%g", d, c)
			g, err := LayerNormBackward(x, d, w, x, o)
			ensure.NoError(t, err)
			ensure.Equal(t, make([]float64, d), g.Weight)
		}
	}
}
