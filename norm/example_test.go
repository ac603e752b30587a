package norm_test

import (
	"errors"
	"fmt"
	"math"

	"github.com/plumbref/plumb/norm"
)

// LayerNorm of one row of four, with no gain or bias: the worked value of
// the package documentation (Ba et al. 2016 Eq. 3–4, ε = 1e-5 in the root,
// computed with mpmath).
func ExampleLayerNorm() {
	y, err := norm.LayerNorm([]float64{1, 2, 3, 4}, 4, nil, nil, norm.Options{Epsilon: 1e-5})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%.15f\n", y)
	// Output:
	// [-1.341635419968927 -0.447211806656309 0.447211806656309 1.341635419968927]
}

// RMSNorm of two rows of three, with a gain stored as an offset from 1.
func ExampleRMSNorm() {
	x := []float64{
		1, 2, 2,
		-3, 0, 4,
	}
	w := []float64{0, 0.5, -0.5} // gain 1 + w = 1, 1.5, 0.5
	y, err := norm.RMSNorm(x, 3, w, norm.Options{Epsilon: 1e-6, Weight: norm.WeightOnePlus})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%.6f\n", y[:3])
	fmt.Printf("%.6f\n", y[3:])
	// Output:
	// [0.577350 1.732051 0.577350]
	// [-1.039230 0.000000 0.692820]
}

// Rows near 1e-300 have squares that underflow to 0; with ε added to the
// root and smaller than the row's RMS, the result is still the row over its
// RMS.
func ExampleRMSNorm_underflow() {
	x := []float64{3e-300, 4e-300}
	y, err := norm.RMSNorm(x, 2, nil, norm.Options{Epsilon: 1e-310, Placement: norm.EpsilonAddedToRoot})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%.6f\n", y) // x / √((9+16)/2 · 1e-600) = x / (3.5355e-300)
	// Output:
	// [0.848528 1.131371]
}

// Query-key normalisation: a [batch 1, seq 2, heads 2, head_dim 4] tensor
// of queries normalised per head, the weight of head_dim elements shared by
// every head.
func ExampleRMSNorm_queryKey() {
	q := []float64{
		1, 1, 1, 1, 2, 0, 0, 0, // position 0: head 0, head 1
		0, 3, 0, 4, 1, -1, 1, -1, // position 1: head 0, head 1
	}
	const headDim = 4
	w := []float64{1, 1, 2, 2}
	y, err := norm.RMSNorm(q, headDim, w, norm.Options{Epsilon: 1e-12})
	if err != nil {
		fmt.Println(err)
		return
	}
	for i := 0; i < len(y); i += headDim {
		fmt.Printf("%.4f\n", y[i:i+headDim])
	}
	// Output:
	// [1.0000 1.0000 2.0000 2.0000]
	// [2.0000 0.0000 0.0000 0.0000]
	// [0.0000 1.2000 0.0000 3.2000]
	// [1.0000 -1.0000 2.0000 -2.0000]
}

// A pre-norm block keeps the residual stream un-normalised: each sublayer
// reads Norm(h), and its output f is added to h by the next fused call.
func ExampleAddRMSNorm() {
	const d = 2
	o := norm.Options{Epsilon: 1e-6}
	h := []float64{3, 4}                      // the residual stream
	sublayer := func(y []float64) []float64 { // stands for attention or the FFN
		return []float64{y[1], -y[0]}
	}
	y, err := norm.RMSNorm(h, d, nil, o) // first block: nothing to add yet
	if err != nil {
		fmt.Println(err)
		return
	}
	for block := 1; block <= 2; block++ {
		f := sublayer(y)
		y, h, err = norm.AddRMSNorm(f, h, d, nil, o) // h ← h + f; y = Norm(h)
		if err != nil {
			fmt.Println(err)
			return
		}
		fmt.Printf("block %d: stream %.4f, next input %.4f\n", block, h, y)
	}
	// Output:
	// block 1: stream [4.1314 3.1515], next input [1.1244 0.8577]
	// block 2: stream [4.9891 2.0271], next input [1.3102 0.5323]
}

// A post-norm block normalises the stream itself: h ← Norm(h + Sublayer(h))
// (Vaswani et al. 2017 §3.1); the sum is not kept.
func ExampleAddLayerNorm() {
	const d = 3
	o := norm.Options{Epsilon: 1e-5}
	h := []float64{1, 2, 6}
	sublayer := func(h []float64) []float64 { return []float64{h[2], h[0], h[1]} }
	h, _, err := norm.AddLayerNorm(sublayer(h), h, d, nil, nil, o)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%.6f\n", h)
	// Output:
	// [0.462910 -1.388729 0.925819]
}

// The backward of RMSNorm for one row: L = Σ dy·y. The values agree with
// the golden generator's dual-number derivatives (testdata/gen/fam_norm.py).
func ExampleRMSNormBackward() {
	x := []float64{1, 2, 3, 4}
	w := []float64{1, 1, 1, 1}
	dy := []float64{1, 0, 0, 0}
	g, err := norm.RMSNormBackward(x, 4, w, dy, norm.Options{Epsilon: 1e-6})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("dx %.6f\n", g.X)
	fmt.Printf("dw %.6f\n", g.Weight)
	// Output:
	// dx [0.352977 -0.024343 -0.036515 -0.048686]
	// dw [0.365148 0.000000 0.000000 0.000000]
}

// The backward of LayerNorm: its ∂L/∂x sums to zero over a row.
func ExampleLayerNormBackward() {
	x := []float64{1, 2, 3, 4}
	dy := []float64{0.5, -1, 0.25, 2}
	g, err := norm.LayerNormBackward(x, 4, nil, dy, norm.Options{Epsilon: 1e-5})
	if err != nil {
		fmt.Println(err)
		return
	}
	sum := 0.0
	for _, v := range g.X {
		sum += v
	}
	fmt.Printf("dx %.6f, sum %.1g\n", g.X, math.Abs(sum))
	fmt.Printf("db %.2f\n", g.Bias)
	// Output:
	// dx [0.827336 -1.028589 -0.424849 0.626103], sum 0
	// db [0.50 -1.00 0.25 2.00]
}

// Epsilon must be set: the zero Options are refused, not read as ε = 0.
func ExampleOptions() {
	_, err := norm.RMSNorm([]float64{0, 0}, 2, nil, norm.Options{})
	fmt.Println(errors.Is(err, norm.ErrEpsilon))
	fmt.Println(err)
	// Output:
	// true
	// norm: invalid epsilon: RMSNorm: Options.Epsilon = 0; want a finite number > 0 (ε = 0 divides 0 by 0 on a constant row)
}
