package attention

import (
	"errors"
	"math"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
)

// form is an exported function that takes q, k and v, with its name, run
// on float64 arguments (a float32 twin on them rounded).
type form struct {
	fn  string
	run func(q, k, v, dOut []float64, s Shape, o Options) error
}

// forms are the exported functions that take q, k and v.
var forms = []form{
	{"Forward", fwdForm(Forward)},
	{"Forward32", fwdForm(Forward32)},
	{"ForwardTiled", fwdForm(tiledBy2(ForwardTiled))},
	{"ForwardTiled32", fwdForm(tiledBy2(ForwardTiled32))},
	{"ForwardFast", fwdForm(ForwardFast)},
	{"ForwardFast32", fwdForm(ForwardFast32)},
	{"Backward", bwdForm(Backward)},
	{"Backward32", bwdForm(Backward32)},
	{"BackwardFast", bwdForm(BackwardFast)},
	{"BackwardFast32", bwdForm(BackwardFast32)},
}

// fwdForm and bwdForm run a forward or backward function of element type
// E (no dLSE) on float64 arguments, converted to E, for its error.
func fwdForm[E float32 | float64](f func(q, k, v []E, s Shape, o Options) ([]E, []E, error)) func(q, k, v, dOut []float64, s Shape, o Options) error {
	return func(q, k, v, _ []float64, s Shape, o Options) error {
		_, _, err := f(num.Convert[E](q), num.Convert[E](k), num.Convert[E](v), s, o)
		return err
	}
}

func bwdForm[E float32 | float64, G any](f func(q, k, v, dOut, dLSE []E, s Shape, o Options) (G, error)) func(q, k, v, dOut []float64, s Shape, o Options) error {
	return func(q, k, v, d []float64, s Shape, o Options) error {
		_, err := f(num.Convert[E](q), num.Convert[E](k), num.Convert[E](v), num.Convert[E](d), nil, s, o)
		return err
	}
}

// tiledBy2 is a tiled form with blocks of 2 keys.
func tiledBy2[E float32 | float64](f func(q, k, v []E, s Shape, block int, o Options) ([]E, []E, error)) func(q, k, v []E, s Shape, o Options) ([]E, []E, error) {
	return func(q, k, v []E, s Shape, o Options) ([]E, []E, error) { return f(q, k, v, s, 2, o) }
}

var f32 = num.Convert[float32, float64]

var sentinels = []error{ErrShape, ErrLength, ErrOption, ErrBias, ErrMask, ErrOverflow}

// checkError asserts that err wraps want and no other sentinel of the
// package, and reads "<want>: <fn>: <detail>".
func checkError(t *testing.T, err, want error, fn, detail string) {
	t.Helper()
	ensure.Error(t, err)
	expect.ErrorIs(t, err, want)
	for _, other := range sentinels {
		if other != want {
			expect.False(t, errors.Is(err, other), "%q also wraps %v", err, other)
		}
	}
	expect.Equal(t, want.Error()+": "+fn+": "+detail, err.Error())
}

