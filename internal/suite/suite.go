// Package suite holds what the conformance suites (attentiontest,
// posenctest, normtest, ffntest) share: the skeleton of their Run (Run,
// over cases and their variants), deterministic inputs, the tolerances,
// and the judging of one output against the reference with the report of
// compare.Diff; and what the suites' own tests share: reading a failure
// message of Judge back from a conformance.Recorder, and checking that the
// package documentation lists every case. The test interface the suites
// run on and the recorder that stands in for *testing.T are public, in
// package conformance.
package suite

import (
	"fmt"
	"hash/fnv"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/num"
)

// Rand returns the generator of a case: PCG seeded from the case's name, so
// that every case draws the same inputs on every run and machine, and
// adding a case changes no other case's inputs.
func Rand(name string) *rand.Rand {
	h := fnv.New64a()
	h.Write([]byte(name))
	return rand.New(rand.NewPCG(h.Sum64(), 0x706c756d62)) // "plumb"
}

// Normal returns n standard normal values drawn from r, times scale.
func Normal(r *rand.Rand, n int, scale float64) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = scale * r.NormFloat64()
	}
	return x
}

// Is32 reports whether E is float32 arithmetic.
func Is32[E num.Float]() bool { return float64(E(1+math.Ldexp(1, -40))) == 1 }

// InputFormat is the format a kernel of element type E stores its inputs
// in, given its declaration: the zero compare.Format (Float64) means
// Float32 for a float32 kernel. It refuses formats wider than E.
func InputFormat[E num.Float](declared compare.Format) (compare.Format, error) {
	if !declared.Valid() {
		return declared, fmt.Errorf("the kernel declares an invalid number format %v", declared)
	}
	if Is32[E]() {
		if declared == compare.Float64 {
			return compare.Float32, nil
		}
		return declared, nil
	}
	return declared, nil
}

// Float64Tolerance is the explicit tolerance a float64 kernel is held to:
// a normwise relative error of 1e-12 and an absolute error of 1e-12 times
// the largest reference magnitude at every element. That is about 2^13
// roundings of float64: room for any summation order and blocking over the
// lengths the suites use (the attention package's own fast and direct forms
// differ by under 1e-14), and for logits near ±1000, whose rounding alone
// moves the softmax weights by about 1e-13 relative; far below any
// convention slip, which changes outputs at the first digit.
func Float64Tolerance(ref []float64) compare.Tolerance {
	big := 0.0
	for _, v := range ref {
		if a := math.Abs(v); a > big && !math.IsInf(a, 0) {
			big = a
		}
	}
	return compare.Tolerance{Abs: 1e-12 * math.Max(big, math.SmallestNonzeroFloat64), MaxNormwise: 1e-12,
		Basis: "explicit for a float64 kernel: 1e-12 normwise, 1e-12·max|ref| per element"}
}

// Output is one output tensor of a case, to be judged.
type Output struct {
	Name  string    // "output", "lse", "dx", …
	Dims  string    // the names of the dimensions, "[batch, heads, queries, dim]"
	Shape []int     // its shape, in the kernel's layout
	Ref   []float64 // the float64 reference
	Got   []float64 // the kernel's, widened to float64
	// Pose returns the case's problem as an operation of package ops, for
	// the diagnosis of a failing output; it is called only when the output
	// fails, and the outputs of one case share one (see Once). Nil, or a
	// nil result, when the problem cannot be posed as one: the failure
	// message then has no diagnosis line.
	Pose func() *Pose
}

