package suite

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/ops"
)

// Recorder is the stand-in the tests watch the functions with.
type Recorder = conformance.Recorder

// Run checks the kernel first, then runs each case with variants as a
// subtest, each variant below it: skipped, naming what is missing, or run
// with the format the kernel stores its inputs in and the generator of
// the subtest's full name.
func TestRun(t *testing.T) {
	type variant = Variant[int]
	cases := []string{"one", "none", "two"}
	variants := func(c string) []variant {
		switch c {
		case "one":
			return []variant{{Name: "a/x", Problem: 1}, {Name: "b", Problem: 2, Missing: []string{"b (B)", "c (C)"}}}
		case "two":
			return []variant{{Name: "a", Problem: 3}}
		}
		return nil
	}
	var ran []string
	run := func(t *Recorder, f compare.Format, c string, p int, r *rand.Rand) {
		ran = append(ran, fmt.Sprintf("%s %s %d %v", t.Name, c, p, f))
		expect.Equal(t, Rand(t.Name).Uint64(), r.Uint64(), t.Name)
		if p == 3 {
			t.Errorf("bad")
		}
	}
	name := func(c string) string { return c }

	rec := &Recorder{}
	Run[*Recorder, float32](rec, "xtest", true, "", compare.Float64, cases, name, variants, run)
	expect.Equal(t, []string{"one/a/x one 1 float32", "two/a two 3 float32"}, ran)
	ensure.Len(t, rec.Children, 2)
	expect.Equal(t, []string{"one", "two"}, []string{rec.Children[0].Name, rec.Children[1].Name})
	skipped := rec.Find("one/b")
	ensure.NotNil(t, skipped)
	expect.True(t, skipped.Skipped)
	expect.Equal(t, []string{"case one/b skipped: it needs b (B), c (C), which the kernel does not declare in its Supports"}, skipped.Messages)
	Skipped(t, rec, "one/b", "b (B), c (C)")
	expect.Equal(t, []string{"two/a"}, rec.Failures())

	ran = nil
	rec = &Recorder{}
	Run[*Recorder, float64](rec, "xtest", true, "", compare.Float64, cases, name, variants, run)
	expect.Equal(t, []string{"one/a/x one 1 float64", "two/a two 3 float64"}, ran)

	ran = nil
	rec = &Recorder{}
	Run[*Recorder, float32](rec, "xtest", false, "Kernel.Forward is nil", compare.Float32, cases, name, variants, run)
	expect.Equal(t, []string{"xtest: Kernel.Forward is nil"}, rec.Messages)
	expect.Empty(t, rec.Children)
	expect.Empty(t, ran)

	rec = &Recorder{}
	Run[*Recorder, float32](rec, "xtest", true, "", compare.Format(42), cases, name, variants, run)
	ensure.Len(t, rec.Messages, 1)
	expect.True(t, strings.HasPrefix(rec.Messages[0], "xtest: the kernel declares an invalid number format"), rec.Messages[0])
	expect.Empty(t, rec.Children)
	expect.Empty(t, ran)
}

