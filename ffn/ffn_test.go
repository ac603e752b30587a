package ffn

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/num"
)

// Worked values, each from its source; kept apart from the golden files.
func TestWorkedValues(t *testing.T) {
	// Each value is printed with 17 significant digits, which identifies
	// the float64 nearest to it; allow one unit of the last place.
	const bound = 0x1p-52
	tests := []struct {
		name   string
		got    float64
		want   float64
		source string
	}{
		{"GELU(1), exact", GELU(1), 0.84134474606854295, "[mpmath] at 35 digits from Hendrycks & Gimpel 2016 §2"},
		{"GELU(1), tanh approximation", GELUTanh(1), 0.8411919906082767, "[mpmath] at 35 digits from Hendrycks & Gimpel 2016 §2"},
		{"GELU(1), sigmoid approximation", GELUSigmoid(1), 0.8457957659328213, "[mpmath] at 35 digits from Hendrycks & Gimpel 2016 §2"},
		// Φ(1) = 0.841344746068542948585232545632 is the standard normal
		// distribution at 1, so GELU(−1) = −(1 − Φ(1)) [mpmath, 30 digits].
		{"GELU(−1), exact", GELU(-1), -0.15865525393145705, "[mpmath] −(1 − Φ(1))"},
		{"σ(0)", Sigmoid(0), 0.5, "definition"},
		{"SiLU(1) = σ(1)", SiLU(1), 0.7310585786300049, "[mpmath] 1/(1 + e^{−1}) = 0.731058578630004879"},
	}
	for _, tt := range tests {
		expect.InDelta(t, tt.want, tt.got, bound*math.Abs(tt.want), "%s (source: %s)", tt.name, tt.source)
	}

	// Shazeer 2020 Eq. (4), (5) with xW = 1, xV = 2: one input, one hidden
	// unit, W = 1, V = 2, W₂ = 1, no biases; values [mpmath] at 35 digits: 2σ(1) and 2·GELU(1).
	gated := []struct {
		name string
		act  Act
		want float64
	}{
		{"GLU", ActSigmoid, 1.4621171572600098},
		{"GEGLU", ActGELU, 1.6826894921370859},
	}
	for _, tt := range gated {
		w := Weights[float64]{W1: []float64{1}, V: []float64{2}, W2: []float64{1}}
		y, err := Forward([]float64{1}, Dims{1, 1, 1, 1}, w, Options{Act: tt.act, Gated: true, Layout: InByOut})
		ensure.NoError(t, err)
		expect.InDelta(t, tt.want, y[0], bound*tt.want, "%s with xW = 1, xV = 2 ([mpmath])", tt.name)
	}

	// Hidden-size rule [common practice]: d = 4096, m = 256 → 11008.
	h, err := HiddenSize(4096, 256)
	ensure.NoError(t, err)
	expect.Equal(t, 11008, h)
}

// The special cases listed in the documentation: each function at its
// points x, bit for bit.
func TestSpecialCases(t *testing.T) {
	inf, nan := math.Inf(1), math.NaN()
	negZero := math.Copysign(0, -1)
	type at struct{ x, want float64 }
	tests := []struct {
		name string
		f    func(float64) float64
		at   []at
	}{
		{"ReLU", ReLU, []at{{negZero, 0}, {inf, inf}, {-inf, 0}, {nan, nan}}},
		{"ReLUDeriv", ReLUDeriv, []at{{0, 0}, {inf, 1}, {nan, nan}}},
		{"Sigmoid", Sigmoid, []at{{inf, 1}, {-inf, 0}, {nan, nan}, {-800, 0}}},
		{"SigmoidDeriv", SigmoidDeriv, []at{{inf, 0}, {-inf, 0}, {nan, nan}}},
		{"SiLU", SiLU, []at{{inf, inf}, {-inf, negZero}, {nan, nan}}},
		{"SiLUDeriv", SiLUDeriv, []at{{inf, 1}, {-inf, 0}, {nan, nan}}},
		{"Swish(·, 0)", func(x float64) float64 { return Swish(x, 0) }, []at{{3, 1.5}}},
		{"Swish(·, −1)", func(x float64) float64 { return Swish(x, -1) }, []at{{inf, 0}, {-inf, -inf}}},
		{"Swish(·, NaN)", func(x float64) float64 { return Swish(x, nan) }, []at{{1, nan}}},
		{"Swish(·, +Inf)", func(x float64) float64 { return Swish(x, inf) }, []at{{1, nan}}},
		{"SwishDeriv(·, 0)", func(x float64) float64 { return SwishDeriv(x, 0) }, []at{{7, 0.5}}},
		{"SwishDeriv(·, −1)", func(x float64) float64 { return SwishDeriv(x, -1) }, []at{{inf, 0}, {-inf, 1}}},
		{"SwishDeriv(·, NaN)", func(x float64) float64 { return SwishDeriv(x, nan) }, []at{{1, nan}}},
		{"GELU", GELU, []at{{inf, inf}, {-inf, negZero}, {nan, nan}, {-40, negZero}}},
		{"GELUDeriv", GELUDeriv, []at{{inf, 1}, {-inf, 0}, {nan, nan}}},
		{"GELUTanh", GELUTanh, []at{{30, 30}, {inf, inf}, {-30, negZero}, {-inf, negZero}, {nan, nan}}},
		{"GELUTanhDeriv", GELUTanhDeriv, []at{{30, 1}, {-30, negZero}, {nan, nan}}},
		{"GELUSigmoid", GELUSigmoid, []at{{inf, inf}, {-inf, negZero}, {nan, nan}}},
		{"GELUSigmoidDeriv", GELUSigmoidDeriv, []at{{inf, 1}, {-inf, 0}, {nan, nan}}},
	}
	for _, tt := range tests {
		for _, p := range tt.at {
			got := tt.f(p.x)
			if math.IsNaN(p.want) {
				expect.True(t, math.IsNaN(got), "%s at %v = %v, want NaN", tt.name, p.x, got)
				continue
			}
			// alike: equal bits, so that the sign of a zero counts
			expect.Equal(t, math.Float64bits(p.want), math.Float64bits(got), "%s at %v = %v, want %v", tt.name, p.x, got, p.want)
		}
	}
}

