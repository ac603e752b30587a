package posenc_test

import (
	"fmt"

	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/posenc"
)

// The encoding of positions 0 and 1 for a model dimension of 4: sin and cos
// of m·1 and m·0.01 (10000^{−2/4} = 0.01), interleaved as in the paper.
func ExampleSinusoidal_Table() {
	pe, err := posenc.Sinusoidal{Dim: 4}.Table(2, 0)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%.6f\n%.6f\n", pe[:4], pe[4:])
	// Output:
	// [0.000000 1.000000 0.000000 1.000000]
	// [0.841471 0.540302 0.010000 0.999950]
}

// Concatenated puts the sines first; Add adds the table to every sequence
// of a [batch, L, Dim] tensor.
func ExampleSinusoidal_Add() {
	s := posenc.Sinusoidal{Dim: 4, Layout: posenc.Concatenated}
	x := make([]float64, 2*1*4) // two sequences of one token
	y, err := s.Add(x, 1, 1)    // the token is at position 1
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%.6f\n", y)
	// Output:
	// [0.841471 0.010000 0.540302 0.999950 0.841471 0.010000 0.540302 0.999950]
}

// One head of dimension 4 at position 1: θ = (1, 0.01), the pairs (1, 2)
// and (3, 4) turned by 1 and 0.01 radians.
func ExampleRotary_Apply() {
	r := posenc.Rotary{Dim: 4}
	y, err := r.Apply([]float64{1, 2, 3, 4}, 1, posenc.Positions{Offset: 1})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%.6f\n", y)
	back, _ := r.ApplyInverse(y, 1, posenc.Positions{Offset: 1})
	fmt.Printf("%.6f\n", back)
	// Output:
	// [-1.142640 1.922076 2.959851 4.029800]
	// [1.000000 2.000000 3.000000 4.000000]
}

// The two pairings rotate different dims: PairHalves pairs dim 0 with dim 2.
// Each prints as its word.
func ExamplePairing() {
	x := []float64{1, 0, 0, 0}
	for _, p := range []posenc.Pairing{posenc.PairAdjacent, posenc.PairHalves} {
		y, _ := posenc.Rotary{Dim: 4, Pairing: p}.Apply(x, 1, posenc.Positions{Offset: 1})
		fmt.Printf("%v %.4f\n", p, y)
	}
	// Output:
	// adjacent [0.5403 0.8415 0.0000 0.0000]
	// halves [0.5403 0.0000 0.8415 0.0000]
}

// Partial rotation: the first 4 of 6 dims are rotated, frequencies over 4;
// the last 2 pass through.
func ExampleRotary_Tables() {
	r := posenc.Rotary{Dim: 6, Rotated: 4}
	cos, sin, err := r.Tables([]int{0, 1, 1000000})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("cos %.6f\nsin %.6f\n", cos, sin)
	// Output:
	// cos [1.000000 1.000000 0.540302 0.999950 0.936752 -0.952155]
	// sin [0.000000 0.000000 0.841471 0.010000 -0.349994 -0.305614]
}

// Every scaling method at s = 4 on 8 rotated dims. YaRN with the paper's
// α = 1, β = 32 and a trained length of 1024 keeps θ_0 (ρ = 1024/2π > β),
// interpolates θ_3 (ρ < α) and ramps between; the two ramps differ.
// (Values checked with the 50-digit generator's formulas.)
func ExampleScaling() {
	for _, sc := range []posenc.Scaling{
		{},
		{Method: posenc.Interpolation, Factor: 4},
		{Method: posenc.NTKAware, Factor: 4},
		{Method: posenc.YaRN, Factor: 4, TrainedLength: 1024},
		{Method: posenc.YaRN, Factor: 4, TrainedLength: 1024, Ramp: posenc.RampDims},
		{Method: posenc.NTKAware, TrainedLength: 2048, CurrentLength: 8192}, // dynamic: s = 4
		{Method: posenc.PerFrequency, Factors: []float64{1, 2, 3, 4}},
	} {
		th, err := posenc.Rotary{Dim: 8, Scaling: sc}.Frequencies()
		if err != nil {
			fmt.Println(err)
			return
		}
		fmt.Printf("%-13v %.3g\n", sc.Method, th)
	}
	// Output:
	// none          [1 0.1 0.01 0.001]
	// interpolation [0.25 0.025 0.0025 0.00025]
	// ntk-aware     [1 0.063 0.00397 0.00025]
	// yarn          [1 0.062 0.00265 0.00025]
	// yarn          [1 0.075 0.005 0.00025]
	// ntk-aware     [1 0.063 0.00397 0.00025]
	// per-frequency [1 0.05 0.00333 0.00025]
}

func ExampleNTKBase() {
	b, _ := posenc.NTKBase(10000, 4, 128)
	fmt.Printf("%.9f\n", b)
	// Output: 40889.942432486
}

// YaRN's temperature at s = 8: √(1/t) ≈ 1.208 (Peng et al. 2023).
func ExampleYaRNMagnitude() {
	m, _ := posenc.YaRNMagnitude(8)
	fmt.Printf("%.4f\n", m)
	r := posenc.Rotary{Dim: 4, Magnitude: m, Scaling: posenc.Scaling{Method: posenc.YaRN, Factor: 8, TrainedLength: 4096}}
	cos, _, _ := r.Tables([]int{0})
	fmt.Printf("%.4f\n", cos)
	// Output:
	// 1.2079
	// [1.2079 1.2079]
}

func ExampleALiBiSlopes() {
	s, _ := posenc.ALiBiSlopes(12)
	fmt.Printf("%.6g\n", s)
	// Output: [0.5 0.25 0.125 0.0625 0.03125 0.015625 0.0078125 0.00390625 0.707107 0.353553 0.176777 0.0883883]
}

// Two queries against five keys (AlignEnd): the first query sits at key 3,
// so key 4 comes after it, and there the forms differ: the causal form's
// −m·(p − j) is +0.5, the symmetric −m·|p − j| is −0.5, the past-only 0.
// Under a causal mask, which hides that key, the three are the same.
func ExampleALiBiBias() {
	g := mask.Geometry{Batch: 1, Lq: 2, Lk: 5}
	for _, form := range []mask.ALiBiForm{mask.ALiBiCausal, mask.ALiBiSymmetric, mask.ALiBiPastOnly} {
		b, err := posenc.ALiBiBias([]float64{0.5}, g, form)
		if err != nil {
			fmt.Println(err)
			return
		}
		fmt.Println(form, b[:5], b[5:])
	}
	g.Align = mask.AlignStart
	b, _ := posenc.ALiBiBias([]float64{0.5}, g, mask.ALiBiCausal)
	fmt.Println("start", b[:5], b[5:])
	// Output:
	// causal [-1.5 -1 -0.5 0 0.5] [-2 -1.5 -1 -0.5 0]
	// symmetric [-1.5 -1 -0.5 0 -0.5] [-2 -1.5 -1 -0.5 0]
	// past-only [-1.5 -1 -0.5 0 0] [-2 -1.5 -1 -0.5 0]
	// start [0 0.5 1 1.5 2] [-0.5 0 0.5 1 1.5]
}

// The float32 instantiation of the same body: a yardstick, not a reference.
func ExampleRotary_Apply32() {
	y, _ := posenc.Rotary{Dim: 4}.Apply32([]float32{1, 2, 3, 4}, 1, posenc.Positions{Offset: 1})
	fmt.Printf("%.5f\n", y) // agrees with Apply to float32 precision
	// Output: [-1.14264 1.92208 2.95985 4.02980]
}
