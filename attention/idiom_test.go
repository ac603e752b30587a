package attention

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
)

// The tests of the precision idioms (Idiom, Options.Idiom): what the
// float32 instantiations compute with each word, and that the reference
// and the other forms ignore them.

// idioms are every combination of the two idiom fields.
func idioms() []Idiom {
	var all []Idiom
	for _, a := range AccumulateFloat32.Values() {
		for _, s := range ShiftMax.Values() {
			all = append(all, Idiom{Accumulation: a, Shift: s})
		}
	}
	return all
}

// uniform32 returns n values uniform in [−scale, scale), as float32 and
// as the same values in float64.
func uniform32(r *rand.Rand, n int, scale float64) ([]float32, []float64) {
	x := make([]float32, n)
	for i := range x {
		x[i] = float32(scale * (2*r.Float64() - 1))
	}
	return x, num.Convert[float64](x)
}

// TestAccumulationCostsItsFormat: a softmax sum of two or three terms
// rounded to bfloat16 after each addition has a relative error of a few
// times u = 2⁻⁸ (half a bfloat16 ulp), so the probabilities' largest
// relative error over 2000 short rows lies between 2⁻¹⁰ and 2⁻⁶; binary16
// (u = 2⁻¹¹) between 2⁻¹³ and 2⁻⁹; float32 accumulation is below 2⁻²⁰. On
// long rows the roundings add up: 256 logits, normwise error about 0.03
// (bfloat16), against 2e-7 for float32.
func TestAccumulationCostsItsFormat(t *testing.T) {
	r := rand.New(rand.NewPCG(31, 32))
	for _, c := range []struct {
		a      Accumulation
		lo, hi float64
	}{
		{AccumulateFloat32, 0, 0x1p-20},
		{AccumulateBFloat16, 0x1p-10, 0x1p-6},
		{AccumulateBinary16, 0x1p-13, 0x1p-9},
	} {
		worst := 0.0
		for range 2000 {
			n := 2 + r.IntN(2)
			x32, x := uniform32(r, n, 3)
			want, err := Softmax(x, n)
			ensure.NoError(t, err)
			got, err := Idiom{Accumulation: c.a}.Softmax32(x32, n)
			ensure.NoError(t, err)
			for j := range want {
				worst = math.Max(worst, math.Abs(float64(got[j])-want[j])/want[j])
			}
		}
		t.Logf("%v: largest relative error of a probability, rows of 2 or 3: %.3g (2^%.1f)", c.a, worst, math.Log2(worst))
		expect.True(t, worst > c.lo && worst <= c.hi, "%v: relative error %.3g; want in (%.3g, %.3g]", c.a, worst, c.lo, c.hi)

		x32, x := uniform32(r, 16*256, 4)
		want, err := Softmax(x, 256)
		ensure.NoError(t, err)
		got, err := Idiom{Accumulation: c.a}.Softmax32(x32, 256)
		ensure.NoError(t, err)
		t.Logf("%v: normwise error, 16 rows of 256: %.3g", c.a, golden.NormwiseRelErr(num.Convert[float64](got), want))
	}
}

