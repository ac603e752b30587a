package ffn

import (
	"math"
	"os"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/internal/num"
)

// The golden files under testdata/golden/ffn are made by
// testdata/gen/fam_ffn.py: every formula evaluated again from its
// published definition with mpmath at 50 significant digits on the exact
// float64 inputs, each output rounded once to float64.

// Tolerances, and why.
const (
	// actCoreBound bounds the normwise relative error of an activation or
	// its derivative over the core inputs (|x| ≤ 8, tiny and signed-zero
	// inputs): each value is a dozen operations rounded to nearest and one
	// call of math.Exp or math.Erfc (within about 1 ulp), so a few ulps.
	actCoreBound = 4 * 0x1p-52
	// actTailBound bounds the error relative to each value for 5 ≤ |x| ≤ 30
	// (the tails, where values go down to about 1e-197): the same few ulps,
	// because the arguments of the exponentials are carried exactly.
	actTailBound = 8 * 0x1p-52
	// layerBound is the project's target for a layer's output and every
	// gradient, normwise relative against the 50-digit values. The sums
	// here have a handful of terms each; the measured error is far below.
	layerBound = 1e-14
	// layer32Bound bounds the float32 instantiation against the same
	// golden values: float32 has unit roundoff 6e-8 and the sums are short,
	// so 1e-5 is loose but tells a float32 body from a wrong one.
	layer32Bound = 1e-5
)

// actConfig is the "config" object of the cases in
// testdata/golden/ffn/activations.json (testdata/gen/fam_ffn.py), with the
// keys of the activation operation (ops/ffn.go): the activation by its
// word, which json decodes.
type actConfig struct {
	Function Act      `json:"function"`
	Beta     *float64 `json:"beta"`
	Part     string   `json:"part"` // "core", "tail" or "far"
}

func decodeActConfig(t *testing.T, c *golden.Case) actConfig {
	t.Helper()
	var cfg actConfig
	ensure.NoError(t, c.DecodeConfig(&cfg))
	ensure.Contains(t, []string{"core", "tail", "far"}, cfg.Part, c.String())
	return cfg
}

// scalarFuncs maps each activation to its exported scalar function and
// derivative, so that the golden check covers the scalar API as well as
// Activate. The identity has no scalar function: it is φ(x) = x with slope
// 1 (NaN at NaN, which the golden inputs do not hold).
func scalarFuncs(a Act, beta float64) (f, df func(float64) float64) {
	switch a {
	case ActIdentity:
		return func(x float64) float64 { return x }, func(float64) float64 { return 1 }
	case ActReLU:
		return ReLU, ReLUDeriv
	case ActGELU:
		return GELU, GELUDeriv
	case ActGELUTanh:
		return GELUTanh, GELUTanhDeriv
	case ActGELUSigmoid:
		return GELUSigmoid, GELUSigmoidDeriv
	case ActSigmoid:
		return Sigmoid, SigmoidDeriv
	case ActSiLU:
		return SiLU, SiLUDeriv
	case ActSwish:
		return func(x float64) float64 { return Swish(x, beta) },
			func(x float64) float64 { return SwishDeriv(x, beta) }
	}
	return nil, nil
}

// tensor returns the tensor name of the case c, read by get (c.Float,
// c.Ints); the test stops if it is missing or malformed.
func tensor[V any](t *testing.T, c *golden.Case, name string, get func(string) (V, []int, error)) V {
	t.Helper()
	v, _, err := get(name)
	ensure.NoError(t, err, "%s: tensor %s", c, name)
	return v
}

// maxRelErr returns the largest elementwise relative error; a zero wanted
// value must be matched by a zero.
func maxRelErr(got, want []float64) float64 {
	worst := 0.0
	for i := range want {
		var e float64
		switch {
		case want[i] == 0:
			e = math.Abs(got[i]) * math.Inf(1)
			if got[i] == 0 {
				e = 0
			}
		default:
			e = math.Abs(got[i]-want[i]) / math.Abs(want[i])
		}
		if !(e <= worst) {
			worst = e
		}
	}
	return worst
}

