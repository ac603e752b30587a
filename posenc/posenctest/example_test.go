package posenctest_test

import (
	"fmt"
	"github.com/plumbref/plumb/conformance"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/posenc"
	"github.com/plumbref/plumb/posenc/posenctest"
)

// A float64 rotary kernel that pairs dims (2i, 2i+1) when told to pair
// (i, i + r/2) fails every halves case except position 0; the cases
// it does not declare are skipped, each with a message. In a kernel's test
// the first argument of Run is the test's *testing.T; a Recorder stands in
// for it here.
func ExampleRun() {
	slipped := posenctest.Kernel[float64]{
		Format: compare.Float64,
		Apply: func(x []float64, p posenctest.Problem) ([]float64, error) {
			r := p.Rotary
			r.Pairing = posenc.PairAdjacent // the slip
			return r.Apply(x, 1, posenc.Positions{List: p.Positions})
		},
		Supports: posenctest.Supports{Pairings: []posenc.Pairing{posenc.PairAdjacent, posenc.PairHalves}},
	}
	rec := &conformance.Recorder{}
	posenctest.Run(rec, slipped)
	var skipped int
	rec.Walk(func(r *conformance.Recorder) {
		switch {
		case len(r.Children) > 0:
		case r.Failed:
			fmt.Println("FAIL", r.Name)
		case r.Skipped:
			skipped++
		}
	})
	fmt.Println(skipped, "skipped, for example:")
	fmt.Println(rec.Find("yarn_ratio_16/halves").Messages[0])
	// Output:
	// FAIL small/halves
	// FAIL head_dim_128/halves
	// FAIL base_500000/halves
	// FAIL positions_to_4096/halves
	// FAIL positions_near_1e6/halves
	// 16 skipped, for example:
	// case yarn_ratio_16/halves skipped: it needs scaling method yarn (Methods), YaRN ramp ratio (Ramps), a magnitude other than 1 (Magnitude), which the kernel does not declare in its Supports
}
