package quant

import (
	"fmt"
	"math"
	"math/big"

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
	Zeros      []int8    // one zero point per block when asymmetric; empty otherwise
	FloatZeros []float64 // one zero point per block, a value of Scheme.Scale, when asymmetric-float; empty otherwise
}

// Quantise returns x, a row-major [rows, cols] tensor, quantised under s.
//
// For each block (the elements that share a scale) with codes lo..hi
// (Scheme.Limits), the scale is chosen from the block's extremes:
//
//	symmetric:  s = up(fl(amax / hi)),             amax = max |x|
//	asymmetric: s = up(fl(fl(xmax − xmin) / (hi − lo))),  xmin = min(x, 0), xmax = max(x, 0)
//	            z = lo − round(xmin / s)
//	asymmetric-float: s as asymmetric with xmin = min x, xmax = max x,
//	            z = lo − xmin/s rounded once to the scale format (not an integer)
//
// Under RulePercentile the extremes are first limited to ±P, P the
// Scheme.Percentile-th percentile of the block's |x| by nearest rank (the
// ⌈p·n/100⌉-th smallest of n, rank at least 1; common practice for
// percentile calibration): amax = min(amax, P), xmin = max(xmin, −P),
// xmax = min(xmax, P). The elements beyond are clipped to lo or hi; Bound's
// s/2 then holds for the unclipped elements only, and BoundOf reports each
// clipped element's own error.
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
//	q = clamp(round(x / s + z), lo, hi)    (asymmetric-float)
//
// with round the exact nearest integer to the quotient, ties broken by
// Scheme.Rounding (Jacob et al. 2018, arXiv 1712.05877, §2.1 Eq. (1) and
// (2): r = S(q − Z), Z an integer so that real zero is a code).
//
// Special cases are:
//
//	rows = 0 or cols = 0        empty codes; one scale of 1 per block (PerTensor: one)
//	a block of zeros            scale 1, codes 0 (asymmetric: z = lo, codes lo)
//	a block whose chosen extremes are 0 (percentile of mostly zeros)  scale 1
//	a float zero point beyond the scale format  error ErrValue
//	asymmetric-float with pow2 scales           error ErrOption
//	Scheme.Percentile not in (0, 100] under RulePercentile  error ErrOption
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
	vals := make([][]float64, g.blocks) // each block's values
	for r := range rows {
		for c := range cols {
			b := g.block(r, c)
			vals[b] = append(vals[b], float64(x[r*cols+c]))
		}
	}
	lo, hi := s.Limits()
	t := Tensor{Rows: rows, Cols: cols, Scheme: s, Codes: make([]int8, rows*cols), Scales: make([]float64, g.blocks)}
	switch s.Symmetry {
	case Asymmetric:
		t.Zeros = make([]int8, g.blocks)
	case AsymmetricFloat:
		t.FloatZeros = make([]float64, g.blocks)
	}
	for b := range g.blocks {
		xmin, xmax := extremes(vals[b], s)
		var q float64
		if s.Symmetry == Symmetric {
			q = quotientUp(max(-xmin, xmax), float64(hi))
		} else {
			q = quotientUp(differenceUp(xmax, xmin), float64(hi-lo))
		}
		sc := 1.0
		if q > 0 {
			var ok bool
			if sc, ok = s.Scale.up(q); !ok || math.IsInf(q, 0) {
				return Tensor{}, fmt.Errorf("%w: %s: block %d spans [%g, %g], which needs a scale ≥ %g; want one at most the largest %v", ErrValue, fn, b, xmin, xmax, q, s.Scale)
			}
		}
		t.Scales[b] = sc
		switch s.Symmetry {
		case Asymmetric:
			// xmin ≤ 0 and xmin/s ≥ −(hi − lo), so z lies in [lo, hi].
			t.Zeros[b] = int8(lo - nearest(xmin, sc, s.Rounding))
		case AsymmetricFloat:
			z := floatZero(xmin, sc, lo, s.Scale)
			if math.IsInf(z, 0) || math.IsNaN(z) {
				return Tensor{}, fmt.Errorf("%w: %s: block %d has min %g, whose zero point %d − min/s is beyond the largest %v", ErrValue, fn, b, xmin, lo, s.Scale)
			}
			t.FloatZeros[b] = z
		}
	}
	for r := range rows {
		for c := range cols {
			i, b := r*cols+c, g.block(r, c)
			t.Codes[i] = int8(clamp(t.code(float64(x[i]), b), lo, hi))
		}
	}
	return t, nil
}

