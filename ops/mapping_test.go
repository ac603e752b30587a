package ops

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/posenc"
)

// The tests of this file check that every configuration key reaches its
// kernel as meant: for every operation, every key and every value of it
// (each word of a word key, the default included, several numbers of a
// number key, and the key left out), the operation's result equals, bit
// for bit, the kernel's called directly with the Go options written out
// here by hand, and values of different meaning give different results,
// on inputs chosen so that they must. A key whose words were swapped, or
// read as another key, on the way from the configuration to the kernel
// fails here.

// The values of the attention keys group, scale and soft_cap, shared by
// every operation that takes them (the attention and kvcache operations).
var (
	groupValues = []attnKeyValue{
		{value: leftOut, same: "blocks"},
		{value: "blocks", body: `"group":"blocks"`, o: attention.Options{Group: attention.GroupBlocks}},
		{value: "cycle", body: `"group":"cycle"`, o: attention.Options{Group: attention.GroupCycle}},
	}
	scaleValues = []attnKeyValue{
		{value: leftOut},
		{value: "0.25", body: `"scale":0.25`, o: attention.Options{Scale: 0.25}},
		{value: "2", body: `"scale":2`, o: attention.Options{Scale: 2}},
	}
	softCapValues = []attnKeyValue{
		{value: leftOut},
		{value: "0.5", body: `"soft_cap":0.5`, o: attention.Options{SoftCap: 0.5}},
		{value: "2", body: `"soft_cap":2`, o: attention.Options{SoftCap: 2}},
	}
)

// leftOut is the value of a key that the configuration leaves out.
const leftOut = "(left out)"

// keyValue is one value of one key: the configuration holding it, the
// inputs, and the kernel called directly with the options that value
// means, written by hand.
type keyValue struct {
	value  string // the word or number as the configuration holds it, or leftOut
	config string // the whole configuration
	// same is the value this one means when it is another's (the default
	// word, for the key left out): their results must be identical. Values
	// with no same of their own must give pairwise different results.
	same string
	in   func(op string) Tensors
	// want calls the kernel directly; nil when the operation must refuse
	// the configuration with an error wrapping refuse.
	want   func(op string, in Tensors) (Tensors, error)
	refuse error
	// want32, for a precision idiom (Key.Idiom), calls the float32 kernel
	// directly with the idiom the value means: Run32 must give its bits
	// (while Run gives want's, the same for every word), and values of
	// different meaning under Run32 (same32, as same for Run) must give
	// different bits.
	want32 func(op string, in Tensors) (Tensors, error)
	same32 string
}

// keyTest is one key of some operations and its values. why says, for
// the reader and in the message of a failure, why the inputs chosen tell
// the values apart: a shape or a mask under which each convention
// matters (Lq ≠ Lk and an offset for the alignment, a mask that leaves
// some rows no key for the empty-row policy, a nonzero weight for the
// weight form, a partial rotation, …).
type keyTest struct {
	ops    []string
	key    string
	why    string
	values []keyValue
}

// cfg is a configuration of version 1 holding the keys of body ("" for
// none).
func cfg(body string) string {
	if body == "" {
		return `{"version":1}`
	}
	return `{"version":1,` + body + `}`
}

// randomTensor is a tensor of the shape, uniform in [−1, 1), the same for
// the same seed.
func randomTensor(seed uint64, shape ...int) Tensor {
	return tensor(rand.New(rand.NewPCG(seed, 77)), shape...)
}

// TestKeysReachKernels runs every value of every key test.
func TestKeysReachKernels(t *testing.T) {
	for _, kt := range keyTests() {
		for _, op := range kt.ops {
			t.Run(op+"/"+kt.key, func(t *testing.T) {
				got, got32 := map[string]Tensors{}, map[string]Tensors{}
				for _, v := range kt.values {
					in := v.in(op)
					if v.want32 != nil {
						out32, err := Run32(op, []byte(v.config), in)
						ensure.NoError(t, err, "%s = %s (%s): Run32", kt.key, v.value, v.config)
						want32, err := v.want32(op, round32(in))
						ensure.NoError(t, err, "%s = %s: the float32 kernel called directly", kt.key, v.value)
						if d := bitDiff(out32, want32); d != "" {
							t.Errorf("%s = %s (%s): Run32 differs from the float32 kernel called directly: %s", kt.key, v.value, v.config, d)
						}
						got32[v.value] = out32
					}
					out, err := Run(op, []byte(v.config), in)
					if v.want == nil {
						ensure.Error(t, err, "%s = %s (%s): the configuration must be refused", kt.key, v.value, v.config)
						expect.ErrorIs(t, err, v.refuse, "%s = %s (%s)", kt.key, v.value, v.config)
						continue
					}
					ensure.NoError(t, err, "%s = %s (%s)", kt.key, v.value, v.config)
					want, err := v.want(op, in)
					ensure.NoError(t, err, "%s = %s: the kernel called directly", kt.key, v.value)
					if d := bitDiff(out, want); d != "" {
						t.Errorf("%s = %s (%s): the operation differs from the kernel called directly: %s", kt.key, v.value, v.config, d)
					}
					got[v.value] = out
				}
				// Values of one meaning agree; values of different meanings
				// differ, so that a swap of two of them is seen.
				meaning := func(v keyValue) string {
					if v.same != "" {
						return v.same
					}
					return v.value
				}
				for i, a := range kt.values {
					for _, b := range kt.values[i+1:] {
						if a.want == nil || b.want == nil {
							continue
						}
						d := bitDiff(got[a.value], got[b.value])
						if meaning(a) == meaning(b) {
							expect.Empty(t, d, "%s = %s and %s = %s mean the same and must agree", kt.key, a.value, kt.key, b.value)
						} else {
							expect.NotEmpty(t, d, "%s = %s and %s = %s give the same result: the inputs do not tell them apart (%s)", kt.key, a.value, kt.key, b.value, kt.why)
						}
					}
				}
				meaning32 := func(v keyValue) string {
					if v.same32 != "" {
						return v.same32
					}
					return v.value
				}
				for i, a := range kt.values {
					for _, b := range kt.values[i+1:] {
						if a.want32 == nil || b.want32 == nil {
							continue
						}
						d := bitDiff(got32[a.value], got32[b.value])
						if meaning32(a) == meaning32(b) {
							expect.Empty(t, d, "Run32: %s = %s and %s = %s mean the same and must agree", kt.key, a.value, kt.key, b.value)
						} else {
							expect.NotEmpty(t, d, "Run32: %s = %s and %s = %s give the same float32 run: the inputs do not tell them apart (%s)", kt.key, a.value, kt.key, b.value, kt.why)
						}
					}
				}
			})
		}
	}
}

// TestKeysCovered: every key of every operation has a key test for that
// operation, with the key left out and, for a word key, every word; a key
// of another type has at least two values besides the key left out.
func TestKeysCovered(t *testing.T) {
	tests := map[[2]string]keyTest{}
	for _, kt := range keyTests() {
		for _, op := range kt.ops {
			_, dup := tests[[2]string{op, kt.key}]
			ensure.False(t, dup, "%s: key %s tested twice", op, kt.key)
			tests[[2]string{op, kt.key}] = kt
		}
	}
	for _, n := range Names() {
		o, _ := Lookup(n)
		for _, k := range o.Keys() {
			kt, ok := tests[[2]string{n, k.Name}]
			if !expect.True(t, ok, "%s: key %s has no key test", n, k.Name) {
				continue
			}
			var values []string
			for _, v := range kt.values {
				values = append(values, v.value)
			}
			expect.Contains(t, values, leftOut, "%s: key %s", n, k.Name)
			if k.Type == "word" {
				for _, w := range k.Words {
					expect.Contains(t, values, w.Text, "%s: key %s: word %s", n, k.Name, w.Text)
				}
			} else {
				expect.GreaterOrEqual(t, len(values), 3, "%s: key %s: values %v", n, k.Name, values)
			}
		}
	}
	for key := range tests {
		o, err := Lookup(key[0])
		ensure.NoError(t, err)
		expect.True(t, slices.ContainsFunc(o.Keys(), func(k Key) bool { return k.Name == key[1] }), "%s has no key %s", key[0], key[1])
	}
}

// bitDiff describes the first difference between two sets of outputs,
// comparing the bits of every value (NaN payloads and signed zeros
// included); "" when they are identical.
func bitDiff(a, b Tensors) string {
	if len(a) != len(b) {
		return fmt.Sprintf("outputs %v and %v", outputNames(a), outputNames(b))
	}
	for _, n := range outputNames(a) {
		x, y := a[n], b[n]
		if _, ok := b[n]; !ok {
			return fmt.Sprintf("output %q missing", n)
		}
		if !slices.Equal(x.Shape, y.Shape) {
			return fmt.Sprintf("output %q: shape %v and %v", n, x.Shape, y.Shape)
		}
		if len(x.Data) != len(y.Data) {
			return fmt.Sprintf("output %q: %d and %d values", n, len(x.Data), len(y.Data))
		}
		for i := range x.Data {
			if math.Float64bits(x.Data[i]) != math.Float64bits(y.Data[i]) {
				return fmt.Sprintf("output %q[%d]: %v and %v", n, i, x.Data[i], y.Data[i])
			}
		}
	}
	return ""
}

