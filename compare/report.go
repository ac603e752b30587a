package compare

import (
	"fmt"
	"math"
	"math/bits"

	"github.com/plumbref/plumb/internal/num"
)

// DefaultWorst is the number of worst elements a Report lists when
// Options.Worst is 0.
const DefaultWorst = 5

// DefaultRelFloorFactor is the default relative-error floor as a fraction
// of the reference's largest magnitude: 2^−10 ≈ 9.8e−4 (our choice; see
// Options.RelFloor).
const DefaultRelFloorFactor = 1.0 / 1024

// Options control Diff.
type Options struct {
	// Format is the candidate's number format, the grid on which ULP
	// distances are counted. The zero value is Float64.
	Format Format

	// Tolerance, when not nil, makes the report carry a Verdict.
	Tolerance *Tolerance

	// Worst is how many of the worst elements to list: 0 means
	// DefaultWorst, a negative value none.
	Worst int

	// RelFloor is the denominator floor of the relative error,
	//
	//	rel_i = |got_i − ref_i| / max(|ref_i|, floor),
	//
	// so that elements of the reference near zero (cancellation leaves many
	// in any real tensor) do not swamp the maximum relative error with
	// meaningless huge quotients. 0 means the default, DefaultRelFloorFactor
	// · max_i |ref_i| over the finite elements (1 if they are all 0, so that
	// the relative error is then the absolute error): an element a thousand
	// times smaller than the largest is measured relative to that
	// thousandth. Other common choices are a fixed floor (a constant such as
	// 1e−6), which is not scale invariant, or none, which is dominated by
	// near-zero elements. A positive value is used as the floor itself; a
	// negative or NaN value is an error.
	RelFloor float64
}

// Element is one element of a comparison, at its multi-dimensional index.
type Element struct {
	Index  []int   // row-major index into the shape
	Offset int     // flat offset into the slices
	Ref    float64 // reference value
	Got    float64 // candidate value
	AbsErr float64 // |Got − Ref|; +Inf when they disagree on NaN or Inf
	RelErr float64 // AbsErr / max(|Ref|, RelFloor)
	ULPs   float64 // ULP distance in the report's format; NaN when undefined or a NaN/Inf mismatch
}

// ULPBucket counts the elements whose ULP distance d lies in [Lo, Hi].
type ULPBucket struct {
	Lo, Hi uint64
	Count  int
}

// Verdict is the outcome of a comparison under a Tolerance.
type Verdict struct {
	Pass bool
	// Failed is the number of elements that fail the elementwise test
	// (NaN and Inf mismatches included).
	Failed int
	// Reasons says, one sentence each, why the comparison fails; empty when
	// it passes.
	Reasons []string
}

// Report is the comparison of a candidate tensor with a reference: the
// error measures, the ULP distribution, the mismatched non-finite values,
// the worst elements and, under a tolerance, the verdict. It renders as
// aligned text (WriteText, String) and as JSON (MarshalJSON, with keys
// documented there). Errors are measured as got − ref.
//
// The numeric measures are taken over the pairs where both values are
// finite; pairs where either is NaN or ±Inf are counted apart, as matches
// (NaN with NaN, or the same infinity) or mismatches.
type Report struct {
	Shape    []int  // shape of the tensors
	Elements int    // number of elements
	Format   Format // the candidate's format, the grid of the ULP distances

	Finite int // pairs where both values are finite

	MaxAbs   float64 // max |got − ref|
	MaxAbsAt []int   // its index (nil when there are no finite pairs)
	MaxRel   float64 // max |got − ref| / max(|ref|, RelFloor)
	MaxRelAt []int   // its index
	RelFloor float64 // the floor used
	RMS      float64 // √(Σ (got − ref)² / Finite)
	// MeanSigned is Σ (got − ref) / Finite: a systematic bias (always
	// rounding one way, a missing or extra term) shows as a mean far from
	// zero compared with RMS, which random rounding does not give.
	MeanSigned float64
	// Normwise is ‖got − ref‖₂ / ‖ref‖₂ over the finite pairs (the absolute
	// ‖got − ref‖₂ when ‖ref‖₂ = 0), the measure plumb's accuracy targets
	// are stated in. It is finite whenever the exact quotient is: the norms
	// are scaled before squaring, and where a difference or a norm itself
	// exceeds float64 (values near ±Max) the quotient is formed from the
	// scaled norms.
	Normwise float64
	// SQNR is the signal-to-quantisation-noise ratio of the candidate in
	// decibels, 10·log₁₀(Σ ref² / Σ (got − ref)²) over the finite pairs
	// (common practice for the measure of a quantised tensor), formed as
	// −20·log₁₀(Normwise): +Inf when got = ref there, −Inf when ref is all
	// zero and got is not, NaN when there are no finite pairs.
	SQNR float64

	MaxULPs float64 // largest ULP distance among the finite pairs
	// ULPs is the distribution of ULP distances over the finite pairs, in
	// buckets 0, 1, 2–3, 4–7, … up to the largest non-empty one. A pair
	// whose distance is undefined (in E4M3, a value beyond the overflow
	// threshold rounds to NaN) is not counted.
	ULPs []ULPBucket
	// NotInFormat counts finite candidate values that are not values of
	// Format: a sign that the candidate was not rounded to the format the
	// report assumes.
	NotInFormat int

	NaNMismatches    int // one of the pair is NaN, the other not
	InfMismatches    int // neither is NaN, one is ±Inf, and they differ
	NonFiniteMatches int // NaN with NaN, or equal infinities

	Worst []Element // the worst elements, worst first

	Tolerance *Tolerance // the tolerance of the verdict, if any
	Verdict   *Verdict   // nil without a tolerance
}

