package attention

import (
	"math"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/mask"
)

// overflowShape and its inputs: q and k all ones, so every q·k is Dk = 2
// and every scaled product is 2·Scale; V rows 1, 2, 3 in both columns.
var overflowShape = Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 2, Lk: 3, Dk: 2, Dv: 2}

func overflowInputs() (q, k, v, d []float64) {
	s := overflowShape
	q, k, v, d = make([]float64, s.qLen()), make([]float64, s.kLen()), make([]float64, s.vLen()), make([]float64, s.oLen())
	for i := range q {
		q[i] = 1
	}
	for i := range k {
		k[i] = 1
	}
	for j := range s.Lk {
		v[2*j], v[2*j+1] = float64(j+1), float64(j+1)
	}
	for i := range d {
		d[i] = 0.5
	}
	return q, k, v, d
}

// overflowForms are forms, with Decode and Decode32 (the queries at the
// end of the keys).
func overflowForms() []form {
	return append(append([]form{}, forms...),
		form{"Decode", fwdForm(atEnd(Decode))},
		form{"Decode32", fwdForm(atEnd(Decode32))})
}

// atEnd is a decoding form with the queries at the last positions of the
// keys, pos = Lk − Lq.
func atEnd[E float32 | float64](f func(q, k, v []E, s Shape, pos int, o Options) ([]E, []E, error)) func(q, k, v []E, s Shape, o Options) ([]E, []E, error) {
	return func(q, k, v []E, s Shape, o Options) ([]E, []E, error) { return f(q, k, v, s, s.Lk-s.Lq, o) }
}

// TestOverflow: a call whose finite inputs make a logit NaN or ±Inf fails
// with ErrOverflow in every form, float64 and float32, instead of
// returning the NaN rows the overflow makes; the same inputs with a scale,
// bias or slope that keeps every logit finite succeed.
func TestOverflow(t *testing.T) {
	q, k, v, d := overflowInputs()
	s := overflowShape
	bias := make([]float64, s.Lq*s.Lk)
	bias[4] = 1.7e308 // query 1, key 1: 2e307 + 1.7e308 > MaxFloat64
	hide := make([]float64, s.Lq*s.Lk)
	hide[4] = math.Inf(-1)
	for _, tc := range []struct {
		name       string
		o          Options
		ok64, ok32 bool // every logit finite in float64, in float32
	}{
		// 2·1e308 > MaxFloat64 ≈ 1.8e308; 1e307 and more is +Inf in
		// float32 (MaxFloat32 ≈ 3.4e38), 2·1e38 is not.
		{"scale 1e308", Options{Scale: 1e308}, false, false},
		{"scale 1e307", Options{Scale: 1e307}, true, false},
		{"scale 1e38", Options{Scale: 1e38}, true, true},
		{"scale 2e38", Options{Scale: 2e38}, true, false},
		{"bias beyond the range", Options{Scale: 1e307, Bias: bias, BiasBatch: 1, BiasHeads: 1}, false, false},
		{"−Inf bias hides", Options{Scale: 1e38, Bias: hide, BiasBatch: 1, BiasHeads: 1}, true, true},
		// −m·|p − j| with |p − j| up to 2 (Lk = 3).
		{"slope·distance beyond the range", Options{Slopes: []float64{1e308, 1}, ALiBi: mask.ALiBiSymmetric}, false, false},
		{"slope 1e307", Options{Slopes: []float64{1e307, 1}, ALiBi: mask.ALiBiSymmetric}, true, false},
		{"slope 1e38", Options{Slopes: []float64{1e38, 1}, ALiBi: mask.ALiBiSymmetric}, true, true},
		// The cap's limit: c·tanh(±Inf/c) = ±c, a finite logit.
		{"scale 1e308 under a soft cap", Options{Scale: 1e308, SoftCap: 30}, true, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			for _, f := range overflowForms() {
				err := f.run(q, k, v, d, s, tc.o)
				ok := tc.ok64
				if strings.HasSuffix(f.fn, "32") {
					ok = tc.ok32
				}
				if ok {
					expect.NoError(t, err, f.fn)
				} else {
					ensure.Error(t, err, f.fn)
					checkError(t, err, ErrOverflow, f.fn, strings.TrimPrefix(err.Error(), ErrOverflow.Error()+": "+f.fn+": "))
				}
			}
		})
	}

	// The whole message names the first logit that overflowed.
	_, _, err := Forward(q, k, v, s, Options{Scale: 1e308})
	checkError(t, err, ErrOverflow, "Forward", "the logit of batch entry 0, query head 0, query 0, key 0 = +Inf from finite q, k and bias; "+
		"want Options.Scale (1e+308), SoftCap (0), Bias and Slopes such that every logit of finite inputs stays within ±1.798e+308, the float64 range")
	_, _, err = ForwardFast(q, k, v, s, Options{Scale: 1e307, Bias: bias, BiasBatch: 1, BiasHeads: 1})
	checkError(t, err, ErrOverflow, "ForwardFast", "the logit of batch entry 0, query head 0, query 1, key 1 = +Inf from finite q, k and bias; "+
		"want Options.Scale (1e+307), SoftCap (0), Bias and Slopes such that every logit of finite inputs stays within ±1.798e+308, the float64 range")

	// Scale 1e39 is finite in float64 but +Inf in float32 (MaxFloat32 ≈
	// 3.4e38): the twins overflow where the reference does not.
	_, _, err = Forward(q, k, v, s, Options{Scale: 1e39})
	ensure.NoError(t, err)
	_, _, err = Forward32(f32(q), f32(k), f32(v), s, Options{Scale: 1e39})
	checkError(t, err, ErrOverflow, "Forward32", "the logit of batch entry 0, query head 0, query 0, key 0 = +Inf from finite q, k and bias; "+
		"want Options.Scale (1e+39), SoftCap (0), Bias and Slopes such that every logit of finite inputs stays within ±3.403e+38, the float32 range")

	// Under the cap every logit is 30·tanh(+Inf) = 30: the softmax is
	// uniform, O = the mean of V's rows (1 + 2 + 3)/3 = 2, lse = 30 + ln 3.
	out, lse, err := ForwardFast(q, k, v, s, Options{Scale: 1e308, SoftCap: 30})
	ensure.NoError(t, err)
	for i := range out {
		expect.InDelta(t, 2, out[i], 4e-16)
	}
	for i := range lse {
		expect.InDelta(t, 30+math.Log(3), lse[i], 1e-14)
	}
}

