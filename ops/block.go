package ops

import (
	"fmt"
	"slices"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/posenc"
)

// The operation of package block: one decoder block on hidden states,
// with a key/value cache.

// blockRotary is the rotary configuration of block-forward: that of
// rotary-apply without the positions, which the block sets (token t at
// past + t).
type blockRotary struct {
	Rotated   int            `json:"rotated" doc:"number of leading dims rotated (even); the rest pass through" default:"head_dim"`
	Base      float64        `json:"base" doc:"frequency base b, θ_i = b^(−2i/rotated)" default:"10000"`
	Pairing   posenc.Pairing `json:"pairing" doc:"which dims one frequency rotates"`
	Magnitude float64        `json:"magnitude" doc:"multiplies cos and sin (YaRN's √(1/t))" default:"1"`
	Scaling   *scalingConfig `json:"scaling" doc:"context scaling" default:"none"`
}

// blockConfig is the configuration of block-forward.
type blockConfig struct {
	header
	Form        block.Form            `json:"form" doc:"where the norms sit and how the sublayers are joined"`
	NormKind    block.NormKind        `json:"norm_kind" doc:"the norm of both norm positions"`
	Epsilon     float64               `json:"epsilon" doc:"ε of both norms, finite and > 0" default:"required"`
	Placement   norm.EpsilonPlacement `json:"epsilon_placement" doc:"where ε enters the norms' denominator"`
	WeightForm  norm.WeightForm       `json:"weight_form" doc:"how the norm weight inputs become the gains"`
	WeightOrder ffn.Layout            `json:"weight_order" doc:"storage of every weight matrix: wq, wk, wv, wo, w1, v, w2"`
	Heads       int                   `json:"heads" doc:"query heads" default:"required"`
	HeadsKV     int                   `json:"heads_kv" doc:"key/value heads, dividing heads" default:"heads"`
	Rotary      *blockRotary          `json:"rotary" doc:"rotary encoding of queries and keys, token t at position past + t" default:"none"`
	scoring
	Mask     []mask.Spec        `json:"mask" doc:"masks, intersected, over the past and new keys; each an object with a \"kind\" and that kind's keys" default:"[] (every key visible)"`
	Align    mask.Align         `json:"align" doc:"where query t sits among the keys: both words put it at key past + t, the block's position"`
	ALiBi    mask.ALiBiForm     `json:"alibi_form" doc:"with input slopes: the key distance d the bias −m·d penalises"`
	EmptyRow attention.EmptyRow `json:"empty_row" doc:"attention output of a row that sees no key"`
	Act      ffn.Act            `json:"activation" doc:"φ of the feed-forward layer (of its gate when gated)"`
	Beta     float64            `json:"beta" doc:"swish β; 0 for every other activation" default:"0"`
	Gated    bool               `json:"gated" doc:"gated feed-forward units φ(x·W + b) ⊗ (x·V + c)" default:"false"`
	Keep     []string           `json:"keep" doc:"stages to return as outputs stage_<name>, in any order (block.Stages)" default:"[] (none)"`
}

var blockInputs = []Port{
	{Name: "x", Doc: "hidden states [tokens, width]"},
	{Name: "norm1", Optional: true, Doc: "the first norm's weight [width]; absent: gain 1"},
	{Name: "norm1_bias", Optional: true, Doc: "the first norm's bias [width] (layer-norm only)"},
	{Name: "wq", Doc: "query projection [width, heads·head_dim] (in-by-out) or [heads·head_dim, width] (out-by-in)"},
	{Name: "bq", Optional: true, Doc: "query bias [heads·head_dim]"},
	{Name: "wk", Doc: "key projection [width, heads_kv·head_dim] or its transpose"},
	{Name: "bk", Optional: true, Doc: "key bias [heads_kv·head_dim]"},
	{Name: "wv", Doc: "value projection [width, heads_kv·head_dim] or its transpose"},
	{Name: "bv", Optional: true, Doc: "value bias [heads_kv·head_dim]"},
	{Name: "wo", Doc: "output projection [heads·head_dim, width] or its transpose"},
	{Name: "bo", Optional: true, Doc: "output bias [width]"},
	{Name: "norm2", Optional: true, Doc: "the second norm's weight [width]; absent: gain 1 (none with parallel)"},
	{Name: "norm2_bias", Optional: true, Doc: "the second norm's bias [width] (layer-norm only; none with parallel)"},
	{Name: "w1", Doc: "feed-forward W1 (the gate W when gated) [width, hidden] or [hidden, width]"},
	{Name: "b1", Optional: true, Doc: "feed-forward b1 [hidden]"},
	{Name: "v", Optional: true, Doc: "gated: the value projection V, the shape of w1"},
	{Name: "c", Optional: true, Doc: "gated: the value bias [hidden]"},
	{Name: "w2", Doc: "feed-forward down projection [hidden, width] or [width, hidden]"},
	{Name: "b2", Optional: true, Doc: "feed-forward b2 [width]"},
	{Name: "past_k", Optional: true, Doc: "cached keys after rotary [past, heads_kv, head_dim]; absent: past = 0"},
	{Name: "past_v", Optional: true, Doc: "cached values [past, heads_kv, head_dim], with past_k"},
	{Name: "slopes", Optional: true, Doc: "ALiBi slopes, one per query head [heads]"},
	{Name: "sinks", Optional: true, Doc: "sink logits, one per query head [heads]"},
}