// The textbook forms lose the tails that the package keeps: at x = −20,
// ½x(1 + erf(x/√2)) cancels to 0 and ½x(1 + tanh(u)) to 0, while the
// values are near 5.5e-88 and 1e-262 (golden file, tail cases).
func TestTailsSurviveCancellation(t *testing.T) {
	x := -20.0
	naiveExact := 0.5 * x * (1 + math.Erf(x/math.Sqrt2))
	naiveTanh := 0.5 * x * (1 + math.Tanh(math.Sqrt(2/math.Pi)*(x+0.044715*x*x*x)))
	ensure.Equal(t, 0.0, naiveExact, "the textbook form cancels (test premise)")
	ensure.Equal(t, 0.0, naiveTanh, "the textbook form cancels (test premise)")
	expect.Less(t, GELU(x), 0.0)
	expect.Less(t, GELUTanh(x), 0.0)
	// φ(−20)/20·(1 − 1/400 …) ≈ 5.5e-88 [mpmath: −5.507248237212467e-88]
	expect.InDelta(t, -5.507248237212467e-88, GELU(x), 1e-15*5.5e-88)
}

// Identities of the activations that hold exactly in real arithmetic,
// checked on random inputs to a few ulps (fixed seed).
func TestActivationIdentities(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	const ulps = 4 * 0x1p-52
	for range 2000 {
		x := (r.Float64()*2 - 1) * 12
		// σ(x) + σ(−x) = 1
		expect.InDelta(t, 1, Sigmoid(x)+Sigmoid(-x), ulps)
		// GELU(x) − GELU(−x) = x·(Φ(x) + Φ(−x)) = x
		expect.InDelta(t, x, GELU(x)-GELU(-x), ulps*math.Abs(x)+ulps)
		// SiLU is Swish with β = 1, the same body: bit-identical
		expect.Equal(t, math.Float64bits(SiLU(x)), math.Float64bits(Swish(x, 1)))
		// x·σ(βx) − (−x)·σ(−βx) = x for any β
		b := r.Float64()*4 - 2
		expect.InDelta(t, x, Swish(x, b)-Swish(-x, b), ulps*math.Abs(x)+ulps)
		// ReLU(x) − ReLU(−x) = x exactly
		expect.Equal(t, x, ReLU(x)-ReLU(-x))
	}
}

// centralDiff is (f(x+h) − f(x−h)) / 2h with h = 2⁻²⁰·max(1, |x|): its
// truncation error is about h²·|f‴|/6 and its rounding error about
// ε·|f|/h, both near 1e-10 relative for the smooth functions here.
func centralDiff(f func(float64) float64, x float64) float64 {
	h := 0x1p-20 * max(1, math.Abs(x))
	return (f(x+h) - f(x-h)) / (2 * h)
}

func TestDerivativesFiniteDifferences(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	// The bound covers the finite difference's own error (about 1e-10
	// relative, see centralDiff) with room; an error in a derivative
	// formula shows at the 1e-2 level or above.
	const bound = 1e-8
	for _, a := range []Act{ActReLU, ActGELU, ActGELUTanh, ActGELUSigmoid, ActSigmoid, ActSiLU, ActSwish} {
		beta := 0.0
		if a == ActSwish {
			beta = 0.6
		}
		f, df := scalarFuncs(a, beta)
		for range 300 {
			x := (r.Float64()*2 - 1) * 10
			if a == ActReLU && math.Abs(x) < 1e-3 {
				continue // the kink
			}
			want := centralDiff(f, x)
			expect.InDelta(t, want, df(x), bound*(1+math.Abs(want)), "%v′(%v)", a, x)
		}
	}
}

// randLayer makes a random layer of the given kind, weights in the
// InByOut layout, separate gate and value projections.
func randLayer(r *rand.Rand, d Dims, gated, biases bool) ([]float64, Weights[float64]) {
	vec := func(n int) []float64 {
		v := make([]float64, n)
		for i := range v {
			v[i] = r.Float64()*2 - 1
		}
		return v
	}
	w := Weights[float64]{W1: vec(d.In * d.Hidden), W2: vec(d.Hidden * d.Out)}
	if biases {
		w.B1, w.B2 = vec(d.Hidden), vec(d.Out)
	}
	if gated {
		w.V = vec(d.In * d.Hidden)
		if biases {
			w.C = vec(d.Hidden)
		}
	}
	return vec(d.Rows * d.In), w
}

