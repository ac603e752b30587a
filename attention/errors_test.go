package attention

import (
	"errors"
	"math"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
)

func TestErrors(t *testing.T) {
	good := Shape{Batch: 2, HeadsQ: 4, HeadsKV: 2, Lq: 3, Lk: 5, Dk: 4, Dv: 2}
	pad, err := mask.KeyPadding([]int{5, 5, 5}) // three lengths for two batch entries
	require.NoError(t, err)
	nan := math.NaN()
	for _, tc := range []struct {
		name     string
		s        Shape
		o        Options
		dq, dk   int // change of length of Q, K
		want     error
		contains string
	}{
		{"heads not a multiple", Shape{2, 8, 3, 3, 5, 4, 2}, Options{}, 0, 0, ErrShape, "K has 3 heads, Q has 8; 8 is not a multiple of 3"},
		{"Dk zero", Shape{2, 4, 2, 3, 5, 0, 2}, Options{}, 0, 0, ErrShape, "Dk = 0"},
		{"Dv zero", Shape{2, 4, 2, 3, 5, 4, 0}, Options{}, 0, 0, ErrShape, "Dv = 0"},
		{"negative Lq", Shape{2, 4, 2, -1, 5, 4, 2}, Options{}, 0, 0, ErrShape, "Lq = -1"},
		{"no kv heads", Shape{2, 4, 0, 3, 5, 4, 2}, Options{}, 0, 0, ErrShape, "HeadsKV = 0"},
		{"Q too short", good, Options{}, -1, 0, ErrLength, "Q has 95 elements; shape [2 4 3 4] = 96"},
		{"K too long", good, Options{}, 0, 1, ErrLength, "K has 81 elements; shape [2 2 5 4] = 80"},
		{"scale negative", good, Options{Scale: -1}, 0, 0, ErrOption, "Scale = -1"},
		{"scale NaN", good, Options{Scale: nan}, 0, 0, ErrOption, "Scale = NaN"},
		{"scale Inf", good, Options{Scale: math.Inf(1)}, 0, 0, ErrOption, "Scale = +Inf"},
		{"cap negative", good, Options{SoftCap: -30}, 0, 0, ErrOption, "SoftCap = -30"},
		{"cap NaN", good, Options{SoftCap: nan}, 0, 0, ErrOption, "SoftCap = NaN"},
		{"layout", good, Options{Layout: 7}, 0, 0, ErrOption, "attention: invalid option: layout = 7; want one of heads-major, seq-major"},
		{"group", good, Options{Group: 2}, 0, 0, ErrOption, "attention: invalid option: group map = 2; want one of blocks, cycle"},
		{"empty row policy", good, Options{EmptyRow: 3}, 0, 0, ErrOption, "attention: invalid option: empty-row policy = 3; want one of zero, nan"},
		{"ALiBi form", good, Options{Slopes: []float64{1, 1, 1, 1}, ALiBi: 3}, 0, 0, mask.ErrALiBi, "ALiBi form = 3; want one of causal, symmetric, past-only"},
		{"bias heads", good, Options{Bias: make([]float64, 2*2*15), BiasBatch: 2, BiasHeads: 2}, 0, 0, ErrBias, "BiasHeads = 2; want 1 or HeadsQ = 4"},
		{"bias batch", good, Options{Bias: make([]float64, 3*15), BiasBatch: 3, BiasHeads: 1}, 0, 0, ErrBias, "BiasBatch = 3; want 1 or Batch = 2"},
		{"bias length", good, Options{Bias: make([]float64, 14), BiasBatch: 1, BiasHeads: 1}, 0, 0, ErrBias, "Bias has 14 elements; shape [1 1 3 5] = 15"},
		{"bias dims unset", good, Options{Bias: make([]float64, 15)}, 0, 0, ErrBias, "BiasBatch = 0"},
		{"slopes length", good, Options{Slopes: []float64{1, 2}}, 0, 0, ErrLength, "Slopes has 2 elements; want one per query head, HeadsQ = 4"},
		{"slope NaN", good, Options{Slopes: []float64{1, nan, 1, 1}}, 0, 0, ErrOption, "Slopes[1] = NaN"},
		{"sinks length", good, Options{Sinks: []float64{1}}, 0, 0, ErrLength, "Sinks has 1 elements"},
		{"sink +Inf", good, Options{Sinks: []float64{0, 0, math.Inf(1), 0}}, 0, 0, ErrOption, "Sinks[2] = +Inf"},
		{"mask wrong size", good, Options{Mask: pad}, 0, 0, ErrMask, "KeyPadding has 3 valid lengths, Batch = 2"},
		{"causal query outside keys", good, Options{Mask: mask.Causal(), Align: mask.AlignStart, Offset: 3}, 0, 0, ErrMask, "Offset = 3"},
		{"ALiBi query outside keys", good, Options{Slopes: []float64{1, 1, 1, 1}, Align: mask.AlignStart, Offset: 4}, 0, 0, ErrOption, "key positions 4 … 6"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			q := make([]float64, max(0, tc.s.Batch*tc.s.HeadsQ*tc.s.Lq*tc.s.Dk+tc.dq))
			k := make([]float64, max(0, tc.s.Batch*tc.s.HeadsKV*tc.s.Lk*tc.s.Dk+tc.dk))
			v := make([]float64, max(0, tc.s.Batch*tc.s.HeadsKV*tc.s.Lk*tc.s.Dv))
			dOut := make([]float64, max(0, tc.s.Batch*tc.s.HeadsQ*tc.s.Lq*tc.s.Dv))
			check := func(err error) {
				t.Helper()
				require.Error(t, err)
				assert.ErrorIs(t, err, tc.want)
				assert.Contains(t, err.Error(), tc.contains)
			}
			_, _, err := Forward(q, k, v, tc.s, tc.o)
			check(err)
			_, _, err = Forward32(num.Convert[float32](q), num.Convert[float32](k), num.Convert[float32](v), tc.s, tc.o)
			check(err)
			_, _, err = ForwardTiled(q, k, v, tc.s, 2, tc.o)
			check(err)
			_, _, err = ForwardFast(q, k, v, tc.s, tc.o)
			check(err)
			_, err = Backward(q, k, v, dOut, nil, tc.s, tc.o)
			check(err)
			_, err = BackwardFast(q, k, v, dOut, nil, tc.s, tc.o)
			check(err)
		})
	}
}

