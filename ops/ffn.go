package ops

import (
	"fmt"

	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/num"
)

type activationConfig struct {
	header
	Function string  `json:"function"`
	Beta     float64 `json:"beta"`
}

var activationWords = []string{"relu", "gelu", "gelu-tanh", "gelu-sigmoid", "sigmoid", "silu", "swish", "identity"}
var activationValues = []ffn.Act{ffn.ActReLU, ffn.ActGELU, ffn.ActGELUTanh, ffn.ActGELUSigmoid, ffn.ActSigmoid, ffn.ActSiLU, ffn.ActSwish, ffn.ActIdentity}

var activationKeys = []Key{
	{"function", "string", "required", `φ: "relu", "gelu" (exact, erf), "gelu-tanh", "gelu-sigmoid" (x·σ(1.702x)), "sigmoid", "silu", "swish" (x·σ(βx)), "identity"`},
	{"beta", "number", "0", `Swish's β ("swish" only)`},
}

func activationOf(key, word string) (ffn.Act, error) {
	if word == "" {
		return 0, fmt.Errorf("%w: key %q is missing; want one of relu, gelu, gelu-tanh, gelu-sigmoid, sigmoid, silu, swish, identity", ErrConfig, key)
	}
	return choice(key, word, activationWords, activationValues)
}

type ffnConfig struct {
	header
	Activation string  `json:"activation"`
	Beta       float64 `json:"beta"`
	Gated      bool    `json:"gated"`
	Layout     string  `json:"layout"`
	Packing    string  `json:"packing"`
}

var ffnKeys = []Key{
	{"activation", "string", "required", "φ, one of the words of the activation operation's \"function\""},
	{"beta", "number", "0", `Swish's β (activation "swish" only)`},
	{"gated", "bool", "false", "false: φ(x·W1 + b1)·W2 + b2; true: (φ(x·W1 + b1) ⊗ (x·V + c))·W2 + b2 (GLU, ReGLU, GEGLU, SwiGLU, Bilinear)"},
	{"layout", "string", "required", `storage of every weight matrix: "in-by-out" ([in, out], y = x·W) or "out-by-in" ([out, in], y = x·Wᵀ)`},
	{"packing", "string", "required with fused", `the fused gate and value matrix: "stacked" (all gate units, then all value units) or "interleaved" (alternating)`},
}

var ffnInputs = []Port{
	{Name: "x", Doc: "[..., in]: each row is one input vector"},
	{Name: "w1", Optional: true, Doc: "W1 (the gate W when gated): [in, hidden] or [hidden, in] by layout"},
	{Name: "b1", Optional: true, Doc: "b1 (the gate bias) [hidden]"},
	{Name: "v", Optional: true, Doc: "gated: the value projection V, the shape of w1"},
	{Name: "c", Optional: true, Doc: "gated: the value bias c [hidden]"},
	{Name: "fused", Optional: true, Doc: "gated, instead of w1 and v: [in, 2·hidden] or [2·hidden, in]"},
	{Name: "fused_bias", Optional: true, Doc: "gated, with fused: [2·hidden]"},
	{Name: "w2", Doc: "W2, the down projection: [hidden, out] or [out, hidden] by layout"},
	{Name: "b2", Optional: true, Doc: "b2 [out]"},
}

// ffnWeightNames pairs each weight input with its gradient output.
var ffnWeightNames = [][2]string{{"w1", "dw1"}, {"b1", "db1"}, {"v", "dv"}, {"c", "dc"}, {"fused", "dfused"}, {"fused_bias", "dfused_bias"}, {"w2", "dw2"}, {"b2", "db2"}}

