package norm

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/internal/num"
)

// allOptions lists every combination of the convention switches.
func allOptions(eps float64) []Options {
	var out []Options
	for _, p := range []EpsilonPlacement{EpsilonInRoot, EpsilonAddedToRoot} {
		for _, w := range []WeightForm{WeightAsIs, WeightOnePlus} {
			out = append(out, Options{Epsilon: eps, Placement: p, Weight: w})
		}
	}
	return out
}

func uniform(r *rand.Rand, n int, lo, hi float64) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = lo + (hi-lo)*r.Float64()
	}
	return v
}

// TestWorkedValues checks the worked values of the package documentation,
// computed with mpmath at 40 digits from the published formulas and printed
// there to 17 significant digits (here to 16 or 17). The bound 1e-15
// (about 4.5 units in the last place) covers the printed rounding and the
// kernels' few roundings.
func TestWorkedValues(t *testing.T) {
	x := []float64{1, 2, 3, 4}
	// [mpmath] LayerNorm, Ba et al. 2016 Eq. (3)–(4), ε = 1e-5 in the root.
	y, err := LayerNorm(x, 4, nil, nil, Options{Epsilon: 1e-5})
	ensure.NoError(t, err)
	want := []float64{-1.341635419968927, -0.44721180665630899, 0.44721180665630899, 1.341635419968927}
	for i := range want {
		expect.InEpsilon(t, want[i], y[i], 1e-15, "LayerNorm element %d", i)
	}
	// [mpmath] RMSNorm, Zhang & Sennrich 2019 (arXiv 1910.07467), ε = 0 in the
	// source; ε = 2⁻¹⁰⁷⁴ changes mean(x²) = 7.5 by a relative 7e-325.
	y, err = RMSNorm(x, 4, nil, Options{Epsilon: math.SmallestNonzeroFloat64})
	ensure.NoError(t, err)
	want = []float64{0.36514837167011074, 0.73029674334022148, 1.0954451150103322, 1.460593486680443}
	for i := range want {
		expect.InEpsilon(t, want[i], y[i], 1e-15, "RMSNorm element %d", i)
	}
}

