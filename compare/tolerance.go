package compare

import (
	"fmt"
	"math"
)

// Tolerance says how far a candidate may be from the reference.
//
// An element, reference r and candidate g both finite, passes when
//
//	|g − r| ≤ Abs + Rel·|r|     or     (ULPs > 0 and ULPDistance(r, g) ≤ ULPs)
//
// with the ULP distance counted in the report's format. NaN must meet NaN
// and an infinity the same infinity: any other pair with a non-finite value
// fails whatever the tolerance. When MaxNormwise is positive the whole
// tensor must also have Report.Normwise ≤ MaxNormwise. A NaN in any
// measure of the report (MaxAbs, MaxRel, RMS, MeanSigned, Normwise) fails
// whatever the tolerance, MaxNormwise 0 included: an error that cannot be
// measured is not within any bound. (Diff itself gives none: its measures
// are finite or +Inf.)
//
// The zero Tolerance demands bit-equal finite values (+0 and −0 equal).
// The elementwise form Abs + Rel·|r| is the usual combined test of absolute
// and relative error [common practice]; Abs carries the elements near zero,
// Rel the large ones.
type Tolerance struct {
	Abs         float64 // absolute error allowed at every element
	Rel         float64 // relative error allowed, times |reference|
	ULPs        uint64  // when > 0, an element within this many ULPs passes too
	MaxNormwise float64 // when > 0, the largest normwise relative error allowed

	// Basis says where the numbers come from ("explicit", or the
	// yardstick's figures); reports print it beside the tolerance.
	Basis string
}

// Validate returns an error wrapping ErrTolerance if a field is negative,
// NaN or infinite.
func (t Tolerance) Validate() error { return t.validate("Tolerance.Validate", "Tolerance") }

// validate is Validate for a call of fn, which names t as name.
func (t Tolerance) validate(fn, name string) error {
	for _, c := range []struct {
		name string
		v    float64
	}{{"Abs", t.Abs}, {"Rel", t.Rel}, {"MaxNormwise", t.MaxNormwise}} {
		if math.IsNaN(c.v) || c.v < 0 || math.IsInf(c.v, 0) {
			return fmt.Errorf("%w: %s: %s.%s = %v; want a finite value ≥ 0", ErrTolerance, fn, name, c.name, c.v)
		}
	}
	return nil
}

// allowed is the absolute error the elementwise test allows at reference r.
func (t Tolerance) allowed(r float64) float64 { return t.Abs + float64(t.Rel*math.Abs(r)) }

// passes reports whether a finite pair with error absErr and ULP distance
// ulps (NaN when undefined) passes the elementwise test.
func (t Tolerance) passes(r, absErr, ulps float64) bool {
	return absErr <= t.allowed(r) || (t.ULPs > 0 && ulps <= float64(t.ULPs))
}

// excess is how many times the element's error exceeds what the tolerance
// allows, for ranking; above 1 exactly when the element fails.
func (t Tolerance) excess(r, absErr, ulps float64) float64 {
	s := absErr / t.allowed(r)
	if absErr == 0 {
		s = 0
	}
	if t.ULPs > 0 && !math.IsNaN(ulps) {
		s = math.Min(s, ulps/float64(t.ULPs))
	}
	pass := t.passes(r, absErr, ulps)
	switch {
	case pass && s > 1:
		s = 1 // the quotient rounded up past 1
	case !pass && !(s > 1):
		s = math.Nextafter(1, 2) // the quotient rounded down to 1
	}
	return s
}

func (t Tolerance) verdict(r *Report, failed int) *Verdict {
	v := &Verdict{Failed: failed}
	if n := r.NaNMismatches + r.InfMismatches; n > 0 {
		v.Reasons = append(v.Reasons, fmt.Sprintf("%d NaN and %d Inf mismatches", r.NaNMismatches, r.InfMismatches))
	}
	if k := failed - r.NaNMismatches - r.InfMismatches; k > 0 {
		v.Reasons = append(v.Reasons, fmt.Sprintf("%d of %d elements exceed the elementwise tolerance", k, r.Elements))
	}
	for _, m := range []struct {
		name string
		v    float64
	}{{"max abs error", r.MaxAbs}, {"max rel error", r.MaxRel}, {"RMS error", r.RMS}, {"mean signed error", r.MeanSigned}, {"normwise relative error", r.Normwise}} {
		if math.IsNaN(m.v) {
			v.Reasons = append(v.Reasons, fmt.Sprintf("the %s is NaN", m.name))
		}
	}
	if t.MaxNormwise > 0 && r.Normwise > t.MaxNormwise {
		v.Reasons = append(v.Reasons, fmt.Sprintf("normwise relative error %.3g exceeds %.3g", r.Normwise, t.MaxNormwise))
	}
	v.Pass = len(v.Reasons) == 0
	return v
}

// DefaultK is the usual factor of a yardstick: a candidate may be at most
// twice as far from the reference as the straightforward implementation in
// its format [common practice].
const DefaultK = 2

// Yardstick is the error of the straightforward low-precision
// implementation of a kernel, and the tolerance it implies for a candidate
// in the same format. See MeasureYardstick.
type Yardstick struct {
	Format     Format    // the format inputs and output are rounded to
	Arithmetic string    // "float32" or "float64": the arithmetic it ran in
	K          float64   // the factor
	Output     []float64 // its output, rounded to Format
	Report     *Report   // its output against the reference

	// The floor: one rounding to Format of the largest reference output,
	// max(u·max|ref|, MinSubnormal/2) absolute and u normwise, u the
	// format's unit roundoff. A candidate that returned the exact result
	// rounded once to the format has at most this error, so the tolerance
	// never refuses it even where the yardstick happens to be exact.
	FloorAbs, FloorNormwise float64

	// Tolerance is
	//
	//	Abs         = K · Report.MaxAbs   + FloorAbs
	//	MaxNormwise = K · Report.Normwise + FloorNormwise
	//
	// with Rel and ULPs zero.
	Tolerance Tolerance
}

