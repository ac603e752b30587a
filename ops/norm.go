package ops

import (
	"fmt"

	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/norm"
)

type normConfig struct {
	header
	Epsilon    float64               `json:"epsilon" doc:"ε, finite and > 0" default:"required"`
	Placement  norm.EpsilonPlacement `json:"epsilon_placement" doc:"where ε enters the denominator"`
	WeightForm norm.WeightForm       `json:"weight_form" doc:"how the weight input becomes the gain"`
}

func (c *normConfig) options() norm.Options {
	return norm.Options{Epsilon: c.Epsilon, Placement: c.Placement, Weight: c.WeightForm}
}

// layerNormConfig is the configuration of the LayerNorm operations: the
// norm's keys and the variance idiom, which RMSNorm (no mean) has not.
type layerNormConfig struct {
	normConfig
	Variance norm.Variance `json:"variance" idiom:"true" doc:"the port's precision idiom: how it computes the variance in float32; changes only the yardstick (the float32 run), never the reference"`
}

func (c *layerNormConfig) options() norm.Options {
	o := c.normConfig.options()
	o.Variance = c.Variance
	return o
}

// normOptions is a norm operation's configuration, as the run functions
// read it.
type normOptions interface{ options() norm.Options }

// normSetup returns the options and the row length d, and checks that the
// per-column inputs hold d values and dy has the shape of x.
func normSetup(c normOptions, in Tensors) (norm.Options, int, error) {
	o := c.options()
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

// normKernels are the float64 and float32 instantiations of one norm's
// forward and backward functions, with RMSNorm's taking (and ignoring) a
// bias so that both norms share one run function, and the names of the
// norm and its operations.
type normKernels struct {
	norm       string // "LayerNorm": the norm and its function in package norm
	op         string // "layernorm": the operations' names begin with it
	bias       bool   // it takes a bias input, and gives its gradient
	forward    func(x []float64, d int, w, b []float64, o norm.Options) ([]float64, error)
	forward32  func(x []float32, d int, w, b []float32, o norm.Options) ([]float32, error)
	backward   func(x []float64, d int, w, dy []float64, o norm.Options) (norm.Grads, error)
	backward32 func(x []float32, d int, w, dy []float32, o norm.Options) (norm.Grads32, error)
}

var (
	layerNorm = normKernels{"LayerNorm", "layernorm", true, norm.LayerNorm, norm.LayerNorm32, norm.LayerNormBackward, norm.LayerNormBackward32}
	rmsNorm   = normKernels{"RMSNorm", "rmsnorm", false,
		func(x []float64, d int, w, _ []float64, o norm.Options) ([]float64, error) {
			return norm.RMSNorm(x, d, w, o)
		},
		func(x []float32, d int, w, _ []float32, o norm.Options) ([]float32, error) {
			return norm.RMSNorm32(x, d, w, o)
		},
		norm.RMSNormBackward, norm.RMSNormBackward32,
	}
)

func init() {
	registerNorm[layerNormConfig](layerNorm)
	registerNorm[normConfig](rmsNorm)
}

// registerNorm registers the forward and backward operations of the norm
// k, with the configuration type C.
func registerNorm[C any, PC interface {
	*C
	normOptions
}](k normKernels) {
	fn := "norm." + k.norm
	inputs := []Port{normX, normWeight}
	grads := []Port{
		{Name: "dx", Doc: "the shape of x"},
		{Name: "dweight", Optional: true, Doc: "[d], when a weight is given"},
	}
	if k.bias {
		inputs = append(inputs, normBias)
		grads = append(grads, Port{Name: "dbias", Doc: "[d]"})
	}
	register(&op[C]{
		name:    k.op + "-forward",
		summary: fmt.Sprintf("%s over the last dimension (%s; float32: %s32)", k.norm, fn, fn),
		inputs:  inputs,
		outputs: []Port{{Name: "y", Doc: "the shape of x"}},
		run:     func(c *C, in Tensors, single bool) (Tensors, error) { return k.runForward(PC(c), in, single) },
	})
	register(&op[C]{
		name:    k.op + "-backward",
		summary: fmt.Sprintf("gradients of %s (%sBackward; float32: %sBackward32)", k.norm, fn, fn),
		inputs:  []Port{normX, normWeight, normDy},
		outputs: grads,
		run:     func(c *C, in Tensors, single bool) (Tensors, error) { return k.runBackward(PC(c), in, single) },
	})
}

func (k normKernels) runForward(c normOptions, in Tensors, single bool) (Tensors, error) {
	o, d, err := normSetup(c, in)
	if err != nil {
		return nil, err
	}
	y, err := pick(single,
		func() ([]float64, error) { return k.forward(in.data("x"), d, in.data("weight"), in.data("bias"), o) },
		func() ([]float32, error) { return k.forward32(in.f32("x"), d, in.f32("weight"), in.f32("bias"), o) })
	if err != nil {
		return nil, err
	}
	return Tensors{"y": {in["x"].Shape, y}}, nil
}

func (k normKernels) runBackward(c normOptions, in Tensors, single bool) (Tensors, error) {
	o, d, err := normSetup(c, in)
	if err != nil {
		return nil, err
	}
	var g norm.Grads
	if single {
		var g32 norm.Grads32
		g32, err = k.backward32(in.f32("x"), d, in.f32("weight"), in.f32("dy"), o)
		g = norm.Grads{X: num.Convert[float64](g32.X), Weight: num.Convert[float64](g32.Weight), Bias: num.Convert[float64](g32.Bias)}
	} else {
		g, err = k.backward(in.data("x"), d, in.data("weight"), in.data("dy"), o)
	}
	if err != nil {
		return nil, err
	}
	out := Tensors{"dx": {in["x"].Shape, g.X}}
	if g.Bias != nil {
		out["dbias"] = Tensor{[]int{d}, g.Bias}
	}
	if g.Weight != nil {
		out["dweight"] = Tensor{[]int{d}, g.Weight}
	}
	return out, nil
}