// TestErrors runs every form, float64 and float32, on each invalid input
// and checks the whole message; the float32 twins fail as their float64
// functions do, with the same sentinel and their own name.
func TestErrors(t *testing.T) {
	good := Shape{Batch: 2, HeadsQ: 4, HeadsKV: 2, Lq: 3, Lk: 5, Dk: 4, Dv: 2}
	pad, err := mask.KeyPadding([]int{5, 5, 5}) // three lengths for two batch entries
	ensure.NoError(t, err)
	// The mask package's own reasons, which the message quotes.
	padWhy := pad.Check(mask.Geometry{Batch: 2, Lq: 3, Lk: 5}).Error()
	causalWhy := mask.Causal().Check(mask.Geometry{Batch: 2, Lq: 3, Lk: 5, Align: mask.AlignStart, Offset: 3}).Error()
	nan := math.NaN()
	for _, tc := range []struct {
		name   string
		s      Shape
		o      Options
		dq, dk int // change of length of Q, K
		want   error
		detail string
	}{
		{"heads not a multiple", Shape{2, 8, 3, 3, 5, 4, 2}, Options{}, 0, 0, ErrShape, "Shape.HeadsQ = 8; want a multiple of HeadsKV = 3"},
		{"negative batch", Shape{-1, 4, 2, 3, 5, 4, 2}, Options{}, 0, 0, ErrShape, "Shape.Batch = -1; want ≥ 0"},
		{"Dk zero", Shape{2, 4, 2, 3, 5, 0, 2}, Options{}, 0, 0, ErrShape, "Shape.Dk = 0; want ≥ 1"},
		{"Dv zero", Shape{2, 4, 2, 3, 5, 4, 0}, Options{}, 0, 0, ErrShape, "Shape.Dv = 0; want ≥ 1"},
		{"negative Lq", Shape{2, 4, 2, -1, 5, 4, 2}, Options{}, 0, 0, ErrShape, "Shape.Lq = -1; want ≥ 0"},
		{"negative Lk", Shape{2, 4, 2, 3, -2, 4, 2}, Options{}, 0, 0, ErrShape, "Shape.Lk = -2; want ≥ 0"},
		{"no kv heads", Shape{2, 4, 0, 3, 5, 4, 2}, Options{}, 0, 0, ErrShape, "Shape.HeadsKV = 0; want ≥ 1"},
		{"Q too short", good, Options{}, -1, 0, ErrLength, "q has 95 elements; want Batch·HeadsQ·Lq·Dk = 2·4·3·4 = 96"},
		{"K too long", good, Options{}, 0, 1, ErrLength, "k has 81 elements; want Batch·HeadsKV·Lk·Dk = 2·2·5·4 = 80"},
		{"scale negative", good, Options{Scale: -1}, 0, 0, ErrOption, "Options.Scale = -1; want a positive finite number, or 0 for 1/√Dk"},
		{"scale NaN", good, Options{Scale: nan}, 0, 0, ErrOption, "Options.Scale = NaN; want a positive finite number, or 0 for 1/√Dk"},
		{"scale Inf", good, Options{Scale: math.Inf(1)}, 0, 0, ErrOption, "Options.Scale = +Inf; want a positive finite number, or 0 for 1/√Dk"},
		{"cap negative", good, Options{SoftCap: -30}, 0, 0, ErrOption, "Options.SoftCap = -30; want a positive finite number, or 0 for no cap"},
		{"cap NaN", good, Options{SoftCap: nan}, 0, 0, ErrOption, "Options.SoftCap = NaN; want a positive finite number, or 0 for no cap"},
		{"layout", good, Options{Layout: 7}, 0, 0, ErrOption, "Options.Layout = 7; want one of heads-major, seq-major"},
		{"group", good, Options{Group: 2}, 0, 0, ErrOption, "Options.Group = 2; want one of blocks, cycle"},
		{"empty row policy", good, Options{EmptyRow: 3}, 0, 0, ErrOption, "Options.EmptyRow = 3; want one of zero, nan"},
		{"ALiBi form", good, Options{Slopes: []float64{1, 1, 1, 1}, ALiBi: 3}, 0, 0, ErrOption, "Options.ALiBi = 3; want one of causal, symmetric, past-only"},
		{"bias heads", good, Options{Bias: make([]float64, 2*2*15), BiasBatch: 2, BiasHeads: 2}, 0, 0, ErrBias, "Options.BiasHeads = 2; want 1 or HeadsQ = 4"},
		{"bias batch", good, Options{Bias: make([]float64, 3*15), BiasBatch: 3, BiasHeads: 1}, 0, 0, ErrBias, "Options.BiasBatch = 3; want 1 or Batch = 2"},
		{"bias length", good, Options{Bias: make([]float64, 14), BiasBatch: 1, BiasHeads: 1}, 0, 0, ErrBias, "Options.Bias has 14 elements; want BiasBatch·BiasHeads·Lq·Lk = 1·1·3·5 = 15"},
		{"bias dims unset", good, Options{Bias: make([]float64, 15)}, 0, 0, ErrBias, "Options.BiasBatch = 0; want 1 or Batch = 2"},
		{"slopes length", good, Options{Slopes: []float64{1, 2}}, 0, 0, ErrLength, "Options.Slopes has 2 elements; want HeadsQ = 4"},
		{"slope NaN", good, Options{Slopes: []float64{1, nan, 1, 1}}, 0, 0, ErrOption, "Options.Slopes[1] = NaN; want a finite number"},
		{"sinks length", good, Options{Sinks: []float64{1}}, 0, 0, ErrLength, "Options.Sinks has 1 elements; want HeadsQ = 4"},
		{"sink +Inf", good, Options{Sinks: []float64{0, 0, math.Inf(1), 0}}, 0, 0, ErrOption, "Options.Sinks[2] = +Inf; want a finite number or −Inf"},
		{"mask wrong size", good, Options{Mask: pad}, 0, 0, ErrMask,
			"Options.Mask = KeyPadding([5 5 5]); want a mask that fits Batch = 2, Lq = 3, Lk = 5, Align = end, Offset = 0 (" + padWhy + ")"},
		{"causal query outside keys", good, Options{Mask: mask.Causal(), Align: mask.AlignStart, Offset: 3}, 0, 0, ErrMask,
			"Options.Mask = Causal; want a mask that fits Batch = 2, Lq = 3, Lk = 5, Align = start, Offset = 3 (" + causalWhy + ")"},
		{"ALiBi query outside keys", good, Options{Slopes: []float64{1, 1, 1, 1}, Align: mask.AlignStart, Offset: 4}, 0, 0, ErrOption,
			"Options.Offset = 4 (queries at key positions 4 … 6 with Align = start, Lq = 3, Lk = 5); want every query at a key position 0 … 4, as ALiBi needs"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			q := make([]float64, max(0, tc.s.Batch*tc.s.HeadsQ*tc.s.Lq*tc.s.Dk+tc.dq))
			k := make([]float64, max(0, tc.s.Batch*tc.s.HeadsKV*tc.s.Lk*tc.s.Dk+tc.dk))
			v := make([]float64, max(0, tc.s.Batch*tc.s.HeadsKV*tc.s.Lk*tc.s.Dv))
			dOut := make([]float64, max(0, tc.s.Batch*tc.s.HeadsQ*tc.s.Lq*tc.s.Dv))
			for _, f := range forms {
				checkError(t, f.run(q, k, v, dOut, tc.s, tc.o), tc.want, f.fn, tc.detail)
			}
		})
	}
}