// blockOutputs are the outputs of block-forward: the hidden states out,
// the present cache and one optional output per stage.
func blockOutputs() []Port {
	ports := []Port{
		{Name: "out", Doc: "hidden states out [tokens, width]"},
		{Name: "present_k", Doc: "the past keys followed by the new ones, after rotary [past + tokens, heads_kv, head_dim]"},
		{Name: "present_v", Doc: "the past values followed by the new ones [past + tokens, heads_kv, head_dim]"},
	}
	for _, s := range block.Stages() {
		ports = append(ports, Port{Name: "stage_" + string(s), Optional: true, Doc: fmt.Sprintf("stage %s, when keep names it; shape %s", s, stageShapeDoc(s))})
	}
	return ports
}

// stageShapeDoc spells the shape of stage s in the operation's names.
func stageShapeDoc(s block.Stage) string {
	d := block.Dims{Tokens: -1, Width: -2, Heads: -3, HeadsKV: -4, HeadDim: -5, Past: -6}
	names := map[int]string{-1: "tokens", -2: "width", -3: "heads", -4: "heads_kv", -5: "head_dim", -7: "past + tokens"}
	var parts []string
	for _, v := range s.Shape(d) {
		parts = append(parts, names[v])
	}
	return fmt.Sprintf("[%s]", joinComma(parts))
}

func joinComma(p []string) string {
	s := ""
	for i, v := range p {
		if i > 0 {
			s += ", "
		}
		s += v
	}
	return s
}

func init() {
	register(&op[blockConfig]{
		name:    "block-forward",
		summary: "one decoder block: norm, attention with a key/value cache, residual, norm, feed-forward, residual (block.ForwardFast; float32: block.ForwardFast32)",
		note: cacheNote("The tokens are at positions past … past + tokens − 1; the present cache is the next call's past.\n" +
			"The stages, in pipeline order: " + stageList() + "."),
		inputs:  blockInputs,
		outputs: blockOutputs(),
		run:     runBlock,
	})
}

func stageList() string {
	var p []string
	for _, s := range block.Stages() {
		p = append(p, string(s))
	}
	return joinComma(p)
}