// The package's two accuracy tables in doc.go, which the golden tests
// measure: TestMain fails when one is out of date.
var (
	actAccuracy = &golden.Accuracy{
		Path:    "doc.go",
		Heading: "// Worst error of the activations over the golden cases: normwise for |x| ≤ 8 (core), largest relative for 5 ≤ |x| ≤ 30 (tail) and beyond (far):",
		Rows:    actRows(),
		Cols:    []string{"core", "tail", "far"},
	}
	layerAccuracy = &golden.Accuracy{
		Path: "doc.go",
		Rows: []string{"Forward", "ForwardFast", "Backward", "BackwardFast", "Forward32", "ForwardFast32", "Backward32", "BackwardFast32"},
		Cols: []string{"y", "dx", "dweights"},
	}
)

// actRows are the activation table's rows: each activation's word, then
// its derivative.
func actRows() []string {
	var rows []string
	for _, a := range Act(0).Values() {
		rows = append(rows, a.String(), a.String()+" derivative")
	}
	return rows
}

func TestMain(m *testing.M) { os.Exit(golden.Main(m, actAccuracy, layerAccuracy)) }

func TestGoldenActivations(t *testing.T) {
	f := golden.MustLoadFamily(t, "ffn", "activations")
	for _, c := range f.Cases {
		t.Run(c.Name, func(t *testing.T) {
			cfg := decodeActConfig(t, c)
			a := cfg.Function
			beta := 0.0
			if cfg.Beta != nil {
				beta = *cfg.Beta
			}
			x, wantY, wantD := tensor(t, c, "x", c.Float), tensor(t, c, "y", c.Float), tensor(t, c, "dydx", c.Float)

			y, err := Activate(x, a, beta)
			ensure.NoError(t, err)
			ones := make([]float64, len(x))
			for i := range ones {
				ones[i] = 1
			}
			d, err := ActivateGrad(x, ones, a, beta)
			ensure.NoError(t, err)

			// the scalar functions are the same bodies: bit-identical
			sf, sdf := scalarFuncs(a, beta)
			for i, xi := range x {
				ensure.Equal(t, math.Float64bits(y[i]), math.Float64bits(sf(xi)), "scalar value at x = %v", xi)
				ensure.Equal(t, math.Float64bits(d[i]), math.Float64bits(sdf(xi)), "scalar derivative at x = %v", xi)
			}

			key := a.String()
			switch cfg.Part {
			case "core":
				ey := golden.NormwiseRelErr(y, wantY)
				ed := golden.NormwiseRelErr(d, wantD)
				expect.LessOrEqual(t, ey, actCoreBound, golden.Describe(c, "y", ey, actCoreBound))
				expect.LessOrEqual(t, ed, actCoreBound, golden.Describe(c, "dydx", ed, actCoreBound))
				actAccuracy.Note(key, cfg.Part, ey)
				actAccuracy.Note(key+" derivative", cfg.Part, ed)
			case "tail", "far":
				// far: |βx| > 30, where values and slopes are within a
				// rounding of x, 1 or 0 (or, for the lower tails of the
				// sigmoids and the exact GELU, normal numbers down to
				// 1e-282): the same relative bound as the tails.
				ey := maxRelErr(y, wantY)
				ed := maxRelErr(d, wantD)
				expect.LessOrEqual(t, ey, actTailBound, "%s: y: largest relative error %.3g in the %s part exceeds %.3g", c, ey, cfg.Part, actTailBound)
				expect.LessOrEqual(t, ed, actTailBound, "%s: dydx: largest relative error %.3g in the %s part exceeds %.3g", c, ed, cfg.Part, actTailBound)
				actAccuracy.Note(key, cfg.Part, ey)
				actAccuracy.Note(key+" derivative", cfg.Part, ed)
			default:
				t.Fatalf("%s: unknown part %q", c, cfg.Part)
			}

			// float32: the same bodies, checked loosely against the same values
			x32 := make([]float32, len(x))
			for i, v := range x {
				x32[i] = float32(v)
			}
			y32, err := Activate32(x32, a, beta)
			ensure.NoError(t, err)
			for i := range y32 {
				if cfg.Part != "core" || math.Abs(x[i]) < 1e-30 {
					continue // float32 underflows on these inputs
				}
				expect.InDelta(t, wantY[i], float64(y32[i]), 1e-6*(1+math.Abs(wantY[i])), "float32 at x = %v", x[i])
			}
		})
	}
}

