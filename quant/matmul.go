package quant

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/vocab"
)

// MatMulInt8 returns the product of two quantised matrices, a [M, K] and b
// [K, N], as integer arithmetic computes it (Jacob et al. 2018, arXiv
// 1712.05877, §2.2–2.3, Eq. (3)–(7)): the int32 sums
//
//	acc[i, j] = Σₖ (qa[i, k] − za)·(qb[k, j] − zb)
//
// accumulated exactly in int32, and the rescaled result
//
//	out[i, j] = sa·sb·acc[i, j]
//
// rounded once to float64: sa·sb is exact (two scales of at most 24
// significand bits each), and the product with acc is one rounding. The
// scales and zero points are per tensor, per row of a (PerChannel with
// ChannelRows) or per column of b (PerChannel with ChannelCols): those the
// sum over k does not cross. Eq. (7) of Jacob et al. expands the same sum
// into Σ qa·qb and correction terms; the two are equal in exact integer
// arithmetic, which int32 is here.
//
// Overflow is ruled out before anything is summed: every term is at most
// ma·mb in magnitude, where ma is the largest |q − z| a's codes and zero
// points allow (128 for symmetric full-range int8, 127 clipped, 255 at most
// with a zero point), so the sum is at most K·ma·mb, and K·ma·mb must not
// exceed 2^31 − 1. For symmetric int8 that is K ≤ 131071 with both operands
// full range (K·128·128), K ≤ 132104 with one clipped (K·127·128) and
// K ≤ 133144 with both clipped (K·127·127).
//
// MatMulInt8 has no float32 twin (codes in, float64 out; see Dequantise).
//
// Special cases are:
//
//	M, K or N = 0               empty or zero results
//	a.Cols ≠ b.Rows             error ErrSize
//	K·ma·mb > 2^31 − 1          error ErrOverflow
//	a per-group scheme, a per-column a or a per-row b  error ErrOption
//	an asymmetric-float operand (no integer zero point)  error ErrOption
//	and those of Dequantise for each operand
func MatMulInt8(a, b Tensor) (acc []int32, out []float64, err error) {
	return matMulInt8("MatMulInt8", a, b)
}

func matMulInt8(fn string, a, b Tensor) (acc []int32, out []float64, err error) {
	ga, err := a.check(fn)
	if err != nil {
		return nil, nil, err
	}
	gb, err := b.check(fn)
	if err != nil {
		return nil, nil, err
	}
	for _, o := range []struct {
		name string
		s    Scheme
		ok   Channel
	}{{"a", a.Scheme, ChannelRows}, {"b", b.Scheme, ChannelCols}} {
		if o.s.Symmetry == AsymmetricFloat {
			return nil, nil, fmt.Errorf("%w: %s: %s.Scheme.Symmetry = %v; want integer zero points (symmetric or asymmetric), which an int32 sum can carry", ErrOption, fn, o.name, o.s.Symmetry)
		}
		if o.s.Granularity == PerGroup || (o.s.Granularity == PerChannel && o.s.Channel != o.ok) {
			return nil, nil, fmt.Errorf("%w: %s: %s.Scheme = %v %v; want per-tensor or per-channel %v scales, which the sum over k does not cross", ErrOption, fn, o.name, o.s.Granularity, o.s.Channel, o.ok)
		}
	}
	if a.Cols != b.Rows {
		return nil, nil, fmt.Errorf("%w: %s: b.Rows = %d; want a.Cols = %d", ErrSize, fn, b.Rows, a.Cols)
	}
	m, k, n := a.Rows, a.Cols, b.Cols
	if err := checkShape(fn, "output", -1, m, n); err != nil {
		return nil, nil, err
	}
	ma, mb := a.spread(), b.spread()
	if bound := int64(k) * int64(ma) * int64(mb); bound > math.MaxInt32 {
		return nil, nil, fmt.Errorf("%w: %s: K·ma·mb = %d·%d·%d = %d; want at most 2^31 − 1 (ma, mb: the largest |code − zero point| of a and b)", ErrOverflow, fn, k, ma, mb, bound)
	}
	acc = make([]int32, m*n)
	out = make([]float64, m*n)
	for i := range m {
		for j := range n {
			ba, bb := ga.block(i, 0), gb.block(0, j)
			za, zb := int32(a.zero(ba)), int32(b.zero(bb))
			var s int32
			for p := range k {
				s += (int32(a.Codes[i*k+p]) - za) * (int32(b.Codes[p*n+j]) - zb)
			}
			acc[i*n+j] = s
			scale := a.Scales[ba] * b.Scales[bb] // exact
			out[i*n+j] = scale * float64(s)
		}
	}
	return acc, out, nil
}

// spread returns the largest |q − z| the codes and zero points of t allow.
func (t *Tensor) spread() int {
	lo, hi := t.Scheme.Limits()
	m := max(-lo, hi)
	for _, z := range t.Zeros {
		m = max(m, hi-int(z), int(z)-lo)
	}
	return m
}

// WeightOnly returns the product of x, activations [m, K] row-major, and
// the quantised weights w [K, N], dequantised exactly: each output
//
//	y[i, j] = Σₖ x[i, k]·ŵ[k, j],   ŵ = (q − z)·s as Dequantise gives it,
//
// (exact, except with a float zero point: then ŵ is (q − z)·s rounded once
// to float64, as Dequantise returns it),
//
// computed exactly (a big-integer sum of exact products) and rounded once
// to out: float64 (compare.Float64: rounded once to float64), float32,
// binary16, bfloat16, or any other compare.Format, with that format's
// overflow (compare.Format.Round). The reference a weight-only kernel is
// judged against is so the exact product of its inputs as stored, not the
// product with unquantised weights.
//
// Special cases are:
//
//	m, K or N = 0               empty or zero results
//	NaN or ±Inf in x            the float64 sum of the products (NaN or ±Inf), rounded to out
//	an exact sum beyond out's largest value  ±Inf (NaN for E4M3), as Round gives it
//	len(x) ≠ m·w.Rows           error ErrLength
//	an invalid out              error ErrOption
//	and those of Dequantise for w
func WeightOnly(x []float64, m int, w Tensor, out compare.Format) ([]float64, error) {
	return weightOnly("WeightOnly", x, m, w, out)
}

// WeightOnly32 is WeightOnly of float32 activations (widened exactly), its
// result rounded once to out and held in float32; out = compare.Float64,
// which float32 cannot hold, is taken as compare.Float32.
//
// Special cases are those of WeightOnly.
func WeightOnly32(x []float32, m int, w Tensor, out compare.Format) ([]float32, error) {
	if out == compare.Float64 {
		out = compare.Float32
	}
	return weightOnly("WeightOnly32", x, m, w, out)
}

func weightOnly[T num.Float](fn string, x []T, m int, w Tensor, out compare.Format) ([]T, error) {
	if err := out.Check(); err != nil {
		return nil, vocab.At(err, ErrOption, fn+": out")
	}
	if err := checkShape(fn, "x", len(x), m, w.Rows); err != nil {
		return nil, err
	}
	if err := checkShape(fn, "output", -1, m, w.Cols); err != nil {
		return nil, err
	}
	if _, err := w.check(fn); err != nil {
		return nil, err
	}
	wd, _ := Dequantise(w) // w is valid

	k, n := w.Rows, w.Cols
	y := make([]T, m*n)
	for i := range m {
		for j := range n {
			s := newExactSum()
			for p := range k {
				s.addProduct(float64(x[i*k+p]), wd[p*n+j], 1, 0)
			}
			y[i*n+j] = T(s.round(out)) // exact: the value is one of out's, within T
		}
	}
	return y, nil
}
