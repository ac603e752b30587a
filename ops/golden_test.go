package ops

import (
	"encoding/json"
	"fmt"
	"maps"
	"math"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
)

// The golden check of the operations: every golden family whose
// computation is an operation is run through Run, on the inputs of its
// 50-digit golden file (testdata/golden/<package>/<family>.json, written
// by testdata/gen/fam_<package>.py in mpmath), with a configuration made
// from the case's by the explicit tables below, and the outputs are
// compared with the golden outputs under the bounds the kernel packages'
// own golden tests use. Where the other tests of this package compare the
// operations with the kernels in Go, this one checks the whole path, from
// a configuration in the golden files' words to the 50-digit values.

// The bounds, the same as the kernel packages' golden tests, each for the
// reason given there.
const (
	// attention/golden_test.go, goldenBound: the project target; the
	// direct form measures below 1e-15, so this fails on any real error.
	attentionBound = 1e-14
	// attention/golden_test.go, largeLogitBound: dQ and dK of the cases
	// with logits near ±1000, where rounding a logit of 1000 to float64
	// (1000·2⁻⁵³ ≈ 1e-13) moves every probability by that much and
	// dQ = Σ dS·k cancels; [mpmath] gives 1.03e-13 for that rounding alone.
	attentionLargeLogitBound = 1e-12
	// norm/golden_test.go, goldenTol: the project target, with room for
	// the d-term sums of the widest rows.
	normBound = 1e-14
	// ffn/golden_test.go, layerBound: the project target for a layer's
	// output and every gradient.
	ffnLayerBound = 1e-14
	// ffn/golden_test.go, actCoreBound: a dozen roundings and one call of
	// math.Exp or math.Erfc per value, a few ulps, normwise over |x| ≤ 8.
	activationCoreBound = 4 * 0x1p-52
	// ffn/golden_test.go, actTailBound: the same few ulps relative to
	// each value in the tails (5 ≤ |x| ≤ 30) and beyond, as the largest
	// relative error of an element: the package checks the tails so,
	// since values there go down to 1e-282 and a normwise error would
	// not see them.
	activationTailBound = 8 * 0x1p-52
	// kvcache/golden_test.go, goldenBound: the project target; every
	// kvcache function makes attention's own calls, which measure below
	// 1e-15 on cases of this size, so the bound fails on any real error (a
	// wrong page, slot or offset moves whole rows).
	kvcacheBound = 1e-14
	// posenc/golden_test.go, tableBound: the angle formed in
	// double-double, so math.Sincos and one or two roundings, 4 ulps of
	// numbers of magnitude ≤ 1.
	posencTableBound = 8e-16
)

// softmaxGoldenBound is attention/softmax_test.go's softmaxBound for rows
// of n: a few units of 2⁻⁵³ for one exponential and one division, plus
// (n − 1)·2⁻⁵³ for the sum of positive terms (Higham 2002, "Accuracy and
// Stability of Numerical Algorithms", §4.2).
func softmaxGoldenBound(n int) float64 { return float64(8+n) * 0x1p-53 }

// bitExact marks an output the kernel package checks bit for bit
// (posenc: the slopes and the bias are correctly rounded).
type bitExact struct{}

// elementwise marks a bound on the largest relative error of an element
// (the activation tails).
type elementwise float64

// goldenRun is one operation run on the cases of a family.
type goldenRun struct {
	op string
	// when selects the cases the operation runs on; nil: every case.
	when func(c *golden.Case, config map[string]json.RawMessage) bool
	// set holds configuration keys the operation needs besides the
	// case's (rotary-apply's "inverse").
	set map[string]any
	// inputs are the golden inputs the operation takes, by golden name;
	// ones adds an input of ones of the shape of the named golden input
	// (the dy that turns activation-grad into φ′).
	inputs []string
	ones   map[string]string
	// outputs maps each golden output it checks to its port.
	outputs map[string]string
	// bound is the bound for one output: a float64 bound on the normwise
	// relative error, bitExact, or an elementwise bound.
	bound func(c *golden.Case, config map[string]json.RawMessage, output string) any
	// calls, when set, makes several calls of the operation of one case,
	// or a call that set, inputs and outputs cannot say (the splits of one
	// decoding step, each a call; their merge, whose inputs are the
	// golden partial results): each call's set and outputs replace the
	// run's.
	calls func(t *testing.T, c *golden.Case, config map[string]json.RawMessage) []goldenCall
}

