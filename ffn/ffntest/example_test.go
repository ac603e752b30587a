package ffntest_test

import (
	"fmt"
	"github.com/plumbref/plumb/conformance"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/ffn/ffntest"
)

// A float64 gated unit that applies the activation to the value
// projection V instead of the gate W fails every SwiGLU case. In a
// kernel's test the first argument of Run is the test's *testing.T; a
// Recorder stands in for it here.
func ExampleRun() {
	slipped := ffntest.Kernel[float64]{
		Format: compare.Float64,
		Forward: func(x []float64, w ffn.Weights[float64], p ffntest.Problem) ([]float64, error) {
			w.W1, w.V = w.V, w.W1 // the slip
			return ffn.Forward(x, p.Dims, w, p.Options)
		},
		Supports: ffntest.Supports{Acts: []ffn.Act{ffn.ActSiLU}, Gated: true, Rectangular: true},
	}
	rec := &conformance.Recorder{}
	ffntest.Run(rec, slipped)
	rec.Walk(func(r *conformance.Recorder) {
		if len(r.Children) == 0 && (r.Failed || r.Skipped) {
			fmt.Println(map[bool]string{true: "FAIL", false: "SKIP"}[r.Failed], r.Name)
		}
	})
	// Output:
	// FAIL one_hidden_unit/silu/gated/in-by-out/separate
	// FAIL small/silu/gated/in-by-out/separate
	// SKIP biases/silu/gated/in-by-out/separate
	// FAIL rectangular/silu/gated/in-by-out/separate
	// FAIL large_preactivations/silu/gated/in-by-out/separate
	// FAIL realistic/silu/gated/in-by-out/separate
}