// TestUnshiftedSoftmaxOverflows: without the maximum subtracted, e^s
// overflows float32 beyond s = ln(MaxFloat32) ≈ 88.72, which makes the row
// NaN (Inf/Inf) and its log-sum-exp +Inf; with binary16 sums the limit is
// ln 65504 ≈ 11.09: the sum is +Inf, the probabilities 0. Below the limits
// the unshifted softmax is as accurate as the shifted one, and the
// shifted softmax is accurate at every logit.
func TestUnshiftedSoftmaxOverflows(t *testing.T) {
	none := Idiom{Shift: ShiftNone}
	none16 := Idiom{Shift: ShiftNone, Accumulation: AccumulateBinary16}
	finite := func(x []float32) bool {
		for _, v := range x {
			if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
				return false
			}
		}
		return true
	}
	for _, c := range []struct {
		id     Idiom
		top    float32 // the largest logit of the row
		finite bool    // the row stays finite and sums to 1
	}{
		{none, 88, true}, {none, 89, false},
		{none16, 10, true}, {none16, 11.2, false}, // e^10 + e^9 + e^7 ≈ 31226; e^11.2 ≈ 73130
		{Idiom{}, 1000, true}, {Idiom{Accumulation: AccumulateBinary16}, 1000, true},
	} {
		x := []float32{c.top, c.top - 1, c.top - 3}
		y, err := c.id.Softmax32(x, 3)
		ensure.NoError(t, err)
		lse, err := c.id.LogSumExp32(x, 3)
		ensure.NoError(t, err)
		sum := y[0] + y[1] + y[2]
		ok := finite(y) && math.Abs(float64(sum)-1) < 1e-2 && finite(lse)
		expect.Equal(t, c.finite, ok, "%+v, logits %v: softmax %v (sum %v), log-sum-exp %v", c.id, x, y, sum, lse)
		if !c.finite {
			expect.True(t, math.IsInf(float64(lse[0]), 1), "%+v, logits %v: log-sum-exp %v; want +Inf", c.id, x, lse[0])
		}
	}
	y, err := none.Softmax32([]float32{89, 88, 0}, 3)
	ensure.NoError(t, err)
	expect.True(t, math.IsNaN(float64(y[0])), "e^89 = +Inf in float32: Inf/Inf = NaN, got %v", y)
	y, err = none16.Softmax32([]float32{12, 0}, 2)
	ensure.NoError(t, err)
	expect.Equal(t, []float32{0, 0}, y, "e^12 = 162755 > 65504: the binary16 sum is +Inf")

	// In attention: logits scaled to about 100 overflow the unshifted
	// float32 softmax of Forward32, with no ErrOverflow (every logit is
	// finite; the exponential overflows), while the plain Forward32 is fine.
	s := Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 2, Lk: 3, Dk: 4, Dv: 2}
	q := []float32{5, 5, 5, 5, 1, 0, 0, 0}
	k := []float32{5, 5, 5, 5, 0, 0, 0, 0, 1, 1, 1, 1}
	v := []float32{1, 2, 3, 4, 5, 6}
	o := Options{Scale: 1, Mask: mask.Full()}
	out, _, err := Forward32(q, k, v, s, o)
	ensure.NoError(t, err)
	expect.True(t, finite(out), "%v", out)
	o.Idiom = none
	out, lse, err := Forward32(q, k, v, s, o)
	ensure.NoError(t, err)
	expect.True(t, math.IsNaN(float64(out[0])), "logit 100: e^100 overflows float32: %v", out)
	expect.True(t, math.IsInf(float64(lse[0]), 1), "%v", lse)
	expect.True(t, finite(out[2:]), "the second row's logits are below 5: %v", out)
}

// TestIdiomPortIsForward32: Forward32 with bfloat16 accumulation is, bit for
// bit, the attention a float32 port with 16-bit accumulators computes,
// written out here in the plain way [common practice: products in float32,
// every running sum rounded to the accumulator's format], for one head of
// 3 queries on 5 keys.
func TestIdiomPortIsForward32(t *testing.T) {
	r := rand.New(rand.NewPCG(33, 34))
	const lq, lk, dk, dv = 3, 5, 8, 4
	q, _ := uniform32(r, lq*dk, 1)
	k, _ := uniform32(r, lk*dk, 1)
	v, _ := uniform32(r, lk*dv, 1)
	bf := func(x float32) float32 { return float32(num.BFloat16.Round(float64(x))) }
	add := func(acc, x float32) float32 { return float32(num.BFloat16.Add(float64(acc), float64(x))) }
	scale := float32(1 / math.Sqrt(dk))
	want := make([]float32, lq*dv)
	for i := range lq {
		s := make([]float32, lk)
		m := float32(math.Inf(-1))
		for j := range lk {
			var acc float32
			for d := range dk {
				acc = add(acc, float32(q[i*dk+d]*k[j*dk+d]))
			}
			s[j] = scale * acc
			m = max(m, s[j])
		}
		var sum float32
		for j := range s {
			s[j] = float32(math.Exp(float64(s[j] - m)))
			sum = add(sum, s[j])
		}
		sum = add(sum, 0) // the absent sink's e^−Inf
		for j := range s {
			p := s[j] / sum
			for d := range dv {
				want[i*dv+d] = add(want[i*dv+d], float32(p*v[j*dv+d]))
			}
		}
	}
	s := Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: lq, Lk: lk, Dk: dk, Dv: dv}
	got, _, err := Forward32(q, k, v, s, Options{Idiom: Idiom{Accumulation: AccumulateBFloat16}})
	ensure.NoError(t, err)
	expect.Equal(t, want, got)
	for _, x := range got {
		expect.Equal(t, bf(x), x, "every output is a running sum, a bfloat16 value")
	}
}