func outputNames(t Tensors) []string {
	var n []string
	for k := range t {
		n = append(n, k)
	}
	slices.Sort(n)
	return n
}

func keyTests() []keyTest {
	var all []keyTest
	for _, f := range []func() []keyTest{attentionKeyTests, rotaryKeyTests, tableKeyTests, normKeyTests, activationKeyTests, ffnKeyTests, idiomKeyTests, kvcacheKeyTests, blockKeyTests} {
		all = append(all, f()...)
	}
	return all
}

// ---- attention-forward and attention-backward ----

var attentionOps = []string{"attention-forward", "attention-backward"}

// attnShape is the geometry of most attention key tests: 4 query heads on
// 2 kv heads, 3 queries on 5 keys (so the alignment and the offset move the
// queries), head dimension 4 and value dimension 3.
var attnShape = attention.Shape{Batch: 1, HeadsQ: 4, HeadsKV: 2, Lq: 3, Lk: 5, Dk: 4, Dv: 3}

// attnInputs are q, k, v (and dout, dlse for the backward operation) of
// shape s in the layout, the same data whatever the layout, and the extra
// inputs.
func attnInputs(s attention.Shape, layout attention.Layout, extra Tensors) func(op string) Tensors {
	return func(op string) Tensors {
		dims := func(b, h, l, d int) []int {
			if layout == attention.SeqMajor {
				return []int{b, l, h, d}
			}
			return []int{b, h, l, d}
		}
		in := Tensors{
			"q": randomTensor(1, dims(s.Batch, s.HeadsQ, s.Lq, s.Dk)...),
			"k": randomTensor(2, dims(s.Batch, s.HeadsKV, s.Lk, s.Dk)...),
			"v": randomTensor(3, dims(s.Batch, s.HeadsKV, s.Lk, s.Dv)...),
		}
		if op == "attention-backward" {
			in["dout"] = randomTensor(4, dims(s.Batch, s.HeadsQ, s.Lq, s.Dv)...)
			lse := dims(s.Batch, s.HeadsQ, s.Lq, 1)
			in["dlse"] = randomTensor(5, lse[:3]...)
		}
		for n, x := range extra {
			in[n] = x
		}
		return in
	}
}

// attnKernel calls attention.Forward or attention.Backward directly with
// shape s and options o, the optional inputs put in o by hand.
func attnKernel(s attention.Shape, o attention.Options) func(op string, in Tensors) (Tensors, error) {
	return func(op string, in Tensors) (Tensors, error) {
		if b, ok := in["bias"]; ok {
			o.Bias, o.BiasBatch, o.BiasHeads = b.Data, b.Shape[0], b.Shape[1]
		}
		if x, ok := in["slopes"]; ok {
			o.Slopes = x.Data
		}
		if x, ok := in["sinks"]; ok {
			o.Sinks = x.Data
		}
		outShape, lseShape := []int{s.Batch, s.HeadsQ, s.Lq, s.Dv}, []int{s.Batch, s.HeadsQ, s.Lq}
		if o.Layout == attention.SeqMajor {
			outShape, lseShape = []int{s.Batch, s.Lq, s.HeadsQ, s.Dv}, []int{s.Batch, s.Lq, s.HeadsQ}
		}
		if op == "attention-forward" {
			out, lse, err := attention.Forward(in["q"].Data, in["k"].Data, in["v"].Data, s, o)
			return Tensors{"out": {outShape, out}, "lse": {lseShape, lse}}, err
		}
		g, err := attention.Backward(in["q"].Data, in["k"].Data, in["v"].Data, in["dout"].Data, in["dlse"].Data, s, o)
		out := Tensors{"dq": {in["q"].Shape, g.DQ}, "dk": {in["k"].Shape, g.DK}, "dv": {in["v"].Shape, g.DV}}
		if g.DSinks != nil {
			out["dsinks"] = Tensor{[]int{s.HeadsQ}, g.DSinks}
		}
		if g.DBias != nil {
			out["dbias"] = Tensor{in["bias"].Shape, g.DBias}
		}
		return out, err
	}
}

// attnValue is one value of an attention key: body holds the keys of the
// configuration, o the options it means.
func attnValue(value, same, body string, s attention.Shape, o attention.Options, extra Tensors) keyValue {
	return keyValue{value: value, same: same, config: cfg(body), in: attnInputs(s, o.Layout, extra), want: attnKernel(s, o)}
}

// attnKeyValue is one value of an attention key, as attentionKeyTests
// lists it: body holds the keys of the configuration, o the options it
// means; a value with refuse is refused by the operations, under that
// error.
type attnKeyValue struct {
	value, same, body string
	o                 attention.Options
	refuse            error
}

// attnRefused is a value of an attention key the operations refuse.
func attnRefused(value, body string, s attention.Shape, refuse error) keyValue {
	return keyValue{value: value, config: cfg(body), in: attnInputs(s, attention.HeadsMajor, nil), refuse: refuse}
}

// must returns a mask built by a constructor, or panics: the masks here
// are written by hand and valid.
func must(m mask.Mask, err error) mask.Mask {
	if err != nil {
		panic(err)
	}
	return m
}

// attnKeyEntry is one attention key of the key tests, with its values
// and the shape and optional inputs that tell them apart.
type attnKeyEntry struct {
	key, why string
	s        attention.Shape // the shape of the inputs; attnShape when zero
	extra    Tensors         // the optional inputs
	values   []attnKeyValue
}

