package ops

import (
	"github.com/plumbref/plumb/attention"
)

type rowsConfig struct {
	header
}

// rowsSetup returns the row length n of input x, its last dimension.
func rowsSetup(in Tensors) (int, error) { return lastDim(in, "x") }

func init() {
	register(&op[rowsConfig]{
		name:    "softmax",
		summary: "softmax over the last dimension, maximum subtracted first (attention.Softmax; float32: attention.Softmax32)",
		inputs:  []Port{{Name: "x", Doc: "[..., n]: logits, one row of n per softmax"}},
		outputs: []Port{{Name: "y", Doc: "the shape of x: each row sums to 1"}},
		run:     runSoftmax,
	})

	register(&op[rowsConfig]{
		name:    "logsumexp",
		summary: "natural log-sum-exp over the last dimension (attention.LogSumExp; float32: attention.LogSumExp32)",
		inputs:  []Port{{Name: "x", Doc: "[..., n]: one row of n per value"}},
		outputs: []Port{{Name: "lse", Doc: "[...]: the shape of x without its last dimension"}},
		run:     runLogsumexp,
	})
}

func runSoftmax(c *rowsConfig, in Tensors, single bool) (Tensors, error) {
	n, err := rowsSetup(in)
	if err != nil {
		return nil, err
	}
	var y []float64
	if single {
		y, err = wide(attention.Softmax32(in.f32("x"), n))
	} else {
		y, err = attention.Softmax(in.data("x"), n)
	}
	if err != nil {
		return nil, err
	}
	return Tensors{"y": {in["x"].Shape, y}}, nil
}

func runLogsumexp(c *rowsConfig, in Tensors, single bool) (Tensors, error) {
	n, err := rowsSetup(in)
	if err != nil {
		return nil, err
	}
	var l []float64
	if single {
		l, err = wide(attention.LogSumExp32(in.f32("x"), n))
	} else {
		l, err = attention.LogSumExp(in.data("x"), n)
	}
	if err != nil {
		return nil, err
	}
	s := in["x"].Shape
	return Tensors{"lse": {append([]int{}, s[:len(s)-1]...), l}}, nil
}