// Judge compares o.Got with o.Ref under opt and, when it fails, marks t
// failed with one short message: the case, its conventions, the output,
// the verdict and the worst element (index, value, reference), the three
// worst elements, with o.Pose one line naming the best-matching other
// convention (diagnose.Run on the posed problem; see Pose), and the file
// holding the whole report (fullReport), the diagnosis's included.
// It reports whether the output passed.
func Judge[T conformance.TB[T]](t T, caseName, conventions string, o Output, opt compare.Options) bool {
	t.Helper()
	if len(o.Got) != len(o.Ref) {
		t.Errorf("case %s (%s): %s has %d elements; want %d, shape %v %s",
			caseName, conventions, o.Name, len(o.Got), len(o.Ref), o.Shape, o.Dims)
		return false
	}
	r, err := compare.Diff(o.Ref, o.Got, o.Shape, opt)
	if err != nil {
		t.Errorf("case %s (%s): %s: cannot compare: %v", caseName, conventions, o.Name, err)
		return false
	}
	if r.Verdict.Pass {
		return true
	}
	worst := "no single element (the normwise error fails)"
	if len(r.Worst) > 0 {
		w := r.Worst[0]
		worst = fmt.Sprintf("worst element %s%v: got %.9g, want %.9g (error %.3g)", o.Dims, w.Index, w.Got, w.Ref, w.Got-w.Ref)
	}
	var b strings.Builder
	fmt.Fprintf(&b, "case %s (%s): %s differs from the reference: %s; %s",
		caseName, conventions, o.Name, strings.Join(r.Verdict.Reasons, "; "), worst)
	for i, w := range r.Worst {
		if i == 3 {
			break
		}
		fmt.Fprintf(&b, "\n  %s%v  got %.9g  want %.9g", o.Dims, w.Index, w.Got, w.Ref)
	}
	full := r.String()
	if o.Pose != nil {
		if p := o.Pose(); p != nil {
			line, text := p.diagnose(opt)
			b.WriteString("\n  " + line)
			full += "\ndiagnosis:\n" + text
		}
	}
	b.WriteString("\n  " + fullReport(caseName+"-"+o.Name, full))
	t.Errorf("%s", b.String())
	return false
}

// ReportInline is the environment variable that, set to 1, prints a
// failing output's whole compare.Diff report in the test's log instead of
// writing it to a file.
const ReportInline = "PLUMB_REPORT_INLINE"

// fullReport writes the whole report r to a file in a directory of the
// system's temporary directory named for the process, and returns a line
// naming it; with ReportInline set, or when
// the file cannot be written, it returns the report itself.
func fullReport(name, report string) string {
	if os.Getenv(ReportInline) != "1" {
		dir := filepath.Join(os.TempDir(), fmt.Sprintf("plumb-conformance-%d", os.Getpid()))
		path := filepath.Join(dir, strings.Map(func(c rune) rune {
			if c == '/' || c == ' ' || c == os.PathSeparator {
				return '_'
			}
			return c
		}, name)+".txt")
		if os.MkdirAll(dir, 0o755) == nil && os.WriteFile(path, []byte(report), 0o644) == nil {
			return reportLine + ": " + path + " (" + ReportInline + "=1 prints it here)"
		}
	}
	return reportLine + ":\n" + report
}

// reportLine leads the last line of a failure message of Judge, the one
// that names the whole report (or holds it); DiagnosisLine looks for it.
const reportLine = "the whole report"

// Tolerance returns the diff options a kernel's output is judged with.
//
// For a float32 kernel it is the yardstick (compare.MeasureYardstick with
// compare.DefaultK) of each of runs, the float32 instantiations of the
// reference's bodies, on the inputs as the kernel stores them in format f;
// with several runs (a package's direct form and its blocked form, which
// sum in different orders) each bound is the largest of theirs. One
// summation order's largest elementwise error is a sample of a few values
// on a small tensor, and a kernel that sums in another order can exceed
// twice that sample at one element while being as accurate as the
// format allows; taking the larger bound of two orders is the suites'
// answer to that.
//
// For a float64 kernel it is Float64Tolerance. It returns an error when a
// yardstick cannot be run.
func Tolerance[E num.Float](f compare.Format, inputs [][]float64, ref []float64, shape []int, runs ...func(in [][]float32) ([]float32, error)) (compare.Options, error) {
	if !Is32[E]() {
		tol := Float64Tolerance(ref)
		return compare.Options{Format: compare.Float64, Tolerance: &tol}, nil
	}
	var opt compare.Options
	for i, run := range runs {
		y, err := compare.MeasureYardstick(f, inputs, ref, shape, compare.DefaultK, run)
		if err != nil {
			return compare.Options{}, err
		}
		o := y.Options()
		if i == 0 {
			opt = o
			continue
		}
		t := *opt.Tolerance
		if o.Tolerance.Abs > t.Abs || o.Tolerance.MaxNormwise > t.MaxNormwise {
			t.Basis = o.Tolerance.Basis
		}
		t.Abs = math.Max(t.Abs, o.Tolerance.Abs)
		t.MaxNormwise = math.Max(t.MaxNormwise, o.Tolerance.MaxNormwise)
		opt.Tolerance = &t
	}
	if len(runs) > 1 {
		t := *opt.Tolerance
		t.Basis = fmt.Sprintf("the larger bounds of %d yardsticks (direct and blocked float32 forms); %s", len(runs), t.Basis)
		opt.Tolerance = &t
	}
	return opt, nil
}

