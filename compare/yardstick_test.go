package compare_test

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/num"
)

// softmaxRows is a small kernel written once over num.Float, as plumb's
// kernels are: the softmax of each row of n elements, with the row maximum
// subtracted. Its float64 instantiation plays the reference, its float32
// instantiation the yardstick.
func softmaxRows[T num.Float](x []T, n int) []T {
	out := make([]T, len(x))
	for r := 0; r+n <= len(x); r += n {
		row, o := x[r:r+n], out[r:r+n]
		m := T(math.Inf(-1))
		for _, v := range row {
			m = max(m, v)
		}
		var s T
		for i, v := range row {
			o[i] = T(math.Exp(float64(v - m)))
			s += o[i]
		}
		for i := range o {
			o[i] /= s
		}
	}
	return out
}

// softmaxNarrowSum is a worse algorithm: the row sum is rounded to format
// f after every addition, as a kernel that accumulates in its storage
// format does.
func softmaxNarrowSum(x []float64, n int, f compare.Format) []float64 {
	out := make([]float64, len(x))
	for r := 0; r+n <= len(x); r += n {
		row, o := x[r:r+n], out[r:r+n]
		m := math.Inf(-1)
		for _, v := range row {
			m = max(m, v)
		}
		s := 0.0
		for i, v := range row {
			o[i] = f.Round(math.Exp(v - m))
			s = f.Round(s + o[i])
		}
		for i := range o {
			o[i] = f.Round(o[i] / s)
		}
	}
	return out
}

func randomLogits(seed uint64, size int) []float64 {
	r := rand.New(rand.NewPCG(seed, 1))
	x := make([]float64, size)
	for i := range x {
		x[i] = 4 * r.NormFloat64()
	}
	return x
}

func softmax32(n int) func(in [][]float32) ([]float32, error) {
	return func(in [][]float32) ([]float32, error) { return softmaxRows(in[0], n), nil }
}

func TestYardstickJudges(t *testing.T) {
	const rows, n = 8, 512
	x := randomLogits(3, rows*n)
	ref := softmaxRows(x, n)
	shape := []int{rows, n}
	for _, f := range []compare.Format{compare.Float32, compare.BFloat16, compare.Binary16} {
		t.Run(f.String(), func(t *testing.T) {
			y, err := compare.MeasureYardstick(f, [][]float64{x}, ref, shape, compare.DefaultK, softmax32(n))
			ensure.NoError(t, err)
			expect.Equal(t, "float32", y.Arithmetic)
			expect.Equal(t, f, y.Format)
			expect.Equal(t, compare.DefaultK*y.Report.MaxAbs+y.FloorAbs, y.Tolerance.Abs)
			expect.Equal(t, compare.DefaultK*y.Report.Normwise+y.FloorNormwise, y.Tolerance.MaxNormwise)
			expect.Equal(t, f.UnitRoundoff(), y.FloorNormwise)
			expect.Positive(t, y.Report.MaxAbs, "the yardstick has rounding error")
			expect.Zero(t, y.Report.NotInFormat, "the yardstick's output is rounded to the format")
			opt := y.Options()

			// The reference rounded once to the format is as good as the
			// format allows: it must pass.
			once := make([]float64, len(ref))
			for i, v := range ref {
				once[i] = f.Round(v)
			}
			r, err := compare.Diff(ref, once, shape, opt)
			ensure.NoError(t, err)
			expect.True(t, r.Verdict.Pass, r.String())

			// The yardstick passes its own tolerance.
			r, err = compare.Diff(ref, y.Output, shape, opt)
			ensure.NoError(t, err)
			expect.True(t, r.Verdict.Pass, r.String())

			// A bug well above rounding: the largest probability 25% too
			// large.
			am := 0
			for i, v := range ref {
				if v > ref[am] {
					am = i
				}
			}
			bad := append([]float64(nil), once...)
			bad[am] = f.Round(ref[am] * 1.25)
			ensure.Greater(t, bad[am]-ref[am], y.Tolerance.Abs, "the bug is larger than the tolerance")
			r, err = compare.Diff(ref, bad, shape, opt)
			ensure.NoError(t, err)
			expect.False(t, r.Verdict.Pass, r.String())
			expect.Equal(t, 1, r.Verdict.Failed)
			expect.Equal(t, am, r.Worst[0].Offset)
			expect.Equal(t, []int{am / n, am % n}, r.Worst[0].Index)
		})
	}
}