// Diff compares the candidate got with the reference ref, both row-major
// tensors of the given shape (nil shape: one dimension of len(ref)), and
// returns the report.
//
// The worst elements are ranked, worst first, by: NaN or Inf mismatches;
// then, with a tolerance, by how many times the element's error exceeds what
// the tolerance allows; without one, by absolute error. Equal ranks keep
// the order of the offsets.
//
// Special cases are:
//
//	len(ref) = 0 with shape [0] or nil   an empty report (no measures), verdict pass
//	len(got) ≠ len(ref), or shape's product ≠ len(ref), or a negative dimension   ErrShape
//	invalid opt.Format                    ErrFormat
//	negative or NaN RelFloor or tolerance ErrTolerance
//	got − ref overflowing float64         +Inf in MaxAbs and in that element's
//	                                      errors; RMS, MeanSigned and Normwise
//	                                      finite where their exact values are
//	                                      (they are formed from (got − ref)/2)
func Diff(ref, got []float64, shape []int, opt Options) (*Report, error) {
	return diff(diffArgs{fn: "Diff", format: "Options.Format", tolerance: "Options.Tolerance"}, ref, got, shape, opt)
}

// diffArgs names, in messages, the function a caller called and how it
// took the format and the tolerance that Diff takes in its Options.
type diffArgs struct{ fn, format, tolerance string }

// diff is Diff with the names of args in its messages.
func diff(args diffArgs, ref, got []float64, shape []int, opt Options) (*Report, error) {
	shape, err := checkDiff(args, ref, got, shape, opt)
	if err != nil {
		return nil, err
	}
	r := &Report{SQNR: math.NaN(), Shape: shape, Elements: len(ref), Format: opt.Format, Tolerance: opt.Tolerance, RelFloor: relFloor(ref, opt.RelFloor)}
	nworst := opt.Worst
	if nworst == 0 {
		nworst = DefaultWorst
	}
	a := &diffSums{r: r, tol: opt.Tolerance, diffs: newNorm(), refs: newNorm(), maxAbsAt: -1, maxRelAt: -1, worst: newTopK(max(nworst, 0))}
	for i := range ref {
		a.add(i, ref[i], got[i])
	}
	a.finish(ref, got)
	if opt.Tolerance != nil {
		r.Verdict = opt.Tolerance.verdict(r, a.failed)
	}
	return r, nil
}

// checkDiff validates Diff's arguments and returns the shape to use.
func checkDiff(a diffArgs, ref, got []float64, shape []int, opt Options) ([]int, error) {
	fn := a.fn
	if len(got) != len(ref) {
		return nil, fmt.Errorf("%w: %s: got has %d elements; want len(ref) = %d", ErrShape, fn, len(got), len(ref))
	}
	shape, err := checkShape(fn, shape, len(ref))
	if err != nil {
		return nil, err
	}
	if err := formatWords.CheckAt(fn+": "+a.format, opt.Format); err != nil {
		return nil, err
	}
	if math.IsNaN(opt.RelFloor) || opt.RelFloor < 0 || math.IsInf(opt.RelFloor, 0) {
		return nil, fmt.Errorf("%w: %s: Options.RelFloor = %v; want a finite value ≥ 0 (0 for the default)", ErrTolerance, fn, opt.RelFloor)
	}
	if opt.Tolerance != nil {
		if err := opt.Tolerance.validate(fn, a.tolerance); err != nil {
			return nil, err
		}
	}
	return shape, nil
}

// relFloor is the floor of the relative error's denominator: the caller's,
// or DefaultRelFloorFactor times the largest finite reference magnitude (1
// when every reference value is 0).
func relFloor(ref []float64, floor float64) float64 {
	if floor != 0 {
		return floor
	}
	big := 0.0
	for _, v := range ref {
		if a := math.Abs(v); a > big && !math.IsInf(a, 0) {
			big = a
		}
	}
	if big == 0 {
		return 1
	}
	return DefaultRelFloorFactor * big
}