// goldenCall is one call of a run's operation on a case.
type goldenCall struct {
	set map[string]any
	// unset are keys of the case's configuration this call does not take;
	// omit are golden inputs of the run it does not take; in holds inputs
	// made from the case.
	unset, omit []string
	in          Tensors
	outputs     map[string]string
}

// goldenFamily maps one golden family to operations.
type goldenFamily struct {
	pkg, family string
	// config maps each configuration key of the golden cases to the key
	// of the operations; a key whose value is an object (scaling, mask)
	// keeps its nested keys, which must be keys of the operation too.
	config map[string]string
	// dropped lists the golden keys no operation takes, with the reason.
	dropped map[string]string
	// configInputs are golden inputs that the operations take as
	// configuration keys ("positions", or "scaling.factors").
	configInputs map[string]string
	// inputs maps golden input names to port names.
	inputs map[string]string
	runs   []goldenRun
	// unchecked lists golden outputs no operation gives, with the reason.
	unchecked map[string]string
}

// identity maps every name to itself.
func identity(names ...string) map[string]string {
	m := map[string]string{}
	for _, n := range names {
		m[n] = n
	}
	return m
}

func bound(b float64) func(*golden.Case, map[string]json.RawMessage, string) any {
	return func(*golden.Case, map[string]json.RawMessage, string) any { return b }
}

func exactly(*golden.Case, map[string]json.RawMessage, string) any { return bitExact{} }