// A failing output's message names the case, the conventions, the output
// and the worst element before the report; a passing one says nothing.
func TestJudge(t *testing.T) {
	ref := []float64{1, 2, 3, 4}
	tol := compare.Tolerance{Abs: 1e-6}
	opt := compare.Options{Format: compare.Float32, Tolerance: &tol}
	r := &Recorder{}
	expect.True(t, Judge(r, "c", "conv", Output{Name: "y", Dims: "[i, j]", Shape: []int{2, 2}, Ref: ref, Got: ref}, opt))
	expect.False(t, r.Failed)
	got := []float64{1, 2, 3.5, 4}
	expect.False(t, Judge(r, "c", "conv", Output{Name: "y", Dims: "[i, j]", Shape: []int{2, 2}, Ref: ref, Got: got}, opt))
	ensure.Len(t, r.Messages, 1)
	first := strings.SplitN(r.Messages[0], "\n", 2)[0]
	expect.Equal(t, "case c (conv): y differs from the reference: 1 of 4 elements exceed the elementwise tolerance; worst element [i, j][1 0]: got 3.5, want 3 (error 0.5)", first)
	// One short block: the verdict line, the worst elements (at most
	// three), and where the whole report is.
	lines := strings.Split(r.Messages[0], "\n")
	ensure.LessOrEqual(t, len(lines), 5, r.Messages[0])
	expect.Equal(t, "  [i, j][1 0]  got 3.5  want 3", lines[1])
	last := lines[len(lines)-1]
	ensure.True(t, strings.HasPrefix(last, "  the whole report: "), last)
	path := strings.TrimPrefix(last, "  the whole report: ")
	path = path[:strings.Index(path, " (")]
	b, err := os.ReadFile(path)
	ensure.NoError(t, err)
	expect.Contains(t, string(b), "verdict: FAIL")
	t.Setenv(ReportInline, "1")
	r2 := &Recorder{}
	Judge(r2, "c", "conv", Output{Name: "y", Dims: "[i, j]", Shape: []int{2, 2}, Ref: ref, Got: got}, opt)
	expect.Contains(t, r2.Messages[0], "the whole report:\n")
	expect.Contains(t, r2.Messages[0], "verdict: FAIL")
	r = &Recorder{}
	expect.False(t, Judge(r, "c", "conv", Output{Name: "y", Shape: []int{4}, Ref: ref, Got: got[:3]}, opt))
	expect.Contains(t, r.Messages[0], "y has 3 elements; want 4")
}

// With a Pose, a failing output's block has one line more, before the
// report's: the convention the kernel used instead, found by
// diagnose.Run; a passing output calls no Pose, and the outputs of one
// case share one diagnosis (Once).
func TestJudgeDiagnoses(t *testing.T) {
	// An RMSNorm of 4 rows of 8 with ε = 0.5, large enough beside the
	// mean squares of N(0, 1) rows that where it enters shows.
	x := Normal(Rand("diagnosis"), 32, 1)
	rms := func(added bool) []float64 {
		y := make([]float64, len(x))
		for r := 0; r < 4; r++ {
			var ss float64
			for _, v := range x[r*8 : r*8+8] {
				ss += v * v / 8
			}
			den := math.Sqrt(ss + 0.5) // norm.EpsilonInRoot: √(s² + ε)
			if added {
				den = math.Sqrt(ss) + 0.5 // norm.EpsilonAddedToRoot: √s² + ε
			}
			for j := range 8 {
				y[r*8+j] = x[r*8+j] / den
			}
		}
		return y
	}
	ref, got := rms(false), rms(true)
	calls := 0
	pose := Once(func() *Pose {
		calls++
		return NewPose("rmsnorm-forward", map[string]any{"epsilon": 0.5}, ops.Tensors{"x": Tensor(x, 4, 8)},
			ops.Tensors{"y": Tensor(got, 4, 8)}, map[string]string{"epsilon_placement": "Problem.Placement"})
	})
	tol := Float64Tolerance(ref)
	opt := compare.Options{Format: compare.Float64, Tolerance: &tol}
	r := &Recorder{}
	expect.True(t, Judge(r, "c", "conv", Output{Name: "y", Shape: []int{4, 8}, Ref: ref, Got: ref, Pose: pose}, opt))
	expect.Equal(t, 0, calls)
	for range 2 {
		expect.False(t, Judge(r, "c", "conv", Output{Name: "y", Dims: "[row, column]", Shape: []int{4, 8}, Ref: ref, Got: got, Pose: pose}, opt))
	}
	expect.Equal(t, 1, calls)
	ensure.Len(t, r.Messages, 2)
	for _, m := range r.Messages {
		lines := strings.Split(m, "\n")
		ensure.Len(t, lines, 6, m)
		expect.True(t, strings.HasPrefix(lines[4], `  it matches "epsilon_placement": "added-to-root" [Problem.Placement] (normwise `), m)
		expect.True(t, strings.HasSuffix(lines[4], ", passes)"), m)
		expect.True(t, strings.HasPrefix(lines[5], "  the whole report"), m)
		expect.Equal(t, lines[4], DiagnosisLine(t, m))
	}

	// An error no convention explains: twice the reference.
	twice := make([]float64, len(ref))
	for i, v := range ref {
		twice[i] = 2 * v
	}
	r = &Recorder{}
	Judge(r, "c", "conv", Output{Name: "y", Shape: []int{4, 8}, Ref: ref, Got: twice, Pose: func() *Pose {
		return NewPose("rmsnorm-forward", map[string]any{"epsilon": 0.5}, ops.Tensors{"x": Tensor(x, 4, 8)}, ops.Tensors{"y": Tensor(twice, 4, 8)}, nil)
	}}, opt)
	expect.Contains(t, r.Messages[0], "\n  no single change of its conventions explains it\n")

	// A problem no operation poses: no line.
	r = &Recorder{}
	Judge(r, "c", "conv", Output{Name: "y", Shape: []int{4, 8}, Ref: ref, Got: got, Pose: func() *Pose { return nil }}, opt)
	expect.Len(t, strings.Split(r.Messages[0], "\n"), 5)
}

