package ops

import (
	"github.com/plumbref/plumb/attention"
)

type rowsConfig struct {
	header
}

// rowsKernel is an operation of one function over the rows of the last
// dimension of its input x, in float64 and float32.
type rowsKernel struct {
	name, summary string
	input, output Port
	f64           func(x []float64, n int) ([]float64, error)
	f32           func(x []float32, n int) ([]float32, error)
	shape         func(x []int) []int // the output's shape from x's
}

func init() {
	for _, k := range []rowsKernel{
		{"softmax", "softmax over the last dimension, maximum subtracted first (attention.Softmax; float32: attention.Softmax32)",
			Port{Name: "x", Doc: "[..., n]: logits, one row of n per softmax"},
			Port{Name: "y", Doc: "the shape of x: each row sums to 1"},
			attention.Softmax, attention.Softmax32, func(x []int) []int { return x }},
		{"logsumexp", "natural log-sum-exp over the last dimension (attention.LogSumExp; float32: attention.LogSumExp32)",
			Port{Name: "x", Doc: "[..., n]: one row of n per value"},
			Port{Name: "lse", Doc: "[...]: the shape of x without its last dimension"},
			attention.LogSumExp, attention.LogSumExp32, func(x []int) []int { return append([]int{}, x[:len(x)-1]...) }},
	} {
		register(&op[rowsConfig]{name: k.name, summary: k.summary, inputs: []Port{k.input}, outputs: []Port{k.output}, run: k.run})
	}
}

// run calls the kernel on rows of n, the last dimension of input x.
func (k rowsKernel) run(_ *rowsConfig, in Tensors, single bool) (Tensors, error) {
	n, err := lastDim(in, "x")
	if err != nil {
		return nil, err
	}
	y, err := pick(single,
		func() ([]float64, error) { return k.f64(in.data("x"), n) },
		func() ([]float32, error) { return k.f32(in.f32("x"), n) })
	if err != nil {
		return nil, err
	}
	return Tensors{k.output.Name: {k.shape(in["x"].Shape), y}}, nil
}
