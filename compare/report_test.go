package compare

import (
	"bytes"
	"encoding/json"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/google/go-cmp/cmp"
	"github.com/google/go-cmp/cmp/cmpopts"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
)

func TestDiffMeasures(t *testing.T) {
	// Worked by hand (arithmetic): errors got − ref = 0, 0.5, −1, 0.
	ref := []float64{1, 2, 4, 0}
	got := []float64{1, 2.5, 3, 0}
	r, err := Diff(ref, got, []int{2, 2}, Options{Format: Float32})
	ensure.NoError(t, err)
	expect.Equal(t, []int{2, 2}, r.Shape)
	expect.Equal(t, 4, r.Elements)
	expect.Equal(t, 4, r.Finite)
	expect.Equal(t, 1.0, r.MaxAbs)
	expect.Equal(t, []int{1, 0}, r.MaxAbsAt)
	// rel = 0.5/2 = 0.25 and 1/4 = 0.25; the first keeps the maximum.
	expect.Equal(t, 0.25, r.MaxRel)
	expect.Equal(t, []int{0, 1}, r.MaxRelAt)
	expect.Equal(t, 4.0/1024, r.RelFloor) // DefaultRelFloorFactor · max|ref|
	expect.InDelta(t, math.Sqrt(1.25/4), r.RMS, 1e-16)
	expect.Equal(t, -0.125, r.MeanSigned)
	expect.InDelta(t, math.Sqrt(1.25/21), r.Normwise, 1e-16)
	// Float32 ULPs: 2 → 2.5 is 0.5 / 2^−22 = 2^21 steps; 3 → 4 is
	// 1 / 2^−22 = 2^22 steps (3 is in the binade [2, 4)).
	expect.Equal(t, float64(1<<22), r.MaxULPs)
	ensure.Len(t, r.ULPs, 24)
	expect.Equal(t, ULPBucket{0, 0, 2}, r.ULPs[0])
	expect.Equal(t, ULPBucket{1 << 20, 1<<21 - 1, 0}, r.ULPs[21])
	expect.Equal(t, ULPBucket{1 << 21, 1<<22 - 1, 1}, r.ULPs[22])
	expect.Equal(t, ULPBucket{1 << 22, 1<<23 - 1, 1}, r.ULPs[23])
	expect.Zero(t, r.NotInFormat)
	// Worst by absolute error, exact elements not listed.
	ensure.Len(t, r.Worst, 2)
	expect.Equal(t, Element{Index: []int{1, 0}, Offset: 2, Ref: 4, Got: 3, AbsErr: 1, RelErr: 0.25, ULPs: 1 << 22}, r.Worst[0])
	expect.Equal(t, []int{0, 1}, r.Worst[1].Index)
	expect.Nil(t, r.Verdict)
}

func TestDiffNonFinite(t *testing.T) {
	inf, nan := math.Inf(1), math.NaN()
	ref := []float64{nan, inf, -inf, nan, 1, inf, 1, 2}
	got := []float64{nan, inf, -inf, 1, nan, -inf, inf, 2}
	r, err := Diff(ref, got, nil, Options{})
	ensure.NoError(t, err)
	expect.Equal(t, 3, r.NonFiniteMatches)
	expect.Equal(t, 2, r.NaNMismatches)
	expect.Equal(t, 2, r.InfMismatches)
	expect.Equal(t, 1, r.Finite)
	ensure.Len(t, r.Worst, 4) // the mismatches, in offset order
	for k, off := range []int{3, 4, 5, 6} {
		expect.Equal(t, off, r.Worst[k].Offset)
		expect.True(t, math.IsInf(r.Worst[k].AbsErr, 1))
	}
	tol := Tolerance{Abs: 1e300}
	r, err = Diff(ref, got, nil, Options{Tolerance: &tol})
	ensure.NoError(t, err)
	expect.False(t, r.Verdict.Pass, "a non-finite mismatch fails under any tolerance")
	expect.Equal(t, 4, r.Verdict.Failed)
}

