package quant

import (
	"fmt"
	"math"
	"math/big"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/vocab"
)

// FP8Scheme is one convention of scaled FP8 quantisation: the element
// format, which elements share a scale, what overflow gives, and the
// format the scales are stored in. Its zero value is E4M3, per-tensor,
// non-saturating, float32 scales.
type FP8Scheme struct {
	Element     FP8Element
	Granularity Granularity
	Channel     Channel // the index the scales follow (PerChannel, PerGroup)
	Group       int     // elements per group (PerGroup only)
	Overflow    Overflow
	Scale       ScaleFormat
}

// FP8Tensor is a [Rows, Cols] tensor of FP8 elements, row-major, each the
// bit pattern of an OFP8 value (compare.E4M3 or compare.E5M2 encoding), with
// one scale per block of the scheme, in the block order of Granularity and
// Channel. Element i of block b means Pᵢ·s_b, Pᵢ the value of its pattern.
type FP8Tensor struct {
	Rows, Cols int
	Scheme     FP8Scheme
	Codes      []uint8
	Scales     []float64
}

// format returns e's compare format.
func (e FP8Element) format() compare.Format {
	if e == FP8E5M2 {
		return compare.E5M2
	}
	return compare.E4M3
}

// scheme returns the integer Scheme that lays s's blocks out, for newGrid.
func (s FP8Scheme) grid(fn string, rows, cols int) (grid, error) {
	for _, c := range []struct {
		field string
		err   error
	}{{"Element", s.Element.Check()}, {"Overflow", s.Overflow.Check()}} {
		if c.err != nil {
			return grid{}, vocab.At(c.err, ErrOption, fn+": FP8Scheme."+c.field)
		}
	}
	return newGrid(fn, rows, cols, Scheme{Granularity: s.Granularity, Channel: s.Channel, Group: s.Group, Scale: s.Scale})
}

// QuantiseFP8 returns x, a row-major [rows, cols] tensor, as scaled FP8
// elements under s (OCP 8-bit Floating Point Specification (OFP8), revision
// 1.0, 2023: E4M3 and E5M2, through package compare). Each element is
//
//	P = round(x / s_b)
//
// the exact quotient rounded once to the element format, to nearest with
// ties to even, and with s.Overflow beyond its largest magnitude: NaN in
// E4M3 and ±Inf in E5M2 when non-saturating, ±max when saturating.
//
// With scales nil, each block's scale is chosen from its largest magnitude,
// s_b = up(fl(amax / max)), max = 448 (E4M3) or 57344 (E5M2), fl rounding
// upward to float64 and up giving the smallest value of the scale format
// ≥ its argument (as in Quantise), so that no element overflows; a block of
// zeros takes the scale 1. Given scales (one per block, each a positive
// finite value of s.Scale: static scales from a calibration), they are used
// as they are, and elements beyond max·s_b overflow as s.Overflow says.
//
// Special cases are:
//
//	rows = 0 or cols = 0        empty codes
//	x holds NaN or ±Inf         error ErrValue
//	a scale needed beyond s.Scale  error ErrValue
//	a given scale ≤ 0, NaN, ±Inf or not of s.Scale  error ErrScale
//	len(scales) not one per block (scales not nil)  error ErrLength
//	len(x) ≠ rows·cols          error ErrLength
//	a Group that does not divide its axis  error ErrGroup
//	an invalid convention       error ErrOption
func QuantiseFP8(x []float64, rows, cols int, s FP8Scheme, scales []float64) (FP8Tensor, error) {
	return quantiseFP8("QuantiseFP8", x, rows, cols, s, scales)
}

// QuantiseFP832 is QuantiseFP8 of float32 values and scales, which widen
// to float64 exactly: the same codes and scales as QuantiseFP8 of the
// widened x and scales.
//
// Special cases are those of QuantiseFP8.
func QuantiseFP832(x []float32, rows, cols int, s FP8Scheme, scales []float32) (FP8Tensor, error) {
	return quantiseFP8("QuantiseFP832", x, rows, cols, s, scales)
}