// setup returns the dims, options and the shape every weight input must
// have, and checks the inputs against them.
func (c *ffnConfig) setup(in Tensors) (ffn.Dims, ffn.Options, map[string][]int, error) {
	var d ffn.Dims
	o := ffn.Options{Gated: c.Gated, Beta: c.Beta}
	var err error
	if o.Act, err = activationOf("activation", c.Activation); err != nil {
		return d, o, nil, err
	}
	if c.Layout == "" {
		return d, o, nil, fmt.Errorf("%w: key \"layout\" is missing; want in-by-out or out-by-in", ErrConfig)
	}
	if o.Layout, err = choice("layout", c.Layout, []string{"in-by-out", "out-by-in"}, []ffn.Layout{ffn.InByOut, ffn.OutByIn}); err != nil {
		return d, o, nil, err
	}
	if c.Packing != "" {
		if o.Packing, err = choice("packing", c.Packing, []string{"stacked", "interleaved"}, []ffn.Packing{ffn.GateUpStacked, ffn.GateUpInterleaved}); err != nil {
			return d, o, nil, err
		}
	}
	if d.In, err = lastDim(in, "x"); err != nil {
		return d, o, nil, err
	}
	d.Rows = len(in.data("x")) / d.In
	w2, err := rank(in, "w2", 2, "[hidden, out] (in-by-out) or [out, hidden] (out-by-in)")
	if err != nil {
		return d, o, nil, err
	}
	mat := func(rows, cols int) []int { // a matrix from rows inputs to cols outputs
		if o.Layout == ffn.InByOut {
			return []int{rows, cols}
		}
		return []int{cols, rows}
	}
	d.Hidden, d.Out = w2[0], w2[1]
	if o.Layout == ffn.OutByIn {
		d.Hidden, d.Out = w2[1], w2[0]
	}
	want := map[string][]int{
		"w1": mat(d.In, d.Hidden), "b1": {d.Hidden}, "v": mat(d.In, d.Hidden), "c": {d.Hidden},
		"fused": mat(d.In, 2*d.Hidden), "fused_bias": {2 * d.Hidden}, "w2": w2, "b2": {d.Out},
	}
	for _, n := range ffnWeightNames {
		if in.has(n[0]) {
			if err := sameShape(in, n[0], want[n[0]], fmt.Sprintf("in %d, hidden %d, out %d, %s", d.In, d.Hidden, d.Out, c.Layout)); err != nil {
				return d, o, nil, err
			}
		}
	}
	if in.has("dy") {
		s := append(append([]int(nil), in["x"].Shape[:len(in["x"].Shape)-1]...), d.Out)
		if err := sameShape(in, "dy", s, "the shape of y"); err != nil {
			return d, o, nil, err
		}
	}
	return d, o, want, nil
}

func ffnWeights[T float32 | float64](in Tensors, conv func([]float64) []T) ffn.Weights[T] {
	return ffn.Weights[T]{
		W1: conv(in.data("w1")), B1: conv(in.data("b1")), V: conv(in.data("v")), C: conv(in.data("c")),
		Fused: conv(in.data("fused")), FusedBias: conv(in.data("fused_bias")), W2: conv(in.data("w2")), B2: conv(in.data("b2")),
	}
}

func same(x []float64) []float64 { return x }

func yShape(in Tensors, out int) []int {
	s := in["x"].Shape
	return append(append([]int(nil), s[:len(s)-1]...), out)
}

