package block_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/posenc"
)

// Bad input: each case breaks one argument of a valid call and names the
// sentinel and a part of the message (the argument and what is wanted).
func TestErrors(t *testing.T) {
	base := variants()["pre-rms-gqa"].make("pre-rms-gqa", 3, 5) // OutByIn, past 3, 4 heads on 1
	lbase := variants()["pre-layer"].make("pre-layer", 3, 5)
	par := variants()["parallel-rms"].make("parallel-rms", 3, 5)
	cases := []struct {
		name   string
		s      setup
		edit   func(s *setup)
		target error
		text   string
	}{
		{"missing Q", base, func(s *setup) { s.w.Q = nil }, block.ErrWeight, "Weights.Q is missing; want [16, 8] = 128 (out-by-in)"},
		{"wrong K", base, func(s *setup) { s.w.K = s.w.K[:3] }, block.ErrWeight, "Weights.K has 3 elements; want [4, 8] = 32 (out-by-in)"},
		{"wrong O in-by-out", lbase, func(s *setup) { s.w.O = s.w.O[:5] }, block.ErrWeight, "Weights.O has 5 elements; want [8, 8] = 64 (in-by-out)"},
		{"wrong bias", lbase, func(s *setup) { s.w.QBias = s.w.QBias[:2] }, block.ErrWeight, "Weights.QBias has 2 elements; want [8] = 8"},
		{"wrong norm", base, func(s *setup) { s.w.Norm1 = s.w.Norm1[:2] }, block.ErrWeight, "Weights.Norm1 has 2 elements"},
		{"rms bias", base, func(s *setup) { s.w.Norm1Bias = make([]float64, 8) }, block.ErrWeight, "Weights.Norm1Bias has 8 elements; want none"},
		{"parallel norm2", par, func(s *setup) { s.w.Norm2 = make([]float64, 8) }, block.ErrWeight, "Weights.Norm2 has 8 elements; want none"},
		{"missing W2", base, func(s *setup) { s.w.FFN.W2 = nil }, ffn.ErrWeightLen, "W2"},
		{"past K short", base, func(s *setup) { s.past.K = s.past.K[:4] }, block.ErrCache, "past K has 4 elements; want [Past, HeadsKV, HeadDim] = [3, 1, 4] = 12"},
		{"past V long", base, func(s *setup) { s.past.V = append(s.past.V, 1) }, block.ErrCache, "past V has 13 elements"},
		{"past without Dims.Past", base, func(s *setup) { s.d.Past = 0 }, block.ErrCache, "past K has 12 elements; want"},
		{"x", base, func(s *setup) { s.x = s.x[:7] }, block.ErrShape, "x has 7 elements; want Tokens·Width = 3·8 = 24"},
		{"heads", base, func(s *setup) { s.d.HeadsKV = 3 }, block.ErrShape, "Dims.Heads = 4; want a multiple of HeadsKV = 3"},
		{"negative past", base, func(s *setup) { s.d.Past = -1 }, block.ErrShape, "Dims.Past = -1"},
		{"huge", base, func(s *setup) { s.d.Tokens, s.d.Hidden = 1<<20, 1<<20 }, block.ErrShape, "MaxElements"},
		{"huge past", base, func(s *setup) { s.d.Past = math.MaxInt }, block.ErrShape, "Dims.Past"},
		{"form", base, func(s *setup) { s.o.Form = 7 }, block.ErrOption, "Options.Form"},
		{"norm kind", base, func(s *setup) { s.o.NormKind = -1 }, block.ErrOption, "Options.NormKind"},
		{"weight order", base, func(s *setup) { s.o.WeightOrder = 9 }, block.ErrOption, "Options.WeightOrder"},
		{"ffn layout", base, func(s *setup) { s.o.WeightOrder = ffn.InByOut; s.o.FFN.Layout = ffn.OutByIn }, block.ErrOption, "Options.FFN.Layout"},
		{"attention layout", base, func(s *setup) { s.o.Attention.Layout = attention.SeqMajor }, block.ErrOption, "Options.Attention.Layout"},
		{"attention offset", base, func(s *setup) { s.o.Attention.Offset = 2 }, block.ErrOption, "Options.Attention.Offset = 2"},
		{"rotary dim", base, func(s *setup) { s.o.Rotary = &posenc.Rotary{Dim: 8} }, block.ErrOption, "Options.Rotary.Dim = 8; want HeadDim = 4"},
		{"rotary base", base, func(s *setup) { s.o.Rotary = &posenc.Rotary{Dim: 4, Base: 0.5} }, posenc.ErrBase, "Base"},
		{"stage", base, func(s *setup) { s.o.Keep = []block.Stage{"query"} }, block.ErrOption, `Options.Keep[0] = "query"`},
		{"epsilon", base, func(s *setup) { s.o.Norm.Epsilon = 0 }, norm.ErrEpsilon, "Epsilon"},
		{"sinks", base, func(s *setup) { s.o.Attention.Sinks = []float64{1} }, attention.ErrLength, "Sinks"},
		{"activation", base, func(s *setup) { s.o.FFN.Act = 99 }, ffn.ErrOption, "Act"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := c.s
			c.edit(&s)
			for _, f := range []struct {
				name string
				fn   func([]float64, block.Dims, block.Weights[float64], block.Cache[float64], block.Options) (block.Result[float64], error)
			}{{"Forward", block.Forward}, {"ForwardFast", block.ForwardFast}} {
				_, err := f.fn(s.x, s.d, s.w, s.past, s.o)
				if expect.ErrorIs(t, err, c.target, f.name) {
					expect.True(t, strings.Contains(err.Error(), c.text), "%s: %v; want it to hold %q", f.name, err, c.text)
				}
			}
		})
	}
}