func TestDiffArguments(t *testing.T) {
	one := []float64{1, 2, 3, 4, 5, 6}
	tests := []struct {
		name     string
		ref, got []float64
		shape    []int
		opt      Options
		want     error
		contains string
	}{
		{"lengths", one, one[:5], nil, Options{}, ErrShape, "compare: shape mismatch: Diff: got has 5 elements; want len(ref) = 6"},
		{"shape product", one, one, []int{2, 2}, Options{}, ErrShape, "compare: shape mismatch: Diff: shape [2 2] holds 4 elements; want len(ref) = 6"},
		{"negative dim", one, one, []int{-2, -3}, Options{}, ErrShape, "compare: shape mismatch: Diff: shape[0] = -2; want ≥ 0 (shape [-2 -3])"},
		{"overflowing shape", one, one, []int{1 << 40, 1 << 40}, Options{}, ErrShape, "compare: shape mismatch: Diff: shape = [1099511627776 1099511627776]; want one whose element count fits an int"},
		{"format", one, one, nil, Options{Format: -1}, ErrFormat, "compare: invalid number format: Diff: Options.Format = -1; want one of float64, float32, binary16, bfloat16, e4m3, e5m2"},
		{"floor", one, one, nil, Options{RelFloor: -1}, ErrTolerance, "compare: invalid tolerance: Diff: Options.RelFloor = -1; want a finite value ≥ 0 (0 for the default)"},
		{"floor nan", one, one, nil, Options{RelFloor: math.NaN()}, ErrTolerance, "compare: invalid tolerance: Diff: Options.RelFloor = NaN; want a finite value ≥ 0 (0 for the default)"},
		{"tolerance", one, one, nil, Options{Tolerance: &Tolerance{Rel: -1}}, ErrTolerance, "compare: invalid tolerance: Diff: Options.Tolerance.Rel = -1; want a finite value ≥ 0"},
		{"tolerance inf", one, one, nil, Options{Tolerance: &Tolerance{Abs: math.Inf(1)}}, ErrTolerance, "compare: invalid tolerance: Diff: Options.Tolerance.Abs = +Inf; want a finite value ≥ 0"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Diff(tc.ref, tc.got, tc.shape, tc.opt)
			ensure.ErrorIs(t, err, tc.want)
			expect.EqualError(t, err, tc.contains)
		})
	}
}

func TestDiffEmptyAndOptions(t *testing.T) {
	r, err := Diff(nil, nil, nil, Options{Tolerance: &Tolerance{}})
	ensure.NoError(t, err)
	expect.Equal(t, []int{0}, r.Shape)
	expect.True(t, r.Verdict.Pass)
	expect.Nil(t, r.MaxAbsAt)
	expect.Contains(t, r.String(), "0 elements")

	ref := []float64{0, 0, 0}
	got := []float64{0.5, 0, 0}
	r, err = Diff(ref, got, []int{3, 1, 1}, Options{})
	ensure.NoError(t, err)
	expect.Equal(t, 1.0, r.RelFloor, "an all-zero reference has floor 1")
	expect.Equal(t, 0.5, r.MaxRel)
	expect.Equal(t, 0.5, r.Normwise, "a zero reference norm gives the absolute norm")

	r, err = Diff(ref, got, nil, Options{RelFloor: 0.25, Worst: -1})
	ensure.NoError(t, err)
	expect.Equal(t, 2.0, r.MaxRel)
	expect.Empty(t, r.Worst)
}