// attentionKeyList lists the attention keys of the key tests (the
// attention operations take them all; block-forward shares those that
// do not move the queries).
func attentionKeyList() []attnKeyEntry {
	causal := mask.Causal()
	start := func(m mask.Mask) attention.Options { return attention.Options{Mask: m, Align: mask.AlignStart} }
	onlyMask := func(m mask.Mask) attention.Options { return attention.Options{Mask: m} }
	slopes := Tensors{"slopes": {[]int{4}, []float64{0.5, 0.25, 0.125, 0.0625}}}
	// Two batch entries for the masks that differ per entry.
	s2 := attnShape
	s2.Batch = 2
	return []attnKeyEntry{
		{key: "layout", why: "the same data read as [batch, heads, queries, dim] or [batch, queries, heads, dim] gives each head other rows (4 heads, 3 queries)",
			values: []attnKeyValue{
				{value: leftOut, same: "heads-major"},
				{value: "heads-major", body: `"layout":"heads-major"`, o: attention.Options{Layout: attention.HeadsMajor}},
				{value: "seq-major", body: `"layout":"seq-major"`, o: attention.Options{Layout: attention.SeqMajor}},
			}},
		{key: "group", why: "4 query heads on 2 kv heads: blocks gives heads 0, 1, 2, 3 kv heads 0, 0, 1, 1, cycle 0, 1, 0, 1, so heads 1 and 2 read other keys",
			values: groupValues},
		{key: "scale", why: "the default 1/√4 = 0.5, 0.25 and 2 scale nonzero logits differently",
			values: scaleValues},
		{key: "soft_cap", why: "scaled logits q·k/2 up to 2 in magnitude: caps of 0.5 and 2 bend them by different amounts, no cap leaves them",
			values: softCapValues},
		{key: "mask", why: "queries at key positions 2, 3, 4 of 5: every key, the causal keys, and a window of 2 inside them are different key sets",
			values: []attnKeyValue{
				{value: leftOut, same: "[]"},
				{value: "[]", body: `"mask":[]`},
				{value: `[full]`, same: "[]", body: `"mask":[{"kind":"full"}]`, o: onlyMask(mask.Full())},
				{value: `[causal]`, body: `"mask":[{"kind":"causal"}]`, o: onlyMask(causal)},
				{value: `[causal, window 2]`, body: `"mask":[{"kind":"causal"},{"kind":"window","size":2}]`, o: onlyMask(must(mask.Intersect(causal, must(mask.Window(2)))))},
			}},
		{key: "mask[].kind", why: "queries at key positions 2, 3, 4 of 5 see {0–4}×3 (full), {0–2}, {0–3}, {0–4} (causal), {1–3}, {2–4}, {3, 4} (band 1, 1), " +
			"{1, 2}, {2, 3}, {3, 4} (window 2), {0–3}, {0–3}, {0–4} (prefix 4), {0–2}×3 (key-padding 3), {0–2}, {3}, {3, 4} (packed 0, 3, 5): all different",
			values: []attnKeyValue{
				{value: leftOut, body: `"mask":[{"size":2}]`, refuse: ErrConfig},
				{value: "full", body: `"mask":[{"kind":"full"}]`, o: onlyMask(mask.Full())},
				{value: "causal", body: `"mask":[{"kind":"causal"}]`, o: onlyMask(causal)},
				{value: "band", body: `"mask":[{"kind":"band","before":1,"after":1}]`, o: onlyMask(must(mask.Band(1, 1)))},
				{value: "window", body: `"mask":[{"kind":"window","size":2}]`, o: onlyMask(must(mask.Window(2)))},
				{value: "prefix", body: `"mask":[{"kind":"prefix","length":4}]`, o: onlyMask(must(mask.Prefix(4)))},
				{value: "key-padding", body: `"mask":[{"kind":"key-padding","valid":[3]}]`, o: onlyMask(must(mask.KeyPadding([]int{3})))},
				{value: "packed", body: `"mask":[{"kind":"packed","offsets":[0,3,5],"block":"causal"}]`, o: onlyMask(must(mask.Packed([]int{0, 3, 5}, mask.BlockCausal)))},
			}},
		{key: "mask[].before", why: "band with after 1, queries at 2, 3, 4: before 0, 1, 2 and unbounded start the query at 3 at keys 3, 2, 1, 0; a swap with after changes the key sets",
			values: []attnKeyValue{
				{value: leftOut, body: `"mask":[{"kind":"band","after":1}]`, refuse: ErrConfig},
				{value: "0", body: `"mask":[{"kind":"band","before":0,"after":1}]`, o: onlyMask(must(mask.Band(0, 1)))},
				{value: "1", body: `"mask":[{"kind":"band","before":1,"after":1}]`, o: onlyMask(must(mask.Band(1, 1)))},
				{value: "2", body: `"mask":[{"kind":"band","before":2,"after":1}]`, o: onlyMask(must(mask.Band(2, 1)))},
				{value: "-1", body: `"mask":[{"kind":"band","before":-1,"after":1}]`, o: onlyMask(must(mask.Band(mask.Unbounded, 1)))},
			}},
		{key: "mask[].after", why: "band with before 1, queries aligned at the start (positions 0, 1, 2): after 0, 1, 2 and unbounded end the query at 0 at keys 0, 1, 2, 4",
			values: []attnKeyValue{
				{value: leftOut, body: `"mask":[{"kind":"band","before":1}],"align":"start"`, refuse: ErrConfig},
				{value: "0", body: `"mask":[{"kind":"band","before":1,"after":0}],"align":"start"`, o: start(must(mask.Band(1, 0)))},
				{value: "1", body: `"mask":[{"kind":"band","before":1,"after":1}],"align":"start"`, o: start(must(mask.Band(1, 1)))},
				{value: "2", body: `"mask":[{"kind":"band","before":1,"after":2}],"align":"start"`, o: start(must(mask.Band(1, 2)))},
				{value: "-1", body: `"mask":[{"kind":"band","before":1,"after":-1}],"align":"start"`, o: start(must(mask.Band(1, mask.Unbounded)))},
			}},
		{key: "mask[].size", why: "queries at 2, 3, 4: windows of 1, 2, 3 keys ending at the query are different key sets",
			values: []attnKeyValue{
				{value: leftOut, body: `"mask":[{"kind":"window"}]`, refuse: ErrConfig},
				{value: "1", body: `"mask":[{"kind":"window","size":1}]`, o: onlyMask(must(mask.Window(1)))},
				{value: "2", body: `"mask":[{"kind":"window","size":2}]`, o: onlyMask(must(mask.Window(2)))},
				{value: "3", body: `"mask":[{"kind":"window","size":3}]`, o: onlyMask(must(mask.Window(3)))},
			}},
		{key: "mask[].length", why: "queries aligned at the start (positions 0, 1, 2), so that a prefix reaches past them: prefixes 0, 2, 4 give the query at 0 keys {0}, {0, 1}, {0–3}",
			values: []attnKeyValue{
				{value: leftOut, body: `"mask":[{"kind":"prefix"}],"align":"start"`, refuse: ErrConfig},
				{value: "0", body: `"mask":[{"kind":"prefix","length":0}],"align":"start"`, o: start(must(mask.Prefix(0)))},
				{value: "2", body: `"mask":[{"kind":"prefix","length":2}],"align":"start"`, o: start(must(mask.Prefix(2)))},
				{value: "4", body: `"mask":[{"kind":"prefix","length":4}],"align":"start"`, o: start(must(mask.Prefix(4)))},
			}},
		{key: "mask[].valid", s: s2, why: "two batch entries: valid counts 5, 5 (every key), 1, 4 and 4, 1 (the same counts in the other order) and 3, 3 are different key sets",
			values: []attnKeyValue{
				{value: leftOut, body: `"mask":[{"kind":"key-padding"}]`, refuse: ErrConfig},
				{value: "[5,5]", body: `"mask":[{"kind":"key-padding","valid":[5,5]}]`, o: onlyMask(must(mask.KeyPadding([]int{5, 5})))},
				{value: "[1,4]", body: `"mask":[{"kind":"key-padding","valid":[1,4]}]`, o: onlyMask(must(mask.KeyPadding([]int{1, 4})))},
				{value: "[4,1]", body: `"mask":[{"kind":"key-padding","valid":[4,1]}]`, o: onlyMask(must(mask.KeyPadding([]int{4, 1})))},
				{value: "[3,3]", body: `"mask":[{"kind":"key-padding","valid":[3,3]}]`, o: onlyMask(must(mask.KeyPadding([]int{3, 3})))},
			}},
		{key: "mask[].offsets", why: "causal blocks, queries at 2, 3, 4: the sequences [0, 5), [0, 2)+[2, 5), [0, 3)+[3, 5) and [0, 1)+[1, 3)+[3, 5) give the query at 2 keys {0–2}, {2}, {0–2}, {1, 2} and the one at 3 {0–3}, {2, 3}, {3}, {3}",
			values: []attnKeyValue{
				{value: leftOut, body: `"mask":[{"kind":"packed","block":"causal"}]`, refuse: ErrConfig},
				{value: "[0,5]", body: `"mask":[{"kind":"packed","offsets":[0,5],"block":"causal"}]`, o: onlyMask(must(mask.Packed([]int{0, 5}, mask.BlockCausal)))},
				{value: "[0,2,5]", body: `"mask":[{"kind":"packed","offsets":[0,2,5],"block":"causal"}]`, o: onlyMask(must(mask.Packed([]int{0, 2, 5}, mask.BlockCausal)))},
				{value: "[0,3,5]", body: `"mask":[{"kind":"packed","offsets":[0,3,5],"block":"causal"}]`, o: onlyMask(must(mask.Packed([]int{0, 3, 5}, mask.BlockCausal)))},
				{value: "[0,1,3,5]", body: `"mask":[{"kind":"packed","offsets":[0,1,3,5],"block":"causal"}]`, o: onlyMask(must(mask.Packed([]int{0, 1, 3, 5}, mask.BlockCausal)))},
			}},
		{key: "mask[].block", why: "sequences [0, 3) and [3, 5), queries at 2, 3, 4: the query at 3 sees {3} causal but {3, 4} full",
			values: []attnKeyValue{
				{value: leftOut, body: `"mask":[{"kind":"packed","offsets":[0,3,5]}]`, refuse: ErrConfig},
				{value: "causal", body: `"mask":[{"kind":"packed","offsets":[0,3,5],"block":"causal"}]`, o: onlyMask(must(mask.Packed([]int{0, 3, 5}, mask.BlockCausal)))},
				{value: "full", body: `"mask":[{"kind":"packed","offsets":[0,3,5],"block":"full"}]`, o: onlyMask(must(mask.Packed([]int{0, 3, 5}, mask.BlockFull)))},
			}},
		{key: "align", why: "3 queries on 5 keys under a causal mask: end puts them at 2, 3, 4, start at 0, 1, 2, so they see different keys",
			values: []attnKeyValue{
				{value: leftOut, same: "end", body: `"mask":[{"kind":"causal"}]`, o: attention.Options{Mask: causal}},
				{value: "end", body: `"mask":[{"kind":"causal"}],"align":"end"`, o: attention.Options{Mask: causal, Align: mask.AlignEnd}},
				{value: "start", body: `"mask":[{"kind":"causal"}],"align":"start"`, o: attention.Options{Mask: causal, Align: mask.AlignStart}},
			}},
		{key: "offset", why: "queries aligned at the start under a causal mask: offsets 0, 1, 2 put the first query at key 0, 1, 2, which it sees with all before it (a negated offset would put it before key 0, which is refused)",
			values: []attnKeyValue{
				{value: leftOut, same: "0", body: `"mask":[{"kind":"causal"}],"align":"start"`, o: start(causal)},
				{value: "0", body: `"mask":[{"kind":"causal"}],"align":"start","offset":0`, o: start(causal)},
				{value: "1", body: `"mask":[{"kind":"causal"}],"align":"start","offset":1`, o: attention.Options{Mask: causal, Align: mask.AlignStart, Offset: 1}},
				{value: "2", body: `"mask":[{"kind":"causal"}],"align":"start","offset":2`, o: attention.Options{Mask: causal, Align: mask.AlignStart, Offset: 2}},
			}},
		{key: "alibi_form", extra: slopes, why: "slopes given and every key visible to queries at 2, 3, 4, so keys after a query exist: their bias is +m·d (causal), −m·d (symmetric), 0 (past-only)",
			values: []attnKeyValue{
				{value: leftOut, same: "causal"},
				{value: "causal", body: `"alibi_form":"causal"`, o: attention.Options{ALiBi: mask.ALiBiCausal}},
				{value: "symmetric", body: `"alibi_form":"symmetric"`, o: attention.Options{ALiBi: mask.ALiBiSymmetric}},
				{value: "past-only", body: `"alibi_form":"past-only"`, o: attention.Options{ALiBi: mask.ALiBiPastOnly}},
			}},
		{key: "empty_row", s: s2, why: "a key-padding mask of valid counts 0 and 3 hides every key from the rows of the first batch entry and some from the second: zero gives them output 0, nan gives NaN",
			values: []attnKeyValue{
				{value: leftOut, same: "zero", body: `"mask":[{"kind":"key-padding","valid":[0,3]}]`, o: onlyMask(must(mask.KeyPadding([]int{0, 3})))},
				{value: "zero", body: `"mask":[{"kind":"key-padding","valid":[0,3]}],"empty_row":"zero"`, o: attention.Options{Mask: must(mask.KeyPadding([]int{0, 3})), EmptyRow: attention.EmptyRowZero}},
				{value: "nan", body: `"mask":[{"kind":"key-padding","valid":[0,3]}],"empty_row":"nan"`, o: attention.Options{Mask: must(mask.KeyPadding([]int{0, 3})), EmptyRow: attention.EmptyRowNaN}},
			}},
	}
}