// TestYardstickRefusesNarrowAccumulation: a softmax that accumulates its
// row sums in bfloat16 stagnates once the sum reaches 256 (the spacing there
// is 2, and adding terms near 1 rounds back), so with 512 logits of similar
// size its error is far more than twice the straightforward float32
// implementation's, and the yardstick says so. (With widely spread logits
// the rounding of the inputs dominates both, and the two are close: the
// yardstick judges the algorithm, not the spread.)
func TestYardstickRefusesNarrowAccumulation(t *testing.T) {
	const rows, n = 8, 512
	x := randomLogits(4, rows*n)
	for i := range x {
		x[i] /= 40 // logits of similar size: every term of the sum near 1
	}
	ref := softmaxRows(x, n)
	y, err := compare.MeasureYardstick(compare.BFloat16, [][]float64{x}, ref, []int{rows, n}, compare.DefaultK, softmax32(n))
	ensure.NoError(t, err)
	in := make([]float64, len(x))
	for i, v := range x {
		in[i] = compare.BFloat16.Round(v)
	}
	bad := softmaxNarrowSum(in, n, compare.BFloat16)
	r, err := compare.Diff(ref, bad, []int{rows, n}, y.Options())
	ensure.NoError(t, err)
	expect.False(t, r.Verdict.Pass, r.String())
	expect.Greater(t, r.Normwise, 2*y.Report.Normwise)
}

func TestYardstickFloat64Arithmetic(t *testing.T) {
	const n = 64
	x := randomLogits(5, 2*n)
	ref := softmaxRows(x, n)
	run := func(in [][]float64) ([]float64, error) { return softmaxRows(in[0], n), nil }
	y, err := compare.MeasureYardstick(compare.BFloat16, [][]float64{x}, ref, nil, compare.DefaultK, run)
	ensure.NoError(t, err)
	expect.Equal(t, "float64", y.Arithmetic)
	expect.Equal(t, []int{2 * n}, y.Report.Shape)

	// Float64 inputs and arithmetic: the yardstick is the reference, its
	// error 0, and the tolerance is the floor alone.
	y, err = compare.MeasureYardstick(compare.Float64, [][]float64{x}, ref, nil, 3, run)
	ensure.NoError(t, err)
	expect.Zero(t, y.Report.MaxAbs)
	expect.Equal(t, y.FloorAbs, y.Tolerance.Abs)
	expect.Equal(t, math.Ldexp(1, -53), y.Tolerance.MaxNormwise)
	expect.Equal(t, 3.0, y.K)
}

// TestYardstickIdentity: with the identity as the kernel the yardstick's
// error is the rounding of the inputs, at most u·|x| per element (u the
// unit roundoff, Higham 2002 Theorem 2.2), so its normwise error is at most
// u and the tolerance at most 3u in normwise terms.
func TestYardstickIdentity(t *testing.T) {
	x := randomLogits(6, 1000)
	for _, f := range []compare.Format{compare.Float32, compare.Binary16, compare.BFloat16, compare.E4M3, compare.E5M2} {
		y, err := compare.MeasureYardstick(f, [][]float64{x}, x, nil, compare.DefaultK,
			func(in [][]float32) ([]float32, error) { return in[0], nil })
		ensure.NoError(t, err)
		u := f.UnitRoundoff()
		expect.LessOrEqual(t, y.Report.MaxRel, u*1024, f.String()) // rel floor: 2^−10·max|x|
		expect.LessOrEqual(t, y.Report.Normwise, u, f.String())
		expect.LessOrEqual(t, y.Tolerance.MaxNormwise, 3*u, f.String())
	}
}

func TestYardstickErrors(t *testing.T) {
	x := []float64{1, 2, 3}
	ok := func(in [][]float32) ([]float32, error) { return in[0], nil }
	boom := errors.New("kernel refused")
	tests := []struct {
		name string
		f    compare.Format
		k    float64
		run  func([][]float32) ([]float32, error)
		ref  []float64
		want error
		text string
	}{
		{"wider format", compare.Float64, 2, ok, x, compare.ErrFormat, "compare: invalid number format: MeasureYardstick: f = float64; want a format no wider than the float32 arithmetic of run"},
		{"invalid format", compare.Format(9), 2, ok, x, compare.ErrFormat, "compare: invalid number format: MeasureYardstick: f = 9; want one of float64, float32, binary16, bfloat16, e4m3, e5m2"},
		{"k below 1", compare.BFloat16, 0.5, ok, x, compare.ErrTolerance, "compare: invalid tolerance: MeasureYardstick: k = 0.5; want a finite value ≥ 1"},
		{"k NaN", compare.BFloat16, math.NaN(), ok, x, compare.ErrTolerance, "compare: invalid tolerance: MeasureYardstick: k = NaN; want a finite value ≥ 1"},
		{"nil run", compare.BFloat16, 2, nil, x, compare.ErrYardstick, "compare: yardstick failed: MeasureYardstick: run = nil; want the low-precision function"},
		{"run fails", compare.BFloat16, 2, func([][]float32) ([]float32, error) { return nil, boom }, x, compare.ErrYardstick, "compare: yardstick failed: MeasureYardstick: run returned an error: kernel refused"},
		{"wrong length", compare.BFloat16, 2, ok, x[:2], compare.ErrShape, "compare: shape mismatch: MeasureYardstick: shape [3] holds 3 elements; want len(ref) = 2"},
		{"short output", compare.BFloat16, 2, func(in [][]float32) ([]float32, error) { return in[0][:1], nil }, x, compare.ErrYardstick, "compare: yardstick failed: MeasureYardstick: run returned 1 elements; want len(ref) = 3"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			shape := []int{3}
			_, err := compare.MeasureYardstick(tc.f, [][]float64{x}, tc.ref, shape, tc.k, tc.run)
			ensure.ErrorIs(t, err, tc.want)
			expect.EqualError(t, err, tc.text)
		})
	}
	_, err := compare.MeasureYardstick(compare.BFloat16, [][]float64{x}, x, nil, 2, func([][]float32) ([]float32, error) { return nil, boom })
	expect.ErrorIs(t, err, boom, "the kernel's own error is wrapped too")
}