func TestWorstRanking(t *testing.T) {
	n := 50
	ref := make([]float64, n)
	got := make([]float64, n)
	for i := range ref {
		ref[i] = float64(i + 1)
		got[i] = ref[i] + float64(i%7)/8 // repeated exact errors: ties
	}
	r, err := Diff(ref, got, []int{5, 10}, Options{Worst: 8})
	ensure.NoError(t, err)
	ensure.Len(t, r.Worst, 8)
	// Errors 6/8 at i = 6, 13, 20, 27, 34, 41, 48, then 5/8 at 5: ties in
	// offset order.
	var offs []int
	for _, e := range r.Worst {
		offs = append(offs, e.Offset)
		expect.Equal(t, []int{e.Offset / 10, e.Offset % 10}, e.Index)
	}
	expect.Equal(t, []int{6, 13, 20, 27, 34, 41, 48, 5}, offs)

	// Under a relative tolerance the small references rank first.
	tol := Tolerance{Rel: 1e-4}
	r, err = Diff(ref, got, nil, Options{Tolerance: &tol, Worst: 1})
	ensure.NoError(t, err)
	expect.Equal(t, 6, r.Worst[0].Offset)
	expect.False(t, r.Verdict.Pass)
}

func TestVerdict(t *testing.T) {
	ref := []float64{1, 2, 3, 4}
	tests := []struct {
		name   string
		got    []float64
		tol    Tolerance
		pass   bool
		failed int
	}{
		{"exact under zero tolerance", []float64{1, 2, 3, 4}, Tolerance{}, true, 0},
		{"−0 equals +0", []float64{1, 2, 3, 4}, Tolerance{}, true, 0},
		{"one ULP under zero tolerance", []float64{1, 2, 3, math.Nextafter(4, 5)}, Tolerance{}, false, 1},
		{"error equal to Abs passes", []float64{1, 2, 3, 4.5}, Tolerance{Abs: 0.5}, true, 0},
		{"error just above Abs fails", []float64{1, 2, 3, math.Nextafter(4.5, 5)}, Tolerance{Abs: 0.5}, false, 1},
		// Abs + Rel·|ref| = 0.25 + 0.0625·4 = 0.5
		{"combined", []float64{1, 2, 3, 4.5}, Tolerance{Abs: 0.25, Rel: 0.0625}, true, 0},
		// 4 → 4 + 2^−21 is 1 ULP of float32 at 4 (2^−21).
		{"ULPs", []float64{1, 2, 3, 4 + pow2(-21)}, Tolerance{ULPs: 1}, true, 0},
		{"ULPs exceeded", []float64{1, 2, 3, 4 + pow2(-20)}, Tolerance{ULPs: 1}, false, 1},
		// normwise = 0.5/√30 ≈ 0.0913
		{"normwise passes", []float64{1, 2, 3, 4.5}, Tolerance{Abs: 1, MaxNormwise: 0.092}, true, 0},
		{"normwise fails", []float64{1, 2, 3, 4.5}, Tolerance{Abs: 1, MaxNormwise: 0.091}, false, 0},
	}
	// SQNR = 10·log₁₀(Σ ref² / Σ (got − ref)²) = 10·log₁₀(30/0.25) = 10·log₁₀ 120 ≈ 20.79 dB.
	r, err := Diff(ref, []float64{1, 2, 3, 4.5}, nil, Options{Format: Float32})
	ensure.NoError(t, err)
	expect.InDelta(t, 10*math.Log10(120), r.SQNR, 1e-13)
	r, err = Diff(ref, ref, nil, Options{Format: Float32})
	ensure.NoError(t, err)
	expect.Equal(t, math.Inf(1), r.SQNR, "no noise")
	r, err = Diff([]float64{0, 0}, []float64{0, 1}, nil, Options{Format: Float32})
	ensure.NoError(t, err)
	expect.Equal(t, math.Inf(-1), r.SQNR, "no signal")
	r, err = Diff([]float64{math.NaN()}, []float64{1}, nil, Options{Format: Float32})
	ensure.NoError(t, err)
	expect.True(t, math.IsNaN(r.SQNR), "no finite pairs")
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tol := tc.tol
			r, err := Diff(ref, tc.got, nil, Options{Format: Float32, Tolerance: &tol})
			ensure.NoError(t, err)
			expect.Equal(t, tc.pass, r.Verdict.Pass, r.String())
			expect.Equal(t, tc.failed, r.Verdict.Failed)
			expect.Equal(t, tc.pass, len(r.Verdict.Reasons) == 0)
		})
	}
}

