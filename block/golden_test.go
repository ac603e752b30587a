package block

import (
	"os"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/posenc"
)

// The golden files testdata/golden/block/*.json are written by
// testdata/gen/fam_block.py: the block composed in mpmath at 50
// significant digits from the generator's own per-layer formulas, each
// output rounded once to float64.

// goldenBound is the project target. The block is a few dozen kernel
// calls deep; each kernel measures below 1e-15 on its own golden cases
// of these sizes, and their errors add, so the target leaves room for
// the composition and still fails on any real error (a wrong position, a
// swapped head, a norm in the wrong place moves whole rows).
const goldenBound = 1e-14

// golden32Bound is attention's and kvcache's float32 bound: a few
// float32 ulps times the longest sum, with margin; it checks that the
// twin computes the same function.
const golden32Bound = 2e-5

var accuracy = &golden.Accuracy{
	Path: "doc.go",
	Rows: []string{"Forward", "ForwardFast", "Forward32", "ForwardFast32"},
	Cols: []string{"out", "present_k", "present_v"},
}

func TestMain(m *testing.M) { os.Exit(accuracy.Main(m)) }

var goldenFamilies = []string{"pre_norm", "post_norm", "parallel", "cache", "weight_order"}

type rotaryConfig struct {
	Rotated   int            `json:"rotated"`
	Base      float64        `json:"base"`
	Pairing   posenc.Pairing `json:"pairing"`
	Magnitude float64        `json:"magnitude"`
	Scaling   struct {
		Method        posenc.Method `json:"method"`
		Factor        float64       `json:"factor"`
		TrainedLength int           `json:"trained_length"`
	} `json:"scaling"`
}

type goldenConfig struct {
	Form        Form                  `json:"form"`
	NormKind    NormKind              `json:"norm_kind"`
	Epsilon     float64               `json:"epsilon"`
	Placement   norm.EpsilonPlacement `json:"epsilon_placement"`
	WeightForm  norm.WeightForm       `json:"weight_form"`
	WeightOrder ffn.Layout            `json:"weight_order"`
	Tokens      int                   `json:"tokens"`
	Width       int                   `json:"width"`
	Heads       int                   `json:"heads"`
	HeadsKV     int                   `json:"heads_kv"`
	HeadDim     int                   `json:"head_dim"`
	Hidden      int                   `json:"hidden"`
	Past        int                   `json:"past"`
	Act         ffn.Act               `json:"activation"`
	Beta        float64               `json:"beta"`
	Gated       bool                  `json:"gated"`
	Mask        []mask.Spec           `json:"mask"`
	Align       mask.Align            `json:"align"`
	Group       attention.GroupMap    `json:"group"`
	SoftCap     float64               `json:"soft_cap"`
	Scale       float64               `json:"scale"`
	ALiBi       mask.ALiBiForm        `json:"alibi_form"`
	Rotary      *rotaryConfig         `json:"rotary"`
}

// goldenCall decodes a case into the block's arguments.
func goldenCall(t *testing.T, c *golden.Case) (Dims, Options, map[string][]float64) {
	var cfg goldenConfig
	ensure.NoError(t, c.DecodeConfig(&cfg))
	m, err := mask.Build(cfg.Mask)
	ensure.NoError(t, err)
	o := Options{Form: cfg.Form, NormKind: cfg.NormKind, WeightOrder: cfg.WeightOrder,
		Norm: norm.Options{Epsilon: cfg.Epsilon, Placement: cfg.Placement, Weight: cfg.WeightForm},
		FFN:  ffn.Options{Act: cfg.Act, Beta: cfg.Beta, Gated: cfg.Gated},
		Attention: attention.Options{Mask: m, Align: cfg.Align, Group: cfg.Group, SoftCap: cfg.SoftCap, Scale: cfg.Scale,
			ALiBi: cfg.ALiBi}}
	if r := cfg.Rotary; r != nil {
		o.Rotary = &posenc.Rotary{Dim: cfg.HeadDim, Rotated: r.Rotated, Base: r.Base, Pairing: r.Pairing, Magnitude: r.Magnitude,
			Scaling: posenc.Scaling{Method: r.Scaling.Method, Factor: r.Scaling.Factor, TrainedLength: r.Scaling.TrainedLength}}
	}
	in := map[string][]float64{}
	for name := range c.Inputs {
		x, _, err := c.Float(name)
		ensure.NoError(t, err)
		in[name] = x
	}
	o.Attention.Slopes, o.Attention.Sinks = in["slopes"], in["sinks"]
	d := Dims{Tokens: cfg.Tokens, Width: cfg.Width, Heads: cfg.Heads, HeadsKV: cfg.HeadsKV, HeadDim: cfg.HeadDim, Hidden: cfg.Hidden, Past: cfg.Past}
	return d, o, in
}

