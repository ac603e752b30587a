package quanttest_test

import (
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/quant"
	"github.com/plumbref/plumb/quant/quanttest"
)

// slip names a deliberate bug of the naive kernels below ("" for none).
type slip string

// scaleAt returns the scale of element (r, c) of an int8 tensor; with
// byCol the per-row scales are read by column (a slip).
func scaleAt(t quant.Tensor, r, c int, byCol bool) (s float64, z int) {
	b := 0
	switch {
	case t.Scheme.Granularity == quant.PerChannel && t.Scheme.Channel == quant.ChannelRows && byCol:
		b = c % len(t.Scales)
	case t.Scheme.Granularity == quant.PerChannel && t.Scheme.Channel == quant.ChannelRows:
		b = r
	case t.Scheme.Granularity == quant.PerChannel:
		b = c
	}
	if len(t.Zeros) > 0 {
		z = int(t.Zeros[b])
	}
	return t.Scales[b], z
}

func naiveInt8(sl slip) func(a, b quant.Tensor, out compare.Format) ([]int32, []float64, error) {
	return func(a, b quant.Tensor, out compare.Format) ([]int32, []float64, error) {
		m, k, n := a.Rows, a.Cols, b.Cols
		acc := make([]int32, m*n)
		y := make([]float64, m*n)
		for i := range m {
			for j := range n {
				sa, za := scaleAt(a, i, 0, false)
				sb, zb := scaleAt(b, 0, j, false)
				var s int32
				var f float32
				for p := range k {
					d := (int32(a.Codes[i*k+p]) - int32(za)) * (int32(b.Codes[p*n+j]) - int32(zb))
					s += d
					f += float32(d)
				}
				if sl == "float32 sums" {
					s = int32(f)
				}
				acc[i*n+j] = s
				y[i*n+j] = out.Round(sa * sb * float64(s))
			}
		}
		return acc, y, nil
	}
}

func fp8Scale(m quant.FP8Matrix, r, c int, byCol bool) float64 {
	switch {
	case m.Granularity == quant.PerTensor:
		return m.Scales[0]
	case m.Channel == quant.ChannelRows && byCol:
		return m.Scales[c%len(m.Scales)]
	case m.Channel == quant.ChannelRows:
		return m.Scales[r]
	}
	return m.Scales[c]
}

func naiveFP8(sl slip) func(a, b quant.FP8Matrix, out compare.Format) ([]float64, error) {
	dec := func(m quant.FP8Matrix, i int) float32 {
		f := m.Format
		if sl == "e4m3 as e5m2" {
			f = compare.E5M2
		}
		v, _ := f.Decode(uint64(m.Codes[i]))
		return float32(v)
	}
	return func(a, b quant.FP8Matrix, out compare.Format) ([]float64, error) {
		m, k, n := a.Rows, a.Cols, b.Cols
		y := make([]float64, m*n)
		for i := range m {
			for j := range n {
				var s float32
				for p := range k {
					x := float32(dec(a, i*k+p) * float32(fp8Scale(a, i, j, sl == "row scales by column")))
					w := float32(dec(b, p*n+j) * float32(fp8Scale(b, p, j, false)))
					s += float32(x * w)
				}
				y[i*n+j] = out.Round(float64(s))
			}
		}
		return y, nil
	}
}

func naiveWeightOnly(sl slip) func(x []float32, m int, w quant.Tensor, out compare.Format) ([]float32, error) {
	return func(x []float32, m int, w quant.Tensor, out compare.Format) ([]float32, error) {
		k, n := w.Rows, w.Cols
		y := make([]float32, m*n)
		for i := range m {
			for j := range n {
				var s float32
				for p := range k {
					sc, z := scaleAt(w, p, j, false)
					if sl == "zero point ignored" {
						z = 0
					}
					s += float32(x[i*k+p] * float32(float64(int(w.Codes[p*n+j])-z)*sc))
				}
				y[i*n+j] = float32(out.Round(float64(s)))
			}
		}
		return y, nil
	}
}

func TestRunMatMulPassesNaiveKernels(t *testing.T) {
	quanttest.RunMatMul(t, quanttest.MatMulKernel{Int8: naiveInt8(""), FP8: naiveFP8(""), WeightOnly: naiveWeightOnly("")})
}

// caught runs f on a recorder and checks that the subtest want is among
// those it records failing.
func caught(t *testing.T, what, want string, f func(r *conformance.Recorder)) {
	t.Helper()
	var r conformance.Recorder
	f(&r)
	fails := r.Failures()
	expect.True(t, slices.ContainsFunc(fails, func(n string) bool { return strings.HasPrefix(n, want) }), what, fails)
}