func TestNotInFormat(t *testing.T) {
	ref := []float64{1, 2, 3}
	got := []float64{1.001, 2, 3 + pow2(-8)} // 1.001 is no bfloat16; 3 + 2^−8 is not either (ULP 2^−6)
	r, err := Diff(ref, got, nil, Options{Format: BFloat16})
	ensure.NoError(t, err)
	expect.Equal(t, 2, r.NotInFormat)
}

// TestDiffProperties checks invariants of the measures on random tensors
// (fixed seed): MaxAbs ≥ RMS ≥ |MeanSigned|; the histogram counts the
// finite pairs; Normwise agrees with the project's golden.NormwiseRelErr;
// the worst list is sorted by absolute error and led by MaxAbs.
func TestDiffProperties(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 7))
	for range 200 {
		n := 1 + r.IntN(300)
		ref := make([]float64, n)
		got := make([]float64, n)
		for i := range ref {
			ref[i] = r.NormFloat64() * math.Pow(10, float64(r.IntN(6)-3))
			got[i] = BFloat16.Round(ref[i] * (1 + 1e-2*r.NormFloat64()))
		}
		rep, err := Diff(ref, got, nil, Options{Format: BFloat16, Worst: 10})
		ensure.NoError(t, err)
		expect.GreaterOrEqual(t, rep.MaxAbs, rep.RMS)
		expect.GreaterOrEqual(t, rep.RMS*(1+1e-15), math.Abs(rep.MeanSigned))
		total := 0
		for _, b := range rep.ULPs {
			total += b.Count
		}
		expect.Equal(t, rep.Finite, total)
		expect.InEpsilon(t, golden.NormwiseRelErr(got, ref), rep.Normwise, 1e-13)
		expect.True(t, slices.IsSortedFunc(rep.Worst, func(a, b Element) int { return -cmpFloat(a.AbsErr, b.AbsErr) }))
		if len(rep.Worst) > 0 {
			expect.Equal(t, rep.MaxAbs, rep.Worst[0].AbsErr)
		}
		expect.Zero(t, rep.NotInFormat)
	}
}

