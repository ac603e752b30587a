// Package suite holds what the conformance suites (attentiontest,
// posenctest, normtest, ffntest) share: the test interface they run on,
// a recorder that stands in for *testing.T when a test must watch a suite
// fail, deterministic inputs, and the judging of one output against the
// reference with the report of compare.Diff.
package suite

import (
	"fmt"
	"hash/fnv"
	"math"
	"math/rand/v2"
	"os"
	"regexp"
	"strings"

	"github.com/plumbref/plumb/compare"
)

// TB is the part of *testing.T a suite uses. *testing.T satisfies TB[*testing.T]:
// its Run takes a func(*testing.T). A suite never stops a test early (no
// Fatal, FailNow or SkipNow is needed): after Skipf it returns by itself,
// so a stand-in whose Skipf only records works too.
type TB[T any] interface {
	Helper()
	Errorf(format string, args ...any)
	Logf(format string, args ...any)
	Skipf(format string, args ...any)
	Run(name string, f func(T)) bool
}

// Recorder is a stand-in for *testing.T that records what a suite says
// instead of failing the test that runs it: the way to show that a suite
// catches a broken kernel. Its Run runs f at once, on the same goroutine,
// with a child Recorder.
type Recorder struct {
	Name     string
	Failed   bool        // Errorf was called here or in a child
	Skipped  bool        // Skipf was called here
	Messages []string    // every Errorf, Logf and Skipf message, in order
	Children []*Recorder // one per Run call, in order
}

// Helper does nothing.
func (r *Recorder) Helper() {}

// Errorf records a failure.
func (r *Recorder) Errorf(format string, args ...any) {
	r.Failed = true
	r.Messages = append(r.Messages, fmt.Sprintf(format, args...))
}

// Logf records a message.
func (r *Recorder) Logf(format string, args ...any) {
	r.Messages = append(r.Messages, fmt.Sprintf(format, args...))
}

// Skipf records a skip; unlike testing.T.Skipf it does not stop the caller.
func (r *Recorder) Skipf(format string, args ...any) {
	r.Skipped = true
	r.Messages = append(r.Messages, fmt.Sprintf(format, args...))
}

// Run runs f with a child Recorder named name and reports whether it passed.
func (r *Recorder) Run(name string, f func(*Recorder)) bool {
	c := &Recorder{Name: name}
	if r.Name != "" {
		c.Name = r.Name + "/" + name
	}
	r.Children = append(r.Children, c)
	f(c)
	if c.Failed {
		r.Failed = true
	}
	return !c.Failed
}

// Failures lists the full names of the failed subtests that have no
// subtests of their own, in the order they ran.
func (r *Recorder) Failures() []string {
	var names []string
	r.Walk(func(c *Recorder) {
		if c.Failed && len(c.Children) == 0 {
			names = append(names, c.Name)
		}
	})
	return names
}

// Walk calls f on r and on every recorder below it, depth first.
func (r *Recorder) Walk(f func(*Recorder)) {
	f(r)
	for _, c := range r.Children {
		c.Walk(f)
	}
}

// Find returns the recorder with the given full name below r, or nil.
func (r *Recorder) Find(name string) *Recorder {
	var found *Recorder
	r.Walk(func(c *Recorder) {
		if c.Name == name && found == nil {
			found = c
		}
	})
	return found
}

// Text is every message of r and its children, one per line.
func (r *Recorder) Text() string {
	var b strings.Builder
	r.Walk(func(c *Recorder) {
		for _, m := range c.Messages {
			fmt.Fprintf(&b, "%s: %s\n", c.Name, m)
		}
	})
	return b.String()
}

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

// Float is the element type of a kernel under test.
type Float interface{ ~float32 | ~float64 }

// Convert converts float64 values to E.
func Convert[E Float](x []float64) []E {
	y := make([]E, len(x))
	for i, v := range x {
		y[i] = E(v)
	}
	return y
}

