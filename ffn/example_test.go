package ffn_test

import (
	"errors"
	"fmt"
	"math"

	"github.com/plumbref/plumb/ffn"
)

func ExampleGELU() {
	// The exact form and its two approximations at x = 1 (Hendrycks &
	// Gimpel 2016, §2): they differ from the third decimal on.
	fmt.Printf("%.15f\n", ffn.GELU(1))
	fmt.Printf("%.15f\n", ffn.GELUTanh(1))
	fmt.Printf("%.15f\n", ffn.GELUSigmoid(1))
	// The negative tail keeps its relative accuracy where
	// ½x(1 + erf(x/√2)) cancels to 0.
	fmt.Printf("%.6e %v\n", ffn.GELU(-30), -30*0.5*(1+math.Erf(-30/math.Sqrt2)))
	// Output:
	// 0.841344746068543
	// 0.841191990608277
	// 0.845795765932821
	// -1.472014e-196 -0
}

func ExampleSwish() {
	// β = 1 is SiLU; β = 0 is x/2.
	fmt.Println(ffn.Swish(2, 1) == ffn.SiLU(2), ffn.Swish(3, 0))
	fmt.Printf("%.6e\n", ffn.SiLU(-40))
	// Output:
	// true 1.5
	// -1.699342e-16
}

func ExampleForward() {
	// SwiGLU (Shazeer 2020, Eq. (6) with biases nil): 2 inputs, 2 hidden
	// units, 1 output, weights stored [in, out].
	d := ffn.Dims{Rows: 1, In: 2, Hidden: 2, Out: 1}
	w := ffn.Weights[float64]{
		W1: []float64{1, 0, 0, 1},  // gate W, [in, out]
		V:  []float64{2, 0, 0, -1}, // value V
		W2: []float64{1, 1},        // down W₂, [hidden, out]
	}
	o := ffn.Options{Act: ffn.ActSiLU, Gated: true, Layout: ffn.InByOut}
	y, err := ffn.Forward([]float64{1, 2}, d, w, o)
	if err != nil {
		fmt.Println(err)
		return
	}
	// x·W = (1, 2), x·V = (2, −2): y = SiLU(1)·2 + SiLU(2)·(−2)
	fmt.Printf("%.12f\n", y[0])
	fmt.Printf("%.12f\n", 2*ffn.SiLU(1)-2*ffn.SiLU(2))

	// The same layer with one fused weight, gate and value units
	// alternating, stored [out, in]: one row per fused output unit.
	fw := ffn.Weights[float64]{
		Fused: []float64{
			1, 0, // gate unit 0
			2, 0, // value unit 0
			0, 1, // gate unit 1
			0, -1, // value unit 1
		},
		W2: []float64{1, 1}, // [out, hidden]
	}
	o.Layout, o.Packing = ffn.OutByIn, ffn.GateUpInterleaved
	y2, err := ffn.Forward([]float64{1, 2}, d, fw, o)
	fmt.Println(y2[0] == y[0], err)
	// Output:
	// -2.061071154652
	// -2.061071154652
	// true <nil>
}

func ExampleBackward() {
	// A plain layer y = ReLU(x·W₁ + b₁)·W₂ with one input, two hidden
	// units and one output; the loss is y itself (dy = 1).
	d := ffn.Dims{Rows: 1, In: 1, Hidden: 2, Out: 1}
	w := ffn.Weights[float64]{W1: []float64{2, -1}, B1: []float64{0, 0.5}, W2: []float64{3, 4}}
	o := ffn.Options{Act: ffn.ActReLU, Layout: ffn.InByOut}
	dx, g, err := ffn.Backward([]float64{1}, []float64{1}, d, w, o)
	if err != nil {
		fmt.Println(err)
		return
	}
	// hidden pre-activations: 2 and −0.5; only the first unit passes
	fmt.Println("dx", dx, "dW1", g.W1, "dB1", g.B1, "dW2", g.W2, "dB2", g.B2)
	// Output:
	// dx [6] dW1 [3 0] dB1 [3 0] dW2 [2 0] dB2 [1]
}

func ExampleHiddenSize() {
	h, err := ffn.HiddenSize(4096, 256)
	fmt.Println(h, err)
	_, err = ffn.HiddenSize(4096, 0)
	fmt.Println(errors.Is(err, ffn.ErrShape), err)
	// Output:
	// 11008 <nil>
	// true ffn: invalid shape: HiddenSize: multiple m = 0; want ≥ 1
}

func ExampleActivate() {
	y, err := ffn.Activate([]float64{-1, 0, 1}, ffn.ActSwish, 1)
	fmt.Printf("%.6f %v\n", y, err)
	_, err = ffn.Activate([]float64{1}, ffn.ActSwish, math.NaN())
	fmt.Println(errors.Is(err, ffn.ErrBeta), err)
	// Output:
	// [-0.268941 0.000000 0.731059] <nil>
	// true ffn: invalid beta: Activate: beta = NaN; want a finite number (the Swish β)
}