func attentionKeyTests() []keyTest {
	keys := attentionKeyList()
	var tests []keyTest
	for _, k := range keys {
		s := k.s
		if s == (attention.Shape{}) {
			s = attnShape
		}
		kt := keyTest{ops: attentionOps, key: k.key, why: k.why}
		for _, v := range k.values {
			if v.refuse != nil {
				kt.values = append(kt.values, attnRefused(v.value, v.body, s, v.refuse))
				continue
			}
			kt.values = append(kt.values, attnValue(v.value, v.same, v.body, s, v.o, k.extra))
		}
		tests = append(tests, kt)
	}
	return tests
}

// ---- rotary-apply and rotary-tables ----

// rotaryValue is one value of a rotary key: body holds the keys of the
// configuration, r the Rotary it means (Dim is set for the operation),
// offset and list the positions.
type rotaryValue struct {
	value, same, body string
	r                 posenc.Rotary
	offset            int
	list              []int // explicit positions; nil: offset, offset+1, …
	inverse           bool  // rotary-apply only
	refuse            error // the configuration is refused, under this error
}

// rotaryDim and rotaryLength are the head dimension and the positions of
// the rotary key tests: x is [2, 5, 8] and the tables [5, rotated/2].
const rotaryDim, rotaryLength = 8, 5

// span lists n positions from first on.
func span(first, n int) []int {
	p := make([]int, n)
	for i := range p {
		p[i] = first + i
	}
	return p
}

// rotaryKeyValue turns v into the keyValue of operation op.
func rotaryKeyValue(op string, v rotaryValue) keyValue {
	kv := keyValue{value: v.value, same: v.same, refuse: v.refuse}
	r := v.r
	r.Dim = rotaryDim
	if op == "rotary-apply" {
		kv.config = cfg(v.body)
		kv.in = func(string) Tensors { return Tensors{"x": randomTensor(11, 2, rotaryLength, rotaryDim)} }
		if v.refuse == nil {
			kv.want = func(_ string, in Tensors) (Tensors, error) {
				apply := r.Apply
				if v.inverse {
					apply = r.ApplyInverse
				}
				y, err := apply(in["x"].Data, rotaryLength, posenc.Positions{Offset: v.offset, List: v.list})
				return Tensors{"y": {in["x"].Shape, y}}, err
			}
		}
		return kv
	}
	body := `"dim":8,"length":5`
	if v.list != nil {
		body = `"dim":8` // the positions give the length
	}
	if v.body != "" {
		body += "," + v.body
	}
	kv.config = cfg(body)
	kv.in = func(string) Tensors { return nil }
	if v.refuse == nil {
		pos := v.list
		if pos == nil {
			pos = span(v.offset, rotaryLength)
		}
		kv.want = func(string, Tensors) (Tensors, error) {
			cos, sin, err := r.Tables(pos)
			half := len(cos) / len(pos)
			return Tensors{"cos": {[]int{len(pos), half}, cos}, "sin": {[]int{len(pos), half}, sin}}, err
		}
	}
	return kv
}

// rotaryKeyEntry is one rotary key of the key tests with its values.
type rotaryKeyEntry struct {
	key, why string
	values   []rotaryValue
}

