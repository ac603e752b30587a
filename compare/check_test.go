package compare_test

import (
	"fmt"
	"math"
	"testing"

	"github.com/google/go-cmp/cmp"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
)

// recorder is a testing.TB that records failures instead of failing.
type recorder struct {
	testing.TB
	errors, fatals []string
}

func (r *recorder) Helper() {}
func (r *recorder) Errorf(format string, args ...any) {
	r.errors = append(r.errors, fmt.Sprintf(format, args...))
}
func (r *recorder) Fatalf(format string, args ...any) {
	r.fatals = append(r.fatals, fmt.Sprintf(format, args...))
}

func TestCheck(t *testing.T) {
	ref := []float64{1, 2, 3, 4}
	tests := []struct {
		name           string
		got            []float64
		shape          []int
		f              compare.Format
		tol            compare.Tolerance
		pass           bool
		errors, fatals int
		contains       string
	}{
		{"pass", []float64{1, 2, 3, 4.001}, []int{2, 2}, compare.Float64, compare.Tolerance{Abs: 1e-2}, true, 0, 0, ""},
		{"fail", []float64{1, 2, 3, 4.1}, []int{2, 2}, compare.Float64, compare.Tolerance{Abs: 1e-2}, false, 1, 0, "verdict: FAIL"},
		{"bad shape", []float64{1, 2, 3, 4}, []int{3}, compare.Float64, compare.Tolerance{}, false, 0, 1, "compare: shape mismatch: Check: shape [3] holds 3 elements; want len(ref) = 4"},
		{"bad tolerance", []float64{1, 2, 3, 4}, nil, compare.Float64, compare.Tolerance{Abs: -1}, false, 0, 1, "compare: invalid tolerance: Check: tol.Abs = -1; want a finite value ≥ 0"},
		{"bad format", []float64{1, 2, 3, 4}, nil, 8, compare.Tolerance{}, false, 0, 1, "compare: invalid number format: Check: f = 8; want one of float64, float32, binary16, bfloat16, e4m3, e5m2"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			rec := &recorder{TB: t}
			r, pass := compare.Check(rec, ref, tc.got, tc.shape, tc.f, tc.tol)
			expect.Equal(t, tc.pass, pass)
			expect.Len(t, rec.errors, tc.errors)
			expect.Len(t, rec.fatals, tc.fatals)
			if tc.fatals > 0 {
				expect.Nil(t, r)
			} else {
				expect.NotNil(t, r)
			}
			for _, m := range append(rec.errors, rec.fatals...) {
				expect.Contains(t, m, tc.contains)
			}
		})
	}
}

func TestApprox(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	const M = math.MaxFloat64
	type pair struct {
		Name string
		V    []float64
		S    float64
	}
	tests := []struct {
		name string
		x, y any
		opt  cmp.Option
		want bool
	}{
		{"scalars within Abs", 1.0, 1.001, compare.Approx(compare.Float64, compare.Tolerance{Abs: 1e-2}), true},
		{"scalars beyond Abs", 1.0, 1.1, compare.Approx(compare.Float64, compare.Tolerance{Abs: 1e-2}), false},
		{"Rel uses the larger magnitude", 100.0, 101.0, compare.Approx(compare.Float64, compare.Tolerance{Rel: 0.00995}), true}, // 1 ≤ 0.00995·101, > 0.00995·100,
		{"ULPs in bfloat16", 1.0, 1.0078125, compare.Approx(compare.BFloat16, compare.Tolerance{ULPs: 1}), true},
		{"ULPs exceeded", 1.0, 1.015625, compare.Approx(compare.BFloat16, compare.Tolerance{ULPs: 1}), false},
		{"NaN equals NaN", nan, nan, compare.Approx(compare.Float64, compare.Tolerance{}), true},
		{"Inf equals Inf", inf, inf, compare.Approx(compare.Float64, compare.Tolerance{}), true},
		{"Inf is not −Inf", inf, -inf, compare.Approx(compare.Float64, compare.Tolerance{Abs: 1e300}), false},
		{"slices", []float64{1, 2, nan}, []float64{1.001, 2, nan}, compare.Approx(compare.Float64, compare.Tolerance{Abs: 1e-2}), true},
		{"slices normwise", []float64{3, 4}, []float64{3, 4.5}, compare.Approx(compare.Float64, compare.Tolerance{Abs: 1, MaxNormwise: 0.09}), false},
		{"slices normwise ok", []float64{3, 4}, []float64{3, 4.5}, compare.Approx(compare.Float64, compare.Tolerance{Abs: 1, MaxNormwise: 0.11}), true},
		{"unequal lengths", []float64{1, 2}, []float64{1}, compare.Approx(compare.Float64, compare.Tolerance{Abs: 1}), false},
		{"inside a struct", pair{"a", []float64{1, 2}, 3}, pair{"a", []float64{1, 2.001}, 3.001}, compare.Approx(compare.Float64, compare.Tolerance{Abs: 1e-2}), true},
		{"struct other field differs", pair{"a", []float64{1}, 3}, pair{"b", []float64{1}, 3}, compare.Approx(compare.Float64, compare.Tolerance{Abs: 1}), false},
		// Near ±Max (M): ‖x − y‖ = 2M·√2 and ‖x‖ = ‖y‖ = M·√2 overflow float64,
		// their quotient 2 does not; for (M, M) against (M/2, M/2) it is 1/2.
		{"normwise near Max passes", []float64{M, M}, []float64{-M, -M}, compare.Approx(compare.Float64, compare.Tolerance{Rel: 2, MaxNormwise: 2.5}), true},
		{"normwise near Max fails", []float64{M, M}, []float64{-M, -M}, compare.Approx(compare.Float64, compare.Tolerance{Rel: 2, MaxNormwise: 1.5}), false},
		{"normwise with a norm beyond float64", []float64{M, M}, []float64{M / 2, M / 2}, compare.Approx(compare.Float64, compare.Tolerance{Rel: 1, MaxNormwise: 0.1}), false},
		{"normwise with a norm beyond float64 ok", []float64{M, M}, []float64{M / 2, M / 2}, compare.Approx(compare.Float64, compare.Tolerance{Rel: 1, MaxNormwise: 0.6}), true},
		{"invalid format equals nothing", 1.0, 1.0, compare.Approx(compare.Format(-3), compare.Tolerance{}), false},
		{"invalid tolerance equals nothing", 1.0, 1.0, compare.Approx(compare.Float64, compare.Tolerance{Abs: -1}), false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			expect.Equal(t, tc.want, cmp.Equal(tc.x, tc.y, tc.opt))
			expect.Equal(t, tc.want, cmp.Equal(tc.y, tc.x, tc.opt), "symmetric")
		})
	}
}