// diffSums accumulates the measures of a Report element by element.
type diffSums struct {
	r                  *Report
	tol                *Tolerance
	diffs, refs        norm
	sum                float64
	maxAbsAt, maxRelAt int
	hist               [65]int
	failed             int
	worst              *topK
	overflow           bool // some got − ref of a finite pair overflows float64
}

// add takes the pair (x, y) = (ref[i], got[i]).
func (a *diffSums) add(i int, x, y float64) {
	r, f := a.r, a.r.Format
	e := Element{Offset: i, Ref: x, Got: y, ULPs: math.NaN()}
	ry := f.Round(y) // once, for ULPDistance and Contains (f is valid: checkDiff)
	if d, ok := f.ulpsBetween(f.Round(x), ry); ok {
		e.ULPs = float64(d)
	}
	if !finite(x) || !finite(y) {
		switch {
		case math.IsNaN(x) && math.IsNaN(y), x == y:
			r.NonFiniteMatches++
			return
		case math.IsNaN(x) || math.IsNaN(y):
			r.NaNMismatches++
		default:
			r.InfMismatches++
		}
		e.AbsErr, e.RelErr, e.ULPs = math.Inf(1), math.Inf(1), math.NaN()
		a.failed++
		a.worst.push(math.Inf(1), e)
		return
	}
	r.Finite++
	d := y - x
	if math.IsInf(d, 0) {
		a.overflow = true // finish forms the measures from (y − x)/2
	}
	e.AbsErr = math.Abs(d)
	e.RelErr = e.AbsErr / math.Max(math.Abs(x), r.RelFloor)
	if a.maxAbsAt < 0 || e.AbsErr > r.MaxAbs {
		r.MaxAbs, a.maxAbsAt = e.AbsErr, i
	}
	if a.maxRelAt < 0 || e.RelErr > r.MaxRel {
		r.MaxRel, a.maxRelAt = e.RelErr, i
	}
	a.diffs.add(d)
	a.refs.add(x)
	a.sum += d
	if !math.IsNaN(e.ULPs) {
		a.hist[bits.Len64(uint64(e.ULPs))]++
		r.MaxULPs = math.Max(r.MaxULPs, e.ULPs)
	}
	if ry != y { // !f.Contains(y): y is finite here
		r.NotInFormat++
	}
	score := e.AbsErr
	if a.tol != nil {
		score = a.tol.excess(x, e.AbsErr, e.ULPs)
		if score > 1 {
			a.failed++
		}
	}
	a.worst.push(score, e)
}

// finish turns the sums into the Report's measures; ref and got are the
// pairs add took, read again when a difference overflowed.
func (a *diffSums) finish(ref, got []float64) {
	r := a.r
	if r.Finite > 0 {
		n := float64(r.Finite)
		dn, rn := a.diffs.value(), a.refs.value()
		r.RMS = dn / math.Sqrt(n)
		r.MeanSigned = a.sum / n
		r.Normwise = dn
		if rn != 0 {
			r.Normwise /= rn
		}
		// Near ±Max a difference, a norm or the sum can exceed float64
		// although the measure does not: then it is formed again, scaled.
		if a.overflow || !finite(dn) || math.IsInf(rn, 0) {
			rms, normwise := a.scaledNorms(ref, got, n)
			if a.overflow || !finite(dn) {
				r.RMS = rms
			}
			r.Normwise = normwise
		}
		if !finite(a.sum) {
			r.MeanSigned = scaledMean(ref, got, n)
		}
		r.SQNR = sqnrOf(r.Normwise, rn == 0)
		r.MaxAbsAt = num.Unravel(a.maxAbsAt, r.Shape)
		r.MaxRelAt = num.Unravel(a.maxRelAt, r.Shape)
		r.ULPs = buckets(a.hist)
	}
	r.Worst = a.worst.elements()
	for k := range r.Worst {
		r.Worst[k].Index = num.Unravel(r.Worst[k].Offset, r.Shape)
	}
}

// sqnrOf returns the SQNR of a normwise error: −20·log₁₀(normwise), or,
// for an all-zero reference (where normwise is the absolute norm of the
// differences), +Inf with no differences and −Inf with some.
func sqnrOf(normwise float64, zeroRef bool) float64 {
	switch {
	case normwise == 0:
		return math.Inf(1)
	case zeroRef:
		return math.Inf(-1)
	}
	return -20 * math.Log10(normwise)
}