func weightsOf[T num.Float](in map[string][]float64) Weights[T] {
	c := func(n string) []T {
		if x, ok := in[n]; ok {
			return num.Convert[T](x)
		}
		return nil
	}
	return Weights[T]{Norm1: c("norm1"), Norm1Bias: c("norm1_bias"), Q: c("wq"), QBias: c("bq"), K: c("wk"), KBias: c("bk"),
		V: c("wv"), VBias: c("bv"), O: c("wo"), OBias: c("bo"), Norm2: c("norm2"), Norm2Bias: c("norm2_bias"),
		FFN: ffn.Weights[T]{W1: c("w1"), B1: c("b1"), V: c("v"), C: c("c"), W2: c("w2"), B2: c("b2")}}
}

func TestGolden(t *testing.T) {
	for _, fam := range goldenFamilies {
		f := golden.MustLoadFamily(t, "block", fam)
		ensure.NotEmpty(t, f.Cases)
		for _, c := range f.Cases {
			d, o, in := goldenCall(t, c)
			check := func(t *testing.T, row string, bound float64, got map[string][]float64) {
				for out, g := range got {
					want, _, err := c.Float(out)
					ensure.NoError(t, err)
					e := golden.NormwiseRelErr(g, want)
					accuracy.Note(row, out, e)
					expect.True(t, e <= bound, golden.Describe(c, out, e, bound))
				}
			}
			for _, fn := range []struct {
				name string
				f    func([]float64, Dims, Weights[float64], Cache[float64], Options) (Result[float64], error)
			}{{"Forward", Forward}, {"ForwardFast", ForwardFast}} {
				t.Run(fn.name+"/"+fam+"/"+c.Name, func(t *testing.T) {
					r, err := fn.f(in["x"], d, weightsOf[float64](in), Cache[float64]{K: in["past_k"], V: in["past_v"]}, o)
					ensure.NoError(t, err)
					check(t, fn.name, goldenBound, map[string][]float64{"out": r.Out, "present_k": r.Present.K, "present_v": r.Present.V})
				})
			}
			for _, fn := range []struct {
				name string
				f    func([]float32, Dims, Weights[float32], Cache[float32], Options) (Result[float32], error)
			}{{"Forward32", Forward32}, {"ForwardFast32", ForwardFast32}} {
				t.Run(fn.name+"/"+fam+"/"+c.Name, func(t *testing.T) {
					r, err := fn.f(num.Convert[float32](in["x"]), d, weightsOf[float32](in),
						Cache[float32]{K: num.Convert[float32](in["past_k"]), V: num.Convert[float32](in["past_v"])}, o)
					ensure.NoError(t, err)
					check(t, fn.name, golden32Bound, map[string][]float64{"out": num.Convert[float64](r.Out),
						"present_k": num.Convert[float64](r.Present.K), "present_v": num.Convert[float64](r.Present.V)})
				})
			}
		}
	}
}

// wordsConfig holds the conventions whose every word the golden cases
// must use: the block's own and those the block switches on itself (the
// weight order, the norm conventions, the rotary pairing, the head map
// and the alignment it sets the offset by). The kernels' other words
// (activations, mask kinds, scalings) are each kernel's golden families'.
type wordsConfig struct {
	Form        Form
	NormKind    NormKind
	WeightOrder ffn.Layout
	Placement   norm.EpsilonPlacement
	WeightForm  norm.WeightForm
	Group       attention.GroupMap
	Align       mask.Align
	Pairing     []posenc.Pairing
}

// TestGoldenWords: the golden cases use every word of those conventions.
func TestGoldenWords(t *testing.T) {
	var w golden.Words
	for _, fam := range goldenFamilies {
		for _, c := range golden.MustLoadFamily(t, "block", fam).Cases {
			var g goldenConfig
			ensure.NoError(t, c.DecodeConfig(&g))
			wc := wordsConfig{Form: g.Form, NormKind: g.NormKind, WeightOrder: g.WeightOrder, Placement: g.Placement,
				WeightForm: g.WeightForm, Group: g.Group, Align: g.Align}
			if g.Rotary != nil {
				wc.Pairing = []posenc.Pairing{g.Rotary.Pairing}
			}
			w.Note(&wc)
		}
	}
	w.Require(t, "block.Form", "block.NormKind", "ffn.Layout", "norm.EpsilonPlacement", "norm.WeightForm",
		"attention.GroupMap", "mask.Align", "posenc.Pairing")
}

// TestGoldenCount: the families hold the cases the generator writes.
func TestGoldenCount(t *testing.T) {
	n := 0
	for _, fam := range goldenFamilies {
		n += len(golden.MustLoadFamily(t, "block", fam).Cases)
	}
	expect.Equal(t, 13, n, "golden cases of testdata/gen/fam_block.py: 3 + 2 + 2 + 4 + 2")
}
