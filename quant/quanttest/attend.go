package quanttest

import (
	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/quant"
)

// AttentionKernel is a float32 attention kernel on a quantised key/value
// cache under test, called as quant.Attend32 is: q [Batch, HeadsQ, Lq, Dk]
// row-major, k and v quant.CacheTensors, o the options (scale, causal
// mask, quantisation of the weights).
type AttentionKernel func(q []float32, headsQ, lq int, k, v quant.CacheTensor, o quant.AttendOptions) ([]float32, error)

// AttentionCase is one problem of RunAttention, with the reason it is there.
type AttentionCase struct {
	Name, Why              string
	Batch, HeadsQ, HeadsKV int
	Lq, Lk, Dk, Dv         int
	Code                   quant.CacheCode
	Scaling                quant.CacheScaling
	Options                quant.AttendOptions
}

// AttentionCases returns the cases of RunAttention, in the order it runs them.
func AttentionCases() []AttentionCase {
	return []AttentionCase{
		{Name: "int8_per_tensor", Why: "int8 keys and values, one scale each", Batch: 1, HeadsQ: 2, HeadsKV: 2, Lq: 3, Lk: 9, Dk: 16, Dv: 8, Code: quant.CacheInt8, Scaling: quant.CachePerTensor},
		{Name: "e4m3_per_head_grouped", Why: "E4M3 cache, a scale per head, 4 query heads on 2 key/value heads", Batch: 2, HeadsQ: 4, HeadsKV: 2, Lq: 2, Lk: 11, Dk: 8, Dv: 8, Code: quant.CacheE4M3, Scaling: quant.CachePerHead},
		{Name: "e5m2_per_token_causal", Why: "E5M2 cache, a scale per token, the causal mask", Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 4, Lk: 12, Dk: 8, Dv: 4, Code: quant.CacheE5M2, Scaling: quant.CachePerToken, Options: quant.AttendOptions{Causal: true}},
		{Name: "int8_per_token_decode", Why: "one query on a per-token int8 cache of 33 tokens: a decoding step", Batch: 2, HeadsQ: 2, HeadsKV: 2, Lq: 1, Lk: 33, Dk: 16, Dv: 16, Code: quant.CacheInt8, Scaling: quant.CachePerToken},
		{Name: "weights_e4m3", Why: "the softmax weights quantised to E4M3 with the scale 1/448 before P·V", Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 3, Lk: 10, Dk: 8, Dv: 8, Code: quant.CacheE4M3, Scaling: quant.CachePerToken, Options: quant.AttendOptions{Prob: quant.ProbE4M3}},
		{Name: "weights_e5m2", Why: "the softmax weights quantised to E5M2 with the scale 1/57344", Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 2, Lk: 10, Dk: 8, Dv: 8, Code: quant.CacheInt8, Scaling: quant.CachePerHead, Options: quant.AttendOptions{Prob: quant.ProbE5M2}},
	}
}

// RunAttention runs the kernel through AttentionCases and judges its
// output against quant.Attend, attention in float64 on the exactly
// dequantised cache (not on the unquantised values), within the
// yardstick of quant.Attend32, the float32 form of the same body on the
// same codes (compare.MeasureYardstick, factor compare.DefaultK). Each
// case's inputs are drawn from a generator seeded with its name, the
// keys and values quantised by quant.QuantiseCache.
func RunAttention[T conformance.TB[T]](t T, kernel AttentionKernel) {
	t.Helper()
	if kernel == nil {
		t.Errorf("quanttest.RunAttention: the kernel is nil")
		return
	}
	for _, c := range AttentionCases() {
		t.Run(c.Name, func(t T) {
			r := suite.Rand(c.Name)
			q := widen(compare.Narrow(suite.Normal(r, c.Batch*c.HeadsQ*c.Lq*c.Dk, 1)))
			k, err := quant.QuantiseCache(suite.Normal(r, c.Batch*c.HeadsKV*c.Lk*c.Dk, 1), c.Batch, c.HeadsKV, c.Lk, c.Dk, c.Code, c.Scaling)
			if err != nil {
				t.Errorf("case %s: cannot quantise the keys: %v", c.Name, err)
				return
			}
			v, err := quant.QuantiseCache(suite.Normal(r, c.Batch*c.HeadsKV*c.Lk*c.Dv, 1), c.Batch, c.HeadsKV, c.Lk, c.Dv, c.Code, c.Scaling)
			if err != nil {
				t.Errorf("case %s: cannot quantise the values: %v", c.Name, err)
				return
			}
			ref, err := quant.Attend(q, c.HeadsQ, c.Lq, k, v, c.Options)
			if err != nil {
				t.Errorf("case %s: the reference: %v", c.Name, err)
				return
			}
			got32, err := kernel(compare.Narrow(q), c.HeadsQ, c.Lq, k, v, c.Options)
			if err != nil {
				t.Errorf("case %s: the kernel: %v", c.Name, err)
				return
			}
			conv := c.Code.String() + " " + c.Scaling.String() + ", weights " + c.Options.Prob.String()
			shape := []int{c.Batch, c.HeadsQ, c.Lq, c.Dv}
			suite.Check[T, float32](t, compare.Float32, c.Name, conv,
				suite.Output{Name: "output", Dims: "[batch, heads, queries, dim]", Shape: shape, Ref: ref, Got: widen(got32)},
				[][]float64{q}, func(in [][]float32) ([]float32, error) {
					return quant.Attend32(in[0], c.HeadsQ, c.Lq, k, v, c.Options)
				})
		})
	}
}
