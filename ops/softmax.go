package ops

import (
	"github.com/plumbref/plumb/attention"
)

type rowsConfig struct {
	header
	idiomKeys
}

// idiomKeys are the precision idioms of a float32 softmax: the keys of
// softmax, logsumexp and attention-forward that change only the yardstick.
type idiomKeys struct {
	Accumulation attention.Accumulation `json:"accumulation" idiom:"true" doc:"the port's precision idiom: the format of its running sums; changes only the yardstick (the float32 run), never the reference"`
	SoftmaxShift attention.SoftmaxShift `json:"softmax_shift" idiom:"true" doc:"the port's precision idiom: what its softmax subtracts before exp; changes only the yardstick (the float32 run), never the reference"`
}

func (c idiomKeys) idiom() attention.Idiom {
	return attention.Idiom{Accumulation: c.Accumulation, Shift: c.SoftmaxShift}
}

// rowsKernel is an operation of one function over the rows of the last
// dimension of its input x, in float64 and float32, and in float32 as a
// port of an idiom computes it.
type rowsKernel struct {
	name, summary string
	input, output Port
	f64           func(x []float64, n int) ([]float64, error)
	f32           func(x []float32, n int) ([]float32, error)
	idiom32       func(id attention.Idiom, x []float32, n int) ([]float32, error)
	shape         func(x []int) []int // the output's shape from x's
}

func init() {
	for _, k := range []rowsKernel{
		{"softmax", "softmax over the last dimension, maximum subtracted first (attention.Softmax; float32: attention.Softmax32)",
			Port{Name: "x", Doc: "[..., n]: logits, one row of n per softmax"},
			Port{Name: "y", Doc: "the shape of x: each row sums to 1"},
			attention.Softmax, attention.Softmax32, attention.Idiom.Softmax32, func(x []int) []int { return x }},
		{"logsumexp", "natural log-sum-exp over the last dimension (attention.LogSumExp; float32: attention.LogSumExp32)",
			Port{Name: "x", Doc: "[..., n]: one row of n per value"},
			Port{Name: "lse", Doc: "[...]: the shape of x without its last dimension"},
			attention.LogSumExp, attention.LogSumExp32, attention.Idiom.LogSumExp32, func(x []int) []int { return append([]int{}, x[:len(x)-1]...) }},
	} {
		register(&op[rowsConfig]{name: k.name, summary: k.summary, inputs: []Port{k.input}, outputs: []Port{k.output}, run: k.run})
	}
}

// run calls the kernel on rows of n, the last dimension of input x; the
// float32 run follows the configuration's idiom.
func (k rowsKernel) run(c *rowsConfig, in Tensors, single bool) (Tensors, error) {
	n, err := lastDim(in, "x")
	if err != nil {
		return nil, err
	}
	y, err := pick(single,
		func() ([]float64, error) { return k.f64(in.data("x"), n) },
		func() ([]float32, error) {
			if id := c.idiom(); id != (attention.Idiom{}) {
				return k.idiom32(id, in.f32("x"), n)
			}
			return k.f32(in.f32("x"), n)
		})
	if err != nil {
		return nil, err
	}
	return Tensors{k.output.Name: {k.shape(in["x"].Shape), y}}, nil
}
