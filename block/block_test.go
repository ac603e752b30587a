package block_test

import (
	"math"
	"slices"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/posenc"
)

// project is the definition of a projection quoted in Forward's doc, as
// a loop: the ascending sum of rounded products, then the bias.
func project(x []float64, rows, in, out int, w, b []float64, lay ffn.Layout) []float64 {
	y := make([]float64, rows*out)
	for r := range rows {
		for j := range out {
			s := 0.0
			for i := range in {
				wij := w[i*out+j]
				if lay == ffn.OutByIn {
					wij = w[j*in+i]
				}
				s = float64(x[r*in+i]*wij) + s
			}
			if b != nil {
				s += b[j]
			}
			y[r*out+j] = s
		}
	}
	return y
}

func sum(x, y []float64) []float64 {
	z := make([]float64, len(x))
	for i := range z {
		z[i] = x[i] + y[i]
	}
	return z
}

// stepByStep computes every stage of s by calling the kernel packages'
// functions one at a time, as the formulas of Forward's doc compose them.
func stepByStep(t *testing.T, s setup) map[block.Stage][]float64 {
	t.Helper()
	d, o, w := s.d, s.o, s.w
	nq, nkv := d.Heads*d.HeadDim, d.HeadsKV*d.HeadDim
	n := func(x, g, b []float64) []float64 {
		var y []float64
		var err error
		if o.NormKind == block.RMSNorm {
			y, err = norm.RMSNorm(x, d.Width, g, o.Norm)
		} else {
			y, err = norm.LayerNorm(x, d.Width, g, b, o.Norm)
		}
		ensure.NoError(t, err)
		return y
	}
	st := map[block.Stage][]float64{block.StageInput: s.x}
	a := s.x
	if o.Form != block.PostNorm {
		a = n(s.x, w.Norm1, w.Norm1Bias)
	}
	st[block.StageAttnIn] = a
	q := project(a, d.Tokens, d.Width, nq, w.Q, w.QBias, o.WeightOrder)
	k := project(a, d.Tokens, d.Width, nkv, w.K, w.KBias, o.WeightOrder)
	v := project(a, d.Tokens, d.Width, nkv, w.V, w.VBias, o.WeightOrder)
	st[block.StageQ], st[block.StageK], st[block.StageV] = q, k, v
	if o.Rotary != nil {
		// each token's heads rotate at the token's position: one
		// Apply per token of [1, heads, D], the heads as the leading axis
		var qr, kr []float64
		for tok := range d.Tokens {
			p := posenc.Positions{Offset: d.Past + tok}
			a, err := o.Rotary.Apply(q[tok*nq:(tok+1)*nq], 1, p)
			ensure.NoError(t, err)
			b, err := o.Rotary.Apply(k[tok*nkv:(tok+1)*nkv], 1, p)
			ensure.NoError(t, err)
			qr, kr = append(qr, a...), append(kr, b...)
		}
		q, k = qr, kr
	}
	st[block.StageQRot], st[block.StageKRot] = q, k
	K, V := slices.Concat(s.past.K, k), slices.Concat(s.past.V, v)
	st[block.StagePresentK], st[block.StagePresentV] = K, V
	ao := o.Attention
	ao.Layout = attention.SeqMajor
	if ao.Align == mask.AlignStart {
		ao.Offset = d.Past
	}
	att, _, err := attention.Forward(q, K, V, attention.Shape{Batch: 1, HeadsQ: d.Heads, HeadsKV: d.HeadsKV, Lq: d.Tokens, Lk: d.Past + d.Tokens, Dk: d.HeadDim, Dv: d.HeadDim}, ao)
	ensure.NoError(t, err)
	st[block.StageAttn] = att
	ao2 := project(att, d.Tokens, nq, d.Width, w.O, w.OBias, o.WeightOrder)
	st[block.StageAttnOut] = ao2
	r1 := sum(s.x, ao2)
	st[block.StageResid1] = r1
	h, f := r1, a
	switch o.Form {
	case block.PreNorm:
		f = n(r1, w.Norm2, w.Norm2Bias)
	case block.PostNorm:
		h = n(r1, w.Norm1, w.Norm1Bias)
		f = h
	}
	st[block.StageFFNIn] = f
	fo := o.FFN
	fo.Layout = o.WeightOrder
	g, err := ffn.Forward(f, ffn.Dims{Rows: d.Tokens, In: d.Width, Hidden: d.Hidden, Out: d.Width}, w.FFN, fo)
	ensure.NoError(t, err)
	st[block.StageFFNOut] = g
	r2 := sum(h, g)
	st[block.StageResid2] = r2
	y := r2
	if o.Form == block.PostNorm {
		y = n(r2, w.Norm2, w.Norm2Bias)
	}
	st[block.StageOutput] = y
	return st
}

// bitsEqual reports whether a and b hold the same bits.
func bitsEqual(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

// Every stage of Forward and ForwardFast is, bit for bit, the kernels'
// functions called one at a time, and has the shape Stage.Shape says.
func TestStagesAreTheKernelsStepByStep(t *testing.T) {
	for name, v := range variants() {
		t.Run(name, func(t *testing.T) {
			s := v.make(name, 5, 1)
			want := stepByStep(t, s)
			o := s.o
			o.Keep = block.Stages()
			for _, f := range []struct {
				name string
				fn   func([]float64, block.Dims, block.Weights[float64], block.Cache[float64], block.Options) (block.Result[float64], error)
			}{{"Forward", block.Forward}, {"ForwardFast", block.ForwardFast}} {
				res, err := f.fn(s.x, s.d, s.w, s.past, o)
				ensure.NoError(t, err)
				ensure.Len(t, res.Stages, len(block.Stages()))
				for _, st := range block.Stages() {
					n := 1
					for _, v := range st.Shape(s.d) {
						n *= v
					}
					expect.Len(t, res.Stages[st], n, "%s: %s", f.name, st)
					expect.True(t, bitsEqual(want[st], res.Stages[st]), "%s: stage %s differs from the step-by-step composition", f.name, st)
				}
				expect.True(t, bitsEqual(want[block.StageOutput], res.Out), "%s: Out", f.name)
				expect.True(t, bitsEqual(want[block.StagePresentK], res.Present.K), "%s: Present.K", f.name)
				expect.True(t, bitsEqual(want[block.StagePresentV], res.Present.V), "%s: Present.V", f.name)
			}
		})
	}
}

// Without Keep no stage is returned.
func TestKeepNothing(t *testing.T) {
	s := variants()["pre-layer"].make("pre-layer", 3, 2)
	res, err := block.Forward(s.x, s.d, s.w, s.past, s.o)
	ensure.NoError(t, err)
	expect.Nil(t, res.Stages)
	s.o.Keep = []block.Stage{block.StageAttn}
	res, err = block.Forward(s.x, s.d, s.w, s.past, s.o)
	ensure.NoError(t, err)
	expect.Len(t, res.Stages, 1)
}