func TestErrorsMaskWrapsBoth(t *testing.T) {
	pad, _ := mask.KeyPadding([]int{9})
	s := Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 2, Lk: 3, Dk: 1, Dv: 1}
	_, _, err := Forward(make([]float64, 2), make([]float64, 3), make([]float64, 3), s, Options{Mask: pad})
	assert.ErrorIs(t, err, ErrMask)
	assert.ErrorIs(t, err, mask.ErrValidLength)
}

// TestErrorsALiBiForm: a form that is none of mask.ALiBiForm's words is an
// option error of this package that wraps the mask package's sentinel too.
func TestErrorsALiBiForm(t *testing.T) {
	s := Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 2, Lk: 3, Dk: 1, Dv: 1}
	_, _, err := Forward(make([]float64, 2), make([]float64, 3), make([]float64, 3), s, Options{Slopes: []float64{0.5}, ALiBi: 9})
	assert.ErrorIs(t, err, ErrOption)
	assert.ErrorIs(t, err, mask.ErrALiBi)
	assert.ErrorContains(t, err, "ALiBi form = 9; want one of causal, symmetric, past-only")
	for _, f := range mask.ALiBiCausal.Values() {
		_, _, err := Forward(make([]float64, 2), make([]float64, 3), make([]float64, 3), s, Options{Slopes: []float64{0.5}, ALiBi: f})
		assert.NoError(t, err, "%v", f)
	}
}

func TestErrorsBackwardLengths(t *testing.T) {
	s := Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 2, Lk: 3, Dk: 2, Dv: 2}
	q, k, v := make([]float64, 8), make([]float64, 6), make([]float64, 6)
	_, err := Backward(q, k, v, make([]float64, 7), nil, s, Options{})
	assert.ErrorIs(t, err, ErrLength)
	assert.ErrorContains(t, err, "dOut has 7 elements; shape [1 2 2 2] = 8")
	_, err = Backward(q, k, v, make([]float64, 8), make([]float64, 3), s, Options{})
	assert.ErrorIs(t, err, ErrLength)
	assert.ErrorContains(t, err, "dLSE has 3 elements; shape [1 2 2] = 4")
	_, err = Backward32(num.Convert[float32](q), num.Convert[float32](k), num.Convert[float32](v), make([]float32, 8), make([]float32, 5), s, Options{})
	assert.ErrorIs(t, err, ErrLength)
}

func TestErrorsTiledMergeDecode(t *testing.T) {
	s := Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 2, Lk: 3, Dk: 1, Dv: 1}
	q, k, v := make([]float64, 2), make([]float64, 3), make([]float64, 3)
	_, _, err := ForwardTiled(q, k, v, s, 0, Options{})
	assert.ErrorIs(t, err, ErrOption)
	assert.ErrorContains(t, err, "block = 0")
	_, _, err = Merge(make([]float64, 4), make([]float64, 2), make([]float64, 4), make([]float64, 3), 2)
	assert.ErrorIs(t, err, ErrLength)
	assert.ErrorContains(t, err, "lseA has 2 rows, lseB has 3")
	_, _, err = Merge(make([]float64, 5), make([]float64, 2), make([]float64, 4), make([]float64, 2), 2)
	assert.ErrorIs(t, err, ErrLength)
	_, _, err = Merge(nil, nil, nil, nil, 0)
	assert.ErrorIs(t, err, ErrShape)
	_, _, err = Decode(q, k, v, s, 2, Options{})
	assert.ErrorIs(t, err, ErrOption)
	assert.ErrorContains(t, err, "pos = 2 with Lq = 2 puts queries at positions 2 … 3; the cache holds Lk = 3 keys")
	_, _, err = Decode(q, k, v, s, -1, Options{})
	assert.ErrorIs(t, err, ErrOption)
}