// rotaryKeyList lists the rotary keys of the key tests (rotary-apply and
// rotary-tables take them all; block-forward those under "rotary" but
// the positions, which the block sets).
func rotaryKeyList() []rotaryKeyEntry {
	// yarn is the YaRN scaling of most scaling keys: factor 4 over a
	// trained length of 16. With base 10000 and 8 rotated dims the
	// frequencies are 1, 0.1, 0.01, 0.001, at ratios ρ = 16·θ/(2π) of
	// 2.55, 0.255, 0.0255, 0.00255: the first lies inside the default ramp
	// α = 1 … β = 32, so α, β and the ramp change it.
	yarn := func(sc posenc.Scaling) posenc.Rotary {
		sc.Method, sc.Factor, sc.TrainedLength = posenc.YaRN, 4, 16
		return posenc.Rotary{Scaling: sc}
	}
	scaled := func(sc posenc.Scaling) posenc.Rotary { return posenc.Rotary{Scaling: sc} }
	factors := []float64{1, 2, 4, 8}
	return []rotaryKeyEntry{
		{"rotated", "rotating 4, 6 or all 8 dims: frequencies over r and the dims past r passed through differ (tables: r/2 columns)", []rotaryValue{
			{value: leftOut, same: "8"},
			{value: "8", body: `"rotated":8`, r: posenc.Rotary{Rotated: 8}},
			{value: "4", body: `"rotated":4`, r: posenc.Rotary{Rotated: 4}},
			{value: "6", body: `"rotated":6`, r: posenc.Rotary{Rotated: 6}},
		}},
		{"base", "the bases 10000, 100 and 500 give other frequencies after frequency 0, at positions up to 4", []rotaryValue{
			{value: leftOut, same: "10000"},
			{value: "10000", body: `"base":10000`, r: posenc.Rotary{Base: 10000}},
			{value: "100", body: `"base":100`, r: posenc.Rotary{Base: 100}},
			{value: "500", body: `"base":500`, r: posenc.Rotary{Base: 500}},
		}},
		{"pairing", "rotary-apply: adjacent rotates dims (0, 1) by frequency 0, halves dims (0, 4); the tables hold one column per frequency whatever the pairing", []rotaryValue{
			{value: leftOut, same: "adjacent"},
			{value: "adjacent", body: `"pairing":"adjacent"`, r: posenc.Rotary{Pairing: posenc.PairAdjacent}},
			{value: "halves", body: `"pairing":"halves"`, r: posenc.Rotary{Pairing: posenc.PairHalves}},
		}},
		{"magnitude", "magnitudes 1, 0.5 and 2 scale the rotated values", []rotaryValue{
			{value: leftOut, same: "1"},
			{value: "1", body: `"magnitude":1`, r: posenc.Rotary{Magnitude: 1}},
			{value: "0.5", body: `"magnitude":0.5`, r: posenc.Rotary{Magnitude: 0.5}},
			{value: "2", body: `"magnitude":2`, r: posenc.Rotary{Magnitude: 2}},
		}},
		{"scaling", "no scaling and interpolation by 2 give other frequencies", []rotaryValue{
			{value: leftOut, same: "none"},
			{value: "none", body: `"scaling":{"method":"none"}`},
			{value: "interpolation by 2", body: `"scaling":{"method":"interpolation","factor":2}`, r: scaled(posenc.Scaling{Method: posenc.Interpolation, Factor: 2})},
		}},
		{"scaling.method", "with factor 4, trained length 16 and factors 1, 2, 4, 8 for every method: none keeps θ, interpolation divides every θ by 4, ntk-aware changes the base " +
			"(θ_0 kept, θ_3 divided by 4), yarn keeps part of θ_0 (ρ = 2.55 on the ramp) and divides the rest, per-frequency divides by 1, 2, 4, 8", []rotaryValue{
			{value: leftOut, same: "none", body: `"scaling":{"factor":4,"trained_length":16,"factors":[1,2,4,8]}`,
				r: scaled(posenc.Scaling{Factor: 4, TrainedLength: 16, Factors: factors})},
			{value: "none", body: `"scaling":{"method":"none","factor":4,"trained_length":16,"factors":[1,2,4,8]}`,
				r: scaled(posenc.Scaling{Method: posenc.NoScaling, Factor: 4, TrainedLength: 16, Factors: factors})},
			{value: "interpolation", body: `"scaling":{"method":"interpolation","factor":4,"trained_length":16,"factors":[1,2,4,8]}`,
				r: scaled(posenc.Scaling{Method: posenc.Interpolation, Factor: 4, TrainedLength: 16, Factors: factors})},
			{value: "ntk-aware", body: `"scaling":{"method":"ntk-aware","factor":4,"trained_length":16,"factors":[1,2,4,8]}`,
				r: scaled(posenc.Scaling{Method: posenc.NTKAware, Factor: 4, TrainedLength: 16, Factors: factors})},
			{value: "yarn", body: `"scaling":{"method":"yarn","factor":4,"trained_length":16,"factors":[1,2,4,8]}`,
				r: scaled(posenc.Scaling{Method: posenc.YaRN, Factor: 4, TrainedLength: 16, Factors: factors})},
			{value: "per-frequency", body: `"scaling":{"method":"per-frequency","factor":4,"trained_length":16,"factors":[1,2,4,8]}`,
				r: scaled(posenc.Scaling{Method: posenc.PerFrequency, Factor: 4, TrainedLength: 16, Factors: factors})},
		}},
		{"scaling.factor", "interpolation divides every frequency by the factor, 2, 4 or 0.5", []rotaryValue{
			{value: leftOut, body: `"scaling":{"method":"interpolation"}`, refuse: posenc.ErrFactor},
			{value: "2", body: `"scaling":{"method":"interpolation","factor":2}`, r: scaled(posenc.Scaling{Method: posenc.Interpolation, Factor: 2})},
			{value: "4", body: `"scaling":{"method":"interpolation","factor":4}`, r: scaled(posenc.Scaling{Method: posenc.Interpolation, Factor: 4})},
			{value: "0.5", body: `"scaling":{"method":"interpolation","factor":0.5}`, r: scaled(posenc.Scaling{Method: posenc.Interpolation, Factor: 0.5})},
		}},
		{"scaling.trained_length", "YaRN by 4: trained lengths 16 and 64 put θ_0 at ρ = 2.55 and 10.2 on the ramp, and θ_1 below it (0.255) or on it (1.02)", []rotaryValue{
			{value: leftOut, body: `"scaling":{"method":"yarn","factor":4}`, refuse: posenc.ErrLength},
			{value: "16", body: `"scaling":{"method":"yarn","factor":4,"trained_length":16}`, r: yarn(posenc.Scaling{})},
			{value: "64", body: `"scaling":{"method":"yarn","factor":4,"trained_length":64}`,
				r: scaled(posenc.Scaling{Method: posenc.YaRN, Factor: 4, TrainedLength: 64})},
		}},
		{"scaling.current_length", "interpolation, factor 3, trained length 16: no current length divides by 3, 32 by the dynamic 2, 80 by 5, 8 (below the trained length) by 1", []rotaryValue{
			{value: leftOut, body: `"scaling":{"method":"interpolation","factor":3,"trained_length":16}`,
				r: scaled(posenc.Scaling{Method: posenc.Interpolation, Factor: 3, TrainedLength: 16})},
			{value: "32", body: `"scaling":{"method":"interpolation","factor":3,"trained_length":16,"current_length":32}`,
				r: scaled(posenc.Scaling{Method: posenc.Interpolation, Factor: 3, TrainedLength: 16, CurrentLength: 32})},
			{value: "80", body: `"scaling":{"method":"interpolation","factor":3,"trained_length":16,"current_length":80}`,
				r: scaled(posenc.Scaling{Method: posenc.Interpolation, Factor: 3, TrainedLength: 16, CurrentLength: 80})},
			{value: "8", body: `"scaling":{"method":"interpolation","factor":3,"trained_length":16,"current_length":8}`,
				r: scaled(posenc.Scaling{Method: posenc.Interpolation, Factor: 3, TrainedLength: 16, CurrentLength: 8})},
		}},
		{"scaling.alpha", "YaRN (see yarn) with β = 32: α = 0 (the key left out beside a β), 1 and 2 put θ_0 (ρ = 2.55) at other points of the ramp", []rotaryValue{
			{value: leftOut, same: "0", body: `"scaling":{"method":"yarn","factor":4,"trained_length":16,"beta":32}`, r: yarn(posenc.Scaling{Beta: 32})},
			{value: "0", body: `"scaling":{"method":"yarn","factor":4,"trained_length":16,"alpha":0,"beta":32}`, r: yarn(posenc.Scaling{Alpha: 0, Beta: 32})},
			{value: "1", body: `"scaling":{"method":"yarn","factor":4,"trained_length":16,"alpha":1,"beta":32}`, r: yarn(posenc.Scaling{Alpha: 1, Beta: 32})},
			{value: "2", body: `"scaling":{"method":"yarn","factor":4,"trained_length":16,"alpha":2,"beta":32}`, r: yarn(posenc.Scaling{Alpha: 2, Beta: 32})},
		}},
		{"scaling.beta", "YaRN (see yarn) with α = 1: β = 32, 16 and 4 give θ_0 (ρ = 2.55) the ramp values 0.05, 0.10 and 0.52; β left out beside an α is 0, below α, and refused", []rotaryValue{
			{value: leftOut, body: `"scaling":{"method":"yarn","factor":4,"trained_length":16,"alpha":1}`, refuse: posenc.ErrFactor},
			{value: "32", body: `"scaling":{"method":"yarn","factor":4,"trained_length":16,"alpha":1,"beta":32}`, r: yarn(posenc.Scaling{Alpha: 1, Beta: 32})},
			{value: "16", body: `"scaling":{"method":"yarn","factor":4,"trained_length":16,"alpha":1,"beta":16}`, r: yarn(posenc.Scaling{Alpha: 1, Beta: 16})},
			{value: "4", body: `"scaling":{"method":"yarn","factor":4,"trained_length":16,"alpha":1,"beta":4}`, r: yarn(posenc.Scaling{Alpha: 1, Beta: 4})},
		}},
		{"scaling.ramp", "YaRN (see yarn), α and β left out (1 and 32): the ratio ramp gives θ_0 γ = (2.55 − 1)/31 = 0.05; the dims ramp, between dims ⌊d(32)⌋ = 0 and ⌈d(1)⌉ = 1, gives it γ = 1", []rotaryValue{
			{value: leftOut, same: "ratio", body: `"scaling":{"method":"yarn","factor":4,"trained_length":16}`, r: yarn(posenc.Scaling{})},
			{value: "ratio", body: `"scaling":{"method":"yarn","factor":4,"trained_length":16,"ramp":"ratio"}`, r: yarn(posenc.Scaling{Ramp: posenc.RampRatio})},
			{value: "dims", body: `"scaling":{"method":"yarn","factor":4,"trained_length":16,"ramp":"dims"}`, r: yarn(posenc.Scaling{Ramp: posenc.RampDims})},
		}},
		{"scaling.factors", "per-frequency: the divisors 1, 2, 4, 8 and 8, 4, 2, 1 (the same in the other order) and 2, 2, 2, 2 give other frequencies", []rotaryValue{
			{value: leftOut, body: `"scaling":{"method":"per-frequency"}`, refuse: posenc.ErrFactor},
			{value: "[1,2,4,8]", body: `"scaling":{"method":"per-frequency","factors":[1,2,4,8]}`, r: scaled(posenc.Scaling{Method: posenc.PerFrequency, Factors: []float64{1, 2, 4, 8}})},
			{value: "[8,4,2,1]", body: `"scaling":{"method":"per-frequency","factors":[8,4,2,1]}`, r: scaled(posenc.Scaling{Method: posenc.PerFrequency, Factors: []float64{8, 4, 2, 1}})},
			{value: "[2,2,2,2]", body: `"scaling":{"method":"per-frequency","factors":[2,2,2,2]}`, r: scaled(posenc.Scaling{Method: posenc.PerFrequency, Factors: []float64{2, 2, 2, 2}})},
		}},
		{"offset", "the first token at position 0, 3 or −2: every token turns by another angle (a negated offset turns 3 into −3)", []rotaryValue{
			{value: leftOut, same: "0"},
			{value: "0", body: `"offset":0`},
			{value: "3", body: `"offset":3`, offset: 3},
			{value: "-2", body: `"offset":-2`, offset: -2},
		}},
		{"positions", "explicit positions 0 … 4 are the default; 4, 0, 3, 1, 2 and 7 × 5 turn the tokens by other angles", []rotaryValue{
			{value: leftOut, same: "[0,1,2,3,4]"},
			{value: "[0,1,2,3,4]", body: `"positions":[0,1,2,3,4]`, list: []int{0, 1, 2, 3, 4}},
			{value: "[4,0,3,1,2]", body: `"positions":[4,0,3,1,2]`, list: []int{4, 0, 3, 1, 2}},
			{value: "[7,7,7,7,7]", body: `"positions":[7,7,7,7,7]`, list: []int{7, 7, 7, 7, 7}},
		}},
	}
}