func cmpFloat(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

func TestReportJSON(t *testing.T) {
	inf, nan := math.Inf(1), math.NaN()
	ref := []float64{1, 2, nan, 4, inf, 0.5}
	got := []float64{1, 2.25, 3, 4, inf, 0.5}
	tol := Tolerance{Abs: 0.1, MaxNormwise: 0.2, Basis: "explicit"}
	r, err := Diff(ref, got, []int{3, 2}, Options{Format: E5M2, Tolerance: &tol})
	ensure.NoError(t, err)
	b, err := json.Marshal(r)
	ensure.NoError(t, err)

	// The keys are part of the API: fixed names, fixed order.
	var keys []string
	dec := json.NewDecoder(strings.NewReader(string(b)))
	depth := 0
	for {
		tok, err := dec.Token()
		if err != nil {
			break
		}
		switch v := tok.(type) {
		case json.Delim:
			if v == '{' || v == '[' {
				depth++
			} else {
				depth--
			}
		case string:
			if depth == 1 && dec.More() {
				keys = append(keys, v)
				// skip the value
				var skip json.RawMessage
				ensure.NoError(t, dec.Decode(&skip))
			}
		}
	}
	expect.Equal(t, []string{"shape", "elements", "format", "finite_pairs", "max_abs_error", "max_abs_error_at",
		"max_rel_error", "max_rel_error_at", "rel_error_floor", "rms_error", "mean_signed_error", "normwise_rel_error",
		"sqnr_db", "max_ulps", "ulp_histogram", "not_in_format", "nan_mismatches", "inf_mismatches", "nonfinite_matches",
		"worst", "tolerance", "verdict"}, keys)
	expect.Contains(t, string(b), `"format":"e5m2"`)
	expect.Contains(t, string(b), `"reference":"nan"`)

	var back Report
	ensure.NoError(t, json.Unmarshal(b, &back))
	if d := cmp.Diff(r, &back, cmpopts.EquateNaNs()); d != "" {
		t.Errorf("JSON round trip (-before +after):\n%s", d)
	}
	expect.Error(t, json.Unmarshal([]byte(`{"surprise":1}`), &back))
	expect.Error(t, json.Unmarshal([]byte(`{"format":"int4"}`), &back))
}

func TestReportText(t *testing.T) {
	ref := []float64{1, 2, math.NaN(), 4}
	got := []float64{1, 2.5, 3, 4}
	tol := Tolerance{Abs: 0.1, Basis: "explicit"}
	r, err := Diff(ref, got, []int{2, 2}, Options{Format: BFloat16, Tolerance: &tol})
	ensure.NoError(t, err)
	var sb strings.Builder
	ensure.NoError(t, r.WriteText(&sb))
	s := sb.String()
	expect.Equal(t, r.String(), s)
	for _, want := range []string{
		"4 elements, shape [2 2], candidate format bfloat16",
		"max abs error       0.5",
		"NaN mismatches      1",
		"ULP distances in bfloat16:",
		"worst 2 elements, ranked by how far each exceeds the tolerance (× tol: ",
		"the max abs error above is the\n  largest |got − ref|, whatever its tolerance:\n",
		"[1 0]  NaN        3          +Inf       +Inf       NaN   +Inf\n",
		"[0 1]  2          2.5        0.5        0.25       32    5\n",
		"relative to |ref|, or to 0.003906 where |ref| is smaller\n",
		"tolerance: abs 0.1, rel not used, ULPs not used, normwise not used\n",
		"basis: explicit",
		"verdict: FAIL: 1 NaN and 0 Inf mismatches; 1 of 4 elements exceed the elementwise tolerance",
	} {
		expect.Contains(t, s, want)
	}
	expect.ErrorIs(t, r.WriteText(failWriter{}), errWrite)

	// Without a tolerance the worst elements are ranked by absolute error.
	r, err = Diff(ref, got, []int{2, 2}, Options{Format: BFloat16})
	ensure.NoError(t, err)
	expect.Contains(t, r.String(), "worst 2 elements, ranked by absolute error |got − ref| (NaN and Inf mismatches first):\n"+
		"  index  reference  candidate  abs error  rel error  ULPs\n")
	expect.NotContains(t, r.String(), "× tol")
}

// A part of the tolerance that takes no part in the test reads "not
// used", never 0.
func TestToleranceWords(t *testing.T) {
	for _, tc := range []struct {
		tol  Tolerance
		want string
	}{
		{Tolerance{}, "abs 0 (equal values), rel not used, ULPs not used, normwise not used"},
		{Tolerance{Abs: 1e-3}, "abs 0.001, rel not used, ULPs not used, normwise not used"},
		{Tolerance{Rel: 1e-3}, "abs not used, rel 0.001, ULPs not used, normwise not used"},
		{Tolerance{ULPs: 4}, "abs not used, rel not used, ULPs 4, normwise not used"},
		{Tolerance{MaxNormwise: 1e-6}, "abs 0 (equal values), rel not used, ULPs not used, normwise 1e-06"},
		{Tolerance{Abs: 1, Rel: 2, ULPs: 3, MaxNormwise: 4}, "abs 1, rel 2, ULPs 3, normwise 4"},
	} {
		expect.Equal(t, tc.want, tc.tol.words())
		r, err := Diff([]float64{1}, []float64{1}, nil, Options{Tolerance: &tc.tol})
		ensure.NoError(t, err)
		expect.Contains(t, r.String(), "\ntolerance: "+tc.want+"\n")
	}
}

// No line of words exceeds TextWidth: the basis of a yardstick's
// tolerance and a verdict of several reasons are wrapped at spaces, with
// nothing lost.
func TestReportTextWidth(t *testing.T) {
	ref := []float64{1, 2, math.NaN(), 4, 5, 6}
	got := []float64{1, 2.5, 3, math.Inf(1), 5.25, 6}
	basis := "yardstick: bfloat16 inputs, float32 arithmetic, bfloat16 output: 2 × (max abs 0.01172, normwise 0.003357) " +
		"+ one rounding (0.01562, 0.003906); the yardstick itself has 1 NaN/Inf mismatches"
	tol := Tolerance{Abs: 0.1, MaxNormwise: 1e-3, Basis: basis}
	r, err := Diff(ref, got, []int{2, 3}, Options{Format: BFloat16, Tolerance: &tol})
	ensure.NoError(t, err)
	s := r.String()
	for _, l := range strings.Split(s, "\n") {
		expect.LessOrEqual(t, utf8.RuneCountInString(l), TextWidth, "%q", l)
	}
	expect.Contains(t, s, "\n  basis: yardstick: bfloat16 inputs, float32 arithmetic, bfloat16 output: 2 × (max abs 0.01172,\n         normwise")
	joined := strings.Join(strings.Fields(s), " ")
	expect.Contains(t, joined, "basis: "+basis)
	expect.Contains(t, joined, "verdict: FAIL: "+strings.Join(r.Verdict.Reasons, "; "))
	ensure.Len(t, r.Verdict.Reasons, 3)

	var b bytes.Buffer
	WrapText(&b, "> ", "  ", strings.Repeat("x", 120)+" y")
	expect.Equal(t, "> "+strings.Repeat("x", 120)+"\n  y\n", b.String(), "a long word stays whole")
}

type failWriter struct{}

var errWrite = expect.ErrAny

func (failWriter) Write([]byte) (int, error) { return 0, errWrite }

// FuzzDiff builds tensors and a shape from arbitrary bytes and checks that
// Diff never panics, and that a report it returns is consistent with its
// inputs and renders.
func FuzzDiff(f *testing.F) {
	f.Add([]byte{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16}, uint8(2), uint8(3), int8(2))
	f.Add([]byte{0xff, 0xf8, 0, 0, 0, 0, 0, 0, 0x7f, 0xf0, 0, 0, 0, 0, 0, 0}, uint8(0), uint8(4), int8(-1))
	f.Fuzz(func(t *testing.T, data []byte, d0, fm uint8, worst int8) {
		n := len(data) / 16
		ref := make([]float64, n)
		got := make([]float64, n)
		for i := range n {
			ref[i] = math.Float64frombits(leUint64(data[16*i:]))
			got[i] = math.Float64frombits(leUint64(data[16*i+8:]))
		}
		var shape []int
		if d0 > 0 {
			shape = []int{int(d0), n / int(d0)}
		}
		tol := Tolerance{Abs: 1e-3, ULPs: 2}
		r, err := Diff(ref, got, shape, Options{Format: Format(fm % 7), Tolerance: &tol, Worst: int(worst)})
		if err != nil {
			return
		}
		if r.Elements != n || r.Finite+r.NaNMismatches+r.InfMismatches+r.NonFiniteMatches != n {
			t.Fatalf("counts do not add up: %+v", r)
		}
		if len(r.Worst) > max(int(worst), 0) && !(worst == 0 && len(r.Worst) <= DefaultWorst) {
			t.Fatalf("%d worst elements for Worst = %d", len(r.Worst), worst)
		}
		for _, e := range r.Worst {
			if len(e.Index) != len(r.Shape) {
				t.Fatalf("index %v for shape %v", e.Index, r.Shape)
			}
		}
		_ = r.String()
		if _, err := json.Marshal(r); err != nil {
			t.Fatalf("JSON: %v", err)
		}
	})
}

func leUint64(b []byte) uint64 {
	var v uint64
	for i := 7; i >= 0; i-- {
		v = v<<8 | uint64(b[i])
	}
	return v
}

// TestDiffExtremeMagnitudes: the norms are scaled, so squares of errors
// near float64's limits neither overflow nor underflow (arithmetic:
// RMS = 0.5·s/√2, Normwise = 0.5/√2 for errors (0.5 s, 0) on (s, s)).
func TestDiffExtremeMagnitudes(t *testing.T) {
	for _, s := range []float64{1e200, 1e-200} {
		r, err := Diff([]float64{s, s}, []float64{1.5 * s, s}, nil, Options{})
		ensure.NoError(t, err)
		expect.InEpsilon(t, 0.5*s/math.Sqrt2, r.RMS, 1e-15)
		expect.InEpsilon(t, 0.5/math.Sqrt2, r.Normwise, 1e-15)
		expect.InEpsilon(t, 0.25*s, r.MeanSigned, 1e-15)
	}
	// An error that overflows float64 is +Inf, not NaN.
	r, err := Diff([]float64{-math.MaxFloat64}, []float64{math.MaxFloat64}, nil, Options{})
	ensure.NoError(t, err)
	expect.True(t, math.IsInf(r.MaxAbs, 1))
	expect.True(t, math.IsInf(r.RMS, 1))
}

// TestDiffNearMax: with values at ±MaxFloat64 a difference, a norm or a
// sum exceeds float64 although the measure does not; Normwise, RMS and
// MeanSigned are then formed scaled and are finite where the exact value
// is. Exact values, by hand with M = MaxFloat64:
//
//	ref (M, M),  got (−M, −M):  ‖d‖ = 2M·√2, ‖ref‖ = M·√2, Normwise = 2;
//	                            RMS = 2M and MeanSigned = −2M exceed float64
//	ref (M, −M), got (−M, M):   Normwise = 2, MeanSigned = 0, RMS = 2M
//	ref (M, M),  got (M/2, M/2): ‖d‖ = (M/2)·√2, Normwise = 1/2,
//	                            RMS = M/2, MeanSigned = −M/2
//	ref (M, M, M), got (M/2, M/2, M/2): the sum of the errors, −3M/2,
//	                            exceeds float64, MeanSigned = −M/2 does not
func TestDiffNearMax(t *testing.T) {
	const M = math.MaxFloat64
	tests := []struct {
		name                  string
		ref, got              []float64
		normwise, rms, signed float64
	}{
		{"opposite signs", []float64{M, M}, []float64{-M, -M}, 2, math.Inf(1), math.Inf(-1)},
		{"errors of both signs", []float64{M, -M}, []float64{-M, M}, 2, math.Inf(1), 0},
		{"the reference norm overflows", []float64{M, M}, []float64{M / 2, M / 2}, 0.5, M / 2, -M / 2},
		{"the sum overflows", []float64{M, M, M}, []float64{M / 2, M / 2, M / 2}, 0.5, M / 2, -M / 2},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r, err := Diff(tc.ref, tc.got, nil, Options{})
			ensure.NoError(t, err)
			expect.Equal(t, tc.normwise, r.Normwise)
			expect.InEpsilon(t, tc.normwise, golden.NormwiseRelErr(scaleAll(tc.got, 0.25), scaleAll(tc.ref, 0.25)), 1e-15,
				"the same quotient on the data scaled by 1/4, where nothing overflows")
			if math.IsInf(tc.rms, 0) {
				expect.Equal(t, tc.rms, r.RMS)
			} else {
				expect.InEpsilon(t, tc.rms, r.RMS, 1e-15)
			}
			if math.IsInf(tc.signed, 0) || tc.signed == 0 {
				expect.Equal(t, tc.signed, r.MeanSigned)
			} else {
				expect.InEpsilon(t, tc.signed, r.MeanSigned, 1e-15)
			}
			expect.False(t, math.IsNaN(r.MaxAbs) || math.IsNaN(r.MaxRel))
		})
	}

	// The verdicts these measures give: |d| = 2M ≤ Rel·|ref| = 2M passes
	// the elementwise test, so the normwise bound decides.
	ref, got := []float64{M, -M}, []float64{-M, M}
	for _, tc := range []struct {
		max  float64
		pass bool
	}{{0, true}, {3, true}, {1.5, false}} {
		r, err := Diff(ref, got, nil, Options{Tolerance: &Tolerance{Rel: 2, MaxNormwise: tc.max}})
		ensure.NoError(t, err)
		expect.Equal(t, tc.pass, r.Verdict.Pass, "MaxNormwise %v: %s", tc.max, r)
	}
	// A reference norm beyond float64 must not make the quotient 0.
	r, err := Diff([]float64{M, M}, []float64{M / 2, M / 2}, nil, Options{Tolerance: &Tolerance{Rel: 1, MaxNormwise: 0.1}})
	ensure.NoError(t, err)
	expect.False(t, r.Verdict.Pass, r.String())
}