// With two yardsticks each bound is the larger of the two.
func TestToleranceTakesTheLargerBound(t *testing.T) {
	ref := []float64{1, 2, 3, 4}
	exact := func(in [][]float32) ([]float32, error) { return in[0], nil }
	off := func(in [][]float32) ([]float32, error) {
		return []float32{1, 2, 3, 4.5}, nil
	}
	one, err := Tolerance[float32](compare.Float32, [][]float64{ref}, ref, nil, exact)
	ensure.NoError(t, err)
	two, err := Tolerance[float32](compare.Float32, [][]float64{ref}, ref, nil, exact, off)
	ensure.NoError(t, err)
	// exact: 2·0 + u·4; off: 2·0.5 + u·4 (u = 2^−24, the floor of one rounding)
	u := math.Ldexp(1, -24)
	expect.Equal(t, u*4, one.Tolerance.Abs)
	expect.Equal(t, 1+u*4, two.Tolerance.Abs)
	expect.Contains(t, two.Tolerance.Basis, "the larger bounds of 2 yardsticks")
	_, err = Tolerance[float32](compare.Float32, [][]float64{ref}, ref, nil, func([][]float32) ([]float32, error) { return nil, errors.New("no") })
	expect.ErrorIs(t, err, compare.ErrYardstick)
	f64, err := Tolerance[float64](compare.Float64, nil, ref, nil)
	ensure.NoError(t, err)
	expect.Equal(t, Float64Tolerance(ref), *f64.Tolerance)
	expect.Equal(t, 4e-12, f64.Tolerance.Abs)
}

// A float64 kernel passes with an error of a few roundings and fails with
// one of 1e-9: the bounds of Float64Tolerance, 1e-12 normwise and
// 1e-12·max|ref| per element, sit between the two.
func TestFloat64KernelIsHeldTo1e12(t *testing.T) {
	ref := []float64{1, -2, 3, 4}
	scaled := func(f float64) []float64 {
		got := make([]float64, len(ref))
		for i, v := range ref {
			got[i] = v * (1 + f)
		}
		return got
	}
	for _, c := range []struct {
		rel  float64
		pass bool
	}{{4e-16, true}, {5e-13, true}, {2e-12, false}, {1e-9, false}} {
		r := &Recorder{}
		ok := Check[*Recorder, float64](r, compare.Float64, "c", "conv", Output{Name: "y", Shape: []int{4}, Ref: ref, Got: scaled(c.rel)}, nil)
		expect.Equal(t, c.pass, ok, "relative error %g", c.rel)
		expect.Equal(t, !c.pass, r.Failed)
	}
	// Every element within 1e-12·max|ref| (0.9e-12 off), but the normwise
	// error ‖(0.9e-12, …)‖₂ / ‖(1, 0, 0, 0)‖₂ = 1.8e-12 exceeds 1e-12.
	r := &Recorder{}
	got := []float64{1 + 0.9e-12, 0.9e-12, 0.9e-12, 0.9e-12}
	expect.False(t, Check[*Recorder, float64](r, compare.Float64, "c", "conv", Output{Name: "y", Shape: []int{4}, Ref: []float64{1, 0, 0, 0}, Got: got}, nil))
	expect.Contains(t, r.Messages[0], "normwise relative error")
}