// Is32 reports whether E is float32 arithmetic.
func Is32[E Float]() bool { return float64(E(1+math.Ldexp(1, -40))) == 1 }

// InputFormat is the format a kernel of element type E stores its inputs
// in, given its declaration: the zero compare.Format (Float64) means
// Float32 for a float32 kernel. It refuses formats wider than E.
func InputFormat[E Float](declared compare.Format) (compare.Format, error) {
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
}

// Judge compares o.Got with o.Ref under opt and, when it fails, marks t
// failed with a message that names the case, its conventions, the output,
// the worst element (index, value, reference) and then the whole report.
// It reports whether the output passed.
func Judge[T TB[T]](t T, caseName, conventions string, o Output, opt compare.Options) bool {
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
	t.Errorf("case %s (%s): %s differs from the reference: %s; %s\n%s",
		caseName, conventions, o.Name, strings.Join(r.Verdict.Reasons, "; "), worst, r)
	return false
}

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
func Tolerance[E Float](f compare.Format, inputs [][]float64, ref []float64, shape []int, runs ...func(in [][]float32) ([]float32, error)) (compare.Options, error) {
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
func Check[T TB[T], E Float](t T, f compare.Format, caseName, conventions string, o Output, inputs [][]float64, runs ...func(in [][]float32) ([]float32, error)) bool {
	t.Helper()
	opt, err := Tolerance[E](f, inputs, o.Ref, o.Shape, runs...)
	if err != nil {
		t.Errorf("case %s (%s): cannot measure the yardstick of %s: %v", caseName, conventions, o.Name, err)
		return false
	}
	return Judge(t, caseName, conventions, o, opt)
}

// Sub is one subtest of a suite: a case under one choice of its
// conventions (Variant, the subtest's name below the case's).
type Sub[T any] struct {
	Case, Variant string
	Run           func(t T)
}

// RunAll runs subs as subtests of t, each under a subtest named by its
// Case (consecutive subs of one case share it).
func RunAll[T TB[T]](t T, subs []Sub[T]) {
	t.Helper()
	for i := 0; i < len(subs); {
		j := i + 1
		for j < len(subs) && subs[j].Case == subs[i].Case {
			j++
		}
		group := subs[i:j]
		t.Run(subs[i].Case, func(t T) {
			for _, s := range group {
				t.Run(s.Variant, s.Run)
			}
		})
		i = j
	}
}

// Start checks what every suite's Run checks first: that the kernel has
// its function (ok) and a number format a kernel of element type E can
// have. It fails t, naming the suite, and returns false otherwise.
func Start[T TB[T], E Float](t T, suiteName string, ok bool, what string, declared compare.Format) (compare.Format, bool) {
	t.Helper()
	if !ok {
		t.Errorf("%s: %s", suiteName, what)
		return 0, false
	}
	f, err := InputFormat[E](declared)
	if err != nil {
		t.Errorf("%s: %v", suiteName, err)
		return 0, false
	}
	return f, true
}

// Missing joins the names of the missing supports of a case into the skip
// message, or returns "" when nothing is missing.
func Missing(caseName string, missing []string) string {
	if len(missing) == 0 {
		return ""
	}
	return fmt.Sprintf("case %s skipped: it needs %s, which the kernel does not declare in its Supports", caseName, strings.Join(missing, ", "))
}

// MissingDocLines reads the Go file at path and returns the cases whose
// line, "//\t<name>  <why>" with any run of spaces between, is not in it:
// the package documentation lists the cases, and this keeps the list
// true.
func MissingDocLines(path string, names, whys []string) ([]string, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var missing []string
	for i, n := range names {
		re := regexp.MustCompile(`(?m)^//\t` + regexp.QuoteMeta(n) + ` +` + regexp.QuoteMeta(whys[i]) + `$`)
		if !re.Match(b) {
			missing = append(missing, n)
		}
	}
	return missing, nil
}
