package compare_test

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"testing"

	"github.com/google/go-cmp/cmp"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/num"
)

func ExampleFormat_Round() {
	fmt.Println(compare.BFloat16.Round(1.0 / 3))
	fmt.Println(compare.Binary16.Round(65519), compare.Binary16.Round(65520))
	fmt.Println(compare.E4M3.Round(464), compare.E4M3.Round(465), compare.E4M3.RoundSaturating(465))
	fmt.Println(compare.E5M2.Round(1e6), compare.E5M2.RoundSaturating(math.Inf(-1)))
	// Output:
	// 0.333984375
	// 65504 +Inf
	// 448 NaN 448
	// +Inf -57344
}

func ExampleFormat_Round_doubleRounding() {
	// Just above the midpoint of 1 and the next binary16 value: float32
	// rounds it onto the midpoint, and the tie then goes to even.
	x := 1 + 0x1p-11 + 0x1p-40
	fmt.Println(compare.Binary16.Round(x))
	fmt.Println(compare.Binary16.Round(float64(float32(x))))
	// Output:
	// 1.0009765625
	// 1
}

func ExampleFormat_Encode() {
	for _, f := range []compare.Format{compare.Binary16, compare.BFloat16, compare.E4M3, compare.E5M2} {
		v, _ := f.Decode(f.Encode(-1.5))
		fmt.Printf("%-8v 0x%04x %v\n", f, f.Encode(-1.5), v)
	}
	// Output:
	// binary16 0xbe00 -1.5
	// bfloat16 0xbfc0 -1.5
	// e4m3     0x00bc -1.5
	// e5m2     0x00be -1.5
}

func ExampleFormat_ULPDistance() {
	d, ok := compare.BFloat16.ULPDistance(1, 1.05)
	fmt.Println(d, ok, compare.BFloat16.ULP(1))
	d, ok = compare.Binary16.ULPDistance(-0x1p-24, 0x1p-24)
	fmt.Println(d, ok)
	_, ok = compare.E4M3.ULPDistance(1, math.NaN())
	fmt.Println(ok)
	// Output:
	// 6 true 0.0078125
	// 2 true
	// false
}

func ExampleDiff() {
	ref := []float64{0.5, 0.25, 0.125, 0.0625, 1, 2}
	got := []float64{0.5, 0.2490234375, 0.125, 0.0625, 1.0078125, math.NaN()}
	tol := compare.Tolerance{Abs: 1e-3, Rel: 1e-3, Basis: "explicit"}
	r, err := compare.Diff(ref, got, []int{2, 3}, compare.Options{Format: compare.BFloat16, Tolerance: &tol})
	if err != nil {
		fmt.Println(err)
		return
	}
	r.WriteText(os.Stdout)
	// Output:
	// 6 elements, shape [2 3], candidate format bfloat16
	//   max abs error       0.007812  at [1 1]
	//   max rel error       0.007812  at [1 1]
	//                                 relative to |ref|, or to 0.001953 where |ref| is smaller
	//   RMS error           0.003521
	//   mean signed error   0.001367  (got − ref)
	//   normwise rel error  0.006822
	//   SQNR                43.32 dB  10·log₁₀(Σ ref² / Σ (got − ref)²)
	//   max ULP distance    1         (bfloat16)
	//   NaN mismatches      1
	//   Inf mismatches      0
	// ULP distances in bfloat16:
	//   0  3   60.0%
	//   1  2   40.0%
	// worst 3 elements, ranked by how far each exceeds the tolerance (× tol: its error over the error
	//   allowed there; above 1 fails), NaN and Inf mismatches first; the max abs error above is the
	//   largest |got − ref|, whatever its tolerance:
	//   index  reference  candidate     abs error  rel error  ULPs  × tol
	//   [1 2]  2          NaN           +Inf       +Inf       NaN   +Inf
	//   [1 1]  1          1.0078125     0.007812   0.007812   1     3.906
	//   [0 1]  0.25       0.2490234375  0.0009766  0.003906   1     0.7812
	// tolerance: abs 0.001, rel 0.001, ULPs not used, normwise not used
	//   basis: explicit
	// verdict: FAIL: 1 NaN and 0 Inf mismatches; 1 of 6 elements exceed the elementwise tolerance
}