func init() {
	register(&op[activationConfig]{
		name:    "activation",
		summary: "an activation function elementwise (ffn.Activate; float32: ffn.Activate32)",
		keys:    activationKeys,
		inputs:  []Port{{Name: "x", Doc: "any shape"}},
		outputs: []Port{{Name: "y", Doc: "φ(x), the shape of x"}},
		run: func(c *activationConfig, in Tensors, single bool) (Tensors, error) {
			a, err := activationOf("function", c.Function)
			if err != nil {
				return nil, err
			}
			var y []float64
			if single {
				var y32 []float32
				y32, err = ffn.Activate32(num.Convert[float32](in.data("x")), a, c.Beta)
				y = num.Convert[float64](y32)
			} else {
				y, err = ffn.Activate(in.data("x"), a, c.Beta)
			}
			if err != nil {
				return nil, err
			}
			return Tensors{"y": {in["x"].Shape, y}}, nil
		},
	})

	register(&op[activationConfig]{
		name:    "activation-grad",
		summary: "gradient through an activation, dy ⊙ φ′(x) (ffn.ActivateGrad; float32: ffn.ActivateGrad32)",
		keys:    activationKeys,
		inputs:  []Port{{Name: "x", Doc: "any shape"}, {Name: "dy", Doc: "gradient with respect to φ(x), the shape of x"}},
		outputs: []Port{{Name: "dx", Doc: "the shape of x"}},
		run: func(c *activationConfig, in Tensors, single bool) (Tensors, error) {
			a, err := activationOf("function", c.Function)
			if err != nil {
				return nil, err
			}
			if err := sameShape(in, "dy", in["x"].Shape, "the shape of x"); err != nil {
				return nil, err
			}
			var dx []float64
			if single {
				var d32 []float32
				d32, err = ffn.ActivateGrad32(num.Convert[float32](in.data("x")), num.Convert[float32](in.data("dy")), a, c.Beta)
				dx = num.Convert[float64](d32)
			} else {
				dx, err = ffn.ActivateGrad(in.data("x"), in.data("dy"), a, c.Beta)
			}
			if err != nil {
				return nil, err
			}
			return Tensors{"dx": {in["x"].Shape, dx}}, nil
		},
	})

	register(&op[ffnConfig]{
		name:    "ffn-forward",
		summary: "feed-forward layer, plain or gated (GLU family) (ffn.Forward; float32: ffn.Forward32)",
		keys:    ffnKeys,
		inputs:  ffnInputs,
		outputs: []Port{{Name: "y", Doc: "[..., out]"}},
		run: func(c *ffnConfig, in Tensors, single bool) (Tensors, error) {
			d, o, _, err := c.setup(in)
			if err != nil {
				return nil, err
			}
			var y []float64
			if single {
				var y32 []float32
				y32, err = ffn.Forward32(num.Convert[float32](in.data("x")), d, ffnWeights(in, num.Convert[float32, float64]), o)
				y = num.Convert[float64](y32)
			} else {
				y, err = ffn.Forward(in.data("x"), d, ffnWeights(in, same), o)
			}
			if err != nil {
				return nil, err
			}
			return Tensors{"y": {yShape(in, d.Out), y}}, nil
		},
	})

	outs := []Port{{Name: "dx", Doc: "the shape of x"}}
	for _, n := range ffnWeightNames {
		outs = append(outs, Port{Name: n[1], Optional: true, Doc: fmt.Sprintf("gradient for %s, its shape (present when %s is used; bias gradients always)", n[0], n[0])})
	}
	register(&op[ffnConfig]{
		name:    "ffn-backward",
		summary: "gradients of ffn-forward for x and every parameter (ffn.Backward; float32: ffn.Backward32)",
		keys:    ffnKeys,
		inputs:  append(append([]Port(nil), ffnInputs...), Port{Name: "dy", Doc: "gradient with respect to y, [..., out]"}),
		outputs: outs,
		run: func(c *ffnConfig, in Tensors, single bool) (Tensors, error) {
			d, o, want, err := c.setup(in)
			if err != nil {
				return nil, err
			}
			var dx []float64
			var g ffn.Weights[float64]
			if single {
				var dx32 []float32
				var g32 ffn.Weights[float32]
				dx32, g32, err = ffn.Backward32(num.Convert[float32](in.data("x")), num.Convert[float32](in.data("dy")), d, ffnWeights(in, num.Convert[float32, float64]), o)
				dx = num.Convert[float64](dx32)
				g = ffn.Weights[float64]{W1: num.Convert[float64](g32.W1), B1: num.Convert[float64](g32.B1), V: num.Convert[float64](g32.V), C: num.Convert[float64](g32.C),
					Fused: num.Convert[float64](g32.Fused), FusedBias: num.Convert[float64](g32.FusedBias), W2: num.Convert[float64](g32.W2), B2: num.Convert[float64](g32.B2)}
			} else {
				dx, g, err = ffn.Backward(in.data("x"), in.data("dy"), d, ffnWeights(in, same), o)
			}
			if err != nil {
				return nil, err
			}
			out := Tensors{"dx": {in["x"].Shape, dx}}
			for i, data := range [][]float64{g.W1, g.B1, g.V, g.C, g.Fused, g.FusedBias, g.W2, g.B2} {
				if data != nil {
					n := ffnWeightNames[i]
					out[n[1]] = Tensor{want[n[0]], data}
				}
			}
			return out, nil
		},
	})
}