func goldenFamilies() []goldenFamily {
	attentionKeys := identity("layout", "group", "scale", "soft_cap", "mask", "align", "offset", "alibi_form", "empty_row")
	attentionDropped := map[string]string{
		"batch": "the batch size of q", "heads_q": "the heads of q", "heads_kv": "the heads of k and v",
		"lq": "the queries of q", "lk": "the keys of k", "dk": "the head dimension of q and k", "dv": "the head dimension of v",
		"bias_batch": "the first dimension of the bias", "bias_heads": "the second dimension of the bias",
	}
	attentionInputs := map[string]string{"q": "q", "k": "k", "v": "v", "bias": "bias", "slopes": "slopes", "sinks": "sinks", "d_out": "dout", "d_lse": "dlse"}
	attentionRuns := []goldenRun{
		{op: "attention-forward", inputs: []string{"q", "k", "v", "bias", "slopes", "sinks"},
			outputs: map[string]string{"out": "out", "lse": "lse"}, bound: bound(attentionBound)},
		{op: "attention-backward", inputs: []string{"q", "k", "v", "bias", "slopes", "sinks", "d_out", "d_lse"},
			when:    func(c *golden.Case, _ map[string]json.RawMessage) bool { return c.Has("d_out") },
			outputs: map[string]string{"d_q": "dq", "d_k": "dk", "d_v": "dv", "d_sinks": "dsinks", "d_bias": "dbias"},
			bound: func(c *golden.Case, _ map[string]json.RawMessage, out string) any {
				if (c.Name == "logits_near_plus_1000" || c.Name == "logits_near_minus_1000") && (out == "d_q" || out == "d_k") {
					return attentionLargeLogitBound
				}
				return attentionBound
			}},
	}
	var fams []goldenFamily
	for _, f := range []string{"basic", "masks", "grouped", "extras", "combined"} {
		fams = append(fams, goldenFamily{pkg: "attention", family: f, config: attentionKeys, dropped: attentionDropped,
			inputs: attentionInputs, runs: attentionRuns})
	}

	softmaxBound := func(c *golden.Case, config map[string]json.RawMessage, _ string) any {
		var n int
		if err := json.Unmarshal(config["n"], &n); err != nil {
			return math.NaN() // fails every comparison: the case has no row length
		}
		return softmaxGoldenBound(n)
	}
	fams = append(fams, goldenFamily{pkg: "attention", family: "softmax",
		dropped: map[string]string{"n": "the last dimension of x"}, inputs: identity("x"),
		runs: []goldenRun{
			{op: "softmax", inputs: []string{"x"}, outputs: map[string]string{"softmax": "y"}, bound: softmaxBound},
			{op: "logsumexp", inputs: []string{"x"}, outputs: map[string]string{"lse": "lse"}, bound: softmaxBound},
		}})

	kind := func(k string) func(*golden.Case, map[string]json.RawMessage) bool {
		return func(_ *golden.Case, config map[string]json.RawMessage) bool {
			return string(config["kind"]) == `"`+k+`"`
		}
	}
	backwardOf := func(k string) func(*golden.Case, map[string]json.RawMessage) bool {
		return func(c *golden.Case, config map[string]json.RawMessage) bool { return kind(k)(c, config) && c.Has("dy") }
	}
	for _, f := range []string{"layernorm", "rmsnorm"} {
		fams = append(fams, goldenFamily{pkg: "norm", family: f,
			config: identity("epsilon", "epsilon_placement", "weight_form"),
			dropped: map[string]string{"kind": "which norm: layer → layernorm-*, rms → rmsnorm-*", "d": "the last dimension of x",
				"weighted": "whether the weight input is given", "bias": "whether the bias input is given"},
			inputs: identity("x", "weight", "bias", "dy"),
			runs: []goldenRun{
				{op: "layernorm-forward", when: kind("layer"), inputs: []string{"x", "weight", "bias"}, outputs: identity("y"), bound: bound(normBound)},
				{op: "layernorm-backward", when: backwardOf("layer"), inputs: []string{"x", "weight", "dy"},
					outputs: identity("dx", "dweight", "dbias"), bound: bound(normBound)},
				{op: "rmsnorm-forward", when: kind("rms"), inputs: []string{"x", "weight"}, outputs: identity("y"), bound: bound(normBound)},
				{op: "rmsnorm-backward", when: backwardOf("rms"), inputs: []string{"x", "weight", "dy"},
					outputs: identity("dx", "dweight"), bound: bound(normBound)},
			}})
	}

	activationBound := func(_ *golden.Case, config map[string]json.RawMessage, _ string) any {
		if string(config["part"]) == `"core"` {
			return activationCoreBound
		}
		return elementwise(activationTailBound)
	}
	fams = append(fams, goldenFamily{pkg: "ffn", family: "activations", config: identity("function", "beta"),
		dropped: map[string]string{"part": "which inputs (core, tail, far): chooses the bound"}, inputs: identity("x"),
		runs: []goldenRun{
			{op: "activation", inputs: []string{"x"}, outputs: identity("y"), bound: activationBound},
			// dx = dy ⊙ φ′(x) with dy = 1 is φ′(x) exactly: a product by 1.
			{op: "activation-grad", inputs: []string{"x"}, ones: map[string]string{"dy": "x"}, outputs: map[string]string{"dydx": "dx"}, bound: activationBound},
		}})
	layerWeights := []string{"x", "w1", "b1", "v", "c", "fused", "fused_bias", "w2", "b2"}
	for _, f := range []string{"plain", "gated"} {
		fams = append(fams, goldenFamily{pkg: "ffn", family: f, config: identity("activation", "beta", "gated", "layout", "packing"),
			dropped: map[string]string{"rows": "the rows of x", "in": "the last dimension of x", "hidden": "a dimension of w2",
				"out": "a dimension of w2", "biases": "whether the bias inputs are given", "storage": "whether w1 and v or fused are given"},
			inputs: identity(append(slices.Clone(layerWeights), "dy")...),
			runs: []goldenRun{
				{op: "ffn-forward", inputs: layerWeights, outputs: identity("y"), bound: bound(ffnLayerBound)},
				{op: "ffn-backward", inputs: append(slices.Clone(layerWeights), "dy"),
					outputs: identity("dx", "dw1", "db1", "dv", "dc", "dfused", "dfused_bias", "dw2", "db2"), bound: bound(ffnLayerBound)},
			}})
	}

	fams = append(fams,
		goldenFamily{pkg: "posenc", family: "sinusoidal_table", config: identity("dim", "base", "layout", "offset", "length"),
			runs: []goldenRun{{op: "sinusoidal-table", outputs: identity("table"), bound: bound(posencTableBound)}}},
		goldenFamily{pkg: "posenc", family: "rotary_tables", config: identity("dim", "rotated", "base", "magnitude", "scaling"),
			configInputs: map[string]string{"positions": "positions"},
			runs:         []goldenRun{{op: "rotary-tables", outputs: identity("cos", "sin"), bound: bound(posencTableBound)}},
			unchecked:    map[string]string{"theta": "the frequencies (Rotary.Frequencies) are no operation's output"}},
		goldenFamily{pkg: "posenc", family: "alibi_slopes", config: identity("heads"),
			runs: []goldenRun{{op: "alibi-slopes", outputs: identity("slopes"), bound: exactly}}},
		goldenFamily{pkg: "posenc", family: "alibi_bias", config: identity("queries", "keys", "align", "offset", "alibi_form"), inputs: identity("slopes"),
			runs: []goldenRun{{op: "alibi-bias", inputs: []string{"slopes"}, outputs: identity("bias"), bound: exactly}}},
	)
	fams = append(fams, kvcacheFamilies()...)
	fams = append(fams, blockFamilies()...)
	for _, f := range []string{"rotary_apply", "scaling"} {
		fams = append(fams, goldenFamily{pkg: "posenc", family: f,
			config:       identity("rotated", "base", "pairing", "magnitude", "scaling", "offset"),
			dropped:      map[string]string{"dim": "the last dimension of x", "length": "the next-to-last dimension of x"},
			configInputs: map[string]string{"positions": "positions", "factors": "scaling.factors"},
			inputs:       identity("x"),
			runs: []goldenRun{
				{op: "rotary-apply", inputs: []string{"x"}, outputs: identity("y"), bound: bound(posencTableBound)},
				{op: "rotary-apply", set: map[string]any{"inverse": true}, inputs: []string{"x"},
					when:    func(c *golden.Case, _ map[string]json.RawMessage) bool { return c.Has("y_inverse") },
					outputs: map[string]string{"y_inverse": "y"}, bound: bound(posencTableBound)},
			},
			unchecked: map[string]string{"theta": "the frequencies (Rotary.Frequencies) are no operation's output"}})
	}
	return fams
}