// layerConfig is the "config" object of the cases in
// testdata/golden/ffn/{plain,gated}.json (testdata/gen/fam_ffn.py), with
// the keys of the ffn operations (ops/ffn.go) for the options: the
// convention fields hold their words, which json decodes. Packing is
// present for a fused weight only.
type layerConfig struct {
	Activation Act      `json:"activation"`
	Beta       *float64 `json:"beta"`
	Gated      bool     `json:"gated"`
	Layout     Layout   `json:"layout"`
	Storage    string   `json:"storage"` // "separate" or "fused"
	Packing    *Packing `json:"packing"`
	Rows       int      `json:"rows"`
	In         int      `json:"in"`
	Hidden     int      `json:"hidden"`
	Out        int      `json:"out"`
	Biases     bool     `json:"biases"`
}

func decodeLayerConfig(t *testing.T, c *golden.Case) layerConfig {
	t.Helper()
	var cfg layerConfig
	ensure.NoError(t, c.DecodeConfig(&cfg))
	ensure.Contains(t, []string{"separate", "fused"}, cfg.Storage, c.String())
	ensure.Equal(t, cfg.Storage == "fused", cfg.Packing != nil, "%s: a packing with a fused weight, and only then", c)
	return cfg
}

// goldenLayer is one decoded layer case.
type goldenLayer struct {
	d     Dims
	o     Options
	w     Weights[float64]
	x, dy []float64
	// want holds y, dx and every gradient under its file name.
	want map[string][]float64
}

func loadLayer(t *testing.T, c *golden.Case) goldenLayer {
	t.Helper()
	cfg := decodeLayerConfig(t, c)
	g := goldenLayer{d: Dims{cfg.Rows, cfg.In, cfg.Hidden, cfg.Out}, want: map[string][]float64{}}
	g.o = Options{Act: cfg.Activation, Gated: cfg.Gated, Layout: cfg.Layout}
	if cfg.Beta != nil {
		g.o.Beta = *cfg.Beta
	}
	if cfg.Packing != nil {
		g.o.Packing = *cfg.Packing
	}
	get := func(name string) []float64 {
		if !c.Has(name) {
			return nil
		}
		return tensor(t, c, name, c.Float)
	}
	g.x, g.dy = get("x"), get("dy")
	g.w = Weights[float64]{W1: get("w1"), B1: get("b1"), V: get("v"), C: get("c"),
		Fused: get("fused"), FusedBias: get("fused_bias"), W2: get("w2"), B2: get("b2")}
	ensure.Equal(t, cfg.Storage == "fused", g.w.Fused != nil, "%s: storage %q and the fused input", c, cfg.Storage)
	for name := range c.Outputs {
		g.want[name] = get(name)
	}
	return g
}

// gradsByName names the gradients as the golden files do.
func gradsByName[T ~float32 | ~float64](dx []T, g Weights[T]) map[string][]T {
	m := map[string][]T{"dx": dx, "dw2": g.W2, "db2": g.B2}
	if g.Fused != nil {
		m["dfused"], m["dfused_bias"] = g.Fused, g.FusedBias
	} else {
		m["dw1"], m["db1"] = g.W1, g.B1
		if g.V != nil {
			m["dv"], m["dc"] = g.V, g.C
		}
	}
	return m
}

func weights32(w Weights[float64]) Weights[float32] {
	return Weights[float32]{W1: num.Convert[float32](w.W1), B1: num.Convert[float32](w.B1), V: num.Convert[float32](w.V), C: num.Convert[float32](w.C),
		Fused: num.Convert[float32](w.Fused), FusedBias: num.Convert[float32](w.FusedBias), W2: num.Convert[float32](w.W2), B2: num.Convert[float32](w.B2)}
}

