package ops

import (
	"fmt"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
)

// attentionConfig is the configuration of attention-forward and
// attention-backward.
type attentionConfig struct {
	header
	Layout attention.Layout `json:"layout" doc:"memory order of q, k, v, out and the gradients (batch first, head dimension last)"`
	scoring
	Mask []mask.Spec `json:"mask" doc:"masks, intersected; each an object with a \"kind\" and that kind's keys" default:"[] (every key visible)"`
	queryPositions
	ALiBi    mask.ALiBiForm     `json:"alibi_form" doc:"with input slopes: the key distance d the bias −m·d penalises"`
	EmptyRow attention.EmptyRow `json:"empty_row" doc:"output of a row that sees no key"`
}

// scoring are the keys that form the logits of one query head from its
// keys, whatever the keys' memory order or positions: the attention
// operations and those of kvcache take them.
type scoring struct {
	Group   attention.GroupMap `json:"group" doc:"which kv head each query head reads"`
	Scale   float64            `json:"scale" doc:"multiplies q·k; positive and finite" default:"1/√dim"`
	SoftCap float64            `json:"soft_cap" doc:"c > 0 replaces the scaled logit t by c·tanh(t/c)" default:"0 (none)"`
}

// queryPositions are the keys that place the queries among the keys, as
// mask.Geometry does.
type queryPositions struct {
	Align  mask.Align `json:"align" doc:"where query i sits among the keys"`
	Offset int        `json:"offset" doc:"shifts every query position" default:"0"`
}

// attentionForwardConfig is the configuration of attention-forward: that
// of attention and the precision idioms of its float32 run, which
// attention-backward (plain float32 in its yardstick) does not take.
type attentionForwardConfig struct {
	attentionConfig
	idiomKeys
}

var attentionInputs = []Port{
	{Name: "q", Doc: "queries, [batch, heads_q, queries, dim] (heads-major) or [batch, queries, heads_q, dim] (seq-major)"},
	{Name: "k", Doc: "keys, [batch, heads_kv, keys, dim] or [batch, keys, heads_kv, dim]; heads_q a multiple of heads_kv"},
	{Name: "v", Doc: "values, [batch, heads_kv, keys, dim_v] or [batch, keys, heads_kv, dim_v]"},
	{Name: "bias", Optional: true, Doc: "additive bias [batch or 1, heads_q or 1, queries, keys], broadcast over the 1s"},
	{Name: "slopes", Optional: true, Doc: "ALiBi slopes, one per query head [heads_q]"},
	{Name: "sinks", Optional: true, Doc: "sink logits, one per query head [heads_q]"},
}

// setup derives the attention shape and options from the inputs.
func (c *attentionConfig) setup(in Tensors) (attention.Shape, attention.Options, error) {
	var s attention.Shape
	o := attention.Options{Layout: c.Layout, Group: c.Group, Align: c.Align, ALiBi: c.ALiBi, EmptyRow: c.EmptyRow,
		Scale: c.Scale, SoftCap: c.SoftCap, Offset: c.Offset}
	var err error
	if o.Mask, err = mask.Build(c.Mask); err != nil {
		return s, o, configAt(err, `key "mask"`)
	}

	if s, err = shapeOf(in, o.Layout, "q", "k", "v"); err != nil {
		return s, o, err
	}
	if in.has("bias") {
		b, err := rank(in, "bias", 4, "[batch or 1, heads_q or 1, queries, keys]")
		if err != nil {
			return s, o, err
		}
		o.Bias, o.BiasBatch, o.BiasHeads = in.data("bias"), b[0], b[1]
		if b[2] != s.Lq || b[3] != s.Lk {
			return s, o, fmt.Errorf("%w: input \"bias\" has shape %v; want [%d or 1, %d or 1, %d, %d]", ErrInput, b, s.Batch, s.HeadsQ, s.Lq, s.Lk)
		}
	}
	err = perHead(in, s, &o)
	return s, o, err
}