// scaledNorms returns RMS and Normwise over the n finite pairs when the
// norm of the differences or of the reference exceeds float64: the norms
// are kept as m·2^e, and, where a difference overflows, every difference
// is taken as 2·(y/2 − x/2), whose half does not. Each result is ±Inf only
// when its exact value is beyond float64.
func (a *diffSums) scaledNorms(ref, got []float64, n float64) (rms, normwise float64) {
	var dm float64
	var de int
	if a.overflow {
		half := newNorm()
		for i, x := range ref {
			if y := got[i]; finite(x) && finite(y) {
				half.add(y/2 - x/2)
			}
		}
		dm, de = half.parts()
		de++
	} else {
		dm, de = a.diffs.parts()
	}
	rms = math.Ldexp(dm/math.Sqrt(n), de)
	rm, re := a.refs.parts()
	if rm == 0 {
		return rms, math.Ldexp(dm, de)
	}
	return rms, math.Ldexp(dm/rm, de-re)
}

// scaledMean is the mean signed error over the n finite pairs when their
// sum exceeds float64: 2·Σ (y/2 − x/2)/n, whose terms and partial sums
// stay within float64 (each |term| ≤ MaxFloat64/n).
func scaledMean(ref, got []float64, n float64) float64 {
	sum := 0.0
	for i, x := range ref {
		if y := got[i]; finite(x) && finite(y) {
			sum += (y/2 - x/2) / n
		}
	}
	return 2 * sum
}

// buckets turns the counts by bit length into the ULP histogram, from
// bucket 0 up to the largest non-empty one.
func buckets(hist [65]int) []ULPBucket {
	top := 0
	for k, c := range hist {
		if c > 0 {
			top = k
		}
	}
	var out []ULPBucket
	for k := 0; k <= top; k++ {
		lo, hi := uint64(0), uint64(0)
		if k > 0 {
			lo = 1 << (k - 1)
			hi = lo<<1 - 1
			if k == 64 {
				hi = math.MaxUint64
			}
		}
		out = append(out, ULPBucket{Lo: lo, Hi: hi, Count: hist[k]})
	}
	return out
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// checkShape returns the shape to use for n elements (len(ref)) in a call
// of fn.
func checkShape(fn string, shape []int, n int) ([]int, error) {
	if shape == nil {
		return []int{n}, nil
	}
	p := 1
	for k, d := range shape {
		if d < 0 {
			return nil, fmt.Errorf("%w: %s: shape[%d] = %d; want ≥ 0 (shape %v)", ErrShape, fn, k, d, shape)
		}
		if d != 0 && p > math.MaxInt/d {
			return nil, fmt.Errorf("%w: %s: shape = %v; want one whose element count fits an int", ErrShape, fn, shape)
		}
		p *= d
	}
	if p != n {
		return nil, fmt.Errorf("%w: %s: shape %v holds %d elements; want len(ref) = %d", ErrShape, fn, shape, p, n)
	}
	return append([]int(nil), shape...), nil
}

// norm accumulates a Euclidean norm with scaling, so that it neither
// overflows nor underflows (the method of LAPACK's dnrm2).
type norm struct{ scale, ssq float64 }

func newNorm() norm { return norm{0, 1} }

func (n *norm) add(v float64) {
	if v == 0 {
		return
	}
	a := math.Abs(v)
	if math.IsInf(a, 0) {
		n.scale, n.ssq = math.Inf(1), 1
		return
	}
	if n.scale < a {
		n.ssq = 1 + float64(n.ssq*(n.scale/a)*(n.scale/a)) // rounded: no fused multiply-add, the same bits everywhere
		n.scale = a
	} else {
		n.ssq += float64((a / n.scale) * (a / n.scale))
	}
}

func (n *norm) value() float64 { return n.scale * math.Sqrt(n.ssq) }

// parts returns m and e with value = m·2^e and m finite: the norm even
// where value overflows. The norm must have taken finite values only.
func (n *norm) parts() (m float64, e int) {
	fr, e := math.Frexp(n.scale)
	return fr * math.Sqrt(n.ssq), e
}

// topK keeps the k elements with the largest scores; equal scores keep the
// smaller offset, so the result does not depend on anything but the data.
type topK struct {
	k      int
	scores []float64
	elems  []Element
}

func newTopK(k int) *topK { return &topK{k: k} }

func (t *topK) push(score float64, e Element) {
	if t.k == 0 || !(score > 0) {
		return // exact elements are never listed
	}
	if len(t.elems) == t.k && !(score > t.scores[t.k-1]) {
		return
	}
	// Insertion point: after every element with a score ≥ this one (the
	// offsets arrive in increasing order).
	i := len(t.scores)
	for i > 0 && score > t.scores[i-1] {
		i--
	}
	if len(t.elems) < t.k {
		t.scores = append(t.scores, 0)
		t.elems = append(t.elems, Element{})
	}
	copy(t.scores[i+1:], t.scores[i:])
	copy(t.elems[i+1:], t.elems[i:])
	t.scores[i], t.elems[i] = score, e
}

func (t *topK) elements() []Element { return t.elems }
