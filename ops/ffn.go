package ops

import (
	"fmt"

	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/num"
)

type activationConfig struct {
	header
	Function ffn.Act `json:"function" doc:"φ" default:"required"`
	Beta     float64 `json:"beta" doc:"Swish's β (\"swish\" only)" default:"0"`
}

type ffnConfig struct {
	header
	Activation ffn.Act      `json:"activation" doc:"φ" default:"required"`
	Beta       float64      `json:"beta" doc:"Swish's β (activation \"swish\" only)" default:"0"`
	Gated      bool         `json:"gated" doc:"false: φ(x·W1 + b1)·W2 + b2; true: (φ(x·W1 + b1) ⊗ (x·V + c))·W2 + b2 (GLU, ReGLU, GEGLU, SwiGLU, Bilinear)" default:"false"`
	Layout     ffn.Layout   `json:"layout" doc:"storage of every weight matrix" default:"required"`
	Packing    *ffn.Packing `json:"packing" doc:"the fused gate and value matrix" default:"required with fused"`
}

// ffnForwardConfig is the configuration of ffn-forward: that of the layer
// and the precision idiom of its float32 run, which ffn-backward (plain
// float32 in its yardstick) does not take.
type ffnForwardConfig struct {
	ffnConfig
	Accumulation ffn.Accumulation `json:"accumulation" idiom:"true" doc:"the port's precision idiom: the format of the running sums of its matrix products; changes only the yardstick (the float32 run), never the reference"`
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
	o := ffn.Options{Act: c.Activation, Gated: c.Gated, Beta: c.Beta, Layout: c.Layout}
	switch {
	case c.Packing != nil:
		o.Packing = *c.Packing
	case in.has("fused") || in.has("fused_bias"):
		return d, o, nil, fmt.Errorf("%w: key \"packing\" is missing; want one of %s (a fused gate and value matrix needs it)", ErrConfig, wordsOf(o.Packing))
	}
	var err error
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
		if err := sameShape(in, "dy", yShape(in, d.Out), "the shape of y"); err != nil {
			return d, o, nil, err
		}
	}
	return d, o, want, nil
}

// ffnWeights are the weight inputs, converted by conv.
func ffnWeights[T float32 | float64](in Tensors, conv func([]float64) []T) ffn.Weights[T] {
	return convertWeights(ffn.Weights[float64]{
		W1: in.data("w1"), B1: in.data("b1"), V: in.data("v"), C: in.data("c"),
		Fused: in.data("fused"), FusedBias: in.data("fused_bias"), W2: in.data("w2"), B2: in.data("b2"),
	}, conv)
}

// convertWeights applies conv to every matrix and vector of w.
func convertWeights[T, U float32 | float64](w ffn.Weights[U], conv func([]U) []T) ffn.Weights[T] {
	return ffn.Weights[T]{W1: conv(w.W1), B1: conv(w.B1), V: conv(w.V), C: conv(w.C),
		Fused: conv(w.Fused), FusedBias: conv(w.FusedBias), W2: conv(w.W2), B2: conv(w.B2)}
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
		inputs:  []Port{{Name: "x", Doc: "any shape"}},
		outputs: []Port{{Name: "y", Doc: "φ(x), the shape of x"}},
		run:     runActivation,
	})

	register(&op[activationConfig]{
		name:    "activation-grad",
		summary: "gradient through an activation, dy ⊙ φ′(x) (ffn.ActivateGrad; float32: ffn.ActivateGrad32)",
		inputs:  []Port{{Name: "x", Doc: "any shape"}, {Name: "dy", Doc: "gradient with respect to φ(x), the shape of x"}},
		outputs: []Port{{Name: "dx", Doc: "the shape of x"}},
		run:     runActivationGrad,
	})

	register(&op[ffnForwardConfig]{
		name:    "ffn-forward",
		summary: "feed-forward layer, plain or gated (GLU family) (ffn.Forward; float32: ffn.Forward32)",
		inputs:  ffnInputs,
		outputs: []Port{{Name: "y", Doc: "[..., out]"}},
		run:     runFfnForward,
	})

	outs := []Port{{Name: "dx", Doc: "the shape of x"}}
	for _, n := range ffnWeightNames {
		outs = append(outs, Port{Name: n[1], Optional: true, Doc: fmt.Sprintf("gradient for %s, its shape (present when %s is used; bias gradients always)", n[0], n[0])})
	}
	register(&op[ffnConfig]{
		name:    "ffn-backward",
		summary: "gradients of ffn-forward for x and every parameter (ffn.Backward; float32: ffn.Backward32)",
		inputs:  append(append([]Port(nil), ffnInputs...), Port{Name: "dy", Doc: "gradient with respect to y, [..., out]"}),
		outputs: outs,
		run:     runFfnBackward,
	})
}