// transpose stores a logical [rows, cols] matrix given in InByOut as
// OutByIn: element (i, j) of m, at i·cols + j, moves to j·rows + i; written
// apart from the package's layouts.
func transpose(m []float64, rows, cols int) []float64 {
	out := make([]float64, len(m))
	for i := range rows {
		for j := range cols {
			out[j*rows+i] = m[i*cols+j]
		}
	}
	return out
}

// fuse packs gate w and value v (both InByOut, in × h) into one InByOut
// matrix of in × 2h, and biases b, c likewise.
func fuse(w, v []float64, in, h int, p Packing) []float64 {
	out := make([]float64, 2*in*h)
	for i := range in {
		for j := range h {
			g, u := j, h+j
			if p == GateUpInterleaved {
				g, u = 2*j, 2*j+1
			}
			out[i*2*h+g] = w[i*h+j]
			out[i*2*h+u] = v[i*h+j]
		}
	}
	return out
}

func toOutByIn(w Weights[float64], d Dims, fused bool) Weights[float64] {
	t := w
	t.W2 = transpose(w.W2, d.Hidden, d.Out)
	if fused {
		t.Fused = transpose(w.Fused, d.In, 2*d.Hidden)
		return t
	}
	t.W1 = transpose(w.W1, d.In, d.Hidden)
	if w.V != nil {
		t.V = transpose(w.V, d.In, d.Hidden)
	}
	return t
}

// Every storage of the same weights (both layouts; separate or fused in
// either packing) gives bit-identical outputs and gradients, the gradients
// stored as their parameters are.
func TestStorageFormsAreBitIdentical(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	for trial := range 40 {
		d := Dims{Rows: 1 + r.IntN(4), In: 1 + r.IntN(7), Hidden: 1 + r.IntN(9), Out: 1 + r.IntN(6)}
		acts := []Act{ActIdentity, ActReLU, ActGELU, ActGELUTanh, ActGELUSigmoid, ActSigmoid, ActSiLU, ActSwish}
		o := Options{Act: acts[trial%len(acts)], Gated: trial%2 == 0, Layout: InByOut}
		if o.Act == ActSwish {
			o.Beta = 1.25
		}
		x, w := randLayer(r, d, o.Gated, trial%3 != 0)
		dy := make([]float64, d.Rows*d.Out)
		for i := range dy {
			dy[i] = r.NormFloat64()
		}
		y, err := Forward(x, d, w, o)
		ensure.NoError(t, err)
		dx, g, err := Backward(x, dy, d, w, o)
		ensure.NoError(t, err)

		// OutByIn, same order of arithmetic
		ot := o
		ot.Layout = OutByIn
		y2, err := Forward(x, d, toOutByIn(w, d, false), ot)
		ensure.NoError(t, err)
		dx2, g2, err := Backward(x, dy, d, toOutByIn(w, d, false), ot)
		ensure.NoError(t, err)
		ensure.Equal(t, y, y2, "OutByIn forward")
		ensure.Equal(t, dx, dx2, "OutByIn dx")
		ensure.Equal(t, toOutByIn(g, d, false), g2, "OutByIn gradients")

		if !o.Gated {
			continue
		}
		for _, p := range []Packing{GateUpStacked, GateUpInterleaved} {
			for _, layout := range []Layout{InByOut, OutByIn} {
				fw := Weights[float64]{Fused: fuse(w.W1, w.V, d.In, d.Hidden, p), W2: w.W2, B2: w.B2}
				if w.B1 != nil {
					fw.FusedBias = fuse(w.B1, w.C, 1, d.Hidden, p)
				}
				if layout == OutByIn {
					fw = toOutByIn(fw, d, true)
				}
				fo := o
				fo.Layout, fo.Packing = layout, p
				y3, err := Forward(x, d, fw, fo)
				ensure.NoError(t, err)
				dx3, g3, err := Backward(x, dy, d, fw, fo)
				ensure.NoError(t, err)
				ensure.Equal(t, y, y3, "%v %v forward", p, layout)
				ensure.Equal(t, dx, dx3, "%v %v dx", p, layout)
				want := Weights[float64]{Fused: fuse(g.W1, g.V, d.In, d.Hidden, p), FusedBias: fuse(g.B1, g.C, 1, d.Hidden, p), W2: g.W2, B2: g.B2}
				if layout == OutByIn {
					want = toOutByIn(want, d, true)
				}
				ensure.Equal(t, want, g3, "%v %v gradients", p, layout)
			}
		}
	}
}

// Backward against central finite differences of the scalar loss
// L = Σ dy ⊙ Forward(x), for every input and parameter.
func TestBackwardFiniteDifferences(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	// The finite difference with h = 2⁻²⁰ has truncation error about
	// h²·|L‴| and rounding error about ε·|L|/h, both below 1e-9 here; a
	// wrong gradient formula is off by O(1).
	const bound = 1e-7
	for trial, a := range []Act{ActReLU, ActGELU, ActGELUTanh, ActGELUSigmoid, ActSigmoid, ActSiLU, ActSwish, ActIdentity} {
		for _, gated := range []bool{false, true} {
			d := Dims{Rows: 2, In: 3, Hidden: 4, Out: 2}
			o := Options{Act: a, Gated: gated, Layout: OutByIn}
			if a == ActSwish {
				o.Beta = -0.8
			}
			x, w := randLayer(r, d, gated, true)
			dy := []float64{0.3, -1.1, 0.7, 0.25}
			loss := func() float64 {
				y, err := Forward(x, d, w, o)
				ensure.NoError(t, err)
				s := 0.0
				for i := range y {
					s += y[i] * dy[i]
				}
				return s
			}
			dx, g, err := Backward(x, dy, d, w, o)
			ensure.NoError(t, err)
			check := func(name string, p, grad []float64) {
				for i := range p {
					orig := p[i]
					h := 0x1p-20
					p[i] = orig + h
					up := loss()
					p[i] = orig - h
					down := loss()
					p[i] = orig
					fd := (up - down) / (2 * h)
					expect.InDelta(t, fd, grad[i], bound*(1+math.Abs(fd)), "trial %d %v gated=%v: %s[%d]", trial, a, gated, name, i)
				}
			}
			check("x", x, dx)
			check("W1", w.W1, g.W1)
			check("B1", w.B1, g.B1)
			check("W2", w.W2, g.W2)
			check("B2", w.B2, g.B2)
			if gated {
				check("V", w.V, g.V)
				check("C", w.C, g.C)
			}
		}
	}
}