// kvcacheFamilies maps the golden families of package kvcache to its
// operations.
func kvcacheFamilies() []goldenFamily {
	shapes := map[string]string{"heads_q": "the heads of q", "heads_kv": "the heads of the keys and values", "dk": "the head dimension of q and the keys",
		"dv": "the head dimension of the values"}
	with := func(more map[string]string) map[string]string {
		m := maps.Clone(shapes)
		maps.Copy(m, more)
		return m
	}
	out := identity("out", "lse")
	splits := func(t *testing.T, c *golden.Case, config map[string]json.RawMessage) [][2]int {
		var sp [][2]int
		ensure.NoError(t, json.Unmarshal(config["splits"], &sp), "%s: key \"splits\"", c)
		return sp
	}
	// An empty split's partial result is exactly 0 and −Inf, which a
	// normwise error cannot measure: it is checked bit for bit.
	splitBound := func(c *golden.Case, config map[string]json.RawMessage, output string) any {
		var sp [][2]int
		_, n, _ := strings.Cut(output, "_")
		i, err := strconv.Atoi(n)
		if json.Unmarshal(config["splits"], &sp) == nil && err == nil && i < len(sp) && sp[i][0] == sp[i][1] {
			return bitExact{}
		}
		return kvcacheBound
	}
	return []goldenFamily{
		{pkg: "kvcache", family: "pages", config: map[string]string{"layout": "layout", "group": "group", "pool_layout": "pool_layout",
			"tables": "page_tables", "lengths": "lengths"},
			dropped: with(map[string]string{"pages": "the first dimension of k_pool", "page_size": "a dimension of k_pool",
				"lq": "the queries of q"}),
			inputs: identity("q", "k_pool", "v_pool"),
			runs:   []goldenRun{{op: "paged-attention", inputs: []string{"q", "k_pool", "v_pool"}, outputs: out, bound: bound(kvcacheBound)}}},
		{pkg: "kvcache", family: "splits", config: map[string]string{"pos": "position"},
			dropped: with(map[string]string{"lq": "the queries of q", "lk": "the keys of k",
				"splits": "the key ranges: each is a call of split-attention (its start and end), merged by merge-splits"}),
			inputs: identity("q", "k", "v", "sinks"),
			runs: []goldenRun{
				{op: "split-attention", inputs: []string{"q", "k", "v", "sinks"}, bound: splitBound,
					calls: func(t *testing.T, c *golden.Case, config map[string]json.RawMessage) []goldenCall {
						var calls []goldenCall
						for n, sp := range splits(t, c, config) {
							call := goldenCall{set: map[string]any{"start": sp[0], "end": sp[1]},
								outputs: map[string]string{fmt.Sprintf("out_%d", n): "out", fmt.Sprintf("lse_%d", n): "lse"}}
							if n > 0 {
								call.omit = []string{"sinks"} // a sink belongs to one split
							}
							calls = append(calls, call)
						}
						return calls
					}},
				{op: "merge-splits", bound: bound(kvcacheBound),
					calls: func(t *testing.T, c *golden.Case, config map[string]json.RawMessage) []goldenCall {
						stack := func(name string) Tensor {
							var x Tensor
							for n := range splits(t, c, config) {
								d, shape, err := c.Float(fmt.Sprintf("%s_%d", name, n))
								ensure.NoError(t, err)
								x.Shape, x.Data = append([]int{n + 1}, shape...), append(x.Data, d...)
							}
							return x
						}
						return []goldenCall{{unset: []string{"position"}, outputs: out,
							in: Tensors{"partial_out": stack("out"), "partial_lse": stack("lse")}}}
					}},
			}},
		{pkg: "kvcache", family: "ring", config: map[string]string{"layout": "layout", "n": "tokens"},
			dropped: with(map[string]string{"slots": "the third dimension of k_ring"}),
			inputs:  identity("q", "k_ring", "v_ring"),
			runs:    []goldenRun{{op: "ring-attention", inputs: []string{"q", "k_ring", "v_ring"}, outputs: out, bound: bound(kvcacheBound)}}},
		{pkg: "kvcache", family: "packed", config: identity("query_offsets", "key_offsets"), dropped: shapes,
			inputs: identity("q", "k", "v"),
			runs:   []goldenRun{{op: "packed-attention", inputs: []string{"q", "k", "v"}, outputs: out, bound: bound(kvcacheBound)}}},
		{pkg: "kvcache", family: "draft", config: identity("layout"),
			dropped: with(map[string]string{"batch": "the batch size of q", "lq": "the drafts of q", "lk": "the keys of k_cache"}),
			inputs:  identity("q", "k_cache", "v_cache", "k_draft", "v_draft"),
			runs: []goldenRun{{op: "draft-attention", inputs: []string{"q", "k_cache", "v_cache", "k_draft", "v_draft"},
				outputs: out, bound: bound(kvcacheBound)}}},
	}
}

