package normtest_test

import (
	"fmt"
	"github.com/plumbref/plumb/conformance"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/norm/normtest"
)

// A float64 RMSNorm that ignores the weight form (it always uses γ = w)
// while declaring both forms fails every weighted case under
// one-plus, and nothing else. In a kernel's test the first argument
// of Run is the test's *testing.T; a Recorder stands in for it here.
func ExampleRun() {
	slipped := normtest.Kernel[float64]{
		Format: compare.Float64,
		Forward: func(x, residual, weight, bias []float64, p normtest.Problem) ([]float64, []float64, error) {
			o := p.Options()
			o.Weight = norm.WeightAsIs // the slip
			y, err := norm.RMSNorm(x, p.Dim, weight, o)
			return y, nil, err
		},
		Supports: normtest.Supports{
			Layers:  []normtest.Layer{normtest.RMSNorm},
			Weights: []norm.WeightForm{norm.WeightAsIs, norm.WeightOnePlus},
		},
	}
	rec := &conformance.Recorder{}
	normtest.Run(rec, slipped)
	rec.Walk(func(r *conformance.Recorder) {
		if len(r.Children) == 0 && (r.Failed || r.Skipped) {
			fmt.Println(map[bool]string{true: "FAIL", false: "SKIP"}[r.Failed], r.Name)
		}
	})
	// Output:
	// FAIL one_element_rows/rmsnorm/in-root/one-plus
	// FAIL small_rows/rmsnorm/in-root/one-plus
	// FAIL realistic/rmsnorm/in-root/one-plus
	// FAIL wide_rows/rmsnorm/in-root/one-plus
	// FAIL offset_rows/rmsnorm/in-root/one-plus
	// FAIL epsilon_matters/rmsnorm/in-root/one-plus
	// FAIL large_values/rmsnorm/in-root/one-plus
	// SKIP no_weight/rmsnorm/in-root
	// SKIP residual_add/rmsnorm/in-root/as-is
	// SKIP residual_add/rmsnorm/in-root/one-plus
}
