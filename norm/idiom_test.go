package norm

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/internal/num"
)

// The tests of the variance idiom (Options.Variance): what the float32
// instantiations compute with each word, and that the reference ignores
// the field.

// offsetRows returns rows of d float32 values of mean about mean and
// standard deviation about std, and the same values in float64.
func offsetRows(seed uint64, rows, d int, mean, std float64) ([]float32, []float64) {
	r := rand.New(rand.NewPCG(seed, 99))
	x32 := make([]float32, rows*d)
	for i := range x32 {
		x32[i] = float32(mean + std*r.NormFloat64())
	}
	return x32, num.Convert[float64](x32)
}

// onePassPort is LayerNorm as a float32 port with the one-pass variance
// writes it [common practice]: Σx and Σx² in one loop, σ² = Σx²/d − μ²
// clamped at 0, ε in the root, no weight or bias.
func onePassPort(x []float32, d int, eps float32) []float32 {
	y := make([]float32, len(x))
	for lo := 0; lo < len(x); lo += d {
		var s1, s2 float32
		for _, v := range x[lo : lo+d] {
			s1 += v
			s2 += float32(v * v)
		}
		mu := s1 / float32(d)
		va := max(s2/float32(d)-float32(mu*mu), 0)
		r := float32(math.Sqrt(float64(va + eps)))
		for j, v := range x[lo : lo+d] {
			y[lo+j] = (v - mu) / r
		}
	}
	return y
}

// TestOnePassLosesTheOffset: on rows of mean 1e4 and standard deviation 1
// the one-pass variance cancels: Σx²/d ≈ 1e8 holds the variance 1 in its
// last bits (a float32 ulp of 1e8 is 8), so LayerNorm32 with
// VarianceOnePass misses the reference by far more than 1e-2 normwise
// (measured: 277, the variance clamped at 0 on most rows), while the
// two-pass form, whose mean is compensated, is within 1e-5 (measured:
// 1.2e-7). On rows of mean 0 the two forms are alike. The one-pass
// LayerNorm32 is, bit for bit, the one-pass port written out (onePassPort):
// its scaling by a power of two is exact.
func TestOnePassLosesTheOffset(t *testing.T) {
	const d = 256
	o := Options{Epsilon: 1e-5}
	one := o
	one.Variance = VarianceOnePass
	for _, c := range []struct {
		mean         float64
		onePassAbove float64 // the one-pass error is above this
		bound        float64 // both are below this
	}{
		{mean: 1e4, onePassAbove: 1e-2, bound: math.Inf(1)},
		{mean: 0, onePassAbove: 0, bound: 1e-6},
	} {
		x32, x := offsetRows(1, 8, d, c.mean, 1)
		want, err := LayerNorm(x, d, nil, nil, o)
		ensure.NoError(t, err)
		two32, err := LayerNorm32(x32, d, nil, nil, o)
		ensure.NoError(t, err)
		one32, err := LayerNorm32(x32, d, nil, nil, one)
		ensure.NoError(t, err)
		eTwo := golden.NormwiseRelErr(num.Convert[float64](two32), want)
		eOne := golden.NormwiseRelErr(num.Convert[float64](one32), want)
		t.Logf("mean %g, std 1, d %d: normwise error two-pass %.3g, one-pass %.3g", c.mean, d, eTwo, eOne)
		expect.Less(t, eTwo, 1e-5, "two-pass, mean %g", c.mean)
		expect.Greater(t, eOne, c.onePassAbove, "one-pass, mean %g", c.mean)
		expect.Less(t, eOne, c.bound, "one-pass, mean %g", c.mean)
		expect.Equal(t, onePassPort(x32, d, 1e-5), one32, "mean %g: LayerNorm32 one-pass is the port written out", c.mean)
	}
}

// TestOnePassBackward: LayerNormBackward32 with VarianceOnePass uses the
// one-pass statistics (far off on a row of mean 1e4), and the fused
// forms follow the option too.
func TestOnePassBackward(t *testing.T) {
	const d = 64
	x32, x := offsetRows(2, 4, d, 1e4, 1)
	dy32, dy := offsetRows(3, 4, d, 0, 1)
	o := Options{Epsilon: 1e-5, Placement: EpsilonAddedToRoot}
	one := o
	one.Variance = VarianceOnePass
	want, err := LayerNormBackward(x, d, nil, dy, o)
	ensure.NoError(t, err)
	two32, err := LayerNormBackward32(x32, d, nil, dy32, o)
	ensure.NoError(t, err)
	one32, err := LayerNormBackward32(x32, d, nil, dy32, one)
	ensure.NoError(t, err)
	eTwo := golden.NormwiseRelErr(num.Convert[float64](two32.X), want.X)
	eOne := golden.NormwiseRelErr(num.Convert[float64](one32.X), want.X)
	t.Logf("backward, mean 1e4: normwise error of dx two-pass %.3g, one-pass %.3g", eTwo, eOne)
	expect.Less(t, eTwo, 1e-4)
	expect.Greater(t, eOne, 1e-2)

	zero := make([]float32, len(x32))
	y, _, err := AddLayerNorm32(x32, zero, d, nil, nil, one)
	ensure.NoError(t, err)
	y1, err := LayerNorm32(x32, d, nil, nil, one)
	ensure.NoError(t, err)
	expect.Equal(t, y1, y, "AddLayerNorm32 with a zero residual is LayerNorm32, one-pass too")
	g, err := AddLayerNormBackward32(x32, d, nil, dy32, nil, one)
	ensure.NoError(t, err)
	expect.Equal(t, one32.X, g.X)
}

// TestVarianceLeavesTheReference: the float64 functions give the same bits
// whatever Options.Variance says, and so does RMSNorm32, which has no
// mean; a value with no word is refused.
func TestVarianceLeavesTheReference(t *testing.T) {
	const d = 32
	x32, x := offsetRows(4, 3, d, 1e4, 1)
	dy32, dy := offsetRows(5, 3, d, 0, 1)
	w := []float64{}
	for i := range d {
		w = append(w, 1+float64(i)/d)
	}
	w32 := num.Convert[float32](w)
	o := Options{Epsilon: 1e-6}
	one := o
	one.Variance = VarianceOnePass
	for _, f := range []func(o Options) (any, error){
		func(o Options) (any, error) { return LayerNorm(x, d, w, w, o) },
		func(o Options) (any, error) { return LayerNormBackward(x, d, w, dy, o) },
		func(o Options) (any, error) {
			y, s, err := AddLayerNorm(x, x, d, w, w, o)
			return [][]float64{y, s}, err
		},
		func(o Options) (any, error) { return AddLayerNormBackward(x, d, w, dy, dy, o) },
		func(o Options) (any, error) { return RMSNorm(x, d, w, o) },
		func(o Options) (any, error) { return RMSNorm32(x32, d, w32, o) },
		func(o Options) (any, error) { return RMSNormBackward32(x32, d, w32, dy32, o) },
	} {
		a, err := f(o)
		ensure.NoError(t, err)
		b, err := f(one)
		ensure.NoError(t, err)
		expect.Equal(t, a, b)
	}
	_, err := LayerNorm32(x32, d, nil, nil, Options{Epsilon: 1, Variance: 2})
	expect.ErrorIs(t, err, ErrOption)
	expect.EqualError(t, err, "norm: invalid option: LayerNorm32: Options.Variance = 2; want one of two-pass, one-pass")
}
