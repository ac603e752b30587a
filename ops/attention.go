package ops

import (
	"bytes"
	"encoding/json"
	"fmt"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
)

// maskConfig is one entry of the "mask" list of an attention configuration.
type maskConfig struct {
	Kind    string `json:"kind"`
	Before  *int   `json:"before"`
	After   *int   `json:"after"`
	Size    int    `json:"size"`
	Length  int    `json:"length"`
	Valid   []int  `json:"valid"`
	Offsets []int  `json:"offsets"`
	Block   string `json:"block"`

	present map[string]bool // the keys the entry spelled out
}

// maskKeys lists, for each kind, the keys it requires; no other key may
// accompany the kind, so that a key meant for another kind ("size" on a
// "causal" entry) is an error rather than silently ignored.
var maskKeys = map[string][]string{
	"full":        nil,
	"causal":      nil,
	"band":        {"before", "after"},
	"window":      {"size"},
	"prefix":      {"length"},
	"key-padding": {"valid"},
	"packed":      {"offsets", "block"},
}

// UnmarshalJSON records which keys the entry holds, then decodes it with
// the configuration's own rules (unknown keys are refused by the outer
// decoder's DisallowUnknownFields, which applies to this plain alias too).
func (m *maskConfig) UnmarshalJSON(b []byte) error {
	var keys map[string]json.RawMessage
	if err := json.Unmarshal(b, &keys); err != nil {
		return err
	}
	type plain maskConfig
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	var p plain
	if err := dec.Decode(&p); err != nil {
		return err
	}
	*m = maskConfig(p)
	m.present = make(map[string]bool, len(keys))
	for k := range keys {
		m.present[k] = true
	}
	return nil
}

// checkKeys refuses an entry whose keys do not match its kind.
func (m maskConfig) checkKeys() error {
	want, ok := maskKeys[m.Kind]
	if !ok {
		return nil // build reports the unknown kind
	}
	allowed := map[string]bool{"kind": true}
	for _, k := range want {
		allowed[k] = true
		if !m.present[k] {
			return fmt.Errorf("%w: key \"mask\": kind %q needs key %q", ErrConfig, m.Kind, k)
		}
	}
	for k := range m.present {
		if !allowed[k] {
			return fmt.Errorf("%w: key \"mask\": key %q does not apply to kind %q", ErrConfig, k, m.Kind)
		}
	}
	return nil
}

var maskKeyDoc = `list of masks, intersected; each an object with "kind": ` +
	`"full"; "causal"; "band" with "before" and "after" (key j visible to query position p iff −before ≤ j − p ≤ after, −1 for no limit); ` +
	`"window" with "size" (that many keys ending at the query, the query included); "prefix" with "length" (keys below it visible to all); ` +
	`"key-padding" with "valid" (one valid key count per batch entry); ` +
	`"packed" with "offsets" (sequence starts, from 0 to the key count) and "block" ("causal" or "full")`

func (m maskConfig) build() (mask.Mask, error) {
	if m.present != nil {
		if err := m.checkKeys(); err != nil {
			return mask.Mask{}, err
		}
	}
	opt := func(p *int) int {
		if p == nil {
			return 0
		}
		return *p
	}
	var mk mask.Mask
	var err error
	switch m.Kind {
	case "full":
		mk = mask.Full()
	case "causal":
		mk = mask.Causal()
	case "band":
		mk, err = mask.Band(opt(m.Before), opt(m.After))
	case "window":
		mk, err = mask.Window(m.Size)
	case "prefix":
		mk, err = mask.Prefix(m.Length)
	case "key-padding":
		mk, err = mask.KeyPadding(m.Valid)
	case "packed":
		var b mask.Block
		if b, err = choice("mask.block", m.Block, []string{"causal", "full"}, []mask.Block{mask.BlockCausal, mask.BlockFull}); err != nil {
			return mk, err
		}
		mk, err = mask.Packed(m.Offsets, b)
	default:
		return mk, fmt.Errorf("%w: key \"mask\": kind %q; want one of full, causal, band, window, prefix, key-padding, packed", ErrConfig, m.Kind)
	}
	if err != nil {
		return mk, fmt.Errorf("%w: key \"mask\" (%s): %w", ErrConfig, m.Kind, err)
	}
	return mk, nil
}