func rotaryKeyTests() []keyTest {
	shared := rotaryKeyList()
	var tests []keyTest
	for _, op := range []string{"rotary-apply", "rotary-tables"} {
		for _, k := range shared {
			kt := keyTest{ops: []string{op}, key: k.key, why: k.why}
			for _, v := range k.values {
				if op == "rotary-tables" && k.key == "pairing" && v.value != leftOut {
					v.same = "adjacent" // one column per frequency: the tables do not depend on the pairing
					if v.value == "adjacent" {
						v.same = ""
					}
				}
				kt.values = append(kt.values, rotaryKeyValue(op, v))
			}
			tests = append(tests, kt)
		}
	}
	apply := func(v rotaryValue) keyValue { return rotaryKeyValue("rotary-apply", v) }
	tests = append(tests, keyTest{ops: []string{"rotary-apply"}, key: "inverse",
		why: "the rotation by −m differs from the rotation by m at the positions 1 … 4",
		values: []keyValue{
			apply(rotaryValue{value: leftOut, same: "false"}),
			apply(rotaryValue{value: "false", body: `"inverse":false`}),
			apply(rotaryValue{value: "true", body: `"inverse":true`, inverse: true}),
		}})
	tablesOf := func(value, same, body string, r posenc.Rotary, pos []int, refuse error) keyValue {
		kv := keyValue{value: value, same: same, config: cfg(body), in: func(string) Tensors { return nil }, refuse: refuse}
		if refuse == nil {
			kv.want = func(string, Tensors) (Tensors, error) {
				cos, sin, err := r.Tables(pos)
				half := r.Dim / 2 // the tests' rotaries rotate every dim
				return Tensors{"cos": {[]int{len(pos), half}, cos}, "sin": {[]int{len(pos), half}, sin}}, err
			}
		}
		return kv
	}
	tests = append(tests,
		keyTest{ops: []string{"rotary-tables"}, key: "dim",
			why: "dims 8 and 6 give 4 and 3 frequencies of other values",
			values: []keyValue{
				tablesOf(leftOut, "", `"length":5`, posenc.Rotary{}, nil, ErrConfig),
				tablesOf("8", "", `"dim":8,"length":5`, posenc.Rotary{Dim: 8}, span(0, 5), nil),
				tablesOf("6", "", `"dim":6,"length":5`, posenc.Rotary{Dim: 6}, span(0, 5), nil),
			}},
		keyTest{ops: []string{"rotary-tables"}, key: "length",
			why: "0, 3 and 5 positions from offset 1: tables of other lengths (the key left out is no position)",
			values: []keyValue{
				tablesOf(leftOut, "0", `"dim":8,"offset":1`, posenc.Rotary{Dim: 8}, []int{}, nil),
				tablesOf("0", "", `"dim":8,"offset":1,"length":0`, posenc.Rotary{Dim: 8}, []int{}, nil),
				tablesOf("3", "", `"dim":8,"offset":1,"length":3`, posenc.Rotary{Dim: 8}, []int{1, 2, 3}, nil),
				tablesOf("5", "", `"dim":8,"offset":1,"length":5`, posenc.Rotary{Dim: 8}, []int{1, 2, 3, 4, 5}, nil),
			}})
	return tests
}

// ---- sinusoidal-table, alibi-slopes, alibi-bias ----

func tableKeyTests() []keyTest {
	sinus := func(value, same, body string, s posenc.Sinusoidal, n, offset int) keyValue {
		return keyValue{value: value, same: same, config: cfg(body), in: func(string) Tensors { return nil },
			want: func(string, Tensors) (Tensors, error) {
				t, err := s.Table(n, offset)
				return Tensors{"table": {[]int{n, s.Dim}, t}}, err
			}}
	}
	refused := func(body string, err error) keyValue {
		return keyValue{value: leftOut, config: cfg(body), in: func(string) Tensors { return nil }, refuse: err}
	}
	slopes := func(value string, heads int) keyValue {
		return keyValue{value: value, config: cfg(`"heads":` + value), in: func(string) Tensors { return nil },
			want: func(string, Tensors) (Tensors, error) {
				s, err := posenc.ALiBiSlopes(heads)
				return Tensors{"slopes": {[]int{heads}, s}}, err
			}}
	}
	// The ALiBi bias of 2 heads, 3 queries on 5 keys unless said.
	twoSlopes := func(string) Tensors { return Tensors{"slopes": {[]int{2}, []float64{0.5, 0.25}}} }
	bias := func(value, same, body string, g mask.Geometry, form mask.ALiBiForm) keyValue {
		return keyValue{value: value, same: same, config: cfg(body), in: twoSlopes,
			want: func(_ string, in Tensors) (Tensors, error) {
				b, err := posenc.ALiBiBias(in["slopes"].Data, g, form)
				return Tensors{"bias": {[]int{2, g.Lq, g.Lk}, b}}, err
			}}
	}
	refusedBias := func(body string) keyValue {
		return keyValue{value: leftOut, config: cfg(body), in: twoSlopes, refuse: ErrConfig}
	}
	g := func(lq, lk int, align mask.Align, offset int) mask.Geometry {
		return mask.Geometry{Batch: 1, Lq: lq, Lk: lk, Align: align, Offset: offset}
	}
	return []keyTest{
		{ops: []string{"sinusoidal-table"}, key: "dim", why: "dims 6 and 4: other frequencies and widths",
			values: []keyValue{
				refused(`"length":4`, ErrConfig),
				sinus("6", "", `"dim":6,"length":4`, posenc.Sinusoidal{Dim: 6}, 4, 0),
				sinus("4", "", `"dim":4,"length":4`, posenc.Sinusoidal{Dim: 4}, 4, 0),
			}},
		{ops: []string{"sinusoidal-table"}, key: "base", why: "bases 10000 and 100 give other frequencies after the first, at positions 1 … 3",
			values: []keyValue{
				sinus(leftOut, "10000", `"dim":6,"length":4`, posenc.Sinusoidal{Dim: 6}, 4, 0),
				sinus("10000", "", `"dim":6,"length":4,"base":10000`, posenc.Sinusoidal{Dim: 6, Base: 10000}, 4, 0),
				sinus("100", "", `"dim":6,"length":4,"base":100`, posenc.Sinusoidal{Dim: 6, Base: 100}, 4, 0),
			}},
		{ops: []string{"sinusoidal-table"}, key: "layout", why: "6 columns: interleaved puts sin, cos, sin, cos, sin, cos, concatenated sin, sin, sin, cos, cos, cos",
			values: []keyValue{
				sinus(leftOut, "interleaved", `"dim":6,"length":4`, posenc.Sinusoidal{Dim: 6}, 4, 0),
				sinus("interleaved", "", `"dim":6,"length":4,"layout":"interleaved"`, posenc.Sinusoidal{Dim: 6, Layout: posenc.Interleaved}, 4, 0),
				sinus("concatenated", "", `"dim":6,"length":4,"layout":"concatenated"`, posenc.Sinusoidal{Dim: 6, Layout: posenc.Concatenated}, 4, 0),
			}},
		{ops: []string{"sinusoidal-table"}, key: "offset", why: "the first row at position 0 or 3: other angles",
			values: []keyValue{
				sinus(leftOut, "0", `"dim":6,"length":4`, posenc.Sinusoidal{Dim: 6}, 4, 0),
				sinus("0", "", `"dim":6,"length":4,"offset":0`, posenc.Sinusoidal{Dim: 6}, 4, 0),
				sinus("3", "", `"dim":6,"length":4,"offset":3`, posenc.Sinusoidal{Dim: 6}, 4, 3),
			}},
		{ops: []string{"sinusoidal-table"}, key: "length", why: "4 and 2 positions: tables of other lengths",
			values: []keyValue{
				refused(`"dim":6`, ErrConfig),
				sinus("4", "", `"dim":6,"length":4`, posenc.Sinusoidal{Dim: 6}, 4, 0),
				sinus("2", "", `"dim":6,"length":2`, posenc.Sinusoidal{Dim: 6}, 2, 0),
			}},
		{ops: []string{"alibi-slopes"}, key: "heads", why: "4, 8 and 6 heads: other counts, and 6 is no power of 2",
			values: []keyValue{refused("", ErrConfig), slopes("4", 4), slopes("8", 8), slopes("6", 6)}},
		{ops: []string{"alibi-bias"}, key: "queries", why: "3 or 2 queries on 5 keys: other shapes and positions (a swap with keys gives 5 on 3)",
			values: []keyValue{
				refusedBias(`"keys":5`),
				bias("3", "", `"queries":3,"keys":5`, g(3, 5, mask.AlignEnd, 0), mask.ALiBiCausal),
				bias("2", "", `"queries":2,"keys":5`, g(2, 5, mask.AlignEnd, 0), mask.ALiBiCausal),
			}},
		{ops: []string{"alibi-bias"}, key: "keys", why: "3 queries on 5 or 4 keys: other shapes and positions",
			values: []keyValue{
				refusedBias(`"queries":3`),
				bias("5", "", `"queries":3,"keys":5`, g(3, 5, mask.AlignEnd, 0), mask.ALiBiCausal),
				bias("4", "", `"queries":3,"keys":4`, g(3, 4, mask.AlignEnd, 0), mask.ALiBiCausal),
			}},
		{ops: []string{"alibi-bias"}, key: "align", why: "3 queries on 5 keys: end puts them at 2, 3, 4, start at 0, 1, 2, so every distance changes",
			values: []keyValue{
				bias(leftOut, "end", `"queries":3,"keys":5`, g(3, 5, mask.AlignEnd, 0), mask.ALiBiCausal),
				bias("end", "", `"queries":3,"keys":5,"align":"end"`, g(3, 5, mask.AlignEnd, 0), mask.ALiBiCausal),
				bias("start", "", `"queries":3,"keys":5,"align":"start"`, g(3, 5, mask.AlignStart, 0), mask.ALiBiCausal),
			}},
		{ops: []string{"alibi-bias"}, key: "offset", why: "end-aligned queries moved by 0, −1 or −2 sit at 2, 1 or 0 first (a negated offset would put them past the last key, which the causal form refuses)",
			values: []keyValue{
				bias(leftOut, "0", `"queries":3,"keys":5`, g(3, 5, mask.AlignEnd, 0), mask.ALiBiCausal),
				bias("0", "", `"queries":3,"keys":5,"offset":0`, g(3, 5, mask.AlignEnd, 0), mask.ALiBiCausal),
				bias("-1", "", `"queries":3,"keys":5,"offset":-1`, g(3, 5, mask.AlignEnd, -1), mask.ALiBiCausal),
				bias("-2", "", `"queries":3,"keys":5,"offset":-2`, g(3, 5, mask.AlignEnd, -2), mask.ALiBiCausal),
			}},
		{ops: []string{"alibi-bias"}, key: "alibi_form", why: "queries at 2, 3, 4 of 5 keys: the keys after a query get +m·d (causal), −m·d (symmetric) or 0 (past-only)",
			values: []keyValue{
				bias(leftOut, "causal", `"queries":3,"keys":5`, g(3, 5, mask.AlignEnd, 0), mask.ALiBiCausal),
				bias("causal", "", `"queries":3,"keys":5,"alibi_form":"causal"`, g(3, 5, mask.AlignEnd, 0), mask.ALiBiCausal),
				bias("symmetric", "", `"queries":3,"keys":5,"alibi_form":"symmetric"`, g(3, 5, mask.AlignEnd, 0), mask.ALiBiSymmetric),
				bias("past-only", "", `"queries":3,"keys":5,"alibi_form":"past-only"`, g(3, 5, mask.AlignEnd, 0), mask.ALiBiPastOnly),
			}},
	}
}