// layerOutputs runs a layer form forward and backward and returns every
// output, widened to float64, under its golden file name.
func layerOutputs[T num.Float](t *testing.T, fwd func([]T, Dims, Weights[T], Options) ([]T, error),
	bwd func([]T, []T, Dims, Weights[T], Options) ([]T, Weights[T], error), x, dy []T, d Dims, w Weights[T], o Options) map[string][]float64 {
	t.Helper()
	y, err := fwd(x, d, w, o)
	ensure.NoError(t, err)
	dx, g, err := bwd(x, dy, d, w, o)
	ensure.NoError(t, err)
	out := map[string][]float64{"y": num.Convert[float64](y)}
	for name, v := range gradsByName(dx, g) {
		out[name] = num.Convert[float64](v)
	}
	return out
}

func testGoldenLayers(t *testing.T, family string) {
	f := golden.MustLoadFamily(t, "ffn", family)
	for _, c := range f.Cases {
		t.Run(c.Name, func(t *testing.T) {
			g := loadLayer(t, c)
			x32, dy32, w32 := num.Convert[float32](g.x), num.Convert[float32](g.dy), weights32(g.w)
			// Every form against the same values: the float64 forms to the
			// project's target, the float32 ones to layer32Bound.
			forms := []struct {
				label, row string // in messages, and the accuracy table's row ("" for none)
				bound      float64
				got        map[string][]float64
			}{
				{"", "", layerBound, layerOutputs(t, Forward, Backward, g.x, g.dy, g.d, g.w, g.o)},
				{" (fast form)", "Fast", layerBound, layerOutputs(t, ForwardFast, BackwardFast, g.x, g.dy, g.d, g.w, g.o)},
				{" (float32)", "32", layer32Bound, layerOutputs(t, Forward32, Backward32, x32, dy32, g.d, w32, g.o)},
				{" (float32, fast form)", "Fast32", layer32Bound, layerOutputs(t, ForwardFast32, BackwardFast32, x32, dy32, g.d, w32, g.o)},
			}
			ensure.Len(t, forms[0].got, len(g.want), "outputs: got %v", mapKeys(forms[0].got))
			for _, form := range forms {
				for name, want := range g.want {
					e := golden.NormwiseRelErr(form.got[name], want)
					expect.LessOrEqual(t, e, form.bound, golden.Describe(c, name+form.label, e, form.bound))
					switch name {
					case "y":
						layerAccuracy.Note("Forward"+form.row, "y", e)
					case "dx":
						layerAccuracy.Note("Backward"+form.row, "dx", e)
					default:
						layerAccuracy.Note("Backward"+form.row, "dweights", e)
					}
				}
			}
		})
	}
}

func mapKeys[V any](m map[string]V) []string {
	var ks []string
	for k := range m {
		ks = append(ks, k)
	}
	return ks
}

func TestGoldenPlain(t *testing.T) { testGoldenLayers(t, "plain") }
func TestGoldenGated(t *testing.T) { testGoldenLayers(t, "gated") }

// TestGoldenWords checks that the golden cases use every word of the
// package's conventions (every activation, weight layout and packing): a
// word no case holds is a convention no 50-digit value checks. It also
// keeps the case counts the package documentation states.
func TestGoldenWords(t *testing.T) {
	var words golden.Words
	count := map[string]int{}
	for _, c := range golden.MustLoadFamily(t, "ffn", "activations").Cases {
		words.Note(decodeActConfig(t, c))
		count["activations"]++
	}
	for _, fam := range []string{"plain", "gated"} {
		for _, c := range golden.MustLoadFamily(t, "ffn", fam).Cases {
			words.Note(decodeLayerConfig(t, c))
			count[fam]++
		}
	}
	// Forward's documentation states the plain and gated counts.
	expect.Equal(t, map[string]int{"activations": 32, "plain": 34, "gated": 48}, count)
	words.Require(t, "ffn.Act", "ffn.Layout", "ffn.Packing")
}

func TestGoldenHiddenSize(t *testing.T) {
	f := golden.MustLoadFamily(t, "ffn", "hidden_size")
	for _, c := range f.Cases {
		d, m, want := tensor(t, c, "d", c.Ints), tensor(t, c, "m", c.Ints), tensor(t, c, "hidden", c.Ints)
		h, err := HiddenSize(int(d[0]), int(m[0]))
		ensure.NoError(t, err, c.String())
		expect.Equal(t, int(want[0]), h, c.String())
	}
}
