package quant

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/internal/num"
)

// Tensor is a quantised [Rows, Cols] tensor: its codes, row-major, and one
// scale (and, when asymmetric, one zero point) per block of the scheme, in
// block order (see Granularity and Channel).
type Tensor struct {
	Rows, Cols int
	Scheme     Scheme
	Codes      []int8    // Rows·Cols codes in the scheme's Limits
	Scales     []float64 // one per block: positive values of Scheme.Scale
	Zeros      []int8    // one zero point per block when asymmetric; empty when symmetric
}

// Quantise returns x, a row-major [rows, cols] tensor, quantised under s.
//
// For each block (the elements that share a scale) with codes lo..hi
// (Scheme.Limits), the scale is chosen from the block's extremes:
//
//	symmetric:  s = up(fl(amax / hi)),             amax = max |x|
//	asymmetric: s = up(fl(fl(xmax − xmin) / (hi − lo))),  xmin = min(x, 0), xmax = max(x, 0)
//	            z = lo − round(xmin / s)
//
// where fl rounds upward to float64 (so that the quotient is never below
// the exact one) and up(q) is the smallest value of the scale format that
// is ≥ q: the scale is rounded to its format before any element is
// quantised, and rounded upward, so that no element of the block falls
// outside the codes. (Rounding the scale to nearest instead can land below
// amax/hi, and then amax/s rounds past hi and is clipped: in bfloat16 by up
// to 127·2^−8 steps.) A block of zeros takes the scale 1. The codes are
//
//	q = clamp(round(x / s) + z, lo, hi)    (z = 0 when symmetric)
//
// with round the exact nearest integer to the quotient, ties broken by
// Scheme.Rounding (Jacob et al. 2018, arXiv 1712.05877, §2.1 Eq. (1) and
// (2): r = S(q − Z), Z an integer so that real zero is a code).
//
// Special cases are:
//
//	rows = 0 or cols = 0        empty codes; one scale of 1 per block (PerTensor: one)
//	a block of zeros            scale 1, codes 0 (asymmetric: z = lo, codes lo)
//	x holds NaN or ±Inf         error ErrValue
//	up(q) beyond the format     error ErrValue (binary16: amax > 65504·hi)
//	len(x) ≠ rows·cols          error ErrLength
//	a Group that does not divide its axis  error ErrGroup
func Quantise(x []float64, rows, cols int, s Scheme) (Tensor, error) {
	return quantise("Quantise", x, rows, cols, s)
}

// Quantise32 is Quantise of float32 values, which widen to float64 exactly:
// the same body, the same codes and scales as Quantise of the widened x.
//
// Special cases are those of Quantise.
func Quantise32(x []float32, rows, cols int, s Scheme) (Tensor, error) {
	return quantise("Quantise32", x, rows, cols, s)
}

func quantise[T num.Float](fn string, x []T, rows, cols int, s Scheme) (Tensor, error) {
	if err := checkShape(fn, "x", len(x), rows, cols); err != nil {
		return Tensor{}, err
	}
	g, err := newGrid(fn, rows, cols, s)
	if err != nil {
		return Tensor{}, err
	}
	for i, v := range x {
		if f := float64(v); math.IsNaN(f) || math.IsInf(f, 0) {
			return Tensor{}, fmt.Errorf("%w: %s: x[%d] = %v; want a finite value", ErrValue, fn, i, f)
		}
	}
	xmin := make([]float64, g.blocks) // min(x, 0) of each block
	xmax := make([]float64, g.blocks) // max(x, 0)
	for r := range rows {
		for c := range cols {
			b, v := g.block(r, c), float64(x[r*cols+c])
			xmin[b], xmax[b] = min(xmin[b], v), max(xmax[b], v)
		}
	}
	lo, hi := s.Limits()
	t := Tensor{Rows: rows, Cols: cols, Scheme: s, Codes: make([]int8, rows*cols), Scales: make([]float64, g.blocks)}
	if s.Symmetry == Asymmetric {
		t.Zeros = make([]int8, g.blocks)
	}
	for b := range g.blocks {
		var q float64
		if s.Symmetry == Asymmetric {
			q = quotientUp(differenceUp(xmax[b], xmin[b]), float64(hi-lo))
		} else {
			q = quotientUp(max(-xmin[b], xmax[b]), float64(hi))
		}
		sc := 1.0
		if q > 0 {
			var ok bool
			if sc, ok = s.Scale.up(q); !ok || math.IsInf(q, 0) {
				return Tensor{}, fmt.Errorf("%w: %s: block %d spans [%g, %g], which needs a scale ≥ %g; want one at most the largest %v", ErrValue, fn, b, xmin[b], xmax[b], q, s.Scale)
			}
		}
		t.Scales[b] = sc
		if t.Zeros != nil {
			// xmin ≤ 0 and xmin/s ≥ −(hi − lo), so z lies in [lo, hi].
			t.Zeros[b] = int8(lo - nearest(xmin[b], sc, s.Rounding))
		}
	}
	for r := range rows {
		for c := range cols {
			i, b := r*cols+c, g.block(r, c)
			z := 0
			if t.Zeros != nil {
				z = int(t.Zeros[b])
			}
			t.Codes[i] = int8(clamp(nearest(float64(x[i]), t.Scales[b], s.Rounding)+z, lo, hi))
		}
	}
	return t, nil
}