// shapeOf derives the attention shape from the inputs q, k and v (by
// those names) in the layout, and checks that they fit together.
func shapeOf(in Tensors, layout attention.Layout, qn, kn, vn string) (attention.Shape, error) {
	var s attention.Shape
	dims := "[batch, heads, length, dim]"
	if layout == attention.SeqMajor {
		dims = "[batch, length, heads, dim]"
	}
	q, err := rank(in, qn, 4, dims)
	if err != nil {
		return s, err
	}
	k, err := rank(in, kn, 4, dims)
	if err != nil {
		return s, err
	}
	v, err := rank(in, vn, 4, dims)
	if err != nil {
		return s, err
	}
	hd, ld := 1, 2
	if layout == attention.SeqMajor {
		hd, ld = 2, 1
	}
	s = attention.Shape{Batch: q[0], HeadsQ: q[hd], HeadsKV: k[hd], Lq: q[ld], Lk: k[ld], Dk: q[3], Dv: v[3]}
	switch {
	case k[0] != q[0]:
		return s, fmt.Errorf("%w: input %q has batch size %d; want %d, the batch size of %q", ErrInput, kn, k[0], q[0], qn)
	case v[0] != q[0]:
		return s, fmt.Errorf("%w: input %q has batch size %d; want %d, the batch size of %q", ErrInput, vn, v[0], q[0], qn)
	case k[3] != q[3]:
		return s, fmt.Errorf("%w: input %q has head dimension %d; want %d, the head dimension of %q", ErrInput, kn, k[3], q[3], qn)
	case v[hd] != k[hd] || v[ld] != k[ld]:
		return s, fmt.Errorf("%w: input %q has shape %v; want %d heads and %d keys, as %q %v has", ErrInput, vn, v, k[hd], k[ld], kn, k)
	}
	return s, nil
}

// perHead puts the optional inputs slopes and sinks, one per query head
// of s, in o.
func perHead(in Tensors, s attention.Shape, o *attention.Options) error {
	for _, n := range []string{"slopes", "sinks"} {
		if in.has(n) {
			if err := sameShape(in, n, []int{s.HeadsQ}, "one per query head"); err != nil {
				return err
			}
		}
	}
	o.Slopes, o.Sinks = in.data("slopes"), in.data("sinks")
	return nil
}

// fastAttention reports whether the attention operations run the fast
// forms on shape s: unless UseDirectForms says otherwise, or the keys are
// too many for a fast form's scratch (more than attention.MaxElements/192,
// which it refuses and the direct form computes).
func fastAttention(s attention.Shape) bool {
	return !direct.Load() && s.Lk <= attention.MaxElements/192
}

func attentionShapes(s attention.Shape, o attention.Options) (out, lse []int) {
	if o.Layout == attention.SeqMajor {
		return []int{s.Batch, s.Lq, s.HeadsQ, s.Dv}, []int{s.Batch, s.Lq, s.HeadsQ}
	}
	return []int{s.Batch, s.HeadsQ, s.Lq, s.Dv}, []int{s.Batch, s.HeadsQ, s.Lq}
}

func init() {
	register(&op[attentionForwardConfig]{
		name:    "attention-forward",
		summary: "scaled dot-product attention, every option (attention.Forward; float32: attention.Forward32)",
		inputs:  attentionInputs,
		outputs: []Port{
			{Name: "out", Doc: "output, [batch, heads_q, queries, dim_v] or [batch, queries, heads_q, dim_v]"},
			{Name: "lse", Doc: "natural log-sum-exp of each row, [batch, heads_q, queries] or [batch, queries, heads_q]"},
		},
		run: runAttentionForward,
	})

	register(&op[attentionConfig]{
		name:    "attention-backward",
		summary: "gradients of attention-forward (attention.Backward; float32: attention.Backward32)",
		inputs: append(append([]Port(nil), attentionInputs...),
			Port{Name: "dout", Doc: "gradient of the loss with respect to out, the shape of out"},
			Port{Name: "dlse", Optional: true, Doc: "gradient with respect to lse, the shape of lse (absent: 0)"}),
		outputs: []Port{
			{Name: "dq", Doc: "gradient for q, the shape of q"},
			{Name: "dk", Doc: "gradient for k, the shape of k"},
			{Name: "dv", Doc: "gradient for v, the shape of v"},
			{Name: "dsinks", Optional: true, Doc: "gradient for sinks [heads_q], when sinks are given"},
			{Name: "dbias", Optional: true, Doc: "gradient for bias, the shape of bias, when a bias is given"},
		},
		run: runAttentionBackward,
	})
}