// The zero format means float32 for a float32 kernel and float64 for a
// float64 kernel.
func TestInputFormat(t *testing.T) {
	f, err := InputFormat[float32](compare.Float64)
	ensure.NoError(t, err)
	expect.Equal(t, compare.Float32, f)
	f, err = InputFormat[float32](compare.BFloat16)
	ensure.NoError(t, err)
	expect.Equal(t, compare.BFloat16, f)
	f, err = InputFormat[float64](compare.Float64)
	ensure.NoError(t, err)
	expect.Equal(t, compare.Float64, f)
	_, err = InputFormat[float64](compare.Format(42))
	expect.Error(t, err)
}

// The same name gives the same inputs; another name others.
func TestRand(t *testing.T) {
	a, b, c := Normal(Rand("x"), 4, 1), Normal(Rand("x"), 4, 1), Normal(Rand("y"), 4, 1)
	expect.Equal(t, a, b)
	expect.NotEqual(t, a, c)
}

// A case whose line is absent, or whose reason differs, is reported.
func TestMissingDocLines(t *testing.T) {
	path := t.TempDir() + "/doc.go"
	ensure.NoError(t, os.WriteFile(path, []byte("// Cases:\n//\n//\tone    the first\n//\ttwo the second, changed\npackage x\n"), 0o644))
	missing, err := MissingDocLines(path, []string{"one", "two", "three"}, []string{"the first", "the second", "the third"})
	ensure.NoError(t, err)
	expect.Equal(t, []string{"two", "three"}, missing)
	_, err = MissingDocLines(path+".none", nil, nil)
	expect.Error(t, err)

	type c struct{ name, why string }
	nameWhy := func(x c) (string, string) { return x.name, x.why }
	rec := &conformance.Recorder{}
	DocListsEveryCase(rec, path, []c{{"one", "the first"}}, nameWhy)
	expect.False(t, rec.Failed, rec.Text())
	DocListsEveryCase(rec, path, []c{{"one", "the first"}, {"two", "the second"}, {"three", "the third"}}, nameWhy)
	expect.Equal(t, []string{path + ": the package documentation does not list these cases with their reasons: two, three"}, rec.Messages)
	rec = &conformance.Recorder{}
	DocListsEveryCase(rec, path+".none", []c{}, nameWhy)
	expect.True(t, rec.Failed)
}