// goldenLeftOut are the golden families no operation computes, and why.
var goldenLeftOut = map[string]string{
	"attention/merge":       "attention.Merge, the combination of two partial attention results, is not an operation",
	"compare/round":         "rounding to a number format is package compare's, not a kernel behind an operation",
	"ffn/hidden_size":       "ffn.HiddenSize, an integer helper, is not an operation",
	"mask/kinds":            "masks are no operation of their own: they enter through the \"mask\" key of attention, which the attention families check",
	"norm/addnorm":          "the fused residual add and norm (norm.AddLayerNorm, norm.AddRMSNorm) is not an operation",
	"posenc/ntk_base":       "posenc.NTKBase, a scalar helper, is not an operation (rotary scaling ntk-aware uses it, checked in the scaling family)",
	"posenc/yarn_magnitude": "posenc.YaRNMagnitude, a scalar helper, is not an operation (it gives rotary's magnitude key, a number)",
	"posenc/sinusoidal_add": "posenc.Sinusoidal.Add is not an operation (sinusoidal-table is, checked in sinusoidal_table)",
}

// TestGoldenFamiliesAccounted: every golden file is checked here or left
// out with a reason, and every operation is checked by some family.
func TestGoldenFamiliesAccounted(t *testing.T) {
	files, err := filepath.Glob(filepath.Join(golden.Dir(), "*", "*.json"))
	ensure.NoError(t, err)
	covered := map[string]bool{}
	ran := map[string]bool{}
	for _, f := range goldenFamilies() {
		covered[f.pkg+"/"+f.family] = true
		for _, r := range f.runs {
			ran[r.op] = true
		}
	}
	var names []string
	for _, p := range files {
		name := filepath.Base(filepath.Dir(p)) + "/" + strings.TrimSuffix(filepath.Base(p), ".json")
		names = append(names, name)
		_, left := goldenLeftOut[name]
		expect.True(t, covered[name] != left, "golden family %s: checked through the operations, or left out with a reason (goldenLeftOut), and not both", name)
	}
	for name, why := range goldenLeftOut {
		expect.Contains(t, names, name, "goldenLeftOut names a family that has no golden file")
		expect.NotEmpty(t, why, "golden family %s is left out without a reason", name)
	}
	for _, n := range Names() {
		expect.True(t, ran[n], "operation %s is checked by no golden family", n)
	}
}

