package quant

import (
	"fmt"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/vocab"
)

// FP8Matrix is a [Rows, Cols] matrix of OCP 8-bit floating-point codes
// (OCP 8-bit Floating Point Specification (OFP8), revision 1.0, 2023) with
// scales: element (r, c) means v·s, where v is the value the code's bit
// pattern encodes in Format (compare.E4M3 or compare.E5M2, decoded by
// compare.Format.Decode) and s its scale.
//
// Granularity and Channel place the scales as they do for Tensor: one for
// the tensor (PerTensor), or one per row (PerChannel, ChannelRows) or per
// column (PerChannel, ChannelCols). Every scale is a positive finite
// float32 value, so that v·s is exact in float64 (at most 4 + 24
// significand bits, and an exponent between 2^−165 and 2^144).
type FP8Matrix struct {
	Rows, Cols  int
	Codes       []uint8 // row-major bit patterns
	Format      compare.Format
	Granularity Granularity // PerTensor or PerChannel
	Channel     Channel     // the index the scales follow (PerChannel only)
	Scales      []float64
}

// check validates m for fn and returns its values v·s, row-major.
func (m *FP8Matrix) check(fn, arg string) ([]float64, error) {
	if err := checkShape(fn, arg, len(m.Codes), m.Rows, m.Cols); err != nil {
		return nil, err
	}
	if m.Format != compare.E4M3 && m.Format != compare.E5M2 {
		return nil, fmt.Errorf("%w: %s: %s.Format = %v; want e4m3 or e5m2", ErrOption, fn, arg, m.Format)
	}
	if err := m.Granularity.Check(); err != nil {
		return nil, vocab.At(err, ErrOption, fn+": "+arg+".Granularity")
	}
	if err := m.Channel.Check(); err != nil {
		return nil, vocab.At(err, ErrOption, fn+": "+arg+".Channel")
	}
	scaleOf := func(int, int) int { return 0 }
	blocks := 1
	switch {
	case m.Granularity == PerGroup:
		return nil, fmt.Errorf("%w: %s: %s.Granularity = %v; want per-tensor or per-channel", ErrOption, fn, arg, m.Granularity)
	case m.Granularity == PerChannel && m.Channel == ChannelRows:
		scaleOf, blocks = func(r, _ int) int { return r }, m.Rows
	case m.Granularity == PerChannel:
		scaleOf, blocks = func(_, c int) int { return c }, m.Cols
	}
	if len(m.Scales) != blocks {
		return nil, fmt.Errorf("%w: %s: %s.Scales has %d values; want %d (%v %v)", ErrLength, fn, arg, len(m.Scales), blocks, m.Granularity, m.Channel)
	}
	for i, s := range m.Scales {
		if !ScaleFloat32.contains(s) {
			return nil, fmt.Errorf("%w: %s: %s.Scales[%d] = %v; want a positive finite float32 value", ErrScale, fn, arg, i, s)
		}
	}
	out := make([]float64, len(m.Codes))
	for r := range m.Rows {
		for c := range m.Cols {
			v, err := m.Format.Decode(uint64(m.Codes[r*m.Cols+c])) // every 8-bit pattern decodes
			if err != nil {
				return nil, vocab.At(err, ErrCode, fn+": "+arg+".Codes")
			}
			out[r*m.Cols+c] = v * m.Scales[scaleOf(r, c)] // exact, or NaN/±Inf for such codes
		}
	}
	return out, nil
}

// DecodeFP8 returns the values of m's codes times their scales, v·s,
// row-major, each exact in float64 (see FP8Matrix). A NaN pattern gives
// NaN; an E5M2 infinity gives ±Inf.
//
// Special cases are:
//
//	Rows or Cols = 0            empty result
//	a Format other than E4M3, E5M2, or a per-group Granularity  error ErrOption
//	a scale ≤ 0, NaN, ±Inf or not a float32 value               error ErrScale
//	Codes or Scales of the wrong length                         error ErrLength
func DecodeFP8(m FP8Matrix) ([]float64, error) { return m.check("DecodeFP8", "m") }