// TestErrors checks that every kind of invalid input gives the named error,
// with a message naming the function, the argument and the values.
func TestErrors(t *testing.T) {
	ok := Options{Epsilon: 1e-5}
	x := []float64{1, 2, 3, 4, 5, 6}
	w3 := []float64{1, 1, 1}
	tests := []struct {
		name string
		call func() error
		want error
		msg  string
	}{
		{"d zero", func() error { _, err := RMSNorm(x, 0, nil, ok); return err }, ErrShape, "norm: shape mismatch: RMSNorm: d = 0; want ≥ 1"},
		{"d negative", func() error { _, err := LayerNorm(x, -2, nil, nil, ok); return err }, ErrShape, "LayerNorm: d = -2; want ≥ 1"},
		{"len not multiple", func() error { _, err := LayerNorm(x, 4, nil, nil, ok); return err }, ErrShape, "norm: shape mismatch: LayerNorm: x has 6 elements; want a multiple of d = 4"},
		{"weight length", func() error { _, err := RMSNorm(x, 3, []float64{1, 1}, ok); return err }, ErrShape, "RMSNorm: weight has 2 elements; want d = 3, or nil for none"},
		{"empty non-nil weight", func() error { _, err := RMSNorm(x, 3, []float64{}, ok); return err }, ErrShape, "RMSNorm: weight has 0 elements; want d = 3, or nil for none"},
		{"bias length", func() error { _, err := LayerNorm(x, 3, w3, []float64{0}, ok); return err }, ErrShape, "LayerNorm: bias has 1 elements; want d = 3, or nil for none"},
		{"epsilon zero", func() error { _, err := RMSNorm(x, 3, nil, Options{}); return err }, ErrEpsilon, "norm: invalid epsilon: RMSNorm: Options.Epsilon = 0; want a finite number > 0 (ε = 0 divides 0 by 0 on a constant row)"},
		{"epsilon negative", func() error { _, err := LayerNorm(x, 3, nil, nil, Options{Epsilon: -1e-5}); return err }, ErrEpsilon, "LayerNorm: Options.Epsilon = -1e-05; want a finite number > 0 (a negative ε can make the denominator 0 or NaN)"},
		{"epsilon NaN", func() error { _, err := LayerNorm(x, 3, nil, nil, Options{Epsilon: math.NaN()}); return err }, ErrEpsilon, "LayerNorm: Options.Epsilon = NaN; want a finite number > 0 (it would make every output NaN or 0)"},
		{"epsilon Inf", func() error { _, err := RMSNorm(x, 3, nil, Options{Epsilon: math.Inf(1)}); return err }, ErrEpsilon, "RMSNorm: Options.Epsilon = +Inf; want a finite number > 0"},
		{"placement", func() error { _, err := RMSNorm(x, 3, nil, Options{Epsilon: 1, Placement: 7}); return err }, ErrOption, "norm: invalid option: RMSNorm: Options.Placement = 7; want one of in-root, added-to-root"},
		{"weight form", func() error { _, err := LayerNorm(x, 3, nil, nil, Options{Epsilon: 1, Weight: -1}); return err }, ErrOption, "norm: invalid option: LayerNorm: Options.Weight = -1; want one of as-is, one-plus"},
		{"dy length LN", func() error { _, err := LayerNormBackward(x, 3, nil, x[:3], ok); return err }, ErrShape, "norm: shape mismatch: LayerNormBackward: dy has 3 elements; want len(x) = 6"},
		{"dy length RMS", func() error { _, err := RMSNormBackward(x, 3, nil, nil, ok); return err }, ErrShape, "RMSNormBackward: dy has 0 elements; want len(x) = 6"},
		{"backward epsilon", func() error { _, err := RMSNormBackward(x, 3, nil, x, Options{}); return err }, ErrEpsilon, "RMSNormBackward: Options.Epsilon = 0; want"},
		{"residual length LN", func() error { _, _, err := AddLayerNorm(x, x[:5], 3, nil, nil, ok); return err }, ErrShape, "AddLayerNorm: residual has 5 elements; want len(x) = 6"},
		{"residual length RMS", func() error { _, _, err := AddRMSNorm(x, nil, 3, nil, ok); return err }, ErrShape, "AddRMSNorm: residual has 0 elements; want len(x) = 6"},
		{"sum length fused", func() error { _, err := AddRMSNormBackward(x[:5], 3, nil, x[:5], nil, ok); return err }, ErrShape, "AddRMSNormBackward: sum has 5 elements; want a multiple of d = 3"},
		{"dsum length LN", func() error { _, err := AddLayerNormBackward(x, 3, nil, x, x[:3], ok); return err }, ErrShape, "AddLayerNormBackward: dsum has 3 elements; want len(sum) = 6, or nil for zero"},
		{"dsum length RMS", func() error { _, err := AddRMSNormBackward(x, 3, nil, x, []float64{}, ok); return err }, ErrShape, "AddRMSNormBackward: dsum has 0 elements; want len(sum) = 6, or nil for zero"},
		{"dy fused", func() error { _, err := AddRMSNormBackward(x, 3, nil, nil, nil, ok); return err }, ErrShape, "AddRMSNormBackward: dy has 0 elements; want len(sum) = 6"},
		{"weight fused backward", func() error { _, err := AddLayerNormBackward(x, 3, w3[:1], x, nil, ok); return err }, ErrShape, "AddLayerNormBackward: weight has 1 elements; want d = 3, or nil for none"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			err := tc.call()
			ensure.Error(t, err)
			expect.ErrorIs(t, err, tc.want)
			for _, other := range []error{ErrShape, ErrEpsilon, ErrOption} {
				if other != tc.want {
					expect.False(t, errors.Is(err, other), "error %q also matches %v", err, other)
				}
			}
			expect.Contains(t, err.Error(), tc.msg)
		})
	}
}

// TestOptionStrings checks the words of the option types (the spelling
// vocabulary.json and the golden configurations use), that they read back,
// and that the zero values are the documented defaults.
func TestOptionStrings(t *testing.T) {
	expect.Equal(t, "in-root", EpsilonInRoot.String())
	expect.Equal(t, "added-to-root", EpsilonAddedToRoot.String())
	expect.Equal(t, "as-is", WeightAsIs.String())
	expect.Equal(t, "one-plus", WeightOnePlus.String())
	expect.Equal(t, "EpsilonPlacement(7)", EpsilonPlacement(7).String())
	expect.Equal(t, "WeightForm(-1)", WeightForm(-1).String())

	var o Options
	expect.Equal(t, EpsilonInRoot, o.Placement, "the zero placement is in-root")
	expect.Equal(t, WeightAsIs, o.Weight, "the zero weight form is as-is")
	expect.Equal(t, []EpsilonPlacement{EpsilonInRoot, EpsilonAddedToRoot}, EpsilonPlacement(0).Values())
	expect.Equal(t, []WeightForm{WeightAsIs, WeightOnePlus}, WeightForm(0).Values())

	var p EpsilonPlacement
	err := p.UnmarshalText([]byte("in_root"))
	expect.ErrorIs(t, err, ErrOption, "the old spelling is not a word")
	expect.Contains(t, err.Error(), `"in_root"; want one of in-root, added-to-root`)
	expect.Equal(t, EpsilonInRoot, p, "a refused word leaves the value alone")
	var f WeightForm = WeightOnePlus
	expect.ErrorIs(t, f.UnmarshalText([]byte("none")), ErrOption)
	expect.Equal(t, WeightOnePlus, f)
	_, err = EpsilonPlacement(7).MarshalText()
	expect.ErrorIs(t, err, ErrOption)
	expect.ErrorIs(t, WeightForm(2).Check(), ErrOption)
}

