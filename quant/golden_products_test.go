package quant

import (
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
)

// The golden files testdata/golden/quant/{fp8_matmul, int8_matmul_to,
// quant_cache, quant_attention}.json are written by
// testdata/gen/fam_quantmm.py from the definitions of doc.go, with exact
// rationals (and mpmath at 50 digits for attention), each output rounded
// once to float64 (or to the case's output format).

// productFamilies are the golden families of this file.
var productFamilies = []string{"fp8_matmul", "int8_matmul_to", "quant_cache", "quant_attention"}

// goldenAttendBound bounds Attend's normwise relative error on the
// quant_attention cases: float64 arithmetic over at most a few dozen
// terms (attention/golden_test.go's project target).
const goldenAttendBound = 1e-14

func goldenFloats(t *testing.T, c *golden.Case, name string) []float64 {
	t.Helper()
	x, _, err := c.Float(name)
	ensure.NoError(t, err, c)
	return x
}

func goldenInts(t *testing.T, c *golden.Case, name string) ([]int64, []int) {
	t.Helper()
	x, shape, err := c.Ints(name)
	ensure.NoError(t, err, c)
	return x, shape
}

func goldenBytes(t *testing.T, c *golden.Case, name string) ([]uint8, []int) {
	t.Helper()
	x, shape := goldenInts(t, c, name)
	b := make([]uint8, len(x))
	for i, v := range x {
		b[i] = uint8(v)
	}
	return b, shape
}

func TestGoldenFP8MatMul(t *testing.T) {
	for _, c := range golden.MustLoadFamily(t, "quant", "fp8_matmul").Cases {
		var cfg struct {
			FormatA compare.Format `json:"format_a"`
			FormatB compare.Format `json:"format_b"`
			GA      Granularity    `json:"granularity_a"`
			GB      Granularity    `json:"granularity_b"`
			Out     compare.Format `json:"out"`
		}
		ensure.NoError(t, c.DecodeConfig(&cfg))
		ca, sa := goldenBytes(t, c, "a")
		cb, sb := goldenBytes(t, c, "b")
		a := FP8Matrix{Rows: sa[0], Cols: sa[1], Codes: ca, Format: cfg.FormatA, Granularity: cfg.GA, Channel: ChannelRows, Scales: goldenFloats(t, c, "scales_a")}
		b := FP8Matrix{Rows: sb[0], Cols: sb[1], Codes: cb, Format: cfg.FormatB, Granularity: cfg.GB, Channel: ChannelCols, Scales: goldenFloats(t, c, "scales_b")}
		got, err := MatMulFP8(a, b, cfg.Out)
		ensure.NoError(t, err, c)
		expect.Equal(t, goldenFloats(t, c, "out"), got, c, "the exact sum rounded once: the same bits")
	}
}

func TestGoldenInt8MatMulTo(t *testing.T) {
	for _, c := range golden.MustLoadFamily(t, "quant", "int8_matmul_to").Cases {
		var cfg struct {
			SymA Symmetry       `json:"symmetry_a"`
			GA   Granularity    `json:"granularity_a"`
			GB   Granularity    `json:"granularity_b"`
			Out  compare.Format `json:"out"`
		}
		ensure.NoError(t, c.DecodeConfig(&cfg))
		conv := func(name string) ([]int8, []int) {
			x, shape := goldenInts(t, c, name)
			q := make([]int8, len(x))
			for i, v := range x {
				q[i] = int8(v)
			}
			return q, shape
		}
		qa, sa := conv("a")
		qb, sb := conv("b")
		za, _ := conv("zeros_a")
		if len(za) == 0 {
			za = nil
		}
		a := Tensor{Rows: sa[0], Cols: sa[1], Codes: qa, Scales: goldenFloats(t, c, "scales_a"), Zeros: za,
			Scheme: Scheme{Symmetry: cfg.SymA, Granularity: cfg.GA, Channel: ChannelRows}}
		b := Tensor{Rows: sb[0], Cols: sb[1], Codes: qb, Scales: goldenFloats(t, c, "scales_b"),
			Scheme: Scheme{Granularity: cfg.GB, Channel: ChannelCols}}
		acc, got, err := MatMulInt8To(a, b, cfg.Out)
		ensure.NoError(t, err, c)
		want, _ := goldenInts(t, c, "acc")
		for i := range want {
			expect.Equal(t, want[i], int64(acc[i]), c, i)
		}
		expect.Equal(t, goldenFloats(t, c, "out"), got, c)
	}
}