// Every bias gradient is returned, also when the bias is nil, and equals
// the gradient computed with an explicit zero bias.
func TestNilBiasGradients(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 10))
	d := Dims{Rows: 3, In: 4, Hidden: 5, Out: 2}
	x, w := randLayer(r, d, true, false)
	dy := []float64{1, -2, 0.5, 0.25, -1, 3}
	o := Options{Act: ActSiLU, Gated: true, Layout: InByOut}
	dx, g, err := Backward(x, dy, d, w, o)
	ensure.NoError(t, err)
	ensure.Len(t, g.B1, d.Hidden)
	ensure.Len(t, g.C, d.Hidden)
	ensure.Len(t, g.B2, d.Out)
	wz := w
	wz.B1, wz.C, wz.B2 = make([]float64, d.Hidden), make([]float64, d.Hidden), make([]float64, d.Out)
	dxz, gz, err := Backward(x, dy, d, wz, o)
	ensure.NoError(t, err)
	expect.Equal(t, dx, dxz)
	expect.Equal(t, g, gz)
}

func TestHiddenSize(t *testing.T) {
	tests := []struct {
		d, m, want int
		source     string
	}{
		{4096, 256, 11008, "common practice"},
		{4096, 1, 10923, "⌈8·4096/3⌉ = ⌈10922.67⌉ (arithmetic)"},
		{3, 1, 8, "8·3/3 = 8 exactly (arithmetic)"},
		{1, 256, 256, "⌈8/768⌉ = 1 (arithmetic)"},
	}
	for _, tt := range tests {
		h, err := HiddenSize(tt.d, tt.m)
		ensure.NoError(t, err)
		expect.Equal(t, tt.want, h, "d = %d, m = %d (%s)", tt.d, tt.m, tt.source)
	}
	// property: h is the least multiple of m that is ≥ 8d/3
	r := rand.New(rand.NewPCG(11, 12))
	for range 500 {
		d, m := 1+r.IntN(1<<20), 1+r.IntN(1024)
		h, err := HiddenSize(d, m)
		ensure.NoError(t, err)
		expect.Zero(t, h%m)
		expect.GreaterOrEqual(t, 3*h, 8*d)
		expect.Less(t, 3*(h-m), 8*d)
	}
	for _, bad := range [][2]int{{0, 256}, {-1, 1}, {4096, 0}, {4096, -3}, {math.MaxInt / 2, 256}, {1, math.MaxInt}} {
		_, err := HiddenSize(bad[0], bad[1])
		expect.ErrorIs(t, err, ErrShape, "HiddenSize(%d, %d)", bad[0], bad[1])
	}
}

