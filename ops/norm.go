package ops

import (
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/norm"
)

type normConfig struct {
	header
	Epsilon    float64 `json:"epsilon"`
	Placement  string  `json:"epsilon_placement"`
	WeightForm string  `json:"weight_form"`
}

var normKeys = []Key{
	{"epsilon", "number", "required", "ε, finite and > 0"},
	{"epsilon_placement", "string", `"in-root"`, `"in-root" divides by √(s² + ε); "added-to-root" by √s² + ε`},
	{"weight_form", "string", `"as-is"`, `the gain is the weight ("as-is") or 1 + weight ("one-plus")`},
}

func (c *normConfig) options() (norm.Options, error) {
	o := norm.Options{Epsilon: c.Epsilon}
	var err error
	if o.Placement, err = choice("epsilon_placement", c.Placement, []string{"in-root", "added-to-root"}, []norm.EpsilonPlacement{norm.EpsilonInRoot, norm.EpsilonAddedToRoot}); err != nil {
		return o, err
	}
	o.Weight, err = choice("weight_form", c.WeightForm, []string{"as-is", "one-plus"}, []norm.WeightForm{norm.WeightAsIs, norm.WeightOnePlus})
	return o, err
}

// normSetup returns the options and the row length d, and checks that the
// per-column inputs hold d values and dy has the shape of x.
func normSetup(c *normConfig, in Tensors) (norm.Options, int, error) {
	o, err := c.options()
	if err != nil {
		return o, 0, err
	}
	d, err := lastDim(in, "x")
	if err != nil {
		return o, 0, err
	}
	for _, n := range []string{"weight", "bias"} {
		if in.has(n) {
			if err := sameShape(in, n, []int{d}, "one value per element of a row of x"); err != nil {
				return o, 0, err
			}
		}
	}
	if in.has("dy") {
		if err := sameShape(in, "dy", in["x"].Shape, "the shape of x"); err != nil {
			return o, 0, err
		}
	}
	return o, d, nil
}

var (
	normX      = Port{Name: "x", Doc: "[..., d]: each row of d values is normalised"}
	normWeight = Port{Name: "weight", Optional: true, Doc: "gain [d] (absent: 1)"}
	normBias   = Port{Name: "bias", Optional: true, Doc: "bias [d] (absent: 0)"}
	normDy     = Port{Name: "dy", Doc: "gradient of the loss with respect to y, the shape of x"}
)

func init() {
	register(&op[normConfig]{
		name:    "layernorm-forward",
		summary: "LayerNorm over the last dimension (norm.LayerNorm; float32: norm.LayerNorm32)",
		keys:    normKeys,
		inputs:  []Port{normX, normWeight, normBias},
		outputs: []Port{{Name: "y", Doc: "the shape of x"}},
		run: func(c *normConfig, in Tensors, single bool) (Tensors, error) {
			o, d, err := normSetup(c, in)
			if err != nil {
				return nil, err
			}
			var y []float64
			if single {
				var y32 []float32
				y32, err = norm.LayerNorm32(num.Convert[float32](in.data("x")), d, num.Convert[float32](in.data("weight")), num.Convert[float32](in.data("bias")), o)
				y = num.Convert[float64](y32)
			} else {
				y, err = norm.LayerNorm(in.data("x"), d, in.data("weight"), in.data("bias"), o)
			}
			if err != nil {
				return nil, err
			}
			return Tensors{"y": {in["x"].Shape, y}}, nil
		},
	})

	register(&op[normConfig]{
		name:    "layernorm-backward",
		summary: "gradients of LayerNorm (norm.LayerNormBackward; float32: norm.LayerNormBackward32)",
		keys:    normKeys,
		inputs:  []Port{normX, normWeight, normDy},
		outputs: []Port{
			{Name: "dx", Doc: "the shape of x"},
			{Name: "dweight", Optional: true, Doc: "[d], when a weight is given"},
			{Name: "dbias", Doc: "[d]"},
		},
		run: func(c *normConfig, in Tensors, single bool) (Tensors, error) {
			o, d, err := normSetup(c, in)
			if err != nil {
				return nil, err
			}
			var g norm.Grads
			if single {
				var g32 norm.Grads32
				g32, err = norm.LayerNormBackward32(num.Convert[float32](in.data("x")), d, num.Convert[float32](in.data("weight")), num.Convert[float32](in.data("dy")), o)
				g = norm.Grads{X: num.Convert[float64](g32.X), Weight: num.Convert[float64](g32.Weight), Bias: num.Convert[float64](g32.Bias)}
			} else {
				g, err = norm.LayerNormBackward(in.data("x"), d, in.data("weight"), in.data("dy"), o)
			}
			if err != nil {
				return nil, err
			}
			out := Tensors{"dx": {in["x"].Shape, g.X}, "dbias": {[]int{d}, g.Bias}}
			if g.Weight != nil {
				out["dweight"] = Tensor{[]int{d}, g.Weight}
			}
			return out, nil
		},
	})

	register(&op[normConfig]{
		name:    "rmsnorm-forward",
		summary: "RMSNorm over the last dimension (norm.RMSNorm; float32: norm.RMSNorm32)",
		keys:    normKeys,
		inputs:  []Port{normX, normWeight},
		outputs: []Port{{Name: "y", Doc: "the shape of x"}},
		run: func(c *normConfig, in Tensors, single bool) (Tensors, error) {
			o, d, err := normSetup(c, in)
			if err != nil {
				return nil, err
			}
			var y []float64
			if single {
				var y32 []float32
				y32, err = norm.RMSNorm32(num.Convert[float32](in.data("x")), d, num.Convert[float32](in.data("weight")), o)
				y = num.Convert[float64](y32)
			} else {
				y, err = norm.RMSNorm(in.data("x"), d, in.data("weight"), o)
			}
			if err != nil {
				return nil, err
			}
			return Tensors{"y": {in["x"].Shape, y}}, nil
		},
	})

	register(&op[normConfig]{
		name:    "rmsnorm-backward",
		summary: "gradients of RMSNorm (norm.RMSNormBackward; float32: norm.RMSNormBackward32)",
		keys:    normKeys,
		inputs:  []Port{normX, normWeight, normDy},
		outputs: []Port{
			{Name: "dx", Doc: "the shape of x"},
			{Name: "dweight", Optional: true, Doc: "[d], when a weight is given"},
		},
		run: func(c *normConfig, in Tensors, single bool) (Tensors, error) {
			o, d, err := normSetup(c, in)
			if err != nil {
				return nil, err
			}
			var g norm.Grads
			if single {
				var g32 norm.Grads32
				g32, err = norm.RMSNormBackward32(num.Convert[float32](in.data("x")), d, num.Convert[float32](in.data("weight")), num.Convert[float32](in.data("dy")), o)
				g = norm.Grads{X: num.Convert[float64](g32.X), Weight: num.Convert[float64](g32.Weight)}
			} else {
				g, err = norm.RMSNormBackward(in.data("x"), d, in.data("weight"), in.data("dy"), o)
			}
			if err != nil {
				return nil, err
			}
			out := Tensors{"dx": {in["x"].Shape, g.X}}
			if g.Weight != nil {
				out["dweight"] = Tensor{[]int{d}, g.Weight}
			}
			return out, nil
		},
	})
}