// differenceUp returns a − b rounded upward to float64.
func differenceUp(a, b float64) float64 {
	d, e := num.TwoSum(a, -b)
	if e > 0 {
		return math.Nextafter(d, math.Inf(1))
	}
	return d
}

// quotientUp returns a/b rounded upward to float64, for a ≥ 0, b > 0.
func quotientUp(a, b float64) float64 {
	q := a / b
	if math.FMA(q, b, -a) < 0 { // the sign of q·b − a, exactly
		return math.Nextafter(q, math.Inf(1))
	}
	return q
}

// check validates t for fn and returns its grid.
func (t *Tensor) check(fn string) (grid, error) {
	if err := checkShape(fn, "Tensor", len(t.Codes), t.Rows, t.Cols); err != nil {
		return grid{}, err
	}
	g, err := newGrid(fn, t.Rows, t.Cols, t.Scheme)
	if err != nil {
		return grid{}, err
	}
	if len(t.Scales) != g.blocks {
		return grid{}, fmt.Errorf("%w: %s: Tensor.Scales has %d values; want one per block, %d", ErrLength, fn, len(t.Scales), g.blocks)
	}
	zeros := 0
	if t.Scheme.Symmetry == Asymmetric {
		zeros = g.blocks
	}
	if len(t.Zeros) != zeros {
		return grid{}, fmt.Errorf("%w: %s: Tensor.Zeros has %d values; want %d (one per block when asymmetric, none when symmetric)", ErrLength, fn, len(t.Zeros), zeros)
	}
	for b, v := range t.Scales {
		if !t.Scheme.Scale.contains(v) {
			return grid{}, fmt.Errorf("%w: %s: Tensor.Scales[%d] = %v; want a positive finite %v value", ErrScale, fn, b, v, t.Scheme.Scale)
		}
	}
	lo, hi := t.Scheme.Limits()
	for _, f := range []struct {
		what  string
		codes []int8
	}{{"Codes", t.Codes}, {"Zeros", t.Zeros}} {
		for i, q := range f.codes {
			if int(q) < lo || int(q) > hi {
				return grid{}, fmt.Errorf("%w: %s: Tensor.%s[%d] = %d; want %d ≤ code ≤ %d", ErrCode, fn, f.what, i, q, lo, hi)
			}
		}
	}
	return g, nil
}

// zero returns the zero point of block b (0 when symmetric).
func (t *Tensor) zero(b int) int {
	if len(t.Zeros) == 0 {
		return 0
	}
	return int(t.Zeros[b])
}

// Dequantise returns the values of t's codes, x̂ = (q − z)·s, row-major.
// They are exact in float64: q − z is an integer of at most 8 bits
// (|q − z| ≤ 255) and s has at most 24 significand bits (float32, binary16
// and bfloat16 scales; 1 for powers of two), so the product has at most 32
// significand bits, and its exponent, between 2^−149 and 2^128·255, lies
// in float64's normal range.
//
// Dequantise has no float32 twin: its inputs are codes, not floats, and its
// output is exact in float64 but not in float32. A float32 caller rounds the
// result once (compare.Narrow). This is the package's rule for every
// function that takes codes and returns float64 values that are exact or
// rounded once (Bound, DecodeMX, BoundMX, DotMX, MatMulInt8).
//
// Special cases are:
//
//	t.Rows = 0 or t.Cols = 0    empty result
//	a scale ≤ 0, NaN, ±Inf, or not of Scheme.Scale   error ErrScale
//	a code or zero point outside Scheme.Limits        error ErrCode
//	Codes, Scales or Zeros of the wrong length        error ErrLength
func Dequantise(t Tensor) ([]float64, error) {
	return t.each("Dequantise", func(i, b int) float64 {
		return float64(int(t.Codes[i])-t.zero(b)) * t.Scales[b]
	})
}

// each checks t for fn and returns f(i, b) for every element i, of block b.
func (t *Tensor) each(fn string, f func(i, b int) float64) ([]float64, error) {
	g, err := t.check(fn)
	if err != nil {
		return nil, err
	}
	out := make([]float64, len(t.Codes))
	for r := range t.Rows {
		for c := range t.Cols {
			out[r*t.Cols+c] = f(r*t.Cols+c, g.block(r, c))
		}
	}
	return out, nil
}

// Bound returns, for each element of t, the largest error of round to
// nearest that its scale allows, s/2: half a step of the codes. Every x
// that Quantise turned into t satisfies |x − x̂| ≤ s/2 exactly, for no
// element is clipped (see Quantise's rule for the scale). The values are
// exact (a power-of-two scaling).
//
// Special cases are those of Dequantise.
func Bound(t Tensor) ([]float64, error) {
	return t.each("Bound", func(_, b int) float64 { return t.Scales[b] / 2 })
}
