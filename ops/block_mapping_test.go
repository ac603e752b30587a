package ops

import (
	"encoding/json"
	"fmt"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/block"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/posenc"
)

// The key tests of block-forward: every value of every key against
// block.Forward called directly with the options written out here by
// hand. The block's geometry is that of the attention key tests: 3
// tokens after a past of 2, so 3 queries at key positions 2, 3, 4 of 5,
// 4 query heads on 2 kv heads, head dimension 4 (8 for the rotary keys,
// the rotary key tests' dimension); width 8, 6 hidden units.

// blockGeom is the shape of one block key test's inputs.
type blockGeom struct {
	heads, hkv, hd int
	order          ffn.Layout
	gated          bool
	noNorm2        bool // parallel: no second norm
}

var blockBase = blockGeom{heads: 4, hkv: 2, hd: 4}

// inputs are the block's inputs for g; the same seeds whatever g.
func (g blockGeom) inputs(extra Tensors) func(string) Tensors {
	return func(string) Tensors {
		nq, nkv := g.heads*g.hd, g.hkv*g.hd
		m := func(seed uint64, in, out int) Tensor {
			if g.order == ffn.OutByIn {
				return randomTensor(seed, out, in)
			}
			return randomTensor(seed, in, out)
		}
		in := Tensors{"x": randomTensor(31, 3, 8), "norm1": randomTensor(32, 8),
			"wq": m(33, 8, nq), "wk": m(34, 8, nkv), "wv": m(35, 8, nkv), "wo": m(36, nq, 8),
			"w1": m(37, 8, 6), "w2": m(38, 6, 8), "past_k": randomTensor(39, 2, g.hkv, g.hd), "past_v": randomTensor(40, 2, g.hkv, g.hd)}
		if !g.noNorm2 {
			in["norm2"] = randomTensor(41, 8)
		}
		if g.gated {
			in["v"] = m(42, 8, 6)
		}
		for n, x := range extra {
			in[n] = x
		}
		return in
	}
}

// blockOptions are the options of the configuration body of blockBody.
func blockOptions() block.Options {
	return block.Options{Norm: norm.Options{Epsilon: 1e-5}}
}

// blockWant calls block.Forward with o on the inputs.
func blockWant(g blockGeom, o block.Options) func(string, Tensors) (Tensors, error) {
	return func(_ string, in Tensors) (Tensors, error) {
		o.Attention.Slopes = in.data("slopes")
		d := block.Dims{Tokens: 3, Width: 8, Heads: g.heads, HeadsKV: g.hkv, HeadDim: g.hd, Hidden: 6, Past: 2}
		r, err := block.Forward(in.data("x"), d, blockWeights(in, same), block.Cache[float64]{K: in.data("past_k"), V: in.data("past_v")}, o)
		if err != nil {
			return nil, err
		}
		cache := []int{5, g.hkv, g.hd}
		out := Tensors{"out": {[]int{3, 8}, r.Out}, "present_k": {cache, r.Present.K}, "present_v": {[]int{5, g.hkv, g.hd}, r.Present.V}}
		for s, t := range r.Stages {
			out["stage_"+string(s)] = Tensor{Shape: s.Shape(d), Data: t}
		}
		return out, nil
	}
}

// blockValue is one value: the configuration holds the required keys of
// g (epsilon 1e-5, heads, heads_kv) and body, and means o.
func blockValue(value, same, body string, g blockGeom, o block.Options, extra Tensors) keyValue {
	full := fmt.Sprintf(`"epsilon":1e-5,"heads":%d,"heads_kv":%d`, g.heads, g.hkv)
	if body != "" {
		full += "," + body
	}
	return blockRaw(value, same, full, g, o, extra)
}

// blockRaw is a value whose configuration holds body alone.
func blockRaw(value, same, body string, g blockGeom, o block.Options, extra Tensors) keyValue {
	return keyValue{value: value, same: same, config: cfg(body), in: g.inputs(extra), want: blockWant(g, o)}
}

