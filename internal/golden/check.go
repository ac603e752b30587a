package golden

import (
	"fmt"
	"math"
	"testing"

	"gonum.org/v1/gonum/floats"
)

// MustLoadFamily loads testdata/golden/<pkg>/<family>.json or stops the test.
func MustLoadFamily(tb testing.TB, pkg, family string) *File {
	tb.Helper()
	f, err := LoadFamily(pkg, family)
	if err != nil {
		tb.Fatal(err)
	}
	return f
}

// NormwiseRelErr is ‖got − want‖₂ / ‖want‖₂ over the finite elements of
// want, the error measure the project's accuracy targets are stated in. When
// ‖want‖₂ is 0 it is the absolute norm ‖got − want‖₂. Non-finite elements
// must match exactly (NaN with NaN, +Inf with +Inf); a mismatch there, or a
// length mismatch, gives +Inf. The norms are computed with scaling so that
// values near the overflow or underflow thresholds do not distort them.
func NormwiseRelErr(got, want []float64) float64 {
	if len(got) != len(want) {
		return math.Inf(1)
	}
	var diff, ref []float64
	for i := range want {
		w, g := want[i], got[i]
		if math.IsNaN(w) || math.IsInf(w, 0) {
			if !(math.IsNaN(w) && math.IsNaN(g)) && w != g {
				return math.Inf(1)
			}
			continue
		}
		if math.IsNaN(g) || math.IsInf(g, 0) {
			return math.Inf(1)
		}
		diff = append(diff, g-w)
		ref = append(ref, w)
	}
	d := norm2(diff)
	r := norm2(ref)
	if r == 0 {
		return d
	}
	return d / r
}

// norm2 is the Euclidean norm. gonum's floats.Norm computes it with
// scaling, in the manner of the reference BLAS dnrm2, so that it neither
// overflows nor underflows.
func norm2(x []float64) float64 {
	if len(x) == 0 {
		return 0
	}
	return floats.Norm(x, 2)
}

// Describe formats a failed comparison for a test message: the case, the
// error found and the bound.
func Describe(c *Case, tensor string, err, bound float64) string {
	return fmt.Sprintf("%s: %s: normwise relative error %.3g exceeds %.3g", c, tensor, err, bound)
}