// Bad arguments: each gives its named error, whose message names the
// argument and the values, and never a panic.
func TestErrors(t *testing.T) {
	d := Dims{Rows: 2, In: 3, Hidden: 4, Out: 5}
	vec := func(n int) []float64 { return make([]float64, n) }
	plain := Weights[float64]{W1: vec(12), B1: vec(4), W2: vec(20), B2: vec(5)}
	gated := Weights[float64]{W1: vec(12), V: vec(12), W2: vec(20)}
	fused := Weights[float64]{Fused: vec(24), FusedBias: vec(8), W2: vec(20)}
	x := vec(6)
	po := Options{Act: ActReLU, Layout: InByOut}
	gatedOpt := Options{Act: ActSiLU, Gated: true, Layout: OutByIn}
	fusedOpt := Options{Act: ActSiLU, Gated: true, Layout: OutByIn, Packing: GateUpStacked}
	with := func(w Weights[float64], f func(*Weights[float64])) Weights[float64] { f(&w); return w }
	tests := []struct {
		name string
		x    []float64
		d    Dims
		w    Weights[float64]
		o    Options
		err  error
		msg  string
	}{
		{"unknown activation", x, d, plain, Options{Act: 99, Layout: InByOut}, ErrOption, "ffn: invalid option: Forward: Options.Act = 99; want one of relu, gelu, gelu-tanh, gelu-sigmoid, sigmoid, silu, swish, identity"},
		{"negative activation", x, d, plain, Options{Act: -1}, ErrOption, "ffn: invalid option: Forward: Options.Act = -1; want one of relu, gelu, gelu-tanh, gelu-sigmoid, sigmoid, silu, swish, identity"},
		{"unknown layout", x, d, plain, Options{Act: ActReLU, Layout: 2}, ErrOption, "ffn: invalid option: Forward: Options.Layout = 2; want one of in-by-out, out-by-in"},
		{"NaN beta", x, d, plain, Options{Act: ActSwish, Beta: math.NaN(), Layout: InByOut}, ErrBeta, "ffn: invalid beta: Forward: Options.Beta = NaN; want a finite number (the Swish β)"},
		{"Inf beta", x, d, plain, Options{Act: ActSwish, Beta: math.Inf(-1), Layout: InByOut}, ErrBeta, "ffn: invalid beta: Forward: Options.Beta = -Inf; want a finite number (the Swish β)"},
		{"beta without Swish", x, d, plain, Options{Act: ActGELUSigmoid, Beta: 1.702, Layout: InByOut}, ErrBeta, "ffn: invalid beta: Forward: Options.Beta = 1.702; want 0: activation gelu-sigmoid has no β (only swish takes one)"},
		{"NaN beta without Swish", x, d, plain, Options{Act: ActSiLU, Beta: math.NaN(), Layout: InByOut}, ErrBeta, "ffn: invalid beta: Forward: Options.Beta = NaN; want 0: activation silu has no β (only swish takes one)"},
		{"negative rows", x, Dims{-1, 3, 4, 5}, plain, po, ErrShape, "ffn: invalid shape: Forward: Dims.Rows = -1; want ≥ 0"},
		{"zero in", x, Dims{2, 0, 4, 5}, plain, po, ErrShape, "ffn: invalid shape: Forward: Dims.In = 0; want ≥ 1"},
		{"zero hidden", x, Dims{2, 3, 0, 5}, plain, po, ErrShape, "ffn: invalid shape: Forward: Dims.Hidden = 0; want ≥ 1"},
		{"zero out", x, Dims{2, 3, 4, 0}, plain, po, ErrShape, "ffn: invalid shape: Forward: Dims.Out = 0; want ≥ 1"},
		{"huge dims", x, Dims{math.MaxInt / 2, 3, 4, 5}, plain, po, ErrShape, "ffn: invalid shape: Forward: Dims = {Rows:4611686018427387903 In:3 Hidden:4 Out:5}; want sizes whose element counts fit an int"},
		{"short x", vec(5), d, plain, po, ErrShape, "ffn: invalid shape: Forward: x has 5 elements; want Rows·In = 2·3 = 6"},
		{"missing W1", x, d, with(plain, func(w *Weights[float64]) { w.W1 = nil }), po, ErrWeightLen, "ffn: wrong weight length: Forward: Weights.W1 has 0 elements; want In·Hidden = 3·4 = 12"},
		{"W1 wrong length", x, d, with(plain, func(w *Weights[float64]) { w.W1 = vec(13) }), po, ErrWeightLen, "ffn: wrong weight length: Forward: Weights.W1 has 13 elements; want In·Hidden = 3·4 = 12"},
		{"W1 other hidden", x, d, with(plain, func(w *Weights[float64]) { w.W1 = vec(18) }), po, ErrHidden, "ffn: mismatched hidden size: Forward: Weights.W1 has 18 elements, implying hidden size 6; want Dims.Hidden = 4, In·Hidden = 3·4 = 12 elements"},
		{"B1 other hidden", x, d, with(plain, func(w *Weights[float64]) { w.B1 = vec(3) }), po, ErrHidden, "ffn: mismatched hidden size: Forward: Weights.B1 has 3 elements; want Hidden = 4, or 0 for no bias"},
		{"W2 other hidden", x, d, with(plain, func(w *Weights[float64]) { w.W2 = vec(35) }), po, ErrHidden, "ffn: mismatched hidden size: Forward: Weights.W2 has 35 elements, implying hidden size 7; want Dims.Hidden = 4, Hidden·Out = 4·5 = 20 elements"},
		{"W2 wrong length", x, d, with(plain, func(w *Weights[float64]) { w.W2 = vec(21) }), po, ErrWeightLen, "ffn: wrong weight length: Forward: Weights.W2 has 21 elements; want Hidden·Out = 4·5 = 20"},
		{"B2 wrong length", x, d, with(plain, func(w *Weights[float64]) { w.B2 = vec(4) }), po, ErrWeightLen, "ffn: wrong weight length: Forward: Weights.B2 has 4 elements; want Out = 5, or 0 for no bias"},
		{"V on a plain layer", x, d, with(plain, func(w *Weights[float64]) { w.V = vec(12) }), po, ErrWeightLen, "ffn: wrong weight length: Forward: Weights.V has 12 elements; want 0: the layer is not gated (Options.Gated is false)"},
		{"gated without V", x, d, with(gated, func(w *Weights[float64]) { w.V = nil }), gatedOpt, ErrWeightLen, "ffn: wrong weight length: Forward: Weights.V has 0 elements; want In·Hidden = 3·4 = 12"},
		{"gated V other hidden", x, d, with(gated, func(w *Weights[float64]) { w.V = vec(24) }), gatedOpt, ErrHidden, "ffn: mismatched hidden size: Forward: Weights.V has 24 elements, implying hidden size 8; want Dims.Hidden = 4, In·Hidden = 3·4 = 12 elements"},
		{"gated C other hidden", x, d, with(gated, func(w *Weights[float64]) { w.C = vec(5) }), gatedOpt, ErrHidden, "ffn: mismatched hidden size: Forward: Weights.C has 5 elements; want Hidden = 4, or 0 for no bias"},
		{"fused and separate", x, d, with(fused, func(w *Weights[float64]) { w.W1 = vec(12) }), fusedOpt, ErrWeightLen, "ffn: wrong weight length: Forward: Weights.W1 has 12 elements; want 0: Weights.Fused is given; use either W1, B1, V, C or Fused, FusedBias"},
		{"fused with an unknown packing", x, d, fused, Options{Act: ActSiLU, Gated: true, Packing: 7}, ErrOption, "ffn: invalid option: Forward: Options.Packing = 7; want one of stacked, interleaved"},
		{"fused other hidden", x, d, with(fused, func(w *Weights[float64]) { w.Fused = vec(30) }), fusedOpt, ErrHidden, "ffn: mismatched hidden size: Forward: Weights.Fused has 30 elements, implying hidden size 5; want Dims.Hidden = 4, In·2·Hidden = 3·2·4 = 24 elements"},
		{"fused odd width", x, d, with(fused, func(w *Weights[float64]) { w.Fused = vec(27) }), fusedOpt, ErrWeightLen, "ffn: wrong weight length: Forward: Weights.Fused has 27 elements; want In·2·Hidden = 3·2·4 = 24"},
		{"fused bias other hidden", x, d, with(fused, func(w *Weights[float64]) { w.FusedBias = vec(4) }), fusedOpt, ErrHidden, "ffn: mismatched hidden size: Forward: Weights.FusedBias has 4 elements; want 2·Hidden = 2·4 = 8, or 0 for no bias"},
	}
	// Every layer function checks the same way and names itself: the
	// message is Forward's with the function's name in its place.
	to32 := func(v []float64) []float32 { return num.Convert[float32](v) }
	dy := vec(10)
	type run func(x []float64, d Dims, w Weights[float64], o Options) error
	fwd := func(f func([]float64, Dims, Weights[float64], Options) ([]float64, error)) run {
		return func(x []float64, d Dims, w Weights[float64], o Options) error {
			_, err := f(x, d, w, o)
			return err
		}
	}
	fwd32 := func(f func([]float32, Dims, Weights[float32], Options) ([]float32, error)) run {
		return func(x []float64, d Dims, w Weights[float64], o Options) error {
			_, err := f(to32(x), d, weights32(w), o)
			return err
		}
	}
	bwd := func(f func([]float64, []float64, Dims, Weights[float64], Options) ([]float64, Weights[float64], error)) run {
		return func(x []float64, d Dims, w Weights[float64], o Options) error {
			_, _, err := f(x, dy, d, w, o)
			return err
		}
	}
	bwd32 := func(f func([]float32, []float32, Dims, Weights[float32], Options) ([]float32, Weights[float32], error)) run {
		return func(x []float64, d Dims, w Weights[float64], o Options) error {
			_, _, err := f(to32(x), to32(dy), d, weights32(w), o)
			return err
		}
	}
	layers := []struct {
		name string
		run  run
	}{
		{"Forward", fwd(Forward)}, {"Forward32", fwd32(Forward32)}, {"ForwardFast", fwd(ForwardFast)}, {"ForwardFast32", fwd32(ForwardFast32)},
		{"Backward", bwd(Backward)}, {"Backward32", bwd32(Backward32)}, {"BackwardFast", bwd(BackwardFast)}, {"BackwardFast32", bwd32(BackwardFast32)},
	}
	for _, tt := range tests {
		for _, l := range layers {
			err := l.run(tt.x, tt.d, tt.w, tt.o)
			ensure.Error(t, err, "%s: %s", l.name, tt.name)
			expect.ErrorIs(t, err, tt.err, "%s: %s: %v", l.name, tt.name, err)
			expect.Equal(t, strings.Replace(tt.msg, ": Forward: ", ": "+l.name+": ", 1), err.Error(), "%s: %s", l.name, tt.name)
			expect.Equal(t, 1, sentinels(err), "%s: %s: wraps exactly one sentinel: %v", l.name, tt.name, err)
		}
	}

	_, _, err := Backward(x, vec(9), d, plain, po)
	expect.ErrorIs(t, err, ErrShape)
	expect.EqualError(t, err, "ffn: invalid shape: Backward: dy has 9 elements; want Rows·Out = 2·5 = 10")
	_, _, err = BackwardFast32(to32(x), to32(vec(11)), d, weights32(plain), po)
	expect.EqualError(t, err, "ffn: invalid shape: BackwardFast32: dy has 11 elements; want Rows·Out = 2·5 = 10")

	// The vector forms name their arguments a and beta.
	_, err = Activate([]float64{1}, ActSwish, math.NaN())
	expect.ErrorIs(t, err, ErrBeta)
	expect.EqualError(t, err, "ffn: invalid beta: Activate: beta = NaN; want a finite number (the Swish β)")
	_, err = Activate([]float64{1}, 99, 0)
	expect.ErrorIs(t, err, ErrOption)
	expect.EqualError(t, err, "ffn: invalid option: Activate: a = 99; want one of relu, gelu, gelu-tanh, gelu-sigmoid, sigmoid, silu, swish, identity")
	_, err = ActivateGrad32([]float32{1}, []float32{1}, ActIdentity+1, 0)
	expect.ErrorIs(t, err, ErrOption)
	expect.EqualError(t, err, "ffn: invalid option: ActivateGrad32: a = 8; want one of relu, gelu, gelu-tanh, gelu-sigmoid, sigmoid, silu, swish, identity")
	_, err = ActivateGrad([]float64{1, 2}, []float64{1}, ActReLU, 0)
	expect.ErrorIs(t, err, ErrShape)
	expect.EqualError(t, err, "ffn: invalid shape: ActivateGrad: dy has 1 elements; want len(x) = 2")
	_, err = Activate32([]float32{1}, ActGELU, 2)
	expect.ErrorIs(t, err, ErrBeta)
	expect.EqualError(t, err, "ffn: invalid beta: Activate32: beta = 2; want 0: activation gelu has no β (only swish takes one)")
}