// ---- layernorm and rmsnorm, forward and backward ----

var normOps = []string{"layernorm-forward", "layernorm-backward", "rmsnorm-forward", "rmsnorm-backward"}

// normInputs are 3 rows of 8: x with one row of spread 1 and two of
// spread 0.01 around 1 (mean square of the centred values about 3e-5,
// so that ε = 1e-3 outweighs it and its placement matters), a weight
// of values in [−1, 1) (not 0, so that 1 + w ≠ w) and, as the
// operation takes them, a bias and dy.
func normInputs(op string) Tensors {
	x := randomTensor(21, 3, 8)
	for i := 8; i < 24; i++ {
		x.Data[i] = 1 + 0.01*x.Data[i]
	}
	in := Tensors{"x": x, "weight": randomTensor(22, 8)}
	switch op {
	case "layernorm-forward":
		in["bias"] = randomTensor(23, 8)
	case "layernorm-backward", "rmsnorm-backward":
		in["dy"] = randomTensor(24, 3, 8)
	}
	return in
}

// normKernel calls the norm of op directly with options o.
func normKernel(o norm.Options) func(op string, in Tensors) (Tensors, error) {
	return func(op string, in Tensors) (Tensors, error) {
		x, w := in["x"], in["weight"].Data
		switch op {
		case "layernorm-forward":
			y, err := norm.LayerNorm(x.Data, 8, w, in["bias"].Data, o)
			return Tensors{"y": {x.Shape, y}}, err
		case "rmsnorm-forward":
			y, err := norm.RMSNorm(x.Data, 8, w, o)
			return Tensors{"y": {x.Shape, y}}, err
		case "layernorm-backward":
			g, err := norm.LayerNormBackward(x.Data, 8, w, in["dy"].Data, o)
			return Tensors{"dx": {x.Shape, g.X}, "dweight": {[]int{8}, g.Weight}, "dbias": {[]int{8}, g.Bias}}, err
		}
		g, err := norm.RMSNormBackward(x.Data, 8, w, in["dy"].Data, o)
		return Tensors{"dx": {x.Shape, g.X}, "dweight": {[]int{8}, g.Weight}}, err
	}
}

func normKeyTests() []keyTest {
	v := func(value, same, body string, o norm.Options) keyValue {
		return keyValue{value: value, same: same, config: cfg(body), in: normInputs, want: normKernel(o)}
	}
	return []keyTest{
		{ops: normOps, key: "epsilon", why: "ε = 1e-3 and 1e-5 against mean squares near 3e-5 (see normInputs)",
			values: []keyValue{
				{value: leftOut, config: cfg(""), in: normInputs, refuse: ErrConfig},
				v("1e-3", "", `"epsilon":1e-3`, norm.Options{Epsilon: 1e-3}),
				v("1e-5", "", `"epsilon":1e-5`, norm.Options{Epsilon: 1e-5}),
			}},
		{ops: normOps, key: "epsilon_placement", why: "ε = 1e-3 against mean squares near 3e-5: √(s² + ε) ≈ 0.032 against √s² + ε ≈ 0.007 (see normInputs)",
			values: []keyValue{
				v(leftOut, "in-root", `"epsilon":1e-3`, norm.Options{Epsilon: 1e-3}),
				v("in-root", "", `"epsilon":1e-3,"epsilon_placement":"in-root"`, norm.Options{Epsilon: 1e-3, Placement: norm.EpsilonInRoot}),
				v("added-to-root", "", `"epsilon":1e-3,"epsilon_placement":"added-to-root"`, norm.Options{Epsilon: 1e-3, Placement: norm.EpsilonAddedToRoot}),
			}},
		{ops: normOps, key: "weight_form", why: "a weight of nonzero values: the gain w (as-is) differs from 1 + w (one-plus)",
			values: []keyValue{
				v(leftOut, "as-is", `"epsilon":1e-5`, norm.Options{Epsilon: 1e-5}),
				v("as-is", "", `"epsilon":1e-5,"weight_form":"as-is"`, norm.Options{Epsilon: 1e-5, Weight: norm.WeightAsIs}),
				v("one-plus", "", `"epsilon":1e-5,"weight_form":"one-plus"`, norm.Options{Epsilon: 1e-5, Weight: norm.WeightOnePlus}),
			}},
	}
}

// ---- activation and activation-grad ----

var activationOps = []string{"activation", "activation-grad"}

// activationInputs: x from −3 to 3 in steps of 0.5 (both signs, where
// every activation and slope differs from every other), and dy.
func activationInputs(op string) Tensors {
	x := Tensor{Shape: []int{13}, Data: make([]float64, 13)}
	for i := range x.Data {
		x.Data[i] = -3 + 0.5*float64(i)
	}
	in := Tensors{"x": x}
	if op == "activation-grad" {
		in["dy"] = randomTensor(31, 13)
	}
	return in
}

func activationKernel(a ffn.Act, beta float64) func(op string, in Tensors) (Tensors, error) {
	return func(op string, in Tensors) (Tensors, error) {
		x := in["x"]
		if op == "activation" {
			y, err := ffn.Activate(x.Data, a, beta)
			return Tensors{"y": {x.Shape, y}}, err
		}
		dx, err := ffn.ActivateGrad(x.Data, in["dy"].Data, a, beta)
		return Tensors{"dx": {x.Shape, dx}}, err
	}
}

// actWords are the activations by hand, for the activation keys of
// activation and ffn (swish with β left out, 0: x/2).
var actWords = []struct {
	word string
	act  ffn.Act
}{
	{"relu", ffn.ActReLU}, {"gelu", ffn.ActGELU}, {"gelu-tanh", ffn.ActGELUTanh}, {"gelu-sigmoid", ffn.ActGELUSigmoid},
	{"sigmoid", ffn.ActSigmoid}, {"silu", ffn.ActSiLU}, {"swish", ffn.ActSwish}, {"identity", ffn.ActIdentity},
}