func scaleAll(x []float64, s float64) []float64 {
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = v * s
	}
	return out
}

// TestVerdictNaNMeasure: a NaN in any measure fails the verdict, whatever
// the tolerance, MaxNormwise 0 (no normwise bound) included.
func TestVerdictNaNMeasure(t *testing.T) {
	nan := math.NaN()
	for _, tc := range []struct {
		name string
		set  func(*Report)
	}{
		{"normwise relative error", func(r *Report) { r.Normwise = nan }},
		{"max abs error", func(r *Report) { r.MaxAbs = nan }},
		{"max rel error", func(r *Report) { r.MaxRel = nan }},
		{"RMS error", func(r *Report) { r.RMS = nan }},
		{"mean signed error", func(r *Report) { r.MeanSigned = nan }},
	} {
		for _, tol := range []Tolerance{{Abs: 1}, {Abs: 1, MaxNormwise: 1}} {
			r := &Report{Elements: 1, Finite: 1}
			tc.set(r)
			v := tol.verdict(r, 0)
			expect.False(t, v.Pass, "%s NaN under %+v", tc.name, tol)
			expect.Equal(t, []string{"the " + tc.name + " is NaN"}, v.Reasons)
		}
	}
	v := Tolerance{Abs: 1}.verdict(&Report{Elements: 1, Finite: 1}, 0)
	expect.True(t, v.Pass, "no NaN, no failure")
}