// TestSpecialCases checks the "Special cases are:" block of the package
// documentation. The expected values follow from the definitions by hand.
func TestSpecialCases(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	for _, o := range allOptions(1e-5) {
		t.Run(fmt.Sprint(o.Placement, "/", o.Weight), func(t *testing.T) {
			// Empty input: empty output, no error.
			y, err := LayerNorm(nil, 4, nil, nil, o)
			ensure.NoError(t, err)
			expect.Empty(t, y)
			g, err := RMSNormBackward([]float64{}, 4, []float64{1, 2, 3, 4}, []float64{}, o)
			ensure.NoError(t, err)
			expect.Empty(t, g.X)
			expect.Equal(t, []float64{0, 0, 0, 0}, g.Weight)

			// A row with NaN or Inf is NaN throughout; other rows are untouched.
			x := []float64{1, nan, 2, 1, 2, 3, -inf, 0, 1}
			for _, layer := range []bool{true, false} {
				var y []float64
				if layer {
					y, err = LayerNorm(x, 3, nil, []float64{1, 1, 1}, o)
				} else {
					y, err = RMSNorm(x, 3, nil, o)
				}
				ensure.NoError(t, err)
				for j := 0; j < 3; j++ {
					expect.True(t, math.IsNaN(y[j]), "row 0 element %d", j)
					expect.True(t, math.IsNaN(y[6+j]), "row 2 element %d", j)
					expect.False(t, math.IsNaN(y[3+j]), "row 1 element %d", j)
				}
				var gr Grads
				dy := []float64{1, 1, 1, 1, 1, 1, 1, 1, 1}
				if layer {
					gr, err = LayerNormBackward(x, 3, nil, dy, o)
				} else {
					gr, err = RMSNormBackward(x, 3, nil, dy, o)
				}
				ensure.NoError(t, err)
				expect.True(t, math.IsNaN(gr.X[0]) && math.IsNaN(gr.X[8]))
				expect.False(t, math.IsNaN(gr.X[4]))
			}

			// Constant rows in LayerNorm: y = b exactly; ∂L/∂x = (g − mean g)/r.
			b := []float64{0.5, -0.25, 2}
			w := []float64{0.5, 1.5, -1.5}
			c := []float64{7, 7, 7, 1e8, 1e8, 1e8, 0, 0, 0}
			y, err = LayerNorm(c, 3, w, b, o)
			ensure.NoError(t, err)
			expect.Equal(t, append(append(append([]float64{}, b...), b...), b...), y)
			dy := []float64{1, 2, 3, 1, 2, 3, 1, 2, 3}
			g, err = LayerNormBackward(c, 3, w, dy, o)
			ensure.NoError(t, err)
			want := constantRowDx(w, dy, o)
			for j := 0; j < 9; j++ {
				expect.InEpsilon(t, want[j], g.X[j], 1e-14, "constant row dx %d", j)
			}
			expect.Equal(t, []float64{0, 0, 0}, g.Weight, "x̂ = 0 on constant rows")
			expect.Equal(t, []float64{3, 6, 9}, g.Bias)

			// A zero row in RMSNorm: y = 0, ∂L/∂x = g/r.
			y, err = RMSNorm([]float64{0, 0, 0}, 3, w, o)
			ensure.NoError(t, err)
			expect.Equal(t, []float64{0, 0, 0}, y)
			g, err = RMSNormBackward([]float64{0, 0, 0}, 3, w, []float64{1, 2, 3}, o)
			ensure.NoError(t, err)
			r := math.Sqrt(o.Epsilon)
			if o.Placement == EpsilonAddedToRoot {
				r = o.Epsilon
			}
			for j := range 3 {
				gj := float64(j+1) * gammaOf(w, j, o.Weight)
				expect.InEpsilon(t, gj/r, g.X[j], 1e-14, "zero row dx %d", j)
			}

			// d = 1: LayerNorm gives the bias, RMSNorm gives γx/r with s = |x|.
			y, err = LayerNorm([]float64{3, -1e300}, 1, []float64{2}, []float64{0.5}, o)
			ensure.NoError(t, err)
			expect.Equal(t, []float64{0.5, 0.5}, y)
			y, err = RMSNorm([]float64{-3}, 1, nil, o)
			ensure.NoError(t, err)
			want1 := -3 / math.Sqrt(9+o.Epsilon)
			if o.Placement == EpsilonAddedToRoot {
				want1 = -3 / (3 + o.Epsilon)
			}
			expect.InEpsilon(t, want1, y[0], 1e-15)
		})
	}
}