// sentinels counts the package's sentinel errors err wraps.
func sentinels(err error) int {
	n := 0
	for _, s := range []error{ErrShape, ErrWeightLen, ErrHidden, ErrBeta, ErrOption} {
		if errors.Is(err, s) {
			n++
		}
	}
	return n
}

func TestEmptyRows(t *testing.T) {
	d := Dims{Rows: 0, In: 2, Hidden: 3, Out: 1}
	w := Weights[float64]{W1: make([]float64, 6), W2: make([]float64, 3)}
	y, err := Forward(nil, d, w, Options{Act: ActReLU, Layout: InByOut})
	ensure.NoError(t, err)
	expect.Empty(t, y)
	dx, g, err := Backward(nil, nil, d, w, Options{Act: ActReLU, Layout: InByOut})
	ensure.NoError(t, err)
	expect.Empty(t, dx)
	expect.Equal(t, make([]float64, 6), g.W1)
}

// TestZeroOptions checks the documented zero values: Options{} is the plain
// ReLU layer of Vaswani et al. 2017, Eq. (2), with [in, out] weights, and a
// fused gate-up matrix with the zero Packing is stacked.
func TestZeroOptions(t *testing.T) {
	var o Options
	expect.Equal(t, ActReLU, o.Act)
	expect.Equal(t, InByOut, o.Layout)
	expect.Equal(t, GateUpStacked, o.Packing)
	expect.False(t, o.Gated)

	// x = (1, −2); W1 = [[1, 2], [3, −1]] as [in, out]: x·W1 = (−5, 4),
	// ReLU gives (0, 4); W2 = [0.5, 0.25] as [hidden, out], b2 = 0.125:
	// y = 4·0.25 + 0.125 = 1.125 (arithmetic, exact in float64). Read as
	// [out, in], W1 would give x·W1ᵀ = (−3, 5) and y = 1.375 instead.
	d := Dims{Rows: 1, In: 2, Hidden: 2, Out: 1}
	w := Weights[float64]{W1: []float64{1, 2, 3, -1}, W2: []float64{0.5, 0.25}, B2: []float64{0.125}}
	y, err := Forward([]float64{1, -2}, d, w, Options{})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{1.125}, y)
	y, err = Forward([]float64{1, -2}, d, w, Options{Layout: OutByIn})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{1.375}, y)
	yf, err := ForwardFast([]float64{1, -2}, d, w, Options{})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{1.125}, yf)

	// ReLU is the zero Act of the vector forms too.
	a, err := Activate([]float64{-1, 0, 2.5}, 0, 0)
	ensure.NoError(t, err)
	expect.Equal(t, []float64{0, 0, 2.5}, a)

	// The zero Packing reads a fused matrix as all gate units, then all
	// value units: the same layer as the separate W1 and V.
	r := rand.New(rand.NewPCG(13, 14))
	dg := Dims{Rows: 2, In: 3, Hidden: 4, Out: 2}
	x, sep := randLayer(r, dg, true, true)
	fused := Weights[float64]{Fused: fuse(sep.W1, sep.V, dg.In, dg.Hidden, GateUpStacked),
		FusedBias: append(append([]float64(nil), sep.B1...), sep.C...), W2: sep.W2, B2: sep.B2}
	ys, err := Forward(x, dg, sep, Options{Act: ActSiLU, Gated: true})
	ensure.NoError(t, err)
	yz, err := Forward(x, dg, fused, Options{Act: ActSiLU, Gated: true})
	ensure.NoError(t, err)
	expect.Equal(t, ys, yz)
}