func TestToleranceValidate(t *testing.T) {
	expect.NoError(t, compare.Tolerance{}.Validate())
	expect.NoError(t, compare.Tolerance{Abs: 1, Rel: 2, ULPs: 3, MaxNormwise: 4}.Validate())
	for _, tc := range []struct {
		tol  compare.Tolerance
		want string
	}{
		{compare.Tolerance{Abs: -1}, "compare: invalid tolerance: Tolerance.Validate: Tolerance.Abs = -1; want a finite value ≥ 0"},
		{compare.Tolerance{Rel: math.NaN()}, "compare: invalid tolerance: Tolerance.Validate: Tolerance.Rel = NaN; want a finite value ≥ 0"},
		{compare.Tolerance{MaxNormwise: math.Inf(1)}, "compare: invalid tolerance: Tolerance.Validate: Tolerance.MaxNormwise = +Inf; want a finite value ≥ 0"},
	} {
		err := tc.tol.Validate()
		expect.ErrorIs(t, err, compare.ErrTolerance, fmt.Sprint(tc.tol))
		expect.EqualError(t, err, tc.want)
	}
}

// TestYardstickK: the tolerance is k times the yardstick's measured error
// plus the floor, as MeasureYardstick documents. The same kernel measured
// with k = 2 and k = 4 has the same, nonzero error, so the error parts of
// the two tolerances are exactly 2e and 4e (products by powers of two are
// exact), their ratio exactly 2.
//
// The floor is computed here from the format's definition, not from the
// package: one rounding of the largest reference magnitude, u·max|ref|
// with u = 2^−p, p the significand precision (24 for binary32 and 11 for
// binary16, IEEE 754-2019 §3.6 table 3.5; 8 for bfloat16, binary32 with
// the low 16 fraction bits dropped), and u normwise.
func TestYardstickK(t *testing.T) {
	const rows, n = 4, 256
	x := randomLogits(7, rows*n)
	ref := softmaxRows(x, n)
	big := 0.0
	for _, v := range ref {
		big = math.Max(big, math.Abs(v))
	}
	for _, tc := range []struct {
		f compare.Format
		p int
	}{{compare.Float32, 24}, {compare.Binary16, 11}, {compare.BFloat16, 8}} {
		u := math.Ldexp(1, -tc.p)
		floorAbs := u * big // far above half the smallest subnormal of each format
		y2, err := compare.MeasureYardstick(tc.f, [][]float64{x}, ref, nil, 2, softmax32(n))
		ensure.NoError(t, err)
		y4, err := compare.MeasureYardstick(tc.f, [][]float64{x}, ref, nil, 4, softmax32(n))
		ensure.NoError(t, err)
		e, en := y2.Report.MaxAbs, y2.Report.Normwise
		ensure.Positive(t, e, "%v: the yardstick has rounding error", tc.f)
		ensure.Positive(t, en, "%v", tc.f)
		ensure.Equal(t, e, y4.Report.MaxAbs, "%v: the same measurement", tc.f)
		ensure.Equal(t, en, y4.Report.Normwise, "%v", tc.f)
		expect.Equal(t, 2.0, y2.K)
		expect.Equal(t, 4.0, y4.K)

		expect.Equal(t, floorAbs, y2.FloorAbs, "%v: the floor is one rounding of max|ref|", tc.f)
		expect.Equal(t, u, y2.FloorNormwise, "%v", tc.f)
		expect.Equal(t, 2*e+floorAbs, y2.Tolerance.Abs, "%v", tc.f)
		expect.Equal(t, 4*e+floorAbs, y4.Tolerance.Abs, "%v", tc.f)
		expect.Equal(t, 2*en+u, y2.Tolerance.MaxNormwise, "%v", tc.f)
		expect.Equal(t, 4*en+u, y4.Tolerance.MaxNormwise, "%v", tc.f)
		expect.Equal(t, 2*(y2.Tolerance.Abs-y2.FloorAbs), y4.Tolerance.Abs-y4.FloorAbs, "%v: the error parts are in the ratio k = 4 : 2", tc.f)
		expect.Equal(t, 2*(y2.Tolerance.MaxNormwise-y2.FloorNormwise), y4.Tolerance.MaxNormwise-y4.FloorNormwise, "%v", tc.f)
		expect.Greater(t, y4.Tolerance.Abs, y2.Tolerance.Abs, "%v: a larger k allows more", tc.f)
	}
}