// TestGoldenThroughOps runs every mapped golden case through Run.
func TestGoldenThroughOps(t *testing.T) {
	for _, f := range goldenFamilies() {
		file := golden.MustLoadFamily(t, f.pkg, f.family)
		for _, c := range file.Cases {
			t.Run(f.pkg+"/"+f.family+"/"+c.Name, func(t *testing.T) { runGoldenCase(t, f, c) })
		}
	}
}

func runGoldenCase(t *testing.T, f goldenFamily, c *golden.Case) {
	var config map[string]json.RawMessage
	ensure.NoError(t, json.Unmarshal(c.Config, &config), c.String())
	// The configuration of the operations: the case's keys under their
	// operation names, and the inputs the operations take as keys.
	base := map[string]any{"version": 1}
	for k, v := range config {
		if _, ok := f.dropped[k]; ok {
			continue
		}
		key, ok := f.config[k]
		ensure.True(t, ok, "%s: config key %q is neither mapped to an operation key nor dropped with a reason", c, k)
		base[key] = v
	}
	for name, key := range f.configInputs {
		if !c.Has(name) {
			continue
		}
		var v any
		if c.Inputs[name].Dtype == golden.Int {
			ints, _, err := c.Ints(name)
			ensure.NoError(t, err)
			v = ints
		} else {
			x, _, err := c.Float(name)
			ensure.NoError(t, err)
			v = x
		}
		if outer, inner, nested := strings.Cut(key, "."); nested {
			obj := map[string]any{}
			if raw, ok := base[outer].(json.RawMessage); ok {
				ensure.NoError(t, json.Unmarshal(raw, &obj))
			}
			obj[inner] = v
			base[outer] = obj
		} else {
			base[key] = v
		}
	}
	for name := range c.Inputs {
		_, port := f.inputs[name]
		_, key := f.configInputs[name]
		ensure.True(t, port || key, "%s: golden input %q is neither mapped to a port nor to a key", c, name)
	}

	checked := map[string]bool{}
	for _, r := range f.runs {
		if r.when != nil && !r.when(c, config) {
			continue
		}
		o, err := Lookup(r.op)
		ensure.NoError(t, err)
		checkNestedKeys(t, c, o, base)
		calls := []goldenCall{{set: r.set, outputs: r.outputs}}
		if r.calls != nil {
			calls = r.calls(t, c, config)
		}
		for _, call := range calls {
			runGoldenCall(t, f, c, config, base, r, call, checked)
		}
	}
	for name := range c.Outputs {
		if _, why := f.unchecked[name]; why {
			continue
		}
		expect.True(t, checked[name], "%s: golden output %q is checked by no operation", c, name)
	}
}