// blockRefused is a value the operation refuses under err.
func blockRefused(value, body string, g blockGeom, err error) keyValue {
	return keyValue{value: value, config: cfg(body), in: g.inputs(nil), refuse: err}
}

func blockKeyTests() []keyTest {
	ops := []string{"block-forward"}
	base := blockBase
	with := func(edit func(o *block.Options)) block.Options {
		o := blockOptions()
		edit(&o)
		return o
	}
	var tests []keyTest
	add := func(key, why string, values ...keyValue) {
		tests = append(tests, keyTest{ops: ops, key: key, why: why, values: values})
	}

	// The attention keys shared with the attention operations: those that
	// do not move the queries (the block places them itself) and hold for
	// one batch entry.
	own := map[string]bool{"layout": true, "offset": true, "align": true, "mask[].after": true, "mask[].length": true,
		"mask[].valid": true, "empty_row": true}
	for _, k := range attentionKeyList() {
		if own[k.key] {
			continue
		}
		kt := keyTest{ops: ops, key: k.key, why: k.why}
		for _, v := range k.values {
			if v.refuse != nil {
				kt.values = append(kt.values, blockRefused(v.value, fmt.Sprintf(`"epsilon":1e-5,"heads":4,"heads_kv":2,%s`, v.body), base, v.refuse))
				continue
			}
			o := blockOptions()
			o.Attention = v.o
			kt.values = append(kt.values, blockValue(v.value, v.same, v.body, base, o, k.extra))
		}
		tests = append(tests, kt)
	}
	attn := func(a attention.Options) block.Options { o := blockOptions(); o.Attention = a; return o }
	band := func(after int) block.Options { return attn(attention.Options{Mask: must(mask.Band(1, after))}) }
	prefix := func(n int) block.Options { return attn(attention.Options{Mask: must(mask.Prefix(n))}) }
	padding := func(v ...int) block.Options { return attn(attention.Options{Mask: must(mask.KeyPadding(v))}) }
	causal := mask.Causal()
	add("mask[].after", "band with before 1, queries at 2, 3, 4 of 5: after 0, 1 and unbounded give the query at 2 keys {1, 2}, {1–3}, {1–4}",
		blockRefused(leftOut, `"epsilon":1e-5,"heads":4,"heads_kv":2,"mask":[{"kind":"band","before":1}]`, base, ErrConfig),
		blockValue("0", "", `"mask":[{"kind":"band","before":1,"after":0}]`, base, band(0), nil),
		blockValue("1", "", `"mask":[{"kind":"band","before":1,"after":1}]`, base, band(1), nil),
		blockValue("-1", "", `"mask":[{"kind":"band","before":1,"after":-1}]`, base, band(mask.Unbounded), nil))
	add("mask[].length", "queries at 2, 3, 4 of 5: prefixes 0, 4, 5 give the query at 2 keys {0–2}, {0–3}, {0–4}",
		blockRefused(leftOut, `"epsilon":1e-5,"heads":4,"heads_kv":2,"mask":[{"kind":"prefix"}]`, base, ErrConfig),
		blockValue("0", "", `"mask":[{"kind":"prefix","length":0}]`, base, prefix(0), nil),
		blockValue("4", "", `"mask":[{"kind":"prefix","length":4}]`, base, prefix(4), nil),
		blockValue("5", "", `"mask":[{"kind":"prefix","length":5}]`, base, prefix(5), nil))
	add("mask[].valid", "one sequence of 5 keys: valid counts 5, 3 and 1 are different key sets",
		blockRefused(leftOut, `"epsilon":1e-5,"heads":4,"heads_kv":2,"mask":[{"kind":"key-padding"}]`, base, ErrConfig),
		blockValue("[5]", "", `"mask":[{"kind":"key-padding","valid":[5]}]`, base, padding(5), nil),
		blockValue("[3]", "", `"mask":[{"kind":"key-padding","valid":[3]}]`, base, padding(3), nil),
		blockValue("[1]", "", `"mask":[{"kind":"key-padding","valid":[1]}]`, base, padding(1), nil))
	add("align", "the block puts query t at key past + t under both words (end: the last query at the last key; start with offset past), so both mean the same",
		blockValue(leftOut, "end", `"mask":[{"kind":"causal"}]`, base, attn(attention.Options{Mask: causal}), nil),
		blockValue("end", "", `"mask":[{"kind":"causal"}],"align":"end"`, base, attn(attention.Options{Mask: causal, Align: mask.AlignEnd}), nil),
		blockValue("start", "end", `"mask":[{"kind":"causal"}],"align":"start"`, base, attn(attention.Options{Mask: causal, Align: mask.AlignStart}), nil))
	empty := func(e attention.EmptyRow) block.Options {
		return attn(attention.Options{Mask: must(mask.KeyPadding([]int{0})), EmptyRow: e})
	}
	add("empty_row", "a key-padding mask of 0 valid keys hides every key from every query: zero makes the attention output 0, nan NaN",
		blockValue(leftOut, "zero", `"mask":[{"kind":"key-padding","valid":[0]}]`, base, empty(attention.EmptyRowZero), nil),
		blockValue("zero", "", `"mask":[{"kind":"key-padding","valid":[0]}],"empty_row":"zero"`, base, empty(attention.EmptyRowZero), nil),
		blockValue("nan", "", `"mask":[{"kind":"key-padding","valid":[0]}],"empty_row":"nan"`, base, empty(attention.EmptyRowNaN), nil))

	// The rotary keys, under "rotary", at head dimension 8.
	rot := blockGeom{heads: 4, hkv: 2, hd: 8}
	rotary := func(r posenc.Rotary) block.Options {
		o := blockOptions()
		r.Dim = 8
		o.Rotary = &r
		return o
	}
	add("rotary", "no rotary, the default rotary (base 10000, every dim) and base 100 turn the queries and keys at positions 2, 3, 4 by other angles",
		blockValue(leftOut, "", "", rot, blockOptions(), nil),
		blockValue("{}", "", `"rotary":{}`, rot, rotary(posenc.Rotary{}), nil),
		blockValue(`{"base":100}`, "", `"rotary":{"base":100}`, rot, rotary(posenc.Rotary{Base: 100}), nil))
	for _, k := range rotaryKeyList() {
		if k.key == "offset" || k.key == "positions" {
			continue
		}
		kt := keyTest{ops: ops, key: "rotary." + k.key, why: k.why + " (queries and keys at positions 2, 3, 4)"}
		for _, v := range k.values {
			body := `"rotary":{` + v.body + `}`
			if v.refuse != nil {
				kt.values = append(kt.values, blockRefused(v.value, `"epsilon":1e-5,"heads":4,"heads_kv":2,`+body, rot, v.refuse))
				continue
			}
			kt.values = append(kt.values, blockValue(v.value, v.same, body, rot, rotary(v.r), nil))
		}
		tests = append(tests, kt)
	}

	// The block's own keys.
	par := blockGeom{heads: 4, hkv: 2, hd: 4, noNorm2: true}
	add("form", "a norm weight other than 1: pre-norm, post-norm and parallel normalise other tensors and join the sublayers otherwise",
		blockValue(leftOut, "pre-norm", "", base, blockOptions(), nil),
		blockValue("pre-norm", "", `"form":"pre-norm"`, base, with(func(o *block.Options) { o.Form = block.PreNorm }), nil),
		blockValue("post-norm", "", `"form":"post-norm"`, base, with(func(o *block.Options) { o.Form = block.PostNorm }), nil),
		blockValue("parallel", "", `"form":"parallel"`, par, with(func(o *block.Options) { o.Form = block.Parallel }), nil))
	add("norm_kind", "rows of nonzero mean: LayerNorm subtracts it, RMSNorm does not",
		blockValue(leftOut, "layer-norm", "", base, blockOptions(), nil),
		blockValue("layer-norm", "", `"norm_kind":"layer-norm"`, base, with(func(o *block.Options) { o.NormKind = block.LayerNorm }), nil),
		blockValue("rms-norm", "", `"norm_kind":"rms-norm"`, base, with(func(o *block.Options) { o.NormKind = block.RMSNorm }), nil))
	eps := func(e float64) block.Options { o := blockOptions(); o.Norm.Epsilon = e; return o }
	add("epsilon", "rows of variance near 1/3: ε = 1e-5, 0.1 and 0.5 change the denominators by different amounts",
		blockRefused(leftOut, `"heads":4,"heads_kv":2`, base, ErrConfig),
		blockRaw("1e-5", "", `"epsilon":1e-5,"heads":4,"heads_kv":2`, base, eps(1e-5), nil),
		blockRaw("0.1", "", `"epsilon":0.1,"heads":4,"heads_kv":2`, base, eps(0.1), nil),
		blockRaw("0.5", "", `"epsilon":0.5,"heads":4,"heads_kv":2`, base, eps(0.5), nil))
	place := func(p norm.EpsilonPlacement) block.Options { o := eps(0.1); o.Norm.Placement = p; return o }
	add("epsilon_placement", "ε = 0.1 against variances near 1/3: √(σ² + ε) differs from √σ² + ε",
		blockRaw(leftOut, "in-root", `"epsilon":0.1,"heads":4,"heads_kv":2`, base, place(norm.EpsilonInRoot), nil),
		blockRaw("in-root", "", `"epsilon":0.1,"heads":4,"heads_kv":2,"epsilon_placement":"in-root"`, base, place(norm.EpsilonInRoot), nil),
		blockRaw("added-to-root", "", `"epsilon":0.1,"heads":4,"heads_kv":2,"epsilon_placement":"added-to-root"`, base, place(norm.EpsilonAddedToRoot), nil))
	add("weight_form", "norm weights of nonzero values: the gain w (as-is) differs from 1 + w (one-plus)",
		blockValue(leftOut, "as-is", "", base, blockOptions(), nil),
		blockValue("as-is", "", `"weight_form":"as-is"`, base, with(func(o *block.Options) { o.Norm.Weight = norm.WeightAsIs }), nil),
		blockValue("one-plus", "", `"weight_form":"one-plus"`, base, with(func(o *block.Options) { o.Norm.Weight = norm.WeightOnePlus }), nil))
	obi := blockGeom{heads: 4, hkv: 2, hd: 4, order: ffn.OutByIn}
	add("weight_order", "the same data read as [in, out] or [out, in] puts other weights at every place of every projection",
		blockValue(leftOut, "in-by-out", "", base, blockOptions(), nil),
		blockValue("in-by-out", "", `"weight_order":"in-by-out"`, base, blockOptions(), nil),
		blockValue("out-by-in", "", `"weight_order":"out-by-in"`, obi, with(func(o *block.Options) { o.WeightOrder = ffn.OutByIn }), nil))
	add("heads", "16 query units as 4 heads of 4, 2 heads of 8 or 8 heads of 2 on 2 kv heads: other head dimensions, scales and groups",
		blockRefused(leftOut, `"epsilon":1e-5,"heads_kv":2`, base, ErrConfig),
		blockValue("4", "", "", base, blockOptions(), nil),
		blockValue("2", "", "", blockGeom{heads: 2, hkv: 2, hd: 8}, blockOptions(), nil),
		blockValue("8", "", "", blockGeom{heads: 8, hkv: 2, hd: 2}, blockOptions(), nil))
	kv := func(n int) keyValue {
		g := blockGeom{heads: 4, hkv: n, hd: 4}
		return blockRaw(fmt.Sprint(n), "", fmt.Sprintf(`"epsilon":1e-5,"heads":4,"heads_kv":%d`, n), g, blockOptions(), nil)
	}
	add("heads_kv", "4 query heads on 4, 2 or 1 kv heads read other keys (left out: as many as the query heads)",
		blockRaw(leftOut, "4", `"epsilon":1e-5,"heads":4`, blockGeom{heads: 4, hkv: 4, hd: 4}, blockOptions(), nil),
		kv(4), kv(2), kv(1))
	act := keyTest{ops: ops, key: "activation", why: "hidden values of both signs in [−4, 4]: every activation gives others"}
	for _, a := range ffn.Act(0).Values() {
		a := a
		act.values = append(act.values, blockValue(a.String(), "", fmt.Sprintf(`"activation":%q`, a), base,
			with(func(o *block.Options) { o.FFN.Act = a }), nil))
	}
	act.values = append(act.values, blockValue(leftOut, "relu", "", base, blockOptions(), nil))
	tests = append(tests, act)
	swish := func(b float64) block.Options {
		return with(func(o *block.Options) { o.FFN.Act, o.FFN.Beta = ffn.ActSwish, b })
	}
	add("beta", "swish x·σ(βx) of the hidden values with β = 0, 0.5 and 1.5",
		blockValue(leftOut, "0", `"activation":"swish"`, base, swish(0), nil),
		blockValue("0", "", `"activation":"swish","beta":0`, base, swish(0), nil),
		blockValue("0.5", "", `"activation":"swish","beta":0.5`, base, swish(0.5), nil),
		blockValue("1.5", "", `"activation":"swish","beta":1.5`, base, swish(1.5), nil))
	gated := blockGeom{heads: 4, hkv: 2, hd: 4, gated: true}
	add("gated", "a gated layer multiplies φ(x·W) by x·V, values other than 1",
		blockValue(leftOut, "false", "", base, blockOptions(), nil),
		blockValue("false", "", `"gated":false`, base, blockOptions(), nil),
		blockValue("true", "", `"gated":true`, gated, with(func(o *block.Options) { o.FFN.Gated = true }), nil))
	keep := func(s ...block.Stage) block.Options { return with(func(o *block.Options) { o.Keep = s }) }
	add("keep", "no stage, the queries, or the queries and the attention output: other outputs",
		blockValue(leftOut, "[]", "", base, blockOptions(), nil),
		blockValue("[]", "", `"keep":[]`, base, keep(), nil),
		blockValue(`["q"]`, "", `"keep":["q"]`, base, keep(block.StageQ), nil),
		blockValue(`["q","attn"]`, "", `"keep":["q","attn"]`, base, keep(block.StageQ, block.StageAttn), nil),
		blockRefused(`["query"]`, `"epsilon":1e-5,"heads":4,"heads_kv":2,"keep":["query"]`, base, block.ErrOption))
	return tests
}