// TestReportNil: the methods of a nil *Report are errors wrapping
// ErrReport (or, where they return none, what fmt and encoding/json give
// for a nil pointer), not panics; so is JSON that is not a Report's.
func TestReportNil(t *testing.T) {
	var r *Report
	err := r.WriteText(&strings.Builder{})
	ensure.ErrorIs(t, err, ErrReport)
	expect.EqualError(t, err, "compare: invalid report: Report.WriteText: receiver = nil; want a Report from Diff")
	expect.Equal(t, "<nil>", r.String())
	b, err := r.MarshalJSON()
	ensure.NoError(t, err)
	expect.Equal(t, "null", string(b))
	err = r.UnmarshalJSON([]byte("{}"))
	ensure.ErrorIs(t, err, ErrReport)
	expect.EqualError(t, err, "compare: invalid report: Report.UnmarshalJSON: receiver = nil; want a *Report to set")
	err = new(Report).UnmarshalJSON([]byte(`{"elements": 1, "colour": 2}`))
	ensure.ErrorIs(t, err, ErrReport)
	expect.EqualError(t, err, `compare: invalid report: Report.UnmarshalJSON: json: unknown field "colour"; want the JSON object Report.MarshalJSON writes`)
	full, err := Diff([]float64{1}, []float64{1}, nil, Options{})
	ensure.NoError(t, err)
	err = full.WriteText(nil)
	ensure.ErrorIs(t, err, ErrReport)
	expect.EqualError(t, err, "compare: invalid report: Report.WriteText: w = nil; want an io.Writer")
	err = (*Format)(nil).UnmarshalText([]byte("float32"))
	ensure.ErrorIs(t, err, ErrFormat)
	expect.EqualError(t, err, "compare: invalid number format: Format.UnmarshalText: receiver = nil; want a *Format to set")
}