func TestStrings(t *testing.T) {
	expect.Equal(t, "gelu-tanh", ActGELUTanh.String())
	expect.Equal(t, "relu", Act(0).String())
	expect.Equal(t, "Act(99)", Act(99).String())
	expect.Equal(t, "in-by-out", Layout(0).String())
	expect.Equal(t, "out-by-in", OutByIn.String())
	expect.Equal(t, "Layout(2)", Layout(2).String())
	expect.Equal(t, "stacked", Packing(0).String())
	expect.Equal(t, "interleaved", GateUpInterleaved.String())
	expect.Equal(t, "Packing(7)", Packing(7).String())
}

// TestWords checks the words of Act, Layout and Packing: every constant has
// one, in the order of the constants with the zero value first; other text
// is an error wrapping ErrOption that lists the words and leaves the value
// alone. (Every word's round trip, for every convention, is checked in
// internal/vocab.)
func TestWords(t *testing.T) {
	expect.Equal(t, []Act{ActReLU, ActGELU, ActGELUTanh, ActGELUSigmoid, ActSigmoid, ActSiLU, ActSwish, ActIdentity}, Act(0).Values())
	expect.Equal(t, []Layout{InByOut, OutByIn}, Layout(0).Values())
	expect.Equal(t, []Packing{GateUpStacked, GateUpInterleaved}, Packing(0).Values())
	a := ActSwish
	err := a.UnmarshalText([]byte("gelu_tanh"))
	ensure.ErrorIs(t, err, ErrOption, "the old spelling is not a word")
	expect.Equal(t, `ffn: invalid option: activation = "gelu_tanh"; want one of relu, gelu, gelu-tanh, gelu-sigmoid, sigmoid, silu, swish, identity`, err.Error())
	expect.Equal(t, ActSwish, a)
	var l Layout
	ensure.NoError(t, l.UnmarshalText([]byte(" OUT-BY-IN ")), "words are read without regard to case and surrounding space")
	expect.Equal(t, OutByIn, l)
	expect.ErrorIs(t, l.UnmarshalText([]byte("in_by_out")), ErrOption)
	expect.Equal(t, OutByIn, l)
	var p Packing
	expect.ErrorIs(t, p.UnmarshalText([]byte("GateUpInterleaved")), ErrOption)
	_, err = Act(99).MarshalText()
	expect.ErrorIs(t, err, ErrOption)
	expect.ErrorIs(t, Layout(2).Check(), ErrOption)
	expect.ErrorIs(t, Packing(2).Check(), ErrOption)
}

