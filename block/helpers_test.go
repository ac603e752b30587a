package block_test

import (
	"math"
	"math/rand/v2"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/posenc"
)

// uniform draws n values uniform in [−1, 1) times s.
func uniform(r *rand.Rand, n int, s float64) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = s * (2*r.Float64() - 1)
	}
	return x
}

// setup is one configuration of a block call with seeded inputs.
type setup struct {
	name string
	d    block.Dims
	o    block.Options
	w    block.Weights[float64]
	x    []float64
	past block.Cache[float64]
}

// variant chooses the switches of a setup.
type variant struct {
	form    block.Form
	kind    block.NormKind
	order   ffn.Layout
	gated   bool
	biases  bool
	rotary  *posenc.Rotary
	group   attention.GroupMap
	extras  bool // soft-cap, sinks, ALiBi slopes, a causal mask with AlignStart
	heads   int
	headsKV int
	past    int
}

// variants covers every switch at least once.
func variants() map[string]variant {
	half := &posenc.Rotary{Dim: 4, Rotated: 2, Pairing: posenc.PairHalves}
	scaled := &posenc.Rotary{Dim: 4, Base: 500, Scaling: posenc.Scaling{Method: posenc.Interpolation, Factor: 2}}
	return map[string]variant{
		"pre-layer":      {form: block.PreNorm, kind: block.LayerNorm, biases: true, heads: 2, headsKV: 2},
		"post-layer":     {form: block.PostNorm, kind: block.LayerNorm, biases: true, heads: 2, headsKV: 2},
		"parallel-rms":   {form: block.Parallel, kind: block.RMSNorm, gated: true, heads: 4, headsKV: 2, rotary: &posenc.Rotary{Dim: 4}},
		"pre-rms-gqa":    {form: block.PreNorm, kind: block.RMSNorm, gated: true, order: ffn.OutByIn, heads: 4, headsKV: 1, rotary: half, past: 3},
		"cycle-extras":   {form: block.PreNorm, kind: block.RMSNorm, gated: true, group: attention.GroupCycle, extras: true, heads: 4, headsKV: 2, rotary: scaled, past: 2},
		"post-rms-order": {form: block.PostNorm, kind: block.RMSNorm, order: ffn.OutByIn, biases: true, heads: 2, headsKV: 1, past: 4},
	}
}

// make draws the inputs of v at width 8, head dimension 4, hidden 12,
// tokens tokens, from seed.
func (v variant) make(name string, tokens int, seed uint64) setup {
	r := rand.New(rand.NewPCG(seed, 7))
	d := block.Dims{Tokens: tokens, Width: 8, Heads: v.heads, HeadsKV: v.headsKV, HeadDim: 4, Hidden: 12, Past: v.past}
	nq, nkv := d.Heads*d.HeadDim, d.HeadsKV*d.HeadDim
	o := block.Options{Form: v.form, NormKind: v.kind, Norm: norm.Options{Epsilon: 1e-5}, WeightOrder: v.order, Rotary: v.rotary}
	o.Attention.Group = v.group
	o.Attention.Mask = mask.Causal()
	if v.extras {
		o.Attention.Align = mask.AlignStart
		o.Attention.SoftCap = 2
		o.Attention.Sinks = uniform(r, d.Heads, 1)
		o.Attention.Slopes = make([]float64, d.Heads)
		for h := range o.Attention.Slopes {
			o.Attention.Slopes[h] = math.Exp2(-8 * float64(h+1) / float64(d.Heads)) // Press et al. 2022, arXiv 2108.12409, §3
		}
	}
	o.FFN = ffn.Options{Act: ffn.ActGELU, Gated: v.gated}
	if v.gated {
		o.FFN.Act = ffn.ActSiLU
	}
	w := block.Weights[float64]{
		Norm1: uniform(r, d.Width, 1),
		Q:     uniform(r, d.Width*nq, 0.5), K: uniform(r, d.Width*nkv, 0.5), V: uniform(r, d.Width*nkv, 0.5),
		O: uniform(r, nq*d.Width, 0.5),
	}
	if v.form != block.Parallel {
		w.Norm2 = uniform(r, d.Width, 1)
	}
	w.FFN.W1 = uniform(r, d.Width*d.Hidden, 0.5)
	w.FFN.W2 = uniform(r, d.Hidden*d.Width, 0.5)
	if v.gated {
		w.FFN.V = uniform(r, d.Width*d.Hidden, 0.5)
	}
	if v.biases {
		w.QBias, w.KBias, w.VBias, w.OBias = uniform(r, nq, 0.1), uniform(r, nkv, 0.1), uniform(r, nkv, 0.1), uniform(r, d.Width, 0.1)
		w.FFN.B1, w.FFN.B2 = uniform(r, d.Hidden, 0.1), uniform(r, d.Width, 0.1)
		if v.kind == block.LayerNorm {
			w.Norm1Bias = uniform(r, d.Width, 0.1)
			if v.form != block.Parallel {
				w.Norm2Bias = uniform(r, d.Width, 0.1)
			}
		}
	}
	past := block.Cache[float64]{K: uniform(r, d.Past*nkv, 1), V: uniform(r, d.Past*nkv, 1)}
	return setup{name: name, d: d, o: o, w: w, x: uniform(r, tokens*d.Width, 1), past: past}
}