// blockFamilies maps the golden families of package block to
// block-forward.
func blockFamilies() []goldenFamily {
	var fams []goldenFamily
	for _, f := range []string{"pre_norm", "post_norm", "parallel", "cache", "weight_order"} {
		fams = append(fams, goldenFamily{pkg: "block", family: f,
			config: identity("form", "norm_kind", "epsilon", "epsilon_placement", "weight_form", "weight_order", "heads", "heads_kv",
				"activation", "beta", "gated", "mask", "rotary", "group", "soft_cap", "scale", "align", "alibi_form"),
			dropped: map[string]string{"tokens": "the first dimension of x", "width": "the second dimension of x",
				"head_dim": "the query units of wq over heads", "hidden": "a dimension of w1", "past": "the first dimension of past_k"},
			inputs: identity("x", "norm1", "norm1_bias", "wq", "bq", "wk", "bk", "wv", "bv", "wo", "bo", "norm2", "norm2_bias",
				"w1", "b1", "v", "c", "w2", "b2", "past_k", "past_v", "slopes", "sinks"),
			runs: []goldenRun{{op: "block-forward", inputs: []string{"x", "norm1", "norm1_bias", "wq", "bq", "wk", "bk", "wv", "bv", "wo", "bo",
				"norm2", "norm2_bias", "w1", "b1", "v", "c", "w2", "b2", "past_k", "past_v", "slopes", "sinks"},
				outputs: identity("out", "present_k", "present_v"), bound: blockBound}}})
	}
	return fams
}

// blockBound is block/golden_test.go's goldenBound, the project target
// (the block measures below 1e-15 there).
func blockBound(*golden.Case, map[string]json.RawMessage, string) any { return 1e-14 }