// Options returns the diff options that judge a candidate by the
// yardstick: its format and its tolerance.
func (y *Yardstick) Options() Options {
	t := y.Tolerance
	return Options{Format: y.Format, Tolerance: &t}
}

// Float is the element type of a low-precision run or a candidate kernel:
// float32 or float64, or a type defined on one of them. MeasureYardstick's
// arithmetic, Widen's input and the conformance suites' kernels are of a
// Float type.
type Float interface{ ~float32 | ~float64 }

// MeasureYardstick runs run, the same kernel as the reference computed in
// the low-precision arithmetic T, on the inputs rounded to format f, and
// derives a tolerance from its error against the reference ref (row-major,
// of the given shape; nil shape: one dimension).
//
// Steps:
//
//  1. each input element is rounded to f once, from float64 (Format.Round,
//     non-saturating), and converted to T, which is exact;
//  2. run computes the kernel in T: pass the float32 instantiation of the
//     kernel's generic body (for example a closure over a kernel package's
//     Forward32) for float32 arithmetic, or its float64 form for a
//     candidate that accumulates in float64;
//  3. each output element is rounded to f (Format.Round);
//  4. the result is compared with ref by Diff, in format f;
//  5. the tolerance is k × its error + the floor (see Yardstick).
//
// inputs are the float tensors the candidate stores in format f; every
// other argument (shapes, options, masks, integer tensors) is captured by
// the closure. A kernel with several outputs (attention's output and
// log-sum-exp, the gradients of a backward pass) gets one yardstick per
// output, each closure returning the one it judges.
//
// This is the principle of judging a kernel by what its format can do: a
// candidate whose error is within a small factor of the straightforward
// implementation's is as good as the format allows; a larger error is a
// bug or a worse algorithm. k = DefaultK = 2 is common practice.
//
// Errors: an invalid f or one wider than T (Float64 with float32
// arithmetic) wraps ErrFormat; a k that is not finite and ≥ 1 wraps
// ErrTolerance; shape errors wrap ErrShape; an error from run, or an output
// of the wrong length, wraps ErrYardstick.
func MeasureYardstick[T Float](f Format, inputs [][]float64, ref []float64, shape []int, k float64, run func(in [][]T) ([]T, error)) (*Yardstick, error) {
	const fn = "MeasureYardstick"
	if err := formatWords.CheckAt(fn+": f", f); err != nil {
		return nil, err
	}
	arith := "float32"
	prec := Float32.Precision()
	if probe := T(1 + math.Ldexp(1, -40)); float64(probe) != 1 {
		arith, prec = "float64", Float64.Precision()
	}
	if f.Precision() > prec {
		return nil, fmt.Errorf("%w: %s: f = %v; want a format no wider than the %s arithmetic of run", ErrFormat, fn, f, arith)
	}
	if math.IsNaN(k) || math.IsInf(k, 0) || k < 1 {
		return nil, fmt.Errorf("%w: %s: k = %v; want a finite value ≥ 1", ErrTolerance, fn, k)
	}
	if run == nil {
		return nil, fmt.Errorf("%w: %s: run = nil; want the low-precision function", ErrYardstick, fn)
	}
	shape, err := checkShape(fn, shape, len(ref))
	if err != nil {
		return nil, err
	}
	in := make([][]T, len(inputs))
	for i, x := range inputs {
		in[i] = make([]T, len(x))
		for j, v := range x {
			in[i][j] = T(f.Round(v))
		}
	}
	out, err := run(in)
	if err != nil {
		return nil, fmt.Errorf("%w: %s: run returned an error: %w", ErrYardstick, fn, err)
	}
	if len(out) != len(ref) {
		return nil, fmt.Errorf("%w: %s: run returned %d elements; want len(ref) = %d", ErrYardstick, fn, len(out), len(ref))
	}
	y := &Yardstick{Format: f, Arithmetic: arith, K: k, Output: f.RoundSlice(Widen(out))}
	if y.Report, err = Diff(ref, y.Output, shape, Options{Format: f}); err != nil {
		return nil, err
	}
	big := 0.0
	for _, v := range ref {
		if a := math.Abs(v); a > big && !math.IsInf(a, 0) {
			big = a
		}
	}
	u := f.UnitRoundoff()
	y.FloorAbs = math.Max(u*big, f.MinSubnormal()/2)
	y.FloorNormwise = u
	y.Tolerance = Tolerance{
		Abs:         float64(k*y.Report.MaxAbs) + y.FloorAbs,
		MaxNormwise: float64(k*y.Report.Normwise) + y.FloorNormwise,
		Basis: fmt.Sprintf("yardstick: %v inputs, %s arithmetic, %v output: %g × (max abs %.3g, normwise %.3g) + one rounding (%.3g, %.3g)",
			f, arith, f, k, y.Report.MaxAbs, y.Report.Normwise, y.FloorAbs, y.FloorNormwise),
	}
	if n := y.Report.NaNMismatches + y.Report.InfMismatches; n > 0 {
		y.Tolerance.Basis += fmt.Sprintf("; the yardstick itself has %d NaN/Inf mismatches", n)
	}
	return y, nil
}