func TestRunMatMulCatchesSlips(t *testing.T) {
	caught(t, "int32 sums accumulated in float32", "long_sums/int8", func(r *conformance.Recorder) {
		quanttest.RunMatMul(r, quanttest.MatMulKernel{Int8: naiveInt8("float32 sums")})
	})
	caught(t, "per-row scales applied per column", "row_and_column_scales/fp8", func(r *conformance.Recorder) {
		quanttest.RunMatMul(r, quanttest.MatMulKernel{FP8: naiveFP8("row scales by column")})
	})
	caught(t, "E4M3 decoded as E5M2", "per_tensor/fp8", func(r *conformance.Recorder) {
		quanttest.RunMatMul(r, quanttest.MatMulKernel{FP8: naiveFP8("e4m3 as e5m2")})
	})
	caught(t, "zero point ignored", "zero_points/weight-only", func(r *conformance.Recorder) {
		quanttest.RunMatMul(r, quanttest.MatMulKernel{WeightOnly: naiveWeightOnly("zero point ignored")})
	})
}

// naiveAttention decodes the cache to float32 and computes softmax
// attention in float32, the weights normalised at the end.
func naiveAttention(sl slip) quanttest.AttentionKernel {
	return func(q []float32, hq, lq int, k, v quant.CacheTensor, o quant.AttendOptions) ([]float32, error) {
		dec := func(c quant.CacheTensor) []float32 {
			if sl == "previous token's scale" && c.Scaling == quant.CachePerToken {
				s := append([]float64(nil), c.Scales...)
				for i := len(s) - 1; i > 0; i-- {
					if i%c.Len != 0 {
						s[i] = s[i-1]
					}
				}
				c.Scales = s
			}
			x, err := quant.DecodeCache(c)
			if err != nil {
				panic(err)
			}
			return compare.Narrow(x)
		}
		kd, vd := dec(k), dec(v)
		lk, dk, dv := k.Len, k.Dim, v.Dim
		pq := float32(448)
		if sl == "weights scale 1/240" {
			pq = 240
		}
		pf := compare.E4M3
		if o.Prob == quant.ProbE5M2 {
			pf, pq = compare.E5M2, 57344
		}
		tau := float32(1 / math.Sqrt(float64(dk)))
		out := make([]float32, k.Batch*hq*lq*dv)
		for b := range k.Batch {
			for h := range hq {
				kh := b*k.Heads + h/(hq/k.Heads)
				for i := range lq {
					hi := lk
					if o.Causal {
						hi = min(lk, i+lk-lq+1)
					}
					x := make([]float32, hi)
					m := float32(math.Inf(-1))
					for j := range hi {
						var d float32
						for c := range dk {
							d += float32(q[((b*hq+h)*lq+i)*dk+c] * kd[(kh*lk+j)*dk+c])
						}
						x[j] = float32(tau * d)
						m = max(m, x[j])
					}
					var l float32
					acc := make([]float32, dv)
					for j := range hi {
						e := float32(math.Exp(float64(x[j] - m)))
						l += e
						if o.Prob != quant.ProbExact {
							e = float32(pf.RoundSaturating(float64(float32(pq*e)))) / pq
						}
						for c := range dv {
							acc[c] += float32(e * vd[(kh*lk+j)*dv+c])
						}
					}
					for c := range dv {
						out[((b*hq+h)*lq+i)*dv+c] = acc[c] / l
					}
				}
			}
		}
		return out, nil
	}
}

func TestRunAttentionPassesANaiveKernel(t *testing.T) {
	quanttest.RunAttention(t, naiveAttention(""))
}

func TestRunAttentionCatchesSlips(t *testing.T) {
	for _, c := range []struct {
		sl   slip
		want string
	}{{"previous token's scale", "e5m2_per_token_causal"}, {"weights scale 1/240", "weights_e4m3"}} {
		caught(t, string(c.sl), c.want, func(r *conformance.Recorder) { quanttest.RunAttention(r, naiveAttention(c.sl)) })
	}
}

func TestSuiteDocumentsItsCases(t *testing.T) {
	suite.DocListsEveryCase(t, "doc.go", quanttest.MatMulCases(), func(c quanttest.MatMulCase) (string, string) { return c.Name, c.Why })
	suite.DocListsEveryCase(t, "doc.go", quanttest.AttentionCases(), func(c quanttest.AttentionCase) (string, string) { return c.Name, c.Why })
}