func TestGoldenQuantCache(t *testing.T) {
	for _, c := range golden.MustLoadFamily(t, "quant", "quant_cache").Cases {
		var cfg struct {
			Batch   int          `json:"batch"`
			Heads   int          `json:"heads"`
			Len     int          `json:"len"`
			Dim     int          `json:"dim"`
			Code    CacheCode    `json:"code"`
			Scaling CacheScaling `json:"scaling"`
			Append  int          `json:"append"`
		}
		ensure.NoError(t, c.DecodeConfig(&cfg))
		got, err := QuantiseCache(goldenFloats(t, c, "x"), cfg.Batch, cfg.Heads, cfg.Len, cfg.Dim, cfg.Code, cfg.Scaling)
		ensure.NoError(t, err, c)
		codes, _ := goldenBytes(t, c, "codes")
		expect.Equal(t, codes, got.Codes, c)
		expect.Equal(t, goldenFloats(t, c, "scales"), got.Scales, c)
		if cfg.Append == 0 {
			continue
		}
		app, err := AppendCache(got, goldenFloats(t, c, "new"), cfg.Append)
		ensure.NoError(t, err, c)
		codes, _ = goldenBytes(t, c, "appended_codes")
		expect.Equal(t, codes, app.Codes, c, "appended")
		expect.Equal(t, goldenFloats(t, c, "appended_scales"), app.Scales, c, "appended")
	}
}

func TestGoldenQuantAttention(t *testing.T) {
	for _, c := range golden.MustLoadFamily(t, "quant", "quant_attention").Cases {
		var cfg struct {
			Batch   int          `json:"batch"`
			HeadsQ  int          `json:"heads_q"`
			HeadsKV int          `json:"heads_kv"`
			Lq      int          `json:"lq"`
			Lk      int          `json:"lk"`
			Dk      int          `json:"dk"`
			Dv      int          `json:"dv"`
			Code    CacheCode    `json:"code"`
			Scaling CacheScaling `json:"scaling"`
			Causal  bool         `json:"causal"`
			Prob    ProbCode     `json:"prob"`
		}
		ensure.NoError(t, c.DecodeConfig(&cfg))
		kc, _ := goldenBytes(t, c, "k_codes")
		vc, _ := goldenBytes(t, c, "v_codes")
		k := CacheTensor{Batch: cfg.Batch, Heads: cfg.HeadsKV, Len: cfg.Lk, Dim: cfg.Dk, Code: cfg.Code, Scaling: cfg.Scaling, Codes: kc, Scales: goldenFloats(t, c, "k_scales")}
		v := CacheTensor{Batch: cfg.Batch, Heads: cfg.HeadsKV, Len: cfg.Lk, Dim: cfg.Dv, Code: cfg.Code, Scaling: cfg.Scaling, Codes: vc, Scales: goldenFloats(t, c, "v_scales")}
		o := AttendOptions{Causal: cfg.Causal, Prob: cfg.Prob}
		want := goldenFloats(t, c, "out")
		got, err := Attend(goldenFloats(t, c, "q"), cfg.HeadsQ, cfg.Lq, k, v, o)
		ensure.NoError(t, err, c)
		e := golden.NormwiseRelErr(got, want)
		expect.True(t, e <= goldenAttendBound, golden.Describe(c, "out", e, goldenAttendBound))
		got32, err := Attend32(compare.Narrow(goldenFloats(t, c, "q")), cfg.HeadsQ, cfg.Lq, k, v, o)
		ensure.NoError(t, err, c)
		e = golden.NormwiseRelErr(widen32(got32), want)
		expect.True(t, e <= 2e-5, golden.Describe(c, "out (Attend32, the float32 yardstick)", e, 2e-5))
	}
}

func widen32(x []float32) []float64 {
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = float64(v)
	}
	return y
}

func TestGoldenProductFamiliesExist(t *testing.T) {
	for _, f := range productFamilies {
		expect.NotEmpty(t, golden.MustLoadFamily(t, "quant", f).Cases, f)
	}
}
