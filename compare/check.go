package compare

import (
	"math"
	"testing"

	"github.com/google/go-cmp/cmp"
)

// Check compares got with ref under tol, counting ULPs in format f, and
// marks the test failed (tb.Errorf, so the test goes on) with the whole
// report when the verdict is FAIL. An invalid argument (lengths, shape, format,
// tolerance) stops the test (tb.Fatalf). It returns the report, or nil after
// an invalid argument, and reports whether the comparison passed.
//
// Use it in a kernel's tests as
//
//	compare.Check(t, want, got, []int{batch, heads, seq, dim}, compare.Float32, tol)
func Check(tb testing.TB, ref, got []float64, shape []int, f Format, tol Tolerance) (*Report, bool) {
	tb.Helper()
	r, err := diff(diffArgs{fn: "Check", format: "f", tolerance: "tol"}, ref, got, shape, Options{Format: f, Tolerance: &tol})
	if err != nil {
		tb.Fatalf("%v", err)
		return nil, false
	}
	if !r.Verdict.Pass {
		tb.Errorf("compare.Check: candidate differs from the reference:\n%s", r)
	}
	return r, r.Verdict.Pass
}

// Approx returns a go-cmp option under which two float64 values, or two
// []float64 of equal length, are equal when they pass tol in format f.
// Slices are compared as a whole, so MaxNormwise applies; slices of unequal
// length, and values inside other structures, are compared element by
// element by go-cmp as usual, with the float64 rule.
//
// A go-cmp comparer must be symmetric, and which side is the reference is
// unknown to it, so the relative parts use the larger magnitude of the two:
// an element passes when |x − y| ≤ Abs + Rel·max(|x|, |y|) or its ULP
// distance is within ULPs, and slices pass MaxNormwise when
// ‖x − y‖₂ ≤ MaxNormwise·max(‖x‖₂, ‖y‖₂). NaN equals NaN and an infinity
// itself. This is slightly looser than Diff's test with either argument as
// the reference; use Check for the exact rule and a report.
//
// An invalid format or tolerance gives an option under which nothing is
// equal, so that the mistake cannot pass unnoticed.
func Approx(f Format, tol Tolerance) cmp.Option {
	bad := !f.Valid() || tol.Validate() != nil
	elem := func(x, y float64) bool {
		if bad {
			return false
		}
		if !finite(x) || !finite(y) {
			return (math.IsNaN(x) && math.IsNaN(y)) || x == y
		}
		d := math.Abs(x - y)
		if d <= tol.Abs+float64(tol.Rel*math.Max(math.Abs(x), math.Abs(y))) { // rounded: the same verdict on every machine
			return true
		}
		u, ok := f.ULPDistance(x, y)
		return tol.ULPs > 0 && ok && u <= tol.ULPs
	}
	slice := func(x, y []float64) bool {
		for i := range x {
			if !elem(x[i], y[i]) {
				return false
			}
		}
		if tol.MaxNormwise == 0 {
			return true
		}
		d, nx, ny := newNorm(), newNorm(), newNorm()
		overflow := false
		for i := range x {
			if finite(x[i]) && finite(y[i]) {
				e := x[i] - y[i]
				overflow = overflow || math.IsInf(e, 0)
				d.add(e)
				nx.add(x[i])
				ny.add(y[i])
			}
		}
		dv, xv, yv := d.value(), nx.value(), ny.value()
		if !overflow && finite(dv) && finite(xv) && finite(yv) {
			return dv <= tol.MaxNormwise*math.Max(xv, yv)
		}
		// Near ±Max: compare the quotient of the scaled norms, with the
		// differences halved where one overflows (as Diff does).
		dm, de := d.parts()
		if overflow {
			half := newNorm()
			for i := range x {
				if finite(x[i]) && finite(y[i]) {
					half.add(x[i]/2 - y[i]/2)
				}
			}
			dm, de = half.parts()
			de++
		}
		if dm == 0 {
			return true
		}
		xm, xe := nx.parts()
		ym, ye := ny.parts()
		q := math.Inf(1)
		if xm != 0 {
			q = math.Ldexp(dm/xm, de-xe)
		}
		if ym != 0 {
			q = math.Min(q, math.Ldexp(dm/ym, de-ye))
		}
		return q <= tol.MaxNormwise
	}
	return cmp.Options{
		cmp.FilterValues(func(x, y []float64) bool { return len(x) == len(y) }, cmp.Comparer(slice)),
		cmp.Comparer(elem),
	}
}
