package ffn

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/internal/num"
)

// The tests of the accumulation idiom (Options.Accumulation): what
// Forward32 computes with each word, and that the reference and the other
// forms ignore it.

// to32 rounds a layer's input and weights to float32, and returns the
// float64 values of the rounded numbers, so that both precisions see the
// same problem.
func to32(x []float64, w Weights[float64]) ([]float64, Weights[float64], []float32, Weights[float32]) {
	x32 := num.Convert[float32](x)
	w32 := Weights[float32]{W1: num.Convert[float32](w.W1), B1: num.Convert[float32](w.B1), V: num.Convert[float32](w.V),
		C: num.Convert[float32](w.C), W2: num.Convert[float32](w.W2), B2: num.Convert[float32](w.B2)}
	back := Weights[float64]{W1: num.Convert[float64](w32.W1), B1: num.Convert[float64](w32.B1), V: num.Convert[float64](w32.V),
		C: num.Convert[float64](w32.C), W2: num.Convert[float64](w32.W2), B2: num.Convert[float64](w32.B2)}
	return num.Convert[float64](x32), back, x32, w32
}

// TestAccumulationIsThePort: Forward32 with bfloat16 accumulation is, bit
// for bit, a float32 plain ReLU layer whose every running sum is rounded
// to bfloat16 after each addition [common practice: 16-bit accumulators],
// written out here: products in float32, the sum over inputs ascending,
// then the bias.
func TestAccumulationIsThePort(t *testing.T) {
	r := rand.New(rand.NewPCG(41, 42))
	d := Dims{Rows: 3, In: 7, Hidden: 5, Out: 4}
	x64, w64 := randLayer(r, d, false, true)
	_, _, x, w := to32(x64, w64)
	add := func(a, b float32) float32 { return float32(num.BFloat16.Add(float64(a), float64(b))) }
	want := make([]float32, d.Rows*d.Out)
	for row := range d.Rows {
		h := make([]float32, d.Hidden)
		for j := range h {
			var s float32
			for i := range d.In {
				s = add(float32(x[row*d.In+i]*w.W1[i*d.Hidden+j]), s)
			}
			h[j] = max(add(s, w.B1[j]), 0)
		}
		for k := range d.Out {
			var s float32
			for j := range h {
				s = add(float32(h[j]*w.W2[j*d.Out+k]), s)
			}
			want[row*d.Out+k] = add(s, w.B2[k])
		}
	}
	got, err := Forward32(x, d, w, Options{Accumulation: AccumulateBFloat16})
	ensure.NoError(t, err)
	expect.Equal(t, want, got)
}

// TestAccumulationCostsItsFormat: on random layers of 64 inputs, 96 hidden
// units and 32 outputs (inputs and weights uniform in [−1, 1)), the
// normwise error of Forward32 against the reference is about the unit
// roundoff of the accumulation format times the square root of the sum's
// length: between 2⁻⁸ and 2⁻³ for bfloat16 (u = 2⁻⁸), between 2⁻¹¹ and 2⁻⁶
// for binary16 (u = 2⁻¹¹), below 1e-6 for float32; gated layers too.
func TestAccumulationCostsItsFormat(t *testing.T) {
	r := rand.New(rand.NewPCG(43, 44))
	d := Dims{Rows: 8, In: 64, Hidden: 96, Out: 32}
	for _, gated := range []bool{false, true} {
		o := Options{Act: ActSiLU, Gated: gated}
		x, w, x32, w32 := to32(randLayer(r, d, gated, true))
		want, err := Forward(x, d, w, o)
		ensure.NoError(t, err)
		for _, c := range []struct {
			a      Accumulation
			lo, hi float64
		}{
			{AccumulateFloat32, 0, 1e-6},
			{AccumulateBFloat16, 0x1p-8, 0x1p-3},
			{AccumulateBinary16, 0x1p-11, 0x1p-6},
		} {
			o.Accumulation = c.a
			got, err := Forward32(x32, d, w32, o)
			ensure.NoError(t, err)
			e := golden.NormwiseRelErr(num.Convert[float64](got), want)
			t.Logf("gated %v, %v accumulation: normwise error %.3g (2^%.1f)", gated, c.a, e, math.Log2(e))
			expect.True(t, e > c.lo && e <= c.hi, "gated %v, %v: normwise error %.3g; want in (%.3g, %.3g]", gated, c.a, e, c.lo, c.hi)
		}
	}
}

// TestAccumulationLeavesTheReference: Forward, Backward, Backward32,
// ForwardFast32 and BackwardFast32 give the same bits whatever
// Options.Accumulation says; a value with no word is refused.
func TestAccumulationLeavesTheReference(t *testing.T) {
	r := rand.New(rand.NewPCG(45, 46))
	d := Dims{Rows: 2, In: 6, Hidden: 4, Out: 3}
	x, w, x32, w32 := to32(randLayer(r, d, true, true))
	dy, _ := randLayer(r, Dims{Rows: d.Rows, In: d.Out, Hidden: 1, Out: 1}, false, false)
	dy32 := num.Convert[float32](dy)
	type result struct {
		y, dx        []float64
		g            Weights[float64]
		f32, dx32    []float32
		g32, fastG32 Weights[float32]
	}
	run := func(a Accumulation) result {
		o := Options{Act: ActGELU, Gated: true, Accumulation: a}
		var res result
		var err error
		res.y, err = Forward(x, d, w, o)
		ensure.NoError(t, err)
		res.dx, res.g, err = Backward(x, dy, d, w, o)
		ensure.NoError(t, err)
		res.f32, err = ForwardFast32(x32, d, w32, o)
		ensure.NoError(t, err)
		res.dx32, res.g32, err = Backward32(x32, dy32, d, w32, o)
		ensure.NoError(t, err)
		_, res.fastG32, err = BackwardFast32(x32, dy32, d, w32, o)
		ensure.NoError(t, err)
		return res
	}
	plain := run(AccumulateFloat32)
	for _, a := range AccumulateFloat32.Values() {
		expect.Equal(t, plain, run(a), "%v", a)
	}
	_, err := Forward32(x32, d, w32, Options{Accumulation: 5})
	expect.ErrorIs(t, err, ErrOption)
	expect.EqualError(t, err, "ffn: invalid option: Forward32: Options.Accumulation = 5; want one of float32, bfloat16, binary16")
}