// No input makes a call panic: random edits of a valid call (lengths cut,
// sizes changed, conventions out of range) give a result or an error.
func TestNoPanic(t *testing.T) {
	sentinels := []error{block.ErrShape, block.ErrWeight, block.ErrCache, block.ErrOption, ffn.ErrWeightLen, ffn.ErrShape,
		ffn.ErrHidden, attention.ErrShape, attention.ErrLength, attention.ErrOption, attention.ErrMask, posenc.ErrDim}
	r := rand.New(rand.NewPCG(9, 9))
	names := []string{"pre-layer", "post-layer", "parallel-rms", "pre-rms-gqa", "cycle-extras", "post-rms-order"}
	for i := range 400 {
		s := variants()[names[i%len(names)]].make("nopanic", 1+r.IntN(3), uint64(i))
		cut := func(x []float64) []float64 {
			if len(x) == 0 {
				return x
			}
			return x[:r.IntN(len(x))]
		}
		switch r.IntN(12) {
		case 0:
			s.w.Q = cut(s.w.Q)
		case 1:
			s.w.FFN.W1 = cut(s.w.FFN.W1)
		case 2:
			s.past.K = cut(s.past.K)
		case 3:
			s.d.Width = r.IntN(20) - 5
		case 4:
			s.d.Heads = r.IntN(6) - 1
		case 5:
			s.d.HeadDim = r.IntN(8) - 1
		case 6:
			s.d.Past = r.IntN(8) - 2
		case 7:
			s.o.Form = block.Form(r.IntN(5) - 1)
		case 8:
			s.d.Tokens = r.IntN(6) - 1
		case 9:
			s.x[0] = math.NaN()
		case 10:
			s.d.Hidden = r.IntN(30) - 3
		case 11:
			s.o.Attention.SoftCap = -1
		}
		func() {
			defer func() {
				if p := recover(); p != nil {
					t.Fatalf("call %d panicked: %v", i, p)
				}
			}()
			res, err := block.ForwardFast(s.x, s.d, s.w, s.past, s.o)
			if err == nil && len(res.Out) != s.d.Tokens*s.d.Width {
				t.Errorf("call %d: %d outputs; want %d", i, len(res.Out), s.d.Tokens*s.d.Width)
			}
			if err != nil && !slices.ContainsFunc(sentinels, func(e error) bool { return errors.Is(err, e) }) {
				t.Errorf("call %d: error %v wraps none of the sentinels", i, err)
			}
		}()
	}
}