// attentionConfig is the configuration of attention-forward and
// attention-backward.
type attentionConfig struct {
	header
	Layout   string       `json:"layout"`
	Group    string       `json:"group"`
	Scale    float64      `json:"scale"`
	SoftCap  float64      `json:"soft_cap"`
	Mask     []maskConfig `json:"mask"`
	Align    string       `json:"align"`
	Offset   int          `json:"offset"`
	ALiBi    string       `json:"alibi_form"`
	EmptyRow string       `json:"empty_row"`
}

var attentionKeys = []Key{
	{"layout", "string", `"heads-major"`, `"heads-major": q is [batch, heads, queries, dim]; "seq-major": [batch, queries, heads, dim] (k, v, out and the gradients alike)`},
	{"group", "string", `"blocks"`, `which kv head query head h reads: "blocks", h / (heads_q/heads_kv); "cycle", h mod heads_kv`},
	{"scale", "number", "1/√dim", "multiplies q·k; positive and finite"},
	{"soft_cap", "number", "0 (none)", "c > 0 replaces the scaled logit t by c·tanh(t/c)"},
	{"mask", "[object]", "[] (every key visible)", maskKeyDoc},
	{"align", "string", `"end"`, `where query i sits among the keys: "end", position keys − queries + i; "start", position i (plus "offset")`},
	{"offset", "int", "0", "shifts every query position"},
	{"alibi_form", "string", `"causal"`, `with input slopes: "causal" adds −m·(p(i) − j); "symmetric" −m·|p(i) − j|`},
	{"empty_row", "string", `"zero"`, `output of a row that sees no key: "zero" (lse −Inf) or "nan"`},
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
	var o attention.Options
	var err error
	if o.Layout, err = choice("layout", c.Layout, []string{"heads-major", "seq-major"}, []attention.Layout{attention.HeadsMajor, attention.SeqMajor}); err != nil {
		return s, o, err
	}
	if o.Group, err = choice("group", c.Group, []string{"blocks", "cycle"}, []attention.GroupMap{attention.GroupBlocks, attention.GroupCycle}); err != nil {
		return s, o, err
	}
	if o.Align, err = choice("align", c.Align, []string{"end", "start"}, []mask.Align{mask.AlignEnd, mask.AlignStart}); err != nil {
		return s, o, err
	}
	if o.ALiBi, err = choice("alibi_form", c.ALiBi, []string{"causal", "symmetric"}, []attention.ALiBiForm{attention.ALiBiCausal, attention.ALiBiSymmetric}); err != nil {
		return s, o, err
	}
	if o.EmptyRow, err = choice("empty_row", c.EmptyRow, []string{"zero", "nan"}, []attention.EmptyRow{attention.EmptyRowZero, attention.EmptyRowNaN}); err != nil {
		return s, o, err
	}
	o.Scale, o.SoftCap, o.Offset = c.Scale, c.SoftCap, c.Offset
	if len(c.Mask) > 0 {
		ms := make([]mask.Mask, len(c.Mask))
		for i, m := range c.Mask {
			if ms[i], err = m.build(); err != nil {
				return s, o, err
			}
		}
		if o.Mask, err = mask.Intersect(ms...); err != nil {
			return s, o, fmt.Errorf("%w: key \"mask\": %w", ErrConfig, err)
		}
	}

	dims := "[batch, heads, length, dim]"
	if o.Layout == attention.SeqMajor {
		dims = "[batch, length, heads, dim]"
	}
	q, err := rank(in, "q", 4, dims)
	if err != nil {
		return s, o, err
	}
	k, err := rank(in, "k", 4, dims)
	if err != nil {
		return s, o, err
	}
	v, err := rank(in, "v", 4, dims)
	if err != nil {
		return s, o, err
	}
	hd, ld := 1, 2
	if o.Layout == attention.SeqMajor {
		hd, ld = 2, 1
	}
	s = attention.Shape{Batch: q[0], HeadsQ: q[hd], HeadsKV: k[hd], Lq: q[ld], Lk: k[ld], Dk: q[3], Dv: v[3]}
	switch {
	case k[0] != q[0] || v[0] != q[0]:
		return s, o, fmt.Errorf("%w: batch sizes differ: q %d, k %d, v %d", ErrInput, q[0], k[0], v[0])
	case k[3] != q[3]:
		return s, o, fmt.Errorf("%w: input \"k\" has head dimension %d, \"q\" has %d", ErrInput, k[3], q[3])
	case v[hd] != k[hd] || v[ld] != k[ld]:
		return s, o, fmt.Errorf("%w: input \"v\" has shape %v; its heads and keys must match \"k\" %v", ErrInput, v, k)
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
	for _, n := range []string{"slopes", "sinks"} {
		if in.has(n) {
			if err := sameShape(in, n, []int{s.HeadsQ}, "one per query head"); err != nil {
				return s, o, err
			}
		}
	}
	o.Slopes, o.Sinks = in.data("slopes"), in.data("sinks")
	return s, o, nil
}

func attentionShapes(s attention.Shape, o attention.Options) (out, lse []int) {
	if o.Layout == attention.SeqMajor {
		return []int{s.Batch, s.Lq, s.HeadsQ, s.Dv}, []int{s.Batch, s.Lq, s.HeadsQ}
	}
	return []int{s.Batch, s.HeadsQ, s.Lq, s.Dv}, []int{s.Batch, s.HeadsQ, s.Lq}
}

func init() {
	register(&op[attentionConfig]{
		name:    "attention-forward",
		summary: "scaled dot-product attention, every option (attention.Forward; float32: attention.Forward32)",
		keys:    attentionKeys,
		inputs:  attentionInputs,
		outputs: []Port{
			{Name: "out", Doc: "output, [batch, heads_q, queries, dim_v] or [batch, queries, heads_q, dim_v]"},
			{Name: "lse", Doc: "natural log-sum-exp of each row, [batch, heads_q, queries] or [batch, queries, heads_q]"},
		},
		run: func(c *attentionConfig, in Tensors, single bool) (Tensors, error) {
			s, o, err := c.setup(in)
			if err != nil {
				return nil, err
			}
			var out, lse []float64
			if single {
				o32, l32, err := attention.Forward32(num.Convert[float32](in.data("q")), num.Convert[float32](in.data("k")), num.Convert[float32](in.data("v")), s, o)
				if err != nil {
					return nil, err
				}
				out, lse = num.Convert[float64](o32), num.Convert[float64](l32)
			} else if out, lse, err = attention.Forward(in.data("q"), in.data("k"), in.data("v"), s, o); err != nil {
				return nil, err
			}
			os, ls := attentionShapes(s, o)
			return Tensors{"out": {os, out}, "lse": {ls, lse}}, nil
		},
	})

	register(&op[attentionConfig]{
		name:    "attention-backward",
		summary: "gradients of attention-forward (attention.Backward; float32: attention.Backward32)",
		keys:    attentionKeys,
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
		run: func(c *attentionConfig, in Tensors, single bool) (Tensors, error) {
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
			var g attention.Grads
			if single {
				g32, err := attention.Backward32(num.Convert[float32](in.data("q")), num.Convert[float32](in.data("k")), num.Convert[float32](in.data("v")), num.Convert[float32](in.data("dout")), num.Convert[float32](in.data("dlse")), s, o)
				if err != nil {
					return nil, err
				}
				g = attention.Grads{DQ: num.Convert[float64](g32.DQ), DK: num.Convert[float64](g32.DK), DV: num.Convert[float64](g32.DV), DSinks: num.Convert[float64](g32.DSinks), DBias: num.Convert[float64](g32.DBias)}
			} else if g, err = attention.Backward(in.data("q"), in.data("k"), in.data("v"), in.data("dout"), in.data("dlse"), s, o); err != nil {
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
		},
	})
}