func quantiseFP8[T num.Float](fn string, x []T, rows, cols int, s FP8Scheme, given []T) (FP8Tensor, error) {
	var scales []float64
	if given != nil {
		scales = make([]float64, len(given))
		for i, v := range given {
			scales[i] = float64(v)
		}
	}
	if err := checkShape(fn, "x", len(x), rows, cols); err != nil {
		return FP8Tensor{}, err
	}
	g, err := s.grid(fn, rows, cols)
	if err != nil {
		return FP8Tensor{}, err
	}
	for i, v := range x {
		if f := float64(v); math.IsNaN(f) || math.IsInf(f, 0) {
			return FP8Tensor{}, fmt.Errorf("%w: %s: x[%d] = %v; want a finite value", ErrValue, fn, i, f)
		}
	}
	f := s.Element.format()
	t := FP8Tensor{Rows: rows, Cols: cols, Scheme: s, Codes: make([]uint8, rows*cols)}
	if scales != nil {
		if err := checkScales(fn, "scales", scales, g.blocks, s.Scale); err != nil {
			return FP8Tensor{}, err
		}
		t.Scales = append([]float64(nil), scales...)
	} else {
		amax := make([]float64, g.blocks)
		for r := range rows {
			for c := range cols {
				b := g.block(r, c)
				amax[b] = max(amax[b], math.Abs(float64(x[r*cols+c])))
			}
		}
		t.Scales = make([]float64, g.blocks)
		for b, a := range amax {
			t.Scales[b] = 1
			if a == 0 {
				continue
			}
			q := quotientUp(a, f.Max())
			sc, ok := s.Scale.up(q)
			if !ok {
				return FP8Tensor{}, fmt.Errorf("%w: %s: block %d has max |x| = %g, which needs a scale ≥ %g; want one at most the largest %v", ErrValue, fn, b, a, q, s.Scale)
			}
			t.Scales[b] = sc
		}
	}
	for r := range rows {
		for c := range cols {
			i := r*cols + c
			t.Codes[i] = uint8(f.Encode(fp8Round(float64(x[i]), t.Scales[g.block(r, c)], f, s.Overflow == OverflowSaturate)))
		}
	}
	return t, nil
}

// fp8Round returns the exact quotient x/s rounded once to f.
func fp8Round(x, s float64, f compare.Format, sat bool) float64 {
	var r big.Rat
	r.SetFloat64(x)
	r.Quo(&r, new(big.Rat).SetFloat64(s))
	v := roundRat(&r, f, sat)
	if v == 0 && math.Signbit(x) {
		return math.Copysign(0, -1) // −0 stays −0: the sign of the quotient
	}
	return v
}

// checkScales checks that scales holds n positive finite values of f.
func checkScales(fn, what string, scales []float64, n int, f ScaleFormat) error {
	if len(scales) != n {
		return fmt.Errorf("%w: %s: len(%s) = %d; want one per block, %d", ErrLength, fn, what, len(scales), n)
	}
	for b, v := range scales {
		if !f.contains(v) {
			return fmt.Errorf("%w: %s: %s[%d] = %v; want a positive finite %v value", ErrScale, fn, what, b, v, f)
		}
	}
	return nil
}

// DequantiseFP8 returns the values of t's elements, P·s, row-major. They
// are exact in float64: P has at most 4 significand bits and s at most 24,
// and their exponents (P from 2^−16 to 57344, s from 2^−149 to 2^128) keep
// the product in float64's normal range. A NaN pattern gives NaN and an
// infinite one ±Inf (E5M2); a zero keeps its sign.
//
// Special cases are:
//
//	t.Rows = 0 or t.Cols = 0    empty result
//	a scale ≤ 0, NaN, ±Inf or not of Scheme.Scale  error ErrScale
//	Codes or Scales of the wrong length            error ErrLength
//	an invalid convention                          error ErrOption
func DequantiseFP8(t FP8Tensor) ([]float64, error) {
	const fn = "DequantiseFP8"
	if err := checkShape(fn, "FP8Tensor", len(t.Codes), t.Rows, t.Cols); err != nil {
		return nil, err
	}
	g, err := t.Scheme.grid(fn, t.Rows, t.Cols)
	if err != nil {
		return nil, err
	}
	if err := checkScales(fn, "FP8Tensor.Scales", t.Scales, g.blocks, t.Scheme.Scale); err != nil {
		return nil, err
	}
	f := t.Scheme.Element.format()
	out := make([]float64, len(t.Codes))
	for r := range t.Rows {
		for c := range t.Cols {
			i := r*t.Cols + c
			p, _ := f.Decode(uint64(t.Codes[i])) // every 8-bit pattern is a value of E4M3 and E5M2
			out[i] = p * t.Scales[g.block(r, c)]
		}
	}
	return out, nil
}
