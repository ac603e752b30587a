package ops

import (
	"encoding"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"slices"
	"strings"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/posenc"
)

// tensor returns a tensor of the shape holding values uniform in [−1, 1)
// from a fixed-seed generator.
func tensor(r *rand.Rand, shape ...int) Tensor {
	n := 1
	for _, d := range shape {
		n *= d
	}
	x := make([]float64, n)
	for i := range x {
		x[i] = 2*r.Float64() - 1
	}
	return Tensor{Shape: shape, Data: x}
}

type opCase struct {
	name   string // test name
	op     string
	config string
	inputs func(r *rand.Rand) Tensors
	// outputs are the outputs the call must give.
	outputs []string
}

// cases covers every operation at least once.
func cases() []opCase {
	return []opCase{
		{"attention-forward/gqa-causal", "attention-forward", `{"version":1,"mask":[{"kind":"causal"}]}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"q": tensor(r, 1, 4, 5, 8), "k": tensor(r, 1, 2, 5, 8), "v": tensor(r, 1, 2, 5, 8)}
			}, []string{"out", "lse"}},
		{"attention-forward/seq-major-extras", "attention-forward",
			`{"version":1,"layout":"seq-major","group":"cycle","soft_cap":5,"mask":[{"kind":"window","size":3},{"kind":"causal"}],"alibi_form":"causal"}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"q": tensor(r, 2, 4, 4, 8), "k": tensor(r, 2, 6, 2, 8), "v": tensor(r, 2, 6, 2, 4),
					"bias": tensor(r, 1, 4, 4, 6), "slopes": {[]int{4}, []float64{0.5, 0.25, 0.125, 0.0625}}, "sinks": tensor(r, 4)}
			}, []string{"out", "lse"}},
		{"attention-backward/bias-sinks", "attention-backward", `{"version":1,"mask":[{"kind":"causal"}]}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"q": tensor(r, 1, 2, 4, 8), "k": tensor(r, 1, 1, 4, 8), "v": tensor(r, 1, 1, 4, 8),
					"bias": tensor(r, 1, 2, 4, 4), "sinks": tensor(r, 2), "dout": tensor(r, 1, 2, 4, 8), "dlse": tensor(r, 1, 2, 4)}
			}, []string{"dq", "dk", "dv", "dsinks", "dbias"}},
		{"rotary-apply/halves", "rotary-apply", `{"version":1,"pairing":"halves","offset":3}`,
			func(r *rand.Rand) Tensors { return Tensors{"x": tensor(r, 2, 5, 8)} }, []string{"y"}},
		{"rotary-apply/inverse-yarn", "rotary-apply",
			`{"version":1,"rotated":4,"inverse":true,"scaling":{"method":"yarn","factor":4,"trained_length":64}}`,
			func(r *rand.Rand) Tensors { return Tensors{"x": tensor(r, 3, 8)} }, []string{"y"}},
		{"rotary-tables", "rotary-tables", `{"version":1,"dim":8,"length":5,"offset":2}`,
			func(*rand.Rand) Tensors { return nil }, []string{"cos", "sin"}},
		{"sinusoidal-table", "sinusoidal-table", `{"version":1,"dim":6,"length":4,"layout":"concatenated"}`,
			func(*rand.Rand) Tensors { return nil }, []string{"table"}},
		{"alibi-slopes", "alibi-slopes", `{"version":1,"heads":12}`,
			func(*rand.Rand) Tensors { return nil }, []string{"slopes"}},
		{"alibi-bias", "alibi-bias", `{"version":1,"queries":3,"keys":5,"alibi_form":"symmetric"}`,
			func(*rand.Rand) Tensors { return Tensors{"slopes": {[]int{2}, []float64{0.5, 0.25}}} }, []string{"bias"}},
		{"layernorm-forward", "layernorm-forward", `{"version":1,"epsilon":1e-5}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"x": tensor(r, 3, 16), "weight": tensor(r, 16), "bias": tensor(r, 16)}
			}, []string{"y"}},
		{"layernorm-backward", "layernorm-backward", `{"version":1,"epsilon":1e-5,"epsilon_placement":"added-to-root"}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"x": tensor(r, 3, 16), "weight": tensor(r, 16), "dy": tensor(r, 3, 16)}
			},
			[]string{"dx", "dweight", "dbias"}},
		{"rmsnorm-forward", "rmsnorm-forward", `{"version":1,"epsilon":1e-6,"weight_form":"one-plus"}`,
			func(r *rand.Rand) Tensors { return Tensors{"x": tensor(r, 2, 3, 16), "weight": tensor(r, 16)} }, []string{"y"}},
		{"rmsnorm-backward", "rmsnorm-backward", `{"version":1,"epsilon":1e-6}`,
			func(r *rand.Rand) Tensors { return Tensors{"x": tensor(r, 4, 16), "dy": tensor(r, 4, 16)} }, []string{"dx"}},
		{"activation", "activation", `{"version":1,"function":"gelu-tanh"}`,
			func(r *rand.Rand) Tensors { return Tensors{"x": tensor(r, 4, 5)} }, []string{"y"}},
		{"activation-grad", "activation-grad", `{"version":1,"function":"swish","beta":1.5}`,
			func(r *rand.Rand) Tensors { return Tensors{"x": tensor(r, 20), "dy": tensor(r, 20)} }, []string{"dx"}},
		{"ffn-forward/plain", "ffn-forward", `{"version":1,"activation":"relu","layout":"in-by-out"}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"x": tensor(r, 3, 8), "w1": tensor(r, 8, 12), "b1": tensor(r, 12), "w2": tensor(r, 12, 8), "b2": tensor(r, 8)}
			}, []string{"y"}},
		{"ffn-forward/swiglu-fused", "ffn-forward", `{"version":1,"activation":"silu","gated":true,"layout":"out-by-in","packing":"interleaved"}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"x": tensor(r, 2, 3, 8), "fused": tensor(r, 24, 8), "w2": tensor(r, 6, 12)}
			}, []string{"y"}},
		{"ffn-backward/geglu", "ffn-backward", `{"version":1,"activation":"gelu","gated":true,"layout":"in-by-out"}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"x": tensor(r, 3, 8), "w1": tensor(r, 8, 10), "v": tensor(r, 8, 10), "c": tensor(r, 10),
					"w2": tensor(r, 10, 8), "dy": tensor(r, 3, 8)}
			}, []string{"dx", "dw1", "db1", "dv", "dc", "dw2", "db2"}},
		{"paged-attention/shared-page", "paged-attention", `{"version":1,"pool_layout":"heads-first","page_tables":[[1,0],[1,2]],"lengths":[4,3]}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"q": tensor(r, 2, 4, 1, 8), "k_pool": tensor(r, 3, 2, 2, 8), "v_pool": tensor(r, 3, 2, 2, 4), "sinks": tensor(r, 4)}
			}, []string{"out", "lse"}},
		{"split-attention", "split-attention", `{"version":1,"position":5,"start":2,"end":6}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"q": tensor(r, 1, 4, 1, 8), "k": tensor(r, 1, 2, 6, 8), "v": tensor(r, 1, 2, 6, 8)}
			}, []string{"out", "lse"}},
		{"merge-splits", "merge-splits", "",
			func(r *rand.Rand) Tensors {
				return Tensors{"partial_out": tensor(r, 3, 1, 4, 1, 8), "partial_lse": tensor(r, 3, 1, 4, 1)}
			}, []string{"out", "lse"}},
		{"ring-attention/wrapped", "ring-attention", `{"version":1,"layout":"seq-major","tokens":9}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"q": tensor(r, 2, 1, 4, 8), "k_ring": tensor(r, 2, 4, 2, 8), "v_ring": tensor(r, 2, 4, 2, 8),
					"slopes": {[]int{4}, []float64{0.5, 0.25, 0.125, 0.0625}}}
			}, []string{"out", "lse"}},
		{"packed-attention/prefixes", "packed-attention", `{"version":1,"query_offsets":[0,2,5],"key_offsets":[0,4,9]}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"q": tensor(r, 5, 4, 8), "k": tensor(r, 9, 2, 8), "v": tensor(r, 9, 2, 8)}
			}, []string{"out", "lse"}},
		{"draft-attention", "draft-attention", `{"version":1,"group":"cycle"}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"q": tensor(r, 1, 4, 3, 8), "k_cache": tensor(r, 1, 2, 5, 8), "v_cache": tensor(r, 1, 2, 5, 8),
					"k_draft": tensor(r, 1, 2, 3, 8), "v_draft": tensor(r, 1, 2, 3, 8)}
			}, []string{"out", "lse"}},
		{"block-forward/cache-gated", "block-forward",
			`{"version":1,"epsilon":1e-5,"heads":4,"heads_kv":2,"norm_kind":"rms-norm","gated":true,"activation":"silu","rotary":{},"mask":[{"kind":"causal"}],"keep":["q","attn"]}`,
			func(r *rand.Rand) Tensors {
				return Tensors{"x": tensor(r, 3, 8), "wq": tensor(r, 8, 16), "wk": tensor(r, 8, 8), "wv": tensor(r, 8, 8), "wo": tensor(r, 16, 8),
					"w1": tensor(r, 8, 6), "v": tensor(r, 8, 6), "w2": tensor(r, 6, 8), "past_k": tensor(r, 2, 2, 4), "past_v": tensor(r, 2, 2, 4)}
			}, []string{"out", "present_k", "present_v", "stage_q", "stage_attn"}},
		{"softmax", "softmax", `{"version":1}`,
			func(r *rand.Rand) Tensors { return Tensors{"x": tensor(r, 2, 3, 7)} }, []string{"y"}},
		{"logsumexp", "logsumexp", "",
			func(r *rand.Rand) Tensors { return Tensors{"x": tensor(r, 2, 3, 7)} }, []string{"lse"}},
	}
}

// TestEveryOpHasACase keeps the table above complete.
func TestEveryOpHasACase(t *testing.T) {
	covered := map[string]bool{}
	for _, c := range cases() {
		covered[c.op] = true
	}
	for _, n := range Names() {
		expect.True(t, covered[n], "operation %s has no test case", n)
	}
}

// TestRunRun32Yardstick runs every case in float64 and float32 and measures
// its bfloat16 yardstick.
func TestRunRun32Yardstick(t *testing.T) {
	for _, c := range cases() {
		t.Run(c.name, func(t *testing.T) {
			in := c.inputs(rand.New(rand.NewPCG(1, 2)))
			ref, err := Run(c.op, []byte(c.config), in)
			ensure.NoError(t, err)
			got := slices.Sorted(func(yield func(string) bool) {
				for n := range ref {
					if !yield(n) {
						return
					}
				}
			})
			expect.ElementsMatch(t, c.outputs, got)

			low, err := Run32(c.op, []byte(c.config), in)
			ensure.NoError(t, err)
			ensure.Len(t, low, len(ref))
			for n, r := range ref {
				l := low[n]
				ensure.Equal(t, r.Shape, l.Shape, n)
				for _, v := range l.Data {
					ensure.Equal(t, float64(float32(v)), v, "%s: Run32 output %v is not a float32 value", n, v)
				}
				// The float32 instantiation is within a few hundred float32
				// roundings of the reference on these small, well-conditioned
				// problems (u = 6e-8): a bound that a float64 path or a
				// wrong kernel would break either way.
				rep, err := compare.Diff(r.Data, l.Data, r.Shape, compare.Options{Format: compare.Float32})
				ensure.NoError(t, err)
				expect.Less(t, rep.Normwise, 1e-5, "%s: float32 run far from the reference", n)
				if !strings.HasPrefix(c.op, "alibi") && !strings.HasSuffix(c.op, "-table") && c.op != "rotary-tables" {
					expect.Positive(t, rep.Normwise, "%s: the float32 run equals the reference exactly: is it float64?", n)
				}
			}

			ys, err := Yardstick(c.op, []byte(c.config), in, compare.BFloat16, compare.DefaultK)
			ensure.NoError(t, err)
			ensure.Len(t, ys, len(ref))
			for n, y := range ys {
				r := ref[n]
				expect.Equal(t, "float32", y.Arithmetic)
				// The reference rounded once to bfloat16 always passes
				// (the yardstick's floor guarantees it).
				rep, err := compare.Diff(r.Data, compare.BFloat16.RoundSlice(r.Data), r.Shape, y.Options())
				ensure.NoError(t, err)
				expect.True(t, rep.Verdict.Pass, "%s: the rounded reference fails its own yardstick:\n%v", n, rep)
				// A candidate 10% off on its largest element fails: bfloat16
				// holds 8 significant bits (relative spacing 2^−7 ≈ 0.8%).
				bad := slices.Clone(compare.BFloat16.RoundSlice(r.Data))
				big := 0
				for i, v := range r.Data {
					if math.Abs(v) > math.Abs(r.Data[big]) {
						big = i
					}
				}
				if len(bad) > 0 && r.Data[big] != 0 {
					bad[big] *= 1.1
					rep, err = compare.Diff(r.Data, bad, r.Shape, y.Options())
					ensure.NoError(t, err)
					expect.False(t, rep.Verdict.Pass, "%s: a 10%% error passes the yardstick:\n%v", n, rep)
				}
			}
		})
	}
}

// TestRunMatchesKernels checks that the operations call the kernels with
// the options their configuration names, bit for bit.
func TestRunMatchesKernels(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	q, k, v := tensor(r, 1, 4, 6, 8), tensor(r, 1, 2, 6, 8), tensor(r, 1, 2, 6, 8)
	got, err := Run("attention-forward", []byte(`{"version":1,"group":"cycle","mask":[{"kind":"window","size":2}],"soft_cap":3}`),
		Tensors{"q": q, "k": k, "v": v})
	ensure.NoError(t, err)
	w, err := mask.Window(2)
	ensure.NoError(t, err)
	out, lse, err := attention.Forward(q.Data, k.Data, v.Data,
		attention.Shape{Batch: 1, HeadsQ: 4, HeadsKV: 2, Lq: 6, Lk: 6, Dk: 8, Dv: 8},
		attention.Options{Group: attention.GroupCycle, Mask: w, SoftCap: 3})
	ensure.NoError(t, err)
	expect.Equal(t, out, got["out"].Data)
	expect.Equal(t, lse, got["lse"].Data)
	expect.Equal(t, []int{1, 4, 6}, got["lse"].Shape)

	x := tensor(r, 2, 5, 8)
	got, err = Run("rotary-apply", []byte(`{"version":1,"pairing":"halves","base":500}`), Tensors{"x": x})
	ensure.NoError(t, err)
	y, err := posenc.Rotary{Dim: 8, Base: 500, Pairing: posenc.PairHalves}.Apply(x.Data, 5, posenc.Positions{})
	ensure.NoError(t, err)
	expect.Equal(t, y, got["y"].Data)

	// softmax and log-sum-exp, with the worked values of the package
	// documentation (doc.go, Worked values; [mpmath]: x = [1, 3, 2] → lse
	// 3.4076059644443803, softmax 0.090030573170380458, 0.66524095577482189,
	// 0.24472847105479765).
	got, err = Run("softmax", nil, Tensors{"x": {[]int{1, 3}, []float64{1, 3, 2}}})
	ensure.NoError(t, err)
	// Within 2 ulps at these magnitudes (ulp(0.67) = 1.1e-16, ulp(3.4) = 4.4e-16).
	expect.InDeltaSlice(t, []float64{0.090030573170380458, 0.66524095577482189, 0.24472847105479765}, got["y"].Data, 2e-16)
	got, err = Run("logsumexp", nil, Tensors{"x": {[]int{1, 3}, []float64{1, 3, 2}}})
	ensure.NoError(t, err)
	expect.Equal(t, []int{1}, got["lse"].Shape)
	expect.InDelta(t, 3.4076059644443803, got["lse"].Data[0], 5e-16)

	got, err = Run("rmsnorm-forward", []byte(`{"version":1,"epsilon":1e-3,"epsilon_placement":"added-to-root"}`), Tensors{"x": x})
	ensure.NoError(t, err)
	y, err = norm.RMSNorm(x.Data, 8, nil, norm.Options{Epsilon: 1e-3, Placement: norm.EpsilonAddedToRoot})
	ensure.NoError(t, err)
	expect.Equal(t, y, got["y"].Data)

	got, err = Run("activation", []byte(`{"version":1,"function":"gelu-sigmoid"}`), Tensors{"x": x})
	ensure.NoError(t, err)
	y, err = ffn.Activate(x.Data, ffn.ActGELUSigmoid, 0)
	ensure.NoError(t, err)
	expect.Equal(t, y, got["y"].Data)
}

// TestEveryKeyDocumented: every key of every operation says what it does
// and what its absence means, and a word key lists exactly its
// convention's words, the default first.
func TestEveryKeyDocumented(t *testing.T) {
	for _, n := range Names() {
		o, err := Lookup(n)
		ensure.NoError(t, err)
		for _, k := range o.Keys() {
			expect.NotEmpty(t, k.Doc, "%s: key %s", n, k.Name)
			expect.NotEmpty(t, k.Default, "%s: key %s", n, k.Name)
			expect.NotEmpty(t, k.Type, "%s: key %s", n, k.Name)
			if k.Type != "word" {
				expect.Empty(t, k.Words, "%s: key %s", n, k.Name)
				continue
			}
			ensure.NotEmpty(t, k.Convention, "%s: key %s", n, k.Name)
			ensure.NotEmpty(t, k.Words, "%s: key %s", n, k.Name)
			if !strings.HasPrefix(k.Default, "required") {
				expect.Equal(t, `"`+k.Words[0].Text+`"`, k.Default, "%s: key %s: the default is the zero value's word", n, k.Name)
			}
			for _, w := range k.Words {
				expect.NotEmpty(t, w.Meaning, "%s: key %s: word %s", n, k.Name, w.Text)
			}
		}
		expect.NotEmpty(t, o.Summary())
		for _, p := range append(o.Inputs(), o.Outputs()...) {
			expect.NotEmpty(t, p.Doc, "%s: tensor %s", n, p.Name)
		}
	}
}

// TestWordKeysDecode: for every word key of every operation, each of its
// words decodes to the value of the convention whose word it is, and a
// word of no convention is refused naming the key and listing the words.
func TestWordKeysDecode(t *testing.T) {
	for _, n := range Names() {
		o, _ := Lookup(n)
		for _, k := range o.Keys() {
			if k.Type != "word" || strings.ContainsAny(k.Name, ".[") {
				continue
			}
			for _, w := range k.Words {
				cfg := fmt.Sprintf(`{"version":1,%q:%q}`, k.Name, w.Text)
				got, err := wordOf(o, []byte(cfg), k.Name)
				ensure.NoError(t, err, "%s: %s", n, cfg)
				expect.Equal(t, w.Text, got, "%s: %s", n, cfg)
			}
			cfg := fmt.Sprintf(`{"version":1,%q:"no-such-word"}`, k.Name)
			_, err := wordOf(o, []byte(cfg), k.Name)
			ensure.ErrorIs(t, err, ErrConfig, "%s: %s", n, cfg)
			expect.Contains(t, err.Error(), fmt.Sprintf(`key %q = "no-such-word"; want one of `, k.Name), n)
		}
	}
}

func TestErrors(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	x := Tensors{"x": tensor(r, 2, 8)}
	qkv := Tensors{"q": tensor(r, 1, 2, 3, 4), "k": tensor(r, 1, 2, 3, 4), "v": tensor(r, 1, 2, 3, 4)}
	for _, c := range []struct {
		name, op, config string
		in               Tensors
		want             error
		says             string
	}{
		{"unknown op", "attention-sideways", `{"version":1}`, x, ErrUnknownOp, `Run: name = "attention-sideways"; want one of activation, activation-grad,`},
		{"unknown key", "activation", `{"version":1,"function":"relu","slope":2}`, x, ErrConfig, `unknown key "slope"; want one of version, function, beta`},
		{"unknown scaling key", "rotary-apply", `{"version":1,"scaling":{"method":"yarn","factor":2,"slope":2}}`, x, ErrConfig,
			`unknown key "slope"; want one of scaling.method, scaling.factor, scaling.trained_length,`},
		{"unknown nested key", "attention-forward", `{"version":1,"mask":[{"kind":"window","width":2}]}`, qkv, ErrConfig, `key "mask": Spec.UnmarshalJSON: key "width"; want one of kind, before, after, size,`},
		{"mask key of another kind", "attention-forward", `{"version":1,"mask":[{"kind":"causal","size":4}]}`, qkv, ErrConfig, `key "mask": Spec.UnmarshalJSON: key "size" with kind "causal"; want no key but "kind"`},
		{"mask key missing", "attention-forward", `{"version":1,"mask":[{"kind":"band","before":2}]}`, qkv, ErrConfig, `key "mask": Spec.UnmarshalJSON: key "after" is missing; want it with kind "band"`},
		{"mask prefix without length", "attention-forward", `{"version":1,"mask":[{"kind":"prefix"}]}`, qkv, ErrConfig, `key "mask": Spec.UnmarshalJSON: key "length" is missing; want it with kind "prefix"`},
		{"missing version", "activation", `{"function":"relu"}`, x, ErrConfig, `key "version" is missing or 0; want 1,`},
		{"future version", "activation", `{"version":2,"function":"relu"}`, x, ErrConfig, `key "version" = 2; want 1,`},
		{"malformed", "activation", `{"version":1,`, x, ErrConfig, "configuration ends early (malformed JSON); want one JSON object"},
		{"syntax", "activation", `{"version":1 "function":"relu"}`, x, ErrConfig, "configuration is malformed JSON at byte 14 ("}, // the 14th byte, a quote, follows the 1 with no comma
		{"two values", "activation", `{"version":1,"function":"relu"} {}`, x, ErrConfig, "configuration holds more than one JSON value"},
		// 38 bytes before the zeros, 2^20 zeros, and the closing brace.
		{"too long", "activation", `{"version":1,"function":"relu","beta":` + strings.Repeat("0", MaxConfigBytes) + `}`, x, ErrConfig,
			"configuration has 1048615 bytes; want at most MaxConfigBytes = 1048576"},
		{"wrong type", "activation", `{"version":1,"function":3}`, x, ErrConfig, `key "function" holds a JSON number`},
		{"bad word", "attention-forward", `{"version":1,"layout":"rows"}`, qkv, ErrConfig, `key "layout" = "rows"; want one of heads-major, seq-major`},
		{"bad nested word", "attention-forward", `{"version":1,"mask":[{"kind":"windw","size":2}]}`, qkv, ErrConfig, `key "mask[].kind" = "windw"; want one of full, causal,`},
		{"bad block word", "attention-forward", `{"version":1,"mask":[{"kind":"packed","offsets":[0,3],"block":"open"}]}`, qkv, ErrConfig, `key "mask[].block" = "open"; want one of causal, full`},
		{"word as number", "attention-forward", `{"version":1,"group":1}`, qkv, ErrConfig, `key "group" holds a JSON number; want a word: blocks, cycle`},
		{"missing required word", "activation", `{"version":1}`, x, ErrConfig, `key "function" is missing; want one of relu, gelu,`},
		{"missing required number", "layernorm-forward", `{"version":1}`, x, ErrConfig, `key "epsilon" is missing; want ε, finite and > 0 (a number)`},
		{"missing packing", "ffn-forward", `{"version":1,"activation":"relu","gated":true,"layout":"in-by-out"}`,
			Tensors{"x": x["x"], "fused": tensor(r, 8, 8), "w2": tensor(r, 4, 8)}, ErrConfig, `key "packing" is missing; want one of stacked, interleaved`},
		{"unknown input", "activation", `{"version":1,"function":"relu"}`, Tensors{"x": x["x"], "z": x["x"]}, ErrInput, `input name = "z"; want one of x`},
		{"input of a table", "alibi-slopes", `{"version":1,"heads":2}`, x, ErrInput, `input name = "x"; want none: the operation takes no input`},
		{"missing input", "attention-forward", `{"version":1}`, Tensors{"q": qkv["q"]}, ErrInput, `input "k" is missing; want keys, [batch, heads_kv, keys, dim]`},
		{"data short", "activation", `{"version":1,"function":"relu"}`, Tensors{"x": {[]int{3, 3}, make([]float64, 8)}}, ErrInput, `input "x" has 8 elements; want 9 for its shape [3 3]`},
		{"negative dimension", "activation", `{"version":1,"function":"relu"}`, Tensors{"x": {[]int{-1}, nil}}, ErrInput, `input "x" has shape [-1]; want every dimension ≥ 0`},
		{"rank", "attention-forward", `{"version":1}`, Tensors{"q": x["x"], "k": qkv["k"], "v": qkv["v"]}, ErrInput, `input "q" has shape [2 8]; want 4 dimensions`},
		{"head dim", "attention-forward", `{"version":1}`, Tensors{"q": qkv["q"], "k": tensor(r, 1, 2, 3, 5), "v": qkv["v"]}, ErrInput, `input "k" has head dimension 5; want 4, the head dimension of "q"`},
		{"batch", "attention-forward", `{"version":1}`, Tensors{"q": qkv["q"], "k": qkv["k"], "v": tensor(r, 2, 2, 3, 4)}, ErrInput, `input "v" has batch size 2; want 1, the batch size of "q"`},
		{"v keys", "attention-forward", `{"version":1}`, Tensors{"q": qkv["q"], "k": qkv["k"], "v": tensor(r, 1, 2, 4, 4)}, ErrInput, `input "v" has shape [1 2 4 4]; want 2 heads and 3 keys, as "k" [1 2 3 4] has`},
		{"dy shape", "activation-grad", `{"version":1,"function":"relu"}`, Tensors{"x": x["x"], "dy": tensor(r, 8, 2)}, ErrInput, `input "dy" has shape [8 2]; want [2 8]`},
		{"kernel error", "layernorm-forward", `{"version":1,"epsilon":-1}`, x, norm.ErrEpsilon, "layernorm-forward"},
		{"kernel heads", "attention-forward", `{"version":1}`, Tensors{"q": qkv["q"], "k": tensor(r, 1, 3, 3, 4), "v": tensor(r, 1, 3, 3, 4)}, attention.ErrShape, "attention-forward"},
		{"huge table", "sinusoidal-table", `{"version":1,"dim":1024,"length":1000000000}`, nil, ErrConfig,
			`key "length" · key "dim" = 1000000000 · 1024 = 1024000000000; want at most MaxElements = 268435456, the most values output "table" may hold`},
		{"huge bias", "alibi-bias", `{"version":1,"queries":100000,"keys":100000}`, Tensors{"slopes": {[]int{1}, []float64{0.5}}}, ErrConfig,
			`heads (input "slopes") · key "queries" · key "keys" = 1 · 100000 · 100000 = 10000000000; want at most MaxElements = 268435456, the most values output "bias" may hold`},
		{"negative length", "rotary-tables", `{"version":1,"dim":8,"length":-1}`, nil, ErrConfig, `key "length" = -1; want ≥ 0`},
		{"positions and length", "rotary-tables", `{"version":1,"dim":8,"length":2,"positions":[0,4]}`, nil, ErrConfig,
			`key "length" = 2 and key "offset" = 0 with key "positions"; want 0 for both`},
		{"weight shape", "ffn-forward", `{"version":1,"activation":"relu","layout":"in-by-out"}`,
			Tensors{"x": x["x"], "w1": tensor(r, 8, 3), "w2": tensor(r, 4, 8)}, ErrInput, `input "w1" has shape [8 3]; want [8 4]`},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := Run(c.op, []byte(c.config), c.in)
			ensure.Error(t, err)
			expect.True(t, errors.Is(err, c.want), "%v does not wrap %v", err, c.want)
			expect.Contains(t, err.Error(), c.says)
			// The one form: the sentinel's text, then the operation (the
			// function called, for an operation that does not exist).
			where := c.op
			if c.want == ErrUnknownOp {
				where = "Run"
			}
			expect.True(t, strings.HasPrefix(err.Error(), c.want.Error()+": "+where+": "), "%q does not start with %q", err, c.want.Error()+": "+where+": ")
		})
	}
}

// TestMaskErrorsWrapBoth: an invalid mask in a configuration is refused
// under ErrConfig and the mask package's own sentinel, and its message
// names the key once, with one sentinel's text.
func TestMaskErrorsWrapBoth(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	qkv := Tensors{"q": tensor(r, 1, 2, 3, 4), "k": tensor(r, 1, 2, 3, 4), "v": tensor(r, 1, 2, 3, 4)}
	_, err := Run("attention-forward", []byte(`{"version":1,"mask":[{"kind":"window","size":0}]}`), qkv)
	ensure.Error(t, err)
	expect.ErrorIs(t, err, ErrConfig)
	expect.ErrorIs(t, err, mask.ErrWindow)
	expect.True(t, strings.HasPrefix(err.Error(), `ops: invalid configuration: attention-forward: key "mask": `), err.Error())
	expect.NotContains(t, err.Error(), mask.ErrWindow.Error())

	_, err = Run("attention-forward", []byte(`{"version":1,"mask":[{"kind":"band","before":2}]}`), qkv)
	ensure.Error(t, err)
	expect.ErrorIs(t, err, ErrConfig)
	expect.ErrorIs(t, err, mask.ErrSpec)
	expect.True(t, strings.HasPrefix(err.Error(), `ops: invalid configuration: attention-forward: key "mask": `), err.Error())
	expect.NotContains(t, err.Error(), mask.ErrSpec.Error())
}

func TestYardstickRefusesFloat64(t *testing.T) {
	_, err := Yardstick("activation", []byte(`{"version":1,"function":"relu"}`), Tensors{"x": {[]int{1}, []float64{1}}}, compare.Float64, 2)
	expect.ErrorIs(t, err, compare.ErrFormat)
}

func TestEmptyConfigIsVersion1(t *testing.T) {
	out, err := Run("rotary-apply", nil, Tensors{"x": {[]int{1, 2}, []float64{1, 0}}})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{1, 0}, out["y"].Data) // position 0: the identity rotation
}

func FuzzConfig(f *testing.F) {
	f.Add("attention-forward", `{"version":1,"mask":[{"kind":"band","before":1,"after":-1}]}`)
	f.Add("rotary-apply", `{"version":1,"scaling":{"method":"ntk-aware","factor":2}}`)
	f.Add("ffn-forward", `{"version":1,"activation":"swish","beta":1,"gated":true,"layout":"in-by-out"}`)
	r := rand.New(rand.NewPCG(7, 8))
	in := map[string]Tensors{}
	for _, c := range cases() {
		in[c.op] = c.inputs(r)
	}
	f.Fuzz(func(t *testing.T, name, config string) {
		o, err := Lookup(name)
		if err != nil {
			return
		}
		out, err := o.Run([]byte(config), in[name])
		if err != nil {
			return
		}
		for n, t2 := range out {
			size := 1
			for _, d := range t2.Shape {
				size *= d
			}
			if size != len(t2.Data) {
				t.Fatalf("output %s: shape %v, %d values", n, t2.Shape, len(t2.Data))
			}
		}
	})
}

// wordOf decodes config for o and returns the word held by the top-level
// key, as the configuration type holds it.
func wordOf(o Op, config []byte, key string) (string, error) {
	return o.(interface {
		decodeWord([]byte, string) (string, error)
	}).decodeWord(config, key)
}

func (o *op[C]) decodeWord(config []byte, key string) (string, error) {
	c := new(C)
	if err := json.Unmarshal(config, c); err != nil {
		return "", configError(o.name, err, config, o.keys)
	}
	f, ok := fieldByKey(reflect.ValueOf(c).Elem(), key)
	if !ok {
		return "", fmt.Errorf("no field for key %q", key)
	}
	if f.Kind() == reflect.Pointer {
		f = f.Elem()
	}
	b, err := f.Interface().(encoding.TextMarshaler).MarshalText()
	return string(b), err
}

// fieldByKey finds the field of struct v whose JSON key is key, looking
// into embedded structs.
func fieldByKey(v reflect.Value, key string) (reflect.Value, bool) {
	for i := range v.NumField() {
		f := v.Type().Field(i)
		if f.Anonymous {
			if g, ok := fieldByKey(v.Field(i), key); ok {
				return g, true
			}
			continue
		}
		if strings.Split(f.Tag.Get("json"), ",")[0] == key {
			return v.Field(i), true
		}
	}
	return reflect.Value{}, false
}