// Check judges o against o.Ref under Tolerance (the yardsticks runs for a
// float32 kernel, Float64Tolerance for a float64 one) with Judge, and
// reports whether it passed. A yardstick that cannot be run fails t.
func Check[T conformance.TB[T], E num.Float](t T, f compare.Format, caseName, conventions string, o Output, inputs [][]float64, runs ...func(in [][]float32) ([]float32, error)) bool {
	t.Helper()
	opt, err := Tolerance[E](f, inputs, o.Ref, o.Shape, runs...)
	if err != nil {
		t.Errorf("case %s (%s): cannot measure the yardstick of %s: %v", caseName, conventions, o.Name, err)
		return false
	}
	return Judge(t, caseName, conventions, o, opt)
}

// Variant is one choice of the conventions a case runs under.
type Variant[P any] struct {
	// Name is the subtest's name below the case's: the words of the
	// conventions, joined by "/" ("heads-major/cycle/halves").
	Name string
	// Problem is the case as posed to the kernel under this choice.
	Problem P
	// Missing lists what Problem needs that the kernel does not declare,
	// each naming its Supports field ("mask causal (Masks)"); the
	// subtest is skipped when it is not empty.
	Missing []string
}

// Run is the body of every suite's Run. It checks that the kernel has its
// function (ok; what says otherwise) and a number format, declared, that a
// kernel of element type E can have, failing t with a message led by
// suiteName otherwise. Then it runs each case of cases that has variants
// as a subtest named caseName(c), with one subtest per variant below it,
// named v.Name. A variant that misses a declaration is skipped with a
// message naming the case, the variant and what is missing; any other runs
// run(t, f, c, v.Problem, r), with f the format the kernel stores its inputs in
// (see InputFormat) and r the generator of the subtest (Rand of its full
// name below t, "case/variant"), to draw its inputs from.
func Run[T conformance.TB[T], E num.Float, C, P any](t T, suiteName string, ok bool, what string, declared compare.Format,
	cases []C, caseName func(C) string, variants func(C) []Variant[P],
	run func(t T, f compare.Format, c C, p P, r *rand.Rand)) {
	t.Helper()
	if !ok {
		t.Errorf("%s: %s", suiteName, what)
		return
	}
	f, err := InputFormat[E](declared)
	if err != nil {
		t.Errorf("%s: %v", suiteName, err)
		return
	}
	for _, c := range cases {
		vs := variants(c)
		if len(vs) == 0 {
			continue
		}
		name := caseName(c)
		t.Run(name, func(t T) {
			for _, v := range vs {
				t.Run(v.Name, func(t T) {
					full := name + "/" + v.Name
					if len(v.Missing) > 0 {
						t.Skipf("%s", skipMessage(full, strings.Join(v.Missing, ", ")))
						return
					}
					run(t, f, c, v.Problem, Rand(full))
				})
			}
		})
	}
}

// skipMessage is Run's message for the subtest full ("case/variant")
// skipped for what it needs and the kernel does not declare.
func skipMessage(full, needs string) string {
	return "case " + full + " skipped: it needs " + needs + ", which the kernel does not declare in its Supports"
}