// setup derives the block's sizes and options from the configuration and
// the inputs.
func (c *blockConfig) setup(in Tensors) (block.Dims, block.Options, error) {
	var d block.Dims
	o := block.Options{Form: c.Form, NormKind: c.NormKind, WeightOrder: c.WeightOrder,
		Norm: norm.Options{Epsilon: c.Epsilon, Placement: c.Placement, Weight: c.WeightForm},
		FFN:  ffn.Options{Act: c.Act, Beta: c.Beta, Gated: c.Gated}}
	o.Attention = attention.Options{Group: c.Group, Scale: c.Scale, SoftCap: c.SoftCap, Align: c.Align, ALiBi: c.ALiBi, EmptyRow: c.EmptyRow}
	var err error
	if o.Attention.Mask, err = mask.Build(c.Mask); err != nil {
		return d, o, configAt(err, `key "mask"`)
	}
	if c.Heads < 1 {
		return d, o, fmt.Errorf("%w: key \"heads\" = %d; want ≥ 1", ErrConfig, c.Heads)
	}
	hkv := c.HeadsKV
	if hkv == 0 {
		hkv = c.Heads
	}
	x, err := rank(in, "x", 2, "[tokens, width]")
	if err != nil {
		return d, o, err
	}
	wq, err := rank(in, "wq", 2, "[width, heads·head_dim] or [heads·head_dim, width]")
	if err != nil {
		return d, o, err
	}
	w1, err := rank(in, "w1", 2, "[width, hidden] or [hidden, width]")
	if err != nil {
		return d, o, err
	}
	nq, hidden := wq[1], w1[1]
	if c.WeightOrder == ffn.OutByIn {
		nq, hidden = wq[0], w1[0]
	}
	if nq%c.Heads != 0 || nq == 0 {
		return d, o, fmt.Errorf("%w: input \"wq\" has shape %v: %d query units; want a positive multiple of heads = %d", ErrInput, wq, nq, c.Heads)
	}
	d = block.Dims{Tokens: x[0], Width: x[1], Heads: c.Heads, HeadsKV: hkv, HeadDim: nq / c.Heads, Hidden: hidden}
	if in.has("past_k") != in.has("past_v") {
		return d, o, fmt.Errorf("%w: inputs \"past_k\" and \"past_v\": one given without the other; want both or neither", ErrInput)
	}
	if in.has("past_k") {
		pk, err := rank(in, "past_k", 3, "[past, heads_kv, head_dim]")
		if err != nil {
			return d, o, err
		}
		d.Past = pk[0]
		want := []int{pk[0], hkv, d.HeadDim}
		if err := sameShape(in, "past_k", want, "[past, heads_kv, head_dim]"); err != nil {
			return d, o, err
		}
		if err := sameShape(in, "past_v", want, "the shape of past_k"); err != nil {
			return d, o, err
		}
	}
	if r := c.Rotary; r != nil {
		rc := rotaryCommon{Rotated: r.Rotated, Base: r.Base, Pairing: r.Pairing, Magnitude: r.Magnitude, Scaling: r.Scaling}
		rot := rc.rotary(d.HeadDim)
		o.Rotary = &rot
	}
	o.Attention.Slopes, o.Attention.Sinks = in.data("slopes"), in.data("sinks")
	for _, s := range c.Keep {
		o.Keep = append(o.Keep, block.Stage(s))
	}
	return d, o, nil
}

// blockWeights are the weight inputs, converted by conv.
func blockWeights[T float32 | float64](in Tensors, conv func([]float64) []T) block.Weights[T] {
	return block.Weights[T]{
		Norm1: conv(in.data("norm1")), Norm1Bias: conv(in.data("norm1_bias")),
		Q: conv(in.data("wq")), QBias: conv(in.data("bq")), K: conv(in.data("wk")), KBias: conv(in.data("bk")),
		V: conv(in.data("wv")), VBias: conv(in.data("bv")), O: conv(in.data("wo")), OBias: conv(in.data("bo")),
		Norm2: conv(in.data("norm2")), Norm2Bias: conv(in.data("norm2_bias")),
		FFN: ffn.Weights[T]{W1: conv(in.data("w1")), B1: conv(in.data("b1")), V: conv(in.data("v")), C: conv(in.data("c")),
			W2: conv(in.data("w2")), B2: conv(in.data("b2"))},
	}
}

func runBlock(c *blockConfig, in Tensors, single bool) (Tensors, error) {
	d, o, err := c.setup(in)
	if err != nil {
		return nil, err
	}
	fwd, fwd32 := block.ForwardFast, block.ForwardFast32
	if direct.Load() {
		fwd, fwd32 = block.Forward, block.Forward32
	}
	var out, pk, pv []float64
	stages := map[block.Stage][]float64{}
	if single {
		r, err := fwd32(in.f32("x"), d, blockWeights(in, num.Convert[float32, float64]),
			block.Cache[float32]{K: in.f32("past_k"), V: in.f32("past_v")}, o)
		if err != nil {
			return nil, err
		}
		out, pk, pv = num.Convert[float64](r.Out), num.Convert[float64](r.Present.K), num.Convert[float64](r.Present.V)
		for s, t := range r.Stages {
			stages[s] = num.Convert[float64](t)
		}
	} else {
		r, err := fwd(in.data("x"), d, blockWeights(in, same), block.Cache[float64]{K: in.data("past_k"), V: in.data("past_v")}, o)
		if err != nil {
			return nil, err
		}
		out, pk, pv, stages = r.Out, r.Present.K, r.Present.V, r.Stages
	}
	cache := []int{d.Past + d.Tokens, d.HeadsKV, d.HeadDim}
	res := Tensors{"out": {[]int{d.Tokens, d.Width}, out}, "present_k": {cache, pk}, "present_v": {slices.Clone(cache), pv}}
	for s, t := range stages {
		res["stage_"+string(s)] = Tensor{Shape: s.Shape(d), Data: t}
	}
	return res, nil
}