// runGoldenCall makes one call of run r's operation on case c and checks
// its outputs, noting each golden output it checks in checked.
func runGoldenCall(t *testing.T, f goldenFamily, c *golden.Case, config map[string]json.RawMessage, base map[string]any,
	r goldenRun, call goldenCall, checked map[string]bool) {
	t.Helper()
	full := map[string]any{}
	for k, v := range base {
		full[k] = v
	}
	for _, k := range call.unset {
		delete(full, k)
	}
	for k, v := range call.set {
		full[k] = v
	}
	body, err := json.Marshal(full)
	ensure.NoError(t, err)
	in := Tensors{}
	for n, x := range call.in {
		in[n] = x
	}
	for _, name := range r.inputs {
		if !c.Has(name) || slices.Contains(call.omit, name) {
			continue
		}
		x, shape, err := c.Float(name)
		ensure.NoError(t, err)
		in[f.inputs[name]] = Tensor{Shape: shape, Data: x}
	}
	for port, like := range r.ones {
		_, shape, err := c.Float(like)
		ensure.NoError(t, err)
		ones := make([]float64, c.Inputs[like].Len())
		for i := range ones {
			ones[i] = 1
		}
		in[port] = Tensor{Shape: shape, Data: ones}
	}
	out, err := Run(r.op, body, in)
	ensure.NoError(t, err, "%s: %s %s", c, r.op, body)
	if onGoldenRun != nil {
		onGoldenRun(t, r.op, body, in, out)
	}
	for name, port := range call.outputs {
		if !c.Has(name) {
			_, given := out[port]
			expect.False(t, given, "%s: %s gives %q, which the golden case does not hold", c, r.op, port)
			continue
		}
		want, shape, err := c.Float(name)
		ensure.NoError(t, err)
		got, ok := out[port]
		if !expect.True(t, ok, "%s: %s gives no output %q for golden %q", c, r.op, port, name) {
			continue
		}
		expect.Equal(t, shape, got.Shape, "%s: %s: output %q: shape", c, r.op, port)
		checkGolden(t, c, r.op+": "+name, got.Data, want, r.bound(c, config, name))
		checked[name] = true
	}
}

// checkNestedKeys requires every key inside an object of the configuration
// (scaling, mask entries) to be a key of operation o.
func checkNestedKeys(t *testing.T, c *golden.Case, o Op, config map[string]any) {
	t.Helper()
	has := func(name string) bool {
		return slices.ContainsFunc(o.Keys(), func(k Key) bool { return k.Name == name })
	}
	for k, v := range config {
		raw, err := json.Marshal(v)
		ensure.NoError(t, err)
		var obj map[string]json.RawMessage
		var list []map[string]json.RawMessage
		switch {
		case json.Unmarshal(raw, &obj) == nil:
			for inner := range obj {
				expect.True(t, has(k+"."+inner), "%s: %s has no key %s.%s", c, o.Name(), k, inner)
			}
		case json.Unmarshal(raw, &list) == nil:
			for _, e := range list {
				for inner := range e {
					expect.True(t, has(k+"[]."+inner), "%s: %s has no key %s[].%s", c, o.Name(), k, inner)
				}
			}
		}
	}
}

// checkGolden compares got with the golden values want under b: a bound
// on the normwise relative error, bitExact, or elementwise.
func checkGolden(t *testing.T, c *golden.Case, what string, got, want []float64, b any) {
	t.Helper()
	ensure.Len(t, got, len(want), "%s: %s", c, what)
	switch b := b.(type) {
	case bitExact:
		for i := range want {
			if math.Float64bits(got[i]) != math.Float64bits(want[i]) {
				t.Errorf("%s: %s[%d] = %x; want %x bit for bit", c, what, i, got[i], want[i])
				return
			}
		}
	case float64:
		e := golden.NormwiseRelErr(got, want)
		expect.LessOrEqual(t, e, b, golden.Describe(c, what, e, b))
	case elementwise:
		e := golden.NormwiseRelErr(got, want)
		expect.LessOrEqual(t, e, float64(b), golden.Describe(c, what, e, float64(b)))
		for i := range want {
			var r float64
			switch {
			case want[i] == got[i] || (math.IsNaN(want[i]) && math.IsNaN(got[i])):
				continue
			case want[i] == 0 || math.IsInf(want[i], 0) || math.IsNaN(want[i]):
				r = math.Inf(1)
			default:
				r = math.Abs(got[i]-want[i]) / math.Abs(want[i])
			}
			if !(r <= float64(b)) {
				t.Errorf("%s: %s[%d] = %v; want %v within a relative %.3g (error %.3g)", c, what, i, got[i], want[i], float64(b), r)
				return
			}
		}
	default:
		t.Fatalf("%s: %s: bound %v of type %T", c, what, b, b)
	}
}