// extremes returns the least and greatest values a block's scale must
// cover: min(v, 0) and max(v, 0) (symmetric, asymmetric), or min v and max v
// (float zero point; 0 and 0 for an empty block), each limited to ±P, the
// p-th percentile of |v|, under the percentile rule.
func extremes(v []float64, s Scheme) (xmin, xmax float64) {
	if s.Symmetry == AsymmetricFloat && len(v) > 0 {
		xmin, xmax = v[0], v[0]
	}
	for _, x := range v {
		xmin, xmax = min(xmin, x), max(xmax, x)
	}
	if s.Rule == RulePercentile && len(v) > 0 {
		p := percentile(v, s.Percentile)
		xmin, xmax = max(xmin, -p), min(xmax, p)
	}
	return xmin, xmax
}

// floatZero returns the float zero point lo − xmin/s rounded once to the
// scale format f (to nearest, ties to even). When the block holds zero,
// |z| ≤ 128 and every floating scale format holds it within a quarter of a
// step, so xmin lands on code lo; a block far from zero has a large |z|
// (lo − 255 for [10, 20]), which bfloat16 rounds by up to a step or more,
// and then an extreme element can be clipped (BoundOf says by how much).
func floatZero(xmin, s float64, lo int, f ScaleFormat) float64 {
	cf, _ := f.format()
	var r big.Rat
	r.SetFloat64(xmin)
	r.Quo(&r, new(big.Rat).SetFloat64(s))
	r.Sub(big.NewRat(int64(lo), 1), &r)
	return roundRat(&r, cf, false)
}