// FuzzForward: any sizes and slice lengths give either an error wrapping
// a sentinel or outputs of the documented shapes; never a panic.
func FuzzForward(f *testing.F) {
	f.Add(2, 3, 4, 5, 6, 12, 12, 20, 4, 5, uint8(3), true, uint8(1), uint8(1), 0.0)
	f.Add(1, 1, 1, 1, 1, 1, 1, 1, 0, 0, uint8(8), true, uint8(2), uint8(2), 1.5)
	f.Add(0, 2, 2, 2, 0, 4, 0, 4, 2, 2, uint8(2), false, uint8(1), uint8(0), math.NaN())
	f.Fuzz(func(t *testing.T, rows, in, hidden, out, nx, nw1, nv, nw2, nb1, nb2 int, act uint8, gated bool, layout, packing uint8, beta float64) {
		clamp := func(n int) int { return int(uint(n) % 64) }
		d := Dims{rows % 9, in % 9, hidden % 9, out % 9}
		vec := func(n int) []float64 {
			v := make([]float64, clamp(n))
			for i := range v {
				v[i] = float64(i%7) - 3
			}
			return v
		}
		w := Weights[float64]{W1: vec(nw1), B1: vec(nb1), W2: vec(nw2), B2: vec(nb2)}
		if gated && packing%3 == 0 {
			w.V = vec(nv)
		} else if gated {
			w.Fused, w.W1 = w.W1, nil
		}
		o := Options{Act: Act(act % 10), Gated: gated, Layout: Layout(layout % 3), Packing: Packing(packing % 3)}
		if o.Act == ActSwish {
			o.Beta = beta
		}
		x := vec(nx)
		y, err := Forward(x, d, w, o)
		if err != nil {
			if n := sentinels(err); n != 1 {
				t.Fatalf("error wraps %d sentinels: %v", n, err)
			}
			return
		}
		if len(y) != d.Rows*d.Out {
			t.Fatalf("y has %d elements, want %d", len(y), d.Rows*d.Out)
		}
		yf, err := ForwardFast(x, d, w, o)
		if err != nil || len(yf) != len(y) {
			t.Fatalf("ForwardFast: %d elements, error %v; Forward gave %d", len(yf), err, len(y))
		}
		dy := make([]float64, len(y))
		if _, _, err := BackwardFast(x, dy, d, w, o); err != nil {
			t.Fatalf("Forward accepted what BackwardFast refuses: %v", err)
		}
		dx, g, err := Backward(x, dy, d, w, o)
		if err != nil {
			t.Fatalf("Forward accepted what Backward refuses: %v", err)
		}
		if len(dx) != len(x) || len(g.W2) != len(w.W2) || len(g.B2) != d.Out {
			t.Fatalf("gradient shapes: dx %d (x %d), dW2 %d (W2 %d), dB2 %d", len(dx), len(x), len(g.W2), len(w.W2), len(g.B2))
		}
	})
}

// FuzzActivations: for finite x and a finite β every activation and
// derivative is a number (no NaN from ∞·0 or ∞ − ∞ inside), and the
// float64 and float32 bodies agree on which inputs are refused.
func FuzzActivations(f *testing.F) {
	f.Add(1.0, 1.0)
	f.Add(-30.0, 0.25)
	f.Add(1e308, -1e300)
	f.Add(-5e-324, 0.0)
	f.Fuzz(func(t *testing.T, x, beta float64) {
		if math.IsNaN(x) || math.IsInf(x, 0) || math.IsNaN(beta) || math.IsInf(beta, 0) {
			return
		}
		for _, a := range Act(0).Values() {
			b := 0.0
			if a == ActSwish {
				b = beta
			}
			y, err := Activate([]float64{x}, a, b)
			if err != nil {
				t.Fatalf("%v, β = %v: %v", a, b, err)
			}
			d, err := ActivateGrad([]float64{x}, []float64{1}, a, b)
			if err != nil {
				t.Fatalf("%v, β = %v: %v", a, b, err)
			}
			if math.IsNaN(y[0]) || math.IsNaN(d[0]) {
				t.Fatalf("%v(%v), β = %v: value %v, derivative %v", a, x, b, y[0], d[0])
			}
			_, err32 := Activate32([]float32{float32(x)}, a, b)
			if err32 != nil {
				t.Fatalf("float32: %v", err32)
			}
		}
	})
}