func activationKeyTests() []keyTest {
	fn := keyTest{ops: activationOps, key: "function",
		why:    "x from −3 to 3: every φ and φ′ differs from every other there (gelu and gelu-tanh by about 1e-4, swish with β = 0 is x/2 against the identity's x)",
		values: []keyValue{{value: leftOut, config: cfg(""), in: activationInputs, refuse: ErrConfig}}}
	for _, a := range actWords {
		fn.values = append(fn.values, keyValue{value: a.word, config: cfg(`"function":"` + a.word + `"`), in: activationInputs, want: activationKernel(a.act, 0)})
	}
	v := func(value, same, body string, beta float64) keyValue {
		return keyValue{value: value, same: same, config: cfg(body), in: activationInputs, want: activationKernel(ffn.ActSwish, beta)}
	}
	return []keyTest{fn, {ops: activationOps, key: "beta", why: "swish x·σ(βx) with β = 0, 0.5 and 1.5 at x ≠ 0",
		values: []keyValue{
			v(leftOut, "0", `"function":"swish"`, 0),
			v("0", "", `"function":"swish","beta":0`, 0),
			v("0.5", "", `"function":"swish","beta":0.5`, 0.5),
			v("1.5", "", `"function":"swish","beta":1.5`, 1.5),
		}}}
}

// ---- ffn-forward and ffn-backward ----

var ffnOps = []string{"ffn-forward", "ffn-backward"}

// ffn layers of the key tests: 3 rows, in 4, hidden 6, out 5, so that a
// matrix read in the other layout holds other values at every place.
const ffnRows, ffnIn, ffnHidden, ffnOut = 3, 4, 6, 5

// layerInputs are x, the weights of the layer in the layout (the same data
// whatever the layout), gated with separate V and c, or fused, and dy.
func layerInputs(layout ffn.Layout, gated, fused bool) func(op string) Tensors {
	mat := func(seed uint64, rows, cols int) Tensor {
		if layout == ffn.OutByIn {
			return randomTensor(seed, cols, rows)
		}
		return randomTensor(seed, rows, cols)
	}
	return func(op string) Tensors {
		in := Tensors{"x": randomTensor(41, ffnRows, ffnIn), "w2": mat(42, ffnHidden, ffnOut), "b2": randomTensor(43, ffnOut)}
		switch {
		case fused:
			in["fused"], in["fused_bias"] = mat(44, ffnIn, 2*ffnHidden), randomTensor(45, 2*ffnHidden)
		case gated:
			in["w1"], in["b1"], in["v"], in["c"] = mat(46, ffnIn, ffnHidden), randomTensor(47, ffnHidden), mat(48, ffnIn, ffnHidden), randomTensor(49, ffnHidden)
		default:
			in["w1"], in["b1"] = mat(46, ffnIn, ffnHidden), randomTensor(47, ffnHidden)
		}
		if op == "ffn-backward" {
			in["dy"] = randomTensor(50, ffnRows, ffnOut)
		}
		return in
	}
}

// ffnKernel calls ffn.Forward or ffn.Backward directly with options o.
func ffnKernel(o ffn.Options) func(op string, in Tensors) (Tensors, error) {
	return func(op string, in Tensors) (Tensors, error) {
		d := ffn.Dims{Rows: ffnRows, In: ffnIn, Hidden: ffnHidden, Out: ffnOut}
		w := ffn.Weights[float64]{W1: in.data("w1"), B1: in.data("b1"), V: in.data("v"), C: in.data("c"),
			Fused: in.data("fused"), FusedBias: in.data("fused_bias"), W2: in.data("w2"), B2: in.data("b2")}
		if op == "ffn-forward" {
			y, err := ffn.Forward(in["x"].Data, d, w, o)
			return Tensors{"y": {[]int{ffnRows, ffnOut}, y}}, err
		}
		dx, g, err := ffn.Backward(in["x"].Data, in["dy"].Data, d, w, o)
		out := Tensors{"dx": {in["x"].Shape, dx}, "dw2": {in["w2"].Shape, g.W2}, "db2": {[]int{ffnOut}, g.B2}}
		if g.Fused != nil {
			out["dfused"], out["dfused_bias"] = Tensor{in["fused"].Shape, g.Fused}, Tensor{[]int{2 * ffnHidden}, g.FusedBias}
		} else {
			out["dw1"], out["db1"] = Tensor{in["w1"].Shape, g.W1}, Tensor{[]int{ffnHidden}, g.B1}
		}
		if g.V != nil {
			out["dv"], out["dc"] = Tensor{in["v"].Shape, g.V}, Tensor{[]int{ffnHidden}, g.C}
		}
		return out, err
	}
}

func ffnKeyTests() []keyTest {
	plain := layerInputs(ffn.InByOut, false, false)
	act := keyTest{ops: ffnOps, key: "activation",
		why:    "the hidden pre-activations x·W1 + b1 take both signs: every φ gives other hidden values (swish with β = 0 is x/2 against the identity's x)",
		values: []keyValue{{value: leftOut, config: cfg(`"layout":"in-by-out"`), in: plain, refuse: ErrConfig}}}
	for _, a := range actWords {
		act.values = append(act.values, keyValue{value: a.word, config: cfg(`"activation":"` + a.word + `","layout":"in-by-out"`), in: plain,
			want: ffnKernel(ffn.Options{Act: a.act, Layout: ffn.InByOut})})
	}
	v := func(value, same, body string, in func(string) Tensors, o ffn.Options) keyValue {
		return keyValue{value: value, same: same, config: cfg(body), in: in, want: ffnKernel(o)}
	}
	return []keyTest{act,
		{ops: ffnOps, key: "beta", why: "swish x·σ(βx) of the hidden values with β = 0, 0.5 and 1.5",
			values: []keyValue{
				v(leftOut, "0", `"activation":"swish","layout":"in-by-out"`, plain, ffn.Options{Act: ffn.ActSwish}),
				v("0", "", `"activation":"swish","beta":0,"layout":"in-by-out"`, plain, ffn.Options{Act: ffn.ActSwish, Beta: 0}),
				v("0.5", "", `"activation":"swish","beta":0.5,"layout":"in-by-out"`, plain, ffn.Options{Act: ffn.ActSwish, Beta: 0.5}),
				v("1.5", "", `"activation":"swish","beta":1.5,"layout":"in-by-out"`, plain, ffn.Options{Act: ffn.ActSwish, Beta: 1.5}),
			}},
		{ops: ffnOps, key: "gated", why: "a gated layer multiplies φ(x·W + b) by x·V + c, values other than 1",
			values: []keyValue{
				v(leftOut, "false", `"activation":"silu","layout":"in-by-out"`, plain, ffn.Options{Act: ffn.ActSiLU}),
				v("false", "", `"activation":"silu","gated":false,"layout":"in-by-out"`, plain, ffn.Options{Act: ffn.ActSiLU, Gated: false}),
				v("true", "", `"activation":"silu","gated":true,"layout":"in-by-out"`, layerInputs(ffn.InByOut, true, false), ffn.Options{Act: ffn.ActSiLU, Gated: true}),
			}},
		{ops: ffnOps, key: "layout", why: "in 4, hidden 6, out 5: the same data read as [in, hidden] or [hidden, in] puts other weights at every place",
			values: []keyValue{
				{value: leftOut, config: cfg(`"activation":"relu"`), in: plain, refuse: ErrConfig},
				v("in-by-out", "", `"activation":"relu","layout":"in-by-out"`, plain, ffn.Options{Layout: ffn.InByOut}),
				v("out-by-in", "", `"activation":"relu","layout":"out-by-in"`, layerInputs(ffn.OutByIn, false, false), ffn.Options{Layout: ffn.OutByIn}),
			}},
		{ops: ffnOps, key: "packing", why: "a fused [4, 12] gate and value matrix: stacked takes columns 0–5 for the gate, interleaved the even columns",
			values: []keyValue{
				{value: leftOut, config: cfg(`"activation":"silu","gated":true,"layout":"in-by-out"`), in: layerInputs(ffn.InByOut, true, true), refuse: ErrConfig},
				v("stacked", "", `"activation":"silu","gated":true,"layout":"in-by-out","packing":"stacked"`, layerInputs(ffn.InByOut, true, true),
					ffn.Options{Act: ffn.ActSiLU, Gated: true, Packing: ffn.GateUpStacked}),
				v("interleaved", "", `"activation":"silu","gated":true,"layout":"in-by-out","packing":"interleaved"`, layerInputs(ffn.InByOut, true, true),
					ffn.Options{Act: ffn.ActSiLU, Gated: true, Packing: ffn.GateUpInterleaved}),
			}},
	}
}

// TestKeyTestNames keeps the names of the values unique within a key
// test, since results are compared by value name.
func TestKeyTestNames(t *testing.T) {
	for _, kt := range keyTests() {
		seen := map[string]bool{}
		for _, v := range kt.values {
			expect.False(t, seen[v.value], "%v %s: value %s listed twice", kt.ops, kt.key, v.value)
			seen[v.value] = true
			if v.same != "" {
				expect.True(t, slices.ContainsFunc(kt.values, func(w keyValue) bool { return w.value == v.same && w.same == "" }),
					"%v %s: value %s is the same as %s, which is not a value of its own", kt.ops, kt.key, v.value, v.same)
			}
			expect.True(t, strings.HasPrefix(v.config, `{"version":1`), v.config)
		}
	}
}