func runAttentionForward(c *attentionForwardConfig, in Tensors, single bool) (Tensors, error) {
	s, o, err := c.setup(in)
	if err != nil {
		return nil, err
	}
	o.Idiom = c.idiom() // honoured by Forward32 only: the reference ignores it
	// out takes its batch, heads and queries from q and its width from v:
	// it can be far larger than either.
	if err := fits(ErrInput, `output "out"`, size{`batch (input "q")`, s.Batch}, size{`heads_q (input "q")`, s.HeadsQ},
		size{`queries (input "q")`, s.Lq}, size{`dim_v (input "v")`, s.Dv}); err != nil {
		return nil, err
	}
	fwd, fwd32 := attention.ForwardFast, attention.ForwardFast32
	if !fastAttention(s) {
		fwd, fwd32 = attention.Forward, attention.Forward32
	}
	if o.Idiom != (attention.Idiom{}) {
		fwd32 = attention.Forward32 // the fast form computes in plain float32 whatever the idiom says
	}
	var out, lse []float64
	if single {
		o32, l32, err := fwd32(in.f32("q"), in.f32("k"), in.f32("v"), s, o)
		if err != nil {
			return nil, err
		}
		out, lse = num.Convert[float64](o32), num.Convert[float64](l32)
	} else if out, lse, err = fwd(in.data("q"), in.data("k"), in.data("v"), s, o); err != nil {
		return nil, err
	}
	os, ls := attentionShapes(s, o)
	return Tensors{"out": {os, out}, "lse": {ls, lse}}, nil
}

func runAttentionBackward(c *attentionConfig, in Tensors, single bool) (Tensors, error) {
	s, o, err := c.setup(in)
	if err != nil {
		return nil, err
	}
	os, ls := attentionShapes(s, o)
	if err := sameShape(in, "dout", os, "the shape of out"); err != nil {
		return nil, err
	}
	if in.has("dlse") {
		if err := sameShape(in, "dlse", ls, "the shape of lse"); err != nil {
			return nil, err
		}
	}
	bwd, bwd32 := attention.BackwardFast, attention.BackwardFast32
	if !fastAttention(s) {
		bwd, bwd32 = attention.Backward, attention.Backward32
	}
	var g attention.Grads
	if single {
		g32, err := bwd32(in.f32("q"), in.f32("k"), in.f32("v"), in.f32("dout"), in.f32("dlse"), s, o)
		if err != nil {
			return nil, err
		}
		g = attention.Grads{DQ: num.Convert[float64](g32.DQ), DK: num.Convert[float64](g32.DK), DV: num.Convert[float64](g32.DV), DSinks: num.Convert[float64](g32.DSinks), DBias: num.Convert[float64](g32.DBias)}
	} else if g, err = bwd(in.data("q"), in.data("k"), in.data("v"), in.data("dout"), in.data("dlse"), s, o); err != nil {
		return nil, err
	}
	out := Tensors{"dq": {in["q"].Shape, g.DQ}, "dk": {in["k"].Shape, g.DK}, "dv": {in["v"].Shape, g.DV}}
	if g.DSinks != nil {
		out["dsinks"] = Tensor{[]int{s.HeadsQ}, g.DSinks}
	}
	if g.DBias != nil {
		out["dbias"] = Tensor{in["bias"].Shape, g.DBias}
	}
	return out, nil
}