// TestNonFiniteInputs: NaN and ±Inf in q and k are not overflows; their
// logits follow Forward's special cases in every form: a +Inf logit makes
// its row NaN, a NaN logit too, and a −Inf logit gives its key weight 0
// (a row of them is empty).
func TestNonFiniteInputs(t *testing.T) {
	inf := math.Inf(1)
	// One query, two keys, Dk = 2: q = (1, 0.5); key 0 = (−Inf, 1) has
	// logit −Inf, key 1 = (0.3, 1) the logit (0.3 + 0.5)/√2, so key 1 has
	// all the weight: O = v_1 = 7, lse = 0.8/√2.
	s := Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 1, Lk: 2, Dk: 2, Dv: 1}
	q, k, v := []float64{1, 0.5}, []float64{-inf, 1, 0.3, 1}, []float64{100, 7}
	for _, f := range []struct {
		fn  string
		run func(q, k, v []float64) ([]float64, []float64, error)
	}{
		{"Forward", func(q, k, v []float64) ([]float64, []float64, error) { return Forward(q, k, v, s, Options{}) }},
		{"ForwardTiled", func(q, k, v []float64) ([]float64, []float64, error) { return ForwardTiled(q, k, v, s, 1, Options{}) }},
		{"ForwardFast", func(q, k, v []float64) ([]float64, []float64, error) { return ForwardFast(q, k, v, s, Options{}) }},
		{"Decode", func(q, k, v []float64) ([]float64, []float64, error) { return Decode(q, k, v, s, 1, Options{}) }},
	} {
		out, lse, err := f.run(q, k, v)
		ensure.NoError(t, err, f.fn)
		expect.Equal(t, []float64{7}, out, f.fn)
		expect.Equal(t, []float64{0.8 / math.Sqrt2}, lse, f.fn)

		// Both keys −Inf: the row sees no key (EmptyRowZero: O = 0, lse = −Inf).
		out, lse, err = f.run([]float64{1, 0}, []float64{-inf, 1, -inf, 1}, v)
		ensure.NoError(t, err, f.fn)
		expect.Equal(t, []float64{0}, out, f.fn)
		expect.Equal(t, []float64{-inf}, lse, f.fn)

		// A +Inf logit, a NaN logit (Inf·0), a NaN in q: NaN rows, no error.
		for _, in := range [][3][]float64{
			{{1, 0.5}, {inf, 1, 0.3, 1}, v},
			{{0, 0.5}, {inf, 1, 0.3, 1}, v},
			{{math.NaN(), 0.5}, {1, 1, 0.3, 1}, v},
		} {
			out, lse, err = f.run(in[0], in[1], in[2])
			ensure.NoError(t, err, f.fn)
			expect.True(t, math.IsNaN(out[0]) && math.IsNaN(lse[0]), "%s %v: %v %v", f.fn, in, out, lse)
		}
	}
	// The backward forms take them as well (the gradients are NaN or
	// finite as the calculus gives; only the absence of an error is
	// checked here).
	for _, qq := range [][]float64{q, {math.NaN(), 0.5}} {
		_, err := Backward(qq, k, v, []float64{1}, nil, s, Options{})
		expect.NoError(t, err)
		_, err = BackwardFast32(f32(qq), f32(k), f32(v), []float32{1}, nil, s, Options{})
		expect.NoError(t, err)
	}
}