func runActivation(c *activationConfig, in Tensors, single bool) (Tensors, error) {
	y, err := pick(single,
		func() ([]float64, error) { return ffn.Activate(in.data("x"), c.Function, c.Beta) },
		func() ([]float32, error) { return ffn.Activate32(in.f32("x"), c.Function, c.Beta) })
	if err != nil {
		return nil, err
	}
	return Tensors{"y": {in["x"].Shape, y}}, nil
}

func runActivationGrad(c *activationConfig, in Tensors, single bool) (Tensors, error) {
	if err := sameShape(in, "dy", in["x"].Shape, "the shape of x"); err != nil {
		return nil, err
	}
	dx, err := pick(single,
		func() ([]float64, error) { return ffn.ActivateGrad(in.data("x"), in.data("dy"), c.Function, c.Beta) },
		func() ([]float32, error) { return ffn.ActivateGrad32(in.f32("x"), in.f32("dy"), c.Function, c.Beta) })
	if err != nil {
		return nil, err
	}
	return Tensors{"dx": {in["x"].Shape, dx}}, nil
}

func runFfnForward(c *ffnForwardConfig, in Tensors, single bool) (Tensors, error) {
	d, o, _, err := c.setup(in)
	if err != nil {
		return nil, err
	}
	o.Accumulation = c.Accumulation // honoured by Forward32 only: the reference ignores it
	// y takes its rows from x and its width from w2: it can be far larger
	// than either.
	if err := fits(ErrInput, `output "y"`, size{`rows (input "x")`, d.Rows}, size{`out (input "w2")`, d.Out}); err != nil {
		return nil, err
	}
	fwd, fwd32 := ffn.ForwardFast, ffn.ForwardFast32
	if direct.Load() {
		fwd, fwd32 = ffn.Forward, ffn.Forward32
	}
	if o.Accumulation != ffn.AccumulateFloat32 {
		fwd32 = ffn.Forward32 // the fast form computes in plain float32 whatever the idiom says
	}
	y, err := pick(single,
		func() ([]float64, error) { return fwd(in.data("x"), d, ffnWeights(in, same), o) },
		func() ([]float32, error) {
			return fwd32(in.f32("x"), d, ffnWeights(in, num.Convert[float32, float64]), o)
		})
	if err != nil {
		return nil, err
	}
	return Tensors{"y": {yShape(in, d.Out), y}}, nil
}

func runFfnBackward(c *ffnConfig, in Tensors, single bool) (Tensors, error) {
	d, o, want, err := c.setup(in)
	if err != nil {
		return nil, err
	}
	bwd, bwd32 := ffn.BackwardFast, ffn.BackwardFast32
	if direct.Load() {
		bwd, bwd32 = ffn.Backward, ffn.Backward32
	}
	var dx []float64
	var g ffn.Weights[float64]
	if single {
		var dx32 []float32
		var g32 ffn.Weights[float32]
		dx32, g32, err = bwd32(in.f32("x"), in.f32("dy"), d, ffnWeights(in, num.Convert[float32, float64]), o)
		dx, g = num.Convert[float64](dx32), convertWeights(g32, num.Convert[float64, float32])
	} else {
		dx, g, err = bwd(in.data("x"), in.data("dy"), d, ffnWeights(in, same), o)
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
}