func TestErrorsMaskWrapsBoth(t *testing.T) {
	pad, _ := mask.KeyPadding([]int{9})
	s := Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 2, Lk: 3, Dk: 1, Dv: 1}
	_, _, err := Forward(make([]float64, 2), make([]float64, 3), make([]float64, 3), s, Options{Mask: pad})
	expect.ErrorIs(t, err, ErrMask)
	expect.ErrorIs(t, err, mask.ErrValidLength)
}

// TestErrorsALiBiForm: a form that is none of mask.ALiBiForm's words is an
// option error of this package that wraps the mask package's sentinel too.
func TestErrorsALiBiForm(t *testing.T) {
	s := Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 2, Lk: 3, Dk: 1, Dv: 1}
	_, _, err := Forward(make([]float64, 2), make([]float64, 3), make([]float64, 3), s, Options{Slopes: []float64{0.5}, ALiBi: 9})
	expect.ErrorIs(t, err, ErrOption)
	expect.ErrorIs(t, err, mask.ErrALiBi)
	expect.EqualError(t, err, "attention: invalid option: Forward: Options.ALiBi = 9; want one of causal, symmetric, past-only")
	for _, f := range mask.ALiBiCausal.Values() {
		_, _, err := Forward(make([]float64, 2), make([]float64, 3), make([]float64, 3), s, Options{Slopes: []float64{0.5}, ALiBi: f})
		expect.NoError(t, err, "%v", f)
	}
}

func TestErrorsBackwardLengths(t *testing.T) {
	s := Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 2, Lk: 3, Dk: 2, Dv: 2}
	q, k, v := make([]float64, 8), make([]float64, 6), make([]float64, 6)
	for _, tc := range []struct {
		dOut, dLSE []float64
		detail     string
	}{
		{make([]float64, 7), nil, "dOut has 7 elements; want Batch·HeadsQ·Lq·Dv = 1·2·2·2 = 8"},
		{make([]float64, 8), make([]float64, 3), "dLSE has 3 elements; want Batch·HeadsQ·Lq = 1·2·2 = 4"},
		{make([]float64, 8), []float64{}, "dLSE has 0 elements; want Batch·HeadsQ·Lq = 1·2·2 = 4"},
	} {
		_, err := Backward(q, k, v, tc.dOut, tc.dLSE, s, Options{})
		checkError(t, err, ErrLength, "Backward", tc.detail)
		_, err = BackwardFast(q, k, v, tc.dOut, tc.dLSE, s, Options{})
		checkError(t, err, ErrLength, "BackwardFast", tc.detail)
		_, err = Backward32(f32(q), f32(k), f32(v), f32(tc.dOut), f32(tc.dLSE), s, Options{})
		checkError(t, err, ErrLength, "Backward32", tc.detail)
		_, err = BackwardFast32(f32(q), f32(k), f32(v), f32(tc.dOut), f32(tc.dLSE), s, Options{})
		checkError(t, err, ErrLength, "BackwardFast32", tc.detail)
	}
}