// MatMulFP8 returns the product of two scaled FP8 matrices, a [M, K] and
// b [K, N]:
//
//	out[i, j] = Σₖ (va[i, k]·sa)·(vb[k, j]·sb)
//
// where va, vb are the values of the codes (OFP8 rev 1.0 bit layouts,
// through compare.Format.Decode) and sa, sb their scales: per tensor, per
// row of a (PerChannel, ChannelRows) or per column of b (PerChannel,
// ChannelCols), the scales the sum over k does not cross. The sum is exact
// (every term is a product of two exact float64 values, summed in a big
// integer) and rounded once to out: float64, float32, binary16, bfloat16
// or any other compare.Format, with that format's overflow
// (compare.Format.Round). A term with a NaN or infinite code gives the
// float64 sum of the products (NaN or ±Inf) rounded to out.
//
// Special cases are:
//
//	M, K or N = 0               empty or zero results
//	a.Cols ≠ b.Rows             error ErrSize
//	a per-column a or a per-row b   error ErrOption
//	an invalid out              error ErrOption
//	and those of DecodeFP8 for each operand
func MatMulFP8(a, b FP8Matrix, out compare.Format) ([]float64, error) {
	const fn = "MatMulFP8"
	if err := out.Check(); err != nil {
		return nil, vocab.At(err, ErrOption, fn+": out")
	}
	da, err := a.check(fn, "a")
	if err != nil {
		return nil, err
	}
	db, err := b.check(fn, "b")
	if err != nil {
		return nil, err
	}
	for _, o := range []struct {
		name string
		m    *FP8Matrix
		ok   Channel
	}{{"a", &a, ChannelRows}, {"b", &b, ChannelCols}} {
		if o.m.Granularity == PerChannel && o.m.Channel != o.ok {
			return nil, fmt.Errorf("%w: %s: %s = %v %v; want per-tensor or per-channel %v scales, which the sum over k does not cross", ErrOption, fn, o.name, o.m.Granularity, o.m.Channel, o.ok)
		}
	}
	if a.Cols != b.Rows {
		return nil, fmt.Errorf("%w: %s: b.Rows = %d; want a.Cols = %d", ErrSize, fn, b.Rows, a.Cols)
	}
	return exactProduct(fn, da, db, a.Rows, a.Cols, b.Cols, out)
}

// exactProduct returns the [m, n] product of x [m, k] and y [k, n], each
// output the exact sum rounded once to out.
func exactProduct(fn string, x, y []float64, m, k, n int, out compare.Format) ([]float64, error) {
	if err := checkShape(fn, "output", -1, m, n); err != nil {
		return nil, err
	}
	z := make([]float64, m*n)
	for i := range m {
		for j := range n {
			s := newExactSum()
			for p := range k {
				s.addProduct(x[i*k+p], y[p*n+j], 1, 0)
			}
			z[i*n+j] = s.round(out)
		}
	}
	return z, nil
}

// MatMulInt8To is MatMulInt8 with its rescaled result rounded once to out
// (float64, float32, binary16, bfloat16 or any other compare.Format, with
// that format's overflow) instead of to float64: out[i, j] = sa·sb·acc[i,
// j], the exact product rounded once. sa·sb·acc is exact in a big integer
// sum of one term, so no double rounding occurs for any out; with
// out = compare.Float64 the result is MatMulInt8's.
//
// Special cases are those of MatMulInt8, and an invalid out: error
// ErrOption.
func MatMulInt8To(a, b Tensor, out compare.Format) (acc []int32, y []float64, err error) {
	if err := out.Check(); err != nil {
		return nil, nil, vocab.At(err, ErrOption, "MatMulInt8To: out")
	}
	acc, y, err = matMulInt8("MatMulInt8To", a, b)
	if err != nil {
		return nil, nil, err
	}
	ga, _ := a.check("MatMulInt8To") // valid: checked above
	gb, _ := b.check("MatMulInt8To")
	n := b.Cols
	for i := range a.Rows {
		for j := range n {
			s := newExactSum()
			s.addProduct(a.Scales[ga.block(i, 0)]*b.Scales[gb.block(0, j)], float64(acc[i*n+j]), 1, 0) // the scale product is exact
			y[i*n+j] = s.round(out)
		}
	}
	return acc, y, nil
}

// narrowOut is the output format of a float32 twin: out, or float32 for
// compare.Float64, which float32 cannot hold.
func narrowOut(out compare.Format) compare.Format {
	if out == compare.Float64 {
		return compare.Float32
	}
	return out
}

// toFloat32 converts values that are already values of a format no wider
// than float32 (exactly), or rounds float64 values once.
func toFloat32(x []float64) []float32 {
	if x == nil {
		return nil
	}
	y := make([]float32, len(x))
	for i, v := range x {
		y[i] = float32(v)
	}
	return y
}

// DecodeFP832 is DecodeFP8 with each exact value rounded once to float32.
//
// Special cases are those of DecodeFP8.
func DecodeFP832(m FP8Matrix) ([]float32, error) {
	x, err := m.check("DecodeFP832", "m")
	return toFloat32(x), err
}

// MatMulFP832 is MatMulFP8 with its result held in float32: the exact sums
// rounded once to out, and out = compare.Float64, which float32 cannot
// hold, taken as compare.Float32.
//
// Special cases are those of MatMulFP8.
func MatMulFP832(a, b FP8Matrix, out compare.Format) ([]float32, error) {
	y, err := MatMulFP8(a, b, narrowOut(out))
	return toFloat32(y), err
}

// MatMulInt8To32 is MatMulInt8To with its result held in float32: the
// exact products rounded once to out, and out = compare.Float64 taken as
// compare.Float32.
//
// Special cases are those of MatMulInt8To.
func MatMulInt8To32(a, b Tensor, out compare.Format) (acc []int32, y []float32, err error) {
	acc, y64, err := MatMulInt8To(a, b, narrowOut(out))
	return acc, toFloat32(y64), err
}