// constantRowDx is ∂L/∂x of LayerNorm on constant rows of len(w)
// elements, (g − mean g)/r with g = dy∘γ and r = √ε (in the root) or ε
// (added to it), x − μ = 0 making the x̂ term vanish: the definition, by
// hand.
func constantRowDx[T num.Float](w, dy []T, o Options) []float64 {
	r := math.Sqrt(o.Epsilon)
	if o.Placement == EpsilonAddedToRoot {
		r = o.Epsilon
	}
	d := len(w)
	out := make([]float64, len(dy))
	for lo := 0; lo < len(dy); lo += d {
		var mg float64
		for j := range d {
			mg += float64(dy[lo+j]) * float64(gammaOf(w, j, o.Weight)) / float64(d)
		}
		for j := range d {
			out[lo+j] = (float64(dy[lo+j])*float64(gammaOf(w, j, o.Weight)) - mg) / r
		}
	}
	return out
}

// TestNaiveFailsGolden shows that the golden cases for the offset and
// underflow regimes have teeth: the textbook one-pass-of-each formulas,
// computed directly in float64, miss them by far more than the 1e-14
// bound, while the package passes (TestGolden).
func TestNaiveFailsGolden(t *testing.T) {
	naive := func(x []float64, d int, center bool, o Options) []float64 {
		y := make([]float64, len(x))
		for lo := 0; lo < len(x); lo += d {
			row := x[lo : lo+d]
			mu := 0.0
			if center {
				for _, v := range row {
					mu += v
				}
				mu /= float64(d)
			}
			ss := 0.0
			for _, v := range row {
				ss += (v - mu) * (v - mu)
			}
			r := math.Sqrt(ss/float64(d) + o.Epsilon)
			if o.Placement == EpsilonAddedToRoot {
				r = math.Sqrt(ss/float64(d)) + o.Epsilon
			}
			for j, v := range row {
				y[lo+j] = (v - mu) / r
			}
		}
		return y
	}
	cases := []struct {
		family, name string
		center       bool
		o            Options
		atLeast      float64
	}{
		// mean rounded to float64 near 1e8: an error of order 1e-9 in y
		{"layernorm", "offset1e8/eps1e-05/in_root", true, Options{Epsilon: 1e-5}, 1e-10},
		// squares underflow: outputs 1e10 times too large
		{"rmsnorm", "tiny1e-300/eps1e-310/added_to_root", false, Options{Epsilon: 1e-310, Placement: EpsilonAddedToRoot}, 1},
		// squares overflow: every output 0
		{"rmsnorm", "huge1e200", false, Options{Epsilon: 1e-5}, 0.5},
	}
	for _, tc := range cases {
		f := golden.MustLoadFamily(t, "norm", tc.family)
		var c *golden.Case
		for _, k := range f.Cases {
			if k.Name == tc.name {
				c = k
			}
		}
		ensure.NotNil(t, c, "case %s/%s", tc.family, tc.name)
		cfg := decodeConfig(t, c)
		x, _, err := c.Float("x")
		ensure.NoError(t, err)
		want, _, err := c.Float("y")
		ensure.NoError(t, err)
		ensure.True(t, cfg.Weighted, "the case has a weight")
		ensure.Equal(t, WeightAsIs, cfg.WeightForm, "the naive form applies the weight as is")
		ensure.Equal(t, tc.o, cfg.options(), "the naive form runs with the case's options")
		w := floatOr(t, c, "weight")
		b := floatOr(t, c, "bias")
		got := naive(x, cfg.D, tc.center, tc.o)
		for i := range got {
			v := got[i] * w[i%cfg.D]
			if b != nil {
				v += b[i%cfg.D]
			}
			got[i] = v
		}
		e := golden.NormwiseRelErr(got, want)
		t.Logf("%s/%s: naive error %.3g", tc.family, tc.name, e)
		expect.Greater(t, e, tc.atLeast)
	}
}