func TestErrorsTiledMergeDecode(t *testing.T) {
	s := Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 2, Lk: 3, Dk: 1, Dv: 1}
	q, k, v := make([]float64, 2), make([]float64, 3), make([]float64, 3)
	_, _, err := ForwardTiled(q, k, v, s, 0, Options{})
	checkError(t, err, ErrOption, "ForwardTiled", "block = 0; want ≥ 1 key per block")
	_, _, err = ForwardTiled32(f32(q), f32(k), f32(v), s, -1, Options{})
	checkError(t, err, ErrOption, "ForwardTiled32", "block = -1; want ≥ 1 key per block")

	for _, tc := range []struct {
		outA, lseA, outB, lseB []float64
		dv                     int
		want                   error
		detail                 string
	}{
		{make([]float64, 4), make([]float64, 2), make([]float64, 4), make([]float64, 3), 2, ErrLength, "lseB has 3 elements; want len(lseA) = 2"},
		{make([]float64, 5), make([]float64, 2), make([]float64, 4), make([]float64, 2), 2, ErrLength, "outA has 5 elements; want len(lseA)·dv = 2·2 = 4"},
		{make([]float64, 4), make([]float64, 2), make([]float64, 6), make([]float64, 2), 2, ErrLength, "outB has 6 elements; want len(lseB)·dv = 2·2 = 4"},
		{nil, nil, nil, nil, 0, ErrShape, "dv = 0; want ≥ 1"},
	} {
		_, _, err := Merge(tc.outA, tc.lseA, tc.outB, tc.lseB, tc.dv)
		checkError(t, err, tc.want, "Merge", tc.detail)
		_, _, err = Merge32(f32(tc.outA), f32(tc.lseA), f32(tc.outB), f32(tc.lseB), tc.dv)
		checkError(t, err, tc.want, "Merge32", tc.detail)
	}

	for _, tc := range []struct {
		pos    int
		k      []float64
		want   error
		detail string
	}{
		{2, k, ErrOption, "pos = 2; want 0 ≤ pos ≤ Lk − Lq = 1 (the Lq = 2 queries sit at positions pos … pos+Lq−1 of the Lk = 3 cached keys)"},
		{-1, k, ErrOption, "pos = -1; want 0 ≤ pos ≤ Lk − Lq = 1 (the Lq = 2 queries sit at positions pos … pos+Lq−1 of the Lk = 3 cached keys)"},
		{1, k[:2], ErrLength, "kCache has 2 elements; want Batch·HeadsKV·Lk·Dk = 1·1·3·1 = 3"},
	} {
		_, _, err := Decode(q, tc.k, v, s, tc.pos, Options{})
		checkError(t, err, tc.want, "Decode", tc.detail)
		_, _, err = Decode32(f32(q), f32(tc.k), f32(v), s, tc.pos, Options{})
		checkError(t, err, tc.want, "Decode32", tc.detail)
	}
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
				for _, e := range sentinels {
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
		// The float32 twins validate alike and return the same lengths.
		widen := func(out, lse []float32, err error) ([]float64, []float64, error) {
			return num.Convert[float64](out), num.Convert[float64](lse), err
		}
		q32, k32, v32 := f32(q), f32(k), f32(v)
		check(widen(ForwardTiled32(q32, k32, v32, s, 1+int(flags%5), o)))
		check(widen(ForwardFast32(q32, k32, v32, s, o)))
		check(widen(Decode32(q32, k32, v32, s, int(extra%4), o)))
		g32, err := BackwardFast32(q32, k32, v32, f32(dOut), nil, s, o)
		if err == nil && (len(g32.DQ) != len(q) || len(g32.DK) != len(k) || len(g32.DV) != len(v)) {
			t.Fatalf("fast32 %+v: gradient lengths %d %d %d", s, len(g32.DQ), len(g32.DK), len(g32.DV))
		}
	})
}