// code returns the unclamped code of x in block b: the nearest integer to
// x/s + z, ties broken by Scheme.Rounding, decided exactly.
func (t *Tensor) code(x float64, b int) int {
	if t.FloatZeros == nil {
		return nearest(x, t.Scales[b], t.Scheme.Rounding) + t.zero(b)
	}
	var r big.Rat
	r.SetFloat64(x)
	r.Quo(&r, new(big.Rat).SetFloat64(t.Scales[b]))
	r.Add(&r, new(big.Rat).SetFloat64(t.FloatZeros[b]))
	return nearestRat(&r, t.Scheme.Rounding)
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
	zeros, floatZeros := 0, 0
	switch t.Scheme.Symmetry {
	case Asymmetric:
		zeros = g.blocks
	case AsymmetricFloat:
		floatZeros = g.blocks
	}
	if len(t.Zeros) != zeros {
		return grid{}, fmt.Errorf("%w: %s: Tensor.Zeros has %d values; want %d (one per block when asymmetric, none otherwise)", ErrLength, fn, len(t.Zeros), zeros)
	}
	if len(t.FloatZeros) != floatZeros {
		return grid{}, fmt.Errorf("%w: %s: Tensor.FloatZeros has %d values; want %d (one per block when asymmetric-float, none otherwise)", ErrLength, fn, len(t.FloatZeros), floatZeros)
	}
	if cf, ok := t.Scheme.Scale.format(); ok {
		for b, z := range t.FloatZeros {
			if math.IsInf(z, 0) || math.IsNaN(z) || !cf.Contains(z) {
				return grid{}, fmt.Errorf("%w: %s: Tensor.FloatZeros[%d] = %v; want a finite %v value", ErrCode, fn, b, z, t.Scheme.Scale)
			}
		}
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
// With an integer zero point (or none) they are exact in float64: q − z is an integer of at most 8 bits
// (|q − z| ≤ 255) and s has at most 24 significand bits (float32, binary16
// and bfloat16 scales; 1 for powers of two), so the product has at most 32
// significand bits, and its exponent, between 2^−149 and 2^128·255, lies
// in float64's normal range. With a float zero point (AsymmetricFloat),
// (q − z)·s is computed exactly and rounded once to float64, to nearest
// with ties to even.
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
	return t.each("Dequantise", t.value)
}

// value returns x̂ of element i, in block b.
func (t *Tensor) value(i, b int) float64 {
	if t.FloatZeros == nil {
		return float64(int(t.Codes[i])-t.zero(b)) * t.Scales[b]
	}
	var r big.Rat
	r.SetFloat64(t.FloatZeros[b])
	r.Sub(big.NewRat(int64(t.Codes[i]), 1), &r)
	r.Mul(&r, new(big.Rat).SetFloat64(t.Scales[b]))
	v, _ := r.Float64()
	return v
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
// nearest that its scale allows, s/2: half a step of the codes. Under the
// absolute-maximum rule every x that Quantise turned into t satisfies
// |x − x̂| ≤ s/2 for the exact x̂, for no element is clipped (see
// Quantise's rule for the scale); with a float zero point x̂ is then
// rounded once more to float64 (Dequantise). The values are exact (a
// power-of-two scaling).
//
// Under the percentile rule the bound holds for the unclipped elements
// only: an element beyond the extreme codes is clipped, and its error can
// be any size. Bound knows only the codes, so it cannot tell which; BoundOf
// takes x as well and gives clipped elements their actual error.
//
// Special cases are those of Dequantise.
func Bound(t Tensor) ([]float64, error) {
	return t.each("Bound", func(_, b int) float64 { return t.Scales[b] / 2 })
}

// BoundOf returns, for each element of x, the error bound t implies given
// the value it came from: s/2 for an element whose unclamped code
// round(x/s) + z lies in Scheme.Limits (it was not clipped), and for a
// clipped one its actual error |x − x̂|, rounded upward to float64. It is
// Bound wherever nothing was clipped, as always under the
// absolute-maximum rule.
//
// Special cases are those of Dequantise, and:
//
//	len(x) ≠ t.Rows·t.Cols       error ErrLength
//	x holds NaN or ±Inf          error ErrValue
func BoundOf(x []float64, t Tensor) ([]float64, error) { return boundOf("BoundOf", x, t) }

// BoundOf32 is BoundOf of float32 values (widened exactly), each bound
// rounded upward to float32, so that it is still a bound.
//
// Special cases are those of BoundOf.
func BoundOf32(x []float32, t Tensor) ([]float32, error) {
	b, err := boundOf("BoundOf32", x, t)
	if err != nil {
		return nil, err
	}
	out := make([]float32, len(b))
	for i, v := range b {
		out[i] = float32(v)
		if float64(out[i]) < v {
			out[i] = math.Nextafter32(out[i], float32(math.Inf(1)))
		}
	}
	return out, nil
}

func boundOf[T num.Float](fn string, xs []T, t Tensor) ([]float64, error) {
	x := make([]float64, len(xs))
	for i, v := range xs {
		x[i] = float64(v)
	}
	if len(x) != len(t.Codes) {
		return nil, fmt.Errorf("%w: %s: len(x) = %d; want len(t.Codes) = %d", ErrLength, fn, len(x), len(t.Codes))
	}
	for i, v := range x {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("%w: %s: x[%d] = %v; want a finite value", ErrValue, fn, i, v)
		}
	}
	lo, hi := t.Scheme.Limits()
	return t.each(fn, func(i, b int) float64 {
		if q := t.code(x[i], b); q >= lo && q <= hi {
			return t.Scales[b] / 2
		}
		return math.Abs(differenceUp(max(x[i], t.value(i, b)), min(x[i], t.value(i, b))))
	})
}