// Failed, Passed and Skipped read a run on a Recorder back: a failed
// subtest whose message leads with its case and says what is asked, a
// passed subtest, a subtest skipped with Run's message for what it needs;
// DiagnosisLine is the line before the one naming the report (here, with
// no Pose, the worst element's). Anything else fails t with one message.
func TestReadBack(t *testing.T) {
	ref := []float64{1, 2, 3, 4}
	tol := compare.Tolerance{Abs: 1e-6}
	opt := compare.Options{Format: compare.Float32, Tolerance: &tol}
	judge := func(rec *Recorder, name, caseName string, got []float64) {
		rec.Run(name, func(r *Recorder) {
			r.Run("v", func(r *Recorder) {
				Judge(r, caseName, "conv", Output{Name: "y", Dims: "[i]", Shape: []int{4}, Ref: ref, Got: got}, opt)
			})
		})
	}
	rec := &Recorder{}
	judge(rec, "bad", "bad", []float64{1, 2, 3, 5})
	judge(rec, "good", "good", ref)
	judge(rec, "other", "bad", []float64{1, 2, 3, 5})
	rec.Run("skipped", func(r *Recorder) { r.Run("v", func(r *Recorder) { r.Skipf("%s", skipMessage("skipped/v", "b (B)")) }) })
	rec.Run("half", func(r *Recorder) { r.Run("v", func(r *Recorder) { r.Skipf("case half/v skipped") }) })
	msg := Failed(t, rec, "bad/v", "y differs from the reference", "worst element [i][3]")
	expect.True(t, strings.HasPrefix(msg, "case bad (conv): y differs"), msg)
	expect.Equal(t, "  [i][3]  got 5  want 4", DiagnosisLine(t, msg))
	Passed(t, rec, "good/v")
	Skipped(t, rec, "skipped/v", "b (B)")

	for _, c := range []struct {
		name  string
		check func(TB)
		want  string
	}{
		{"Failed, missing", func(r TB) { Failed(r, rec, "none/v") }, "none/v did not run"},
		{"Failed, passed", func(r TB) { Failed(r, rec, "good/v") }, "good/v passed; want it to fail"},
		{"Failed, not said", func(r TB) { Failed(r, rec, "bad/v", "dx differs") }, `bad/v: the message does not say "dx differs":` + "\ncase bad (conv)"},
		{"Failed, another case", func(r TB) { Failed(r, rec, "other/v") }, `other/v: the message does not lead with "case other (":` + "\ncase bad (conv)"},
		{"Passed, missing", func(r TB) { Passed(r, rec, "none/v") }, "none/v did not run"},
		{"Passed, failed", func(r TB) { Passed(r, rec, "bad/v") }, "bad/v failed:\ncase bad (conv)"},
		{"Passed, skipped", func(r TB) { Passed(r, rec, "skipped/v") }, "skipped/v was skipped: case skipped/v skipped: it needs b (B)"},
		{"Skipped, missing", func(r TB) { Skipped(r, rec, "none/v", "b (B)") }, "none/v did not run"},
		{"Skipped, ran", func(r TB) { Skipped(r, rec, "good/v", "b (B)") }, `good/v: want it skipped with "case good/v skipped: it needs b (B), which`},
		{"Skipped, for another need", func(r TB) { Skipped(r, rec, "skipped/v", "c (C)") }, `skipped/v: want it skipped with "case skipped/v skipped: it needs c (C), which`},
		{"Skipped, another message", func(r TB) { Skipped(r, rec, "half/v", "b (B)") }, `half/v: want it skipped with`},
		{"DiagnosisLine, no report", func(r TB) { DiagnosisLine(r, "case c (conv): y differs from the reference") }, "no line naming the whole report in "},
	} {
		r := &Recorder{}
		c.check(r)
		ensure.Len(t, r.Messages, 1, c.name)
		expect.True(t, strings.HasPrefix(r.Messages[0], c.want), "%s: %s", c.name, r.Messages[0])
	}
}

// Judge never panics, whatever the candidate holds, and fails exactly when
// compare.Diff's verdict does.
func FuzzJudge(f *testing.F) {
	f.Add(1.0, 2.0, 3.0, 0.5)
	f.Add(math.NaN(), math.Inf(1), math.Copysign(0, -1), 1e300)
	f.Fuzz(func(t *testing.T, a, b, c, abs float64) {
		ref := []float64{1, -2, 3}
		got := []float64{a, b, c}
		if math.IsNaN(abs) || abs < 0 || math.IsInf(abs, 0) {
			abs = 0
		}
		tol := compare.Tolerance{Abs: abs}
		opt := compare.Options{Format: compare.Float32, Tolerance: &tol}
		r := &Recorder{}
		pass := Judge(r, "c", "conv", Output{Name: "y", Dims: "[i]", Shape: []int{3}, Ref: ref, Got: got}, opt)
		rep, err := compare.Diff(ref, got, []int{3}, opt)
		ensure.NoError(t, err)
		expect.Equal(t, rep.Verdict.Pass, pass)
		expect.Equal(t, !pass, r.Failed)
		if !pass {
			expect.True(t, strings.HasPrefix(r.Messages[0], "case c (conv): y differs from the reference: "), r.Messages[0])
		}
	})
}