func TestErrorsHugeShape(t *testing.T) {
	// 2^32 · 2^32 · 1 · 1 elements would wrap int64 arithmetic around to 0.
	s := Shape{Batch: 1 << 32, HeadsQ: 1 << 32, HeadsKV: 1, Lq: 1, Lk: 1, Dk: 1, Dv: 1}
	_, _, err := Forward(nil, nil, nil, s, Options{})
	checkError(t, err, ErrShape, "Forward", "the size of q, Batch·HeadsQ·Lq·Dk = 4294967296·4294967296·1·1, a zero dimension counted as 1; want at most MaxElements = 268435456 elements")
}

// TestMaxElements: every tensor of a call, and the scratch of the fast
// forms, is refused beyond MaxElements = 2^28 elements before anything is
// allocated. Each shape below needs almost no input data (Lk = 0 needs no
// V, Batch = 0 none at all) and would otherwise allocate from 12 MiB per
// worker (the fast scratch) to 8 TiB (the output) and end the program.
func TestMaxElements(t *testing.T) {
	ensure.Equal(t, 1<<28, MaxElements)
	tests := []struct {
		name   string
		s      Shape
		detail string
	}{
		{"a Dv of 2^40 with no keys", Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 1, Lk: 0, Dk: 1, Dv: 1 << 40},
			"the size of v, Batch·HeadsKV·Lk·Dv = 1·1·0·1099511627776, a zero dimension counted as 1; want at most MaxElements = 268435456 elements"},
		{"the output of many query heads", Shape{Batch: 1, HeadsQ: 1 << 10, HeadsKV: 1, Lq: 1, Lk: 0, Dk: 1, Dv: 1 << 19},
			"the size of the output, Batch·HeadsQ·Lq·Dv = 1·1024·1·524288, a zero dimension counted as 1; want at most MaxElements = 268435456 elements"},
		{"keys of an empty batch", Shape{Batch: 0, HeadsQ: 1, HeadsKV: 1, Lq: 1, Lk: 1 << 40, Dk: 1, Dv: 1},
			"the size of k, Batch·HeadsKV·Lk·Dk = 0·1·1099511627776·1, a zero dimension counted as 1; want at most MaxElements = 268435456 elements"},
		{"queries of an empty batch", Shape{Batch: 0, HeadsQ: 1 << 10, HeadsKV: 1, Lq: 1 << 10, Lk: 1, Dk: 1 << 10, Dv: 1},
			"the size of q, Batch·HeadsQ·Lq·Dk = 0·1024·1024·1024, a zero dimension counted as 1; want at most MaxElements = 268435456 elements"},
		{"values, each factor fitting", Shape{Batch: 1 << 10, HeadsQ: 1, HeadsKV: 1, Lq: 0, Lk: 0, Dk: 1, Dv: 1 << 19},
			"the size of v, Batch·HeadsKV·Lk·Dv = 1024·1·0·524288, a zero dimension counted as 1; want at most MaxElements = 268435456 elements"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			q := make([]float64, tc.s.qLen())
			for _, f := range forms {
				checkError(t, f.run(q, nil, nil, nil, tc.s, Options{}), ErrShape, f.fn, tc.detail)
			}
		})
	}

	// At the limit: a call of 2^28 output elements whose data are empty.
	_, _, err := Forward(nil, nil, nil, Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 0, Lk: 0, Dk: 1, Dv: MaxElements}, Options{})
	expect.NoError(t, err)

	// The fast forms hold up to 3·64·Lk values per worker.
	s := Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 1, Lk: MaxElements/192 + 1, Dk: 1, Dv: 1}
	q, k, v, d := make([]float64, 1), make([]float64, s.Lk), make([]float64, s.Lk), make([]float64, 1)
	const scratch = "Shape.Lk = 1398102; want at most MaxElements/(3·64) = 1398101 keys, so that a worker's scratch of 3·64·Lk values fits MaxElements"
	_, _, err = ForwardFast(q, k, v, s, Options{})
	checkError(t, err, ErrShape, "ForwardFast", scratch)
	_, err = BackwardFast32(f32(q), f32(k), f32(v), f32(d), nil, s, Options{})
	checkError(t, err, ErrShape, "BackwardFast32", scratch)
	_, _, err = Forward(q, k, v, s, Options{})
	expect.NoError(t, err, "the direct form holds one row of Lk logits")
	s.Lk--
	_, _, err = ForwardFast(q, k[1:], v[1:], s, Options{})
	expect.NoError(t, err)
}