// fusedPair is a fused entry point of one precision and the unfused pair
// it must equal bit for bit. The forward functions take a bias (see
// rmsPair for RMSNorm's, which take none).
type fusedPair[T num.Float, G any] struct {
	add     func(x, res []T, d int, w, b []T, o Options) (y, sum []T, err error)
	norm    func(sum []T, d int, w, b []T, o Options) ([]T, error)
	addGrad func(sum []T, d int, w, dy, dsum []T, o Options) (G, error)
	grad    func(sum []T, d int, w, dy []T, o Options) (G, error)
	plus    func(g G, dsum []T) G // g with dsum added to its X, in T
}

// rmsPair is the fusedPair of RMSNorm's functions, whose forward forms
// take no bias.
func rmsPair[T num.Float, G any](add func(x, res []T, d int, w []T, o Options) ([]T, []T, error), norm func(sum []T, d int, w []T, o Options) ([]T, error),
	addGrad func(sum []T, d int, w, dy, dsum []T, o Options) (G, error), grad func(sum []T, d int, w, dy []T, o Options) (G, error), plus func(G, []T) G) fusedPair[T, G] {
	return fusedPair[T, G]{
		add:     func(x, res []T, d int, w, _ []T, o Options) ([]T, []T, error) { return add(x, res, d, w, o) },
		norm:    func(sum []T, d int, w, _ []T, o Options) ([]T, error) { return norm(sum, d, w, o) },
		addGrad: addGrad, grad: grad, plus: plus,
	}
}

// check runs the pair on x, res and dsum, rows of d with weight w, bias b,
// dy and o: sum is x + res rounded once in T, y the unfused norm of it,
// and the backward the unfused backward plus dsum (nil dsum: the unfused
// backward).
func (p fusedPair[T, G]) check(t *testing.T, d int, x, res, w, b, dy, dsum []T, o Options) {
	t.Helper()
	h := make([]T, len(x))
	for i := range h {
		h[i] = x[i] + res[i]
	}
	y, sum, err := p.add(x, res, d, w, b, o)
	ensure.NoError(t, err)
	ensure.Equal(t, h, sum)
	yu, err := p.norm(h, d, w, b, o)
	ensure.NoError(t, err)
	ensure.Equal(t, yu, y)
	gu, err := p.grad(h, d, w, dy, o)
	ensure.NoError(t, err)
	g, err := p.addGrad(sum, d, w, dy, dsum, o)
	ensure.NoError(t, err)
	ensure.Equal(t, p.plus(gu, dsum), g)
	g, err = p.addGrad(sum, d, w, dy, nil, o)
	ensure.NoError(t, err)
	ensure.Equal(t, gu, g, "nil dsum is zero")
}

func plus64(g Grads, dsum []float64) Grads {
	g.X = append([]float64(nil), g.X...)
	for i := range g.X {
		g.X[i] += dsum[i]
	}
	return g
}

func plus32(g Grads32, dsum []float32) Grads32 {
	g.X = append([]float32(nil), g.X...)
	for i := range g.X {
		g.X[i] += dsum[i]
	}
	return g
}

// TestFused checks that the fused residual adds equal the unfused pairs
// bit for bit, in both directions, in float64 and in the float32 twins.
func TestFused(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	const d, rows = 12, 5
	for _, o := range allOptions(1e-6) {
		x := uniform(r, d*rows, -1, 1)
		res := uniform(r, d*rows, -8, 8)
		w := uniform(r, d, -0.5, 0.5)
		b := uniform(r, d, -0.5, 0.5)
		dy := uniform(r, d*rows, -1, 1)
		ds := uniform(r, d*rows, -1, 1)
		fusedPair[float64, Grads]{AddLayerNorm, LayerNorm, AddLayerNormBackward, LayerNormBackward, plus64}.check(t, d, x, res, w, b, dy, ds, o)
		rmsPair(AddRMSNorm, RMSNorm, AddRMSNormBackward, RMSNormBackward, plus64).check(t, d, x, res, w, nil, dy, ds, o)
		f := num.Convert[float32, float64]
		fusedPair[float32, Grads32]{AddLayerNorm32, LayerNorm32, AddLayerNormBackward32, LayerNormBackward32, plus32}.check(t, d, f(x), f(res), f(w), f(b), f(dy), f(ds), o)
		rmsPair(AddRMSNorm32, RMSNorm32, AddRMSNormBackward32, RMSNormBackward32, plus32).check(t, d, f(x), f(res), f(w), nil, f(dy), f(ds), o)
	}
}