// FuzzForward drives every form with shapes and options from the fuzzer and
// asserts that nothing panics, that an error matches a sentinel, and that a
// result has the promised lengths.
func FuzzForward(f *testing.F) {
	f.Add(uint8(1), uint8(2), uint8(1), uint8(3), uint8(4), uint8(2), uint8(2), uint8(0), int8(0), 0.0, 0.0, uint8(0), int16(0))
	f.Add(uint8(2), uint8(4), uint8(2), uint8(1), uint8(9), uint8(3), uint8(1), uint8(0xff), int8(3), 0.5, 30.0, uint8(7), int16(-1))
	f.Add(uint8(0), uint8(3), uint8(2), uint8(0), uint8(0), uint8(0), uint8(1), uint8(3), int8(-2), -1.0, math.NaN(), uint8(1), int16(5))
	f.Fuzz(func(t *testing.T, b, hq, hkv, lq, lk, dk, dv, flags uint8, offset int8, scale, softCap float64, maskKind uint8, extra int16) {
		s := Shape{int(b % 4), int(hq % 9), int(hkv % 5), int(lq % 12), int(lk % 12), int(dk % 6), int(dv % 6)}
		if flags&0x80 != 0 {
			s.Lq, s.Dk = -int(lq%3), -int(dk%2)
		}
		o := Options{Layout: Layout(flags & 1), Group: GroupMap(flags >> 1 & 1), EmptyRow: EmptyRow(flags >> 2 & 1), Scale: scale, SoftCap: softCap, Offset: int(offset)}
		if flags&8 != 0 {
			o.Align = mask.AlignStart
		}
		n := max(0, s.HeadsQ)
		if flags&16 != 0 {
			o.Slopes = make([]float64, max(0, n+int(extra%2)))
			for i := range o.Slopes {
				o.Slopes[i] = 0.5
			}
			o.ALiBi = mask.ALiBiForm(uint16(extra) % 4) // 3 is no form
		}
		if flags&32 != 0 {
			o.Sinks = make([]float64, n)
		}
		if flags&64 != 0 {
			o.Bias, o.BiasBatch, o.BiasHeads = make([]float64, max(0, s.Lq*s.Lk+int(extra%3))), 1, 1
		}
		var err error
		switch maskKind % 8 {
		case 1:
			o.Mask = mask.Causal()
		case 2:
			o.Mask, err = mask.Window(int(extra))
		case 3:
			o.Mask, err = mask.Band(int(extra%5), int(extra%3))
		case 4:
			o.Mask, err = mask.Prefix(int(extra % 8))
		case 5:
			o.Mask, err = mask.KeyPadding([]int{int(extra % 8), 1, 2}[:max(0, min(3, s.Batch))])
		case 6:
			o.Mask, err = mask.Packed([]int{0, int(extra%6) + 1, max(0, s.Lk)}, mask.BlockCausal)
		}
		if err != nil {
			return // not a mask; the mask package tests its own errors
		}
		size := func(x int) int { return max(0, min(x, 1<<12)) }
		q := make([]float64, size(s.qLen()+int(extra%2)))
		k := make([]float64, size(s.kLen()))
		v := make([]float64, size(s.vLen()))
		for i := range q {
			q[i] = float64(i%7) - 3
		}
		for i := range k {
			k[i] = float64(i%5) - 2
		}
		check := func(out, lse []float64, err error) {
			if err != nil {
				for _, e := range []error{ErrShape, ErrLength, ErrOption, ErrBias, ErrMask} {
					if errors.Is(err, e) {
						return
					}
				}
				t.Fatalf("error matches no sentinel: %v", err)
			}
			if len(out) != s.oLen() || len(lse) != s.lseLen() {
				t.Fatalf("%+v: got %d, %d elements", s, len(out), len(lse))
			}
		}
		check(Forward(q, k, v, s, o))
		check(ForwardTiled(q, k, v, s, 1+int(flags%5), o))
		check(ForwardFast(q, k, v, s, o))
		dOut := make([]float64, size(s.oLen()))
		g, err := Backward(q, k, v, dOut, nil, s, o)
		if err == nil && (len(g.DQ) != len(q) || len(g.DK) != len(k) || len(g.DV) != len(v)) {
			t.Fatalf("%+v: gradient lengths %d %d %d", s, len(g.DQ), len(g.DK), len(g.DV))
		}
		g, err = BackwardFast(q, k, v, dOut, nil, s, o)
		if err == nil && (len(g.DQ) != len(q) || len(g.DK) != len(k) || len(g.DV) != len(v)) {
			t.Fatalf("fast %+v: gradient lengths %d %d %d", s, len(g.DQ), len(g.DK), len(g.DV))
		}
	})
}

func TestErrorsHugeShape(t *testing.T) {
	// 2^32 · 2^32 · 1 · 1 elements would wrap int64 arithmetic around to 0.
	s := Shape{Batch: 1 << 32, HeadsQ: 1 << 32, HeadsKV: 1, Lq: 1, Lk: 1, Dk: 1, Dv: 1}
	_, _, err := Forward(nil, nil, nil, s, Options{})
	assert.ErrorIs(t, err, ErrShape)
	assert.ErrorContains(t, err, "more than this package handles")
}