// TestIdiomLeavesTheReference: the float64 functions, Backward32 and the
// fast and tiled forms give the same bits whatever Options.Idiom says, and
// the zero Idiom's Softmax32 and LogSumExp32 are Softmax32's and
// LogSumExp32's; Decode32 honours the idiom as Forward32 does; a value
// with no word is refused.
func TestIdiomLeavesTheReference(t *testing.T) {
	r := rand.New(rand.NewPCG(35, 36))
	s := Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 3, Lk: 6, Dk: 4, Dv: 3}
	q32, q := uniform32(r, s.qLen(), 1)
	k32, k := uniform32(r, s.kLen(), 1)
	v32, v := uniform32(r, s.vLen(), 1)
	d32, d := uniform32(r, s.oLen(), 1)
	sinks := []float64{0.5, -1}
	type result struct {
		out, lse   []float64
		g          Grads
		dout, dlse []float64
		f32, t32   []float32
		g32        Grads32
	}
	run := func(id Idiom) result {
		o := Options{Mask: mask.Causal(), Sinks: sinks, Idiom: id}
		var res result
		var err error
		res.out, res.lse, err = Forward(q, k, v, s, o)
		ensure.NoError(t, err)
		res.g, err = Backward(q, k, v, d, nil, s, o)
		ensure.NoError(t, err)
		res.dout, res.dlse, err = Decode(q, k, v, s, 3, o)
		ensure.NoError(t, err)
		res.f32, _, err = ForwardFast32(q32, k32, v32, s, o)
		ensure.NoError(t, err)
		res.t32, _, err = ForwardTiled32(q32, k32, v32, s, 2, o)
		ensure.NoError(t, err)
		res.g32, err = Backward32(q32, k32, v32, d32, nil, s, o)
		ensure.NoError(t, err)
		return res
	}
	plain := run(Idiom{})
	for _, id := range idioms() {
		expect.Equal(t, plain, run(id), "%+v", id)
		o := Options{Mask: mask.Causal(), Idiom: id}
		fo, fl, err := Forward32(q32, k32, v32, s, o)
		ensure.NoError(t, err)
		do, dl, err := Decode32(q32, k32, v32, s, 3, Options{Idiom: id})
		ensure.NoError(t, err)
		expect.Equal(t, fo, do, "%+v: Decode32 at 3 is the causal Forward32", id)
		expect.Equal(t, fl, dl, "%+v", id)
	}
	x32, _ := uniform32(r, 12, 3)
	y, err := Softmax32(x32, 4)
	ensure.NoError(t, err)
	yi, err := Idiom{}.Softmax32(x32, 4)
	ensure.NoError(t, err)
	expect.Equal(t, y, yi)
	l, err := LogSumExp32(x32, 4)
	ensure.NoError(t, err)
	li, err := Idiom{}.LogSumExp32(x32, 4)
	ensure.NoError(t, err)
	expect.Equal(t, l, li)

	_, _, err = Forward32(q32, k32, v32, s, Options{Idiom: Idiom{Accumulation: 7}})
	expect.ErrorIs(t, err, ErrOption)
	expect.EqualError(t, err, "attention: invalid option: Forward32: Options.Idiom.Accumulation = 7; want one of float32, bfloat16, binary16")
	_, err = Idiom{Shift: 2}.Softmax32(x32, 4)
	expect.EqualError(t, err, "attention: invalid option: Idiom.Softmax32: Idiom.Shift = 2; want one of max, none")
}