func ExampleReport_MarshalJSON() {
	ref := []float64{1, 2}
	got := []float64{1, math.Inf(1)}
	r, _ := compare.Diff(ref, got, nil, compare.Options{Format: compare.Float32})
	b, _ := json.Marshal(r)
	fmt.Println(string(b))
	// Output:
	// {"shape":[2],"elements":2,"format":"float32","finite_pairs":1,"max_abs_error":0,"max_abs_error_at":[0],"max_rel_error":0,"max_rel_error_at":[0],"rel_error_floor":0.001953125,"rms_error":0,"mean_signed_error":0,"normwise_rel_error":0,"sqnr_db":"inf","max_ulps":0,"ulp_histogram":[{"from":0,"to":0,"count":1}],"not_in_format":0,"nan_mismatches":0,"inf_mismatches":1,"nonfinite_matches":0,"worst":[{"index":[1],"offset":1,"reference":2,"candidate":"inf","abs_error":"inf","rel_error":"inf","ulps":"nan"}],"tolerance":null,"verdict":null}
}

// matVec is a kernel written once over num.Float, as plumb's kernels are:
// y = W x for W of m rows and n columns. Each product is rounded to T
// before it is added (T(w*x)), so that no fused multiply-add changes the
// result on any architecture.
func matVec[T num.Float](w, x []T, m, n int) []T {
	y := make([]T, m)
	for i := range m {
		var s T
		for j := range n {
			s += T(w[i*n+j] * x[j])
		}
		y[i] = s
	}
	return y
}

// deterministic inputs in [−0.5, 0.5) with no random generator.
func ramp(n, mul, mod int) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = float64((i*mul)%mod)/float64(mod) - 0.5
	}
	return v
}

func ExampleMeasureYardstick() {
	const m, n = 4, 256
	w, x := ramp(m*n, 37, 101), ramp(n, 53, 97)
	ref := matVec(w, x, m, n) // the float64 reference

	// The yardstick: bfloat16 inputs, float32 arithmetic (the float32
	// instantiation of the same body), bfloat16 output.
	y, err := compare.MeasureYardstick(compare.BFloat16, [][]float64{w, x}, ref, []int{m}, compare.DefaultK,
		func(in [][]float32) ([]float32, error) { return matVec(in[0], in[1], m, n), nil })
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("yardstick: max abs %.2g, normwise %.2g\n", y.Report.MaxAbs, y.Report.Normwise)
	fmt.Printf("tolerance: abs %.2g, normwise %.2g\n", y.Tolerance.Abs, y.Tolerance.MaxNormwise)

	// A candidate that accumulates in bfloat16 instead of float32.
	f := compare.BFloat16
	got := make([]float64, m)
	for i := range m {
		s := 0.0
		for j := range n {
			s = f.Round(s + f.Round(f.Round(w[i*n+j])*f.Round(x[j])))
		}
		got[i] = s
	}
	r, _ := compare.Diff(ref, got, []int{m}, y.Options())
	fmt.Printf("candidate: max abs %.2g, normwise %.2g, pass %v\n", r.MaxAbs, r.Normwise, r.Verdict.Pass)
	// Output:
	// yardstick: max abs 0.0027, normwise 0.0013
	// tolerance: abs 0.015, normwise 0.0065
	// candidate: max abs 0.029, normwise 0.013, pass false
}

// printTB stands in for the *testing.T of a real test.
type printTB struct{ testing.TB }

func (printTB) Helper()                           {}
func (printTB) Errorf(format string, args ...any) { fmt.Printf("FAIL: "+format+"\n", args...) }
func (printTB) Fatalf(format string, args ...any) { fmt.Printf("FATAL: "+format+"\n", args...) }

func ExampleCheck() {
	// In a test: compare.Check(t, want, got, shape, format, tol).
	var t printTB
	want := []float64{1, 2, 3}
	_, ok := compare.Check(t, want, []float64{1, 2, 3.0001}, nil, compare.Float64, compare.Tolerance{Rel: 1e-4})
	fmt.Println(ok)
	_, ok = compare.Check(t, want, []float64{1, 2, 3.0001}, []int{2}, compare.Float64, compare.Tolerance{Rel: 1e-4})
	fmt.Println(ok)
	// Output:
	// true
	// FATAL: compare: shape mismatch: Check: shape [2] holds 2 elements; want len(ref) = 3
	// false
}

func ExampleApprox() {
	type layer struct {
		Name string
		Out  []float64
	}
	want := layer{"norm", []float64{0.5, -1.25, 2}}
	got := layer{"norm", []float64{0.5, -1.2500001, 2.0000002}}
	tol := compare.Tolerance{Abs: 1e-6, Rel: 1e-6}
	fmt.Println(cmp.Equal(want, got, compare.Approx(compare.Float64, tol)))
	fmt.Println(cmp.Equal(want, got))
	// Output:
	// true
	// false
}
