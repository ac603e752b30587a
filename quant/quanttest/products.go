package quanttest

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/quant"
)

// MatMulKernel is a quantised matrix-product kernel under test; any of its
// functions may be nil (its cases are then skipped with a message).
//
//   - Int8 multiplies two int8 Tensors (symmetric or asymmetric, per
//     tensor, per row of a, per column of b) and returns the int32 sums
//     and the rescaled result rounded to out, as quant.MatMulInt8To.
//   - FP8 multiplies two scaled E4M3/E5M2 matrices and returns the result
//     rounded to out, as quant.MatMulFP8 (float32 arithmetic allowed).
//   - WeightOnly multiplies float32 activations [m, K] by int8 or int4
//     weights, as quant.WeightOnly32 (float32 arithmetic allowed).
type MatMulKernel struct {
	Int8       func(a, b quant.Tensor, out compare.Format) (acc []int32, y []float64, err error)
	FP8        func(a, b quant.FP8Matrix, out compare.Format) ([]float64, error)
	WeightOnly func(x []float32, m int, w quant.Tensor, out compare.Format) ([]float32, error)
}

// MatMulCase is one problem of RunMatMul, with the reason it is there.
type MatMulCase struct {
	Name, Why string
	M, K, N   int
	// Int8 and weight-only schemes of a (activations: unused) and b.
	A, B quant.Scheme
	// FP8 formats and scale placement of the two operands.
	FA, FB compare.Format
	GA, GB quant.Granularity
	Out    compare.Format
	// Offset is added to the normal values the int8 codes are drawn from.
	Offset float64
}

// MatMulCases returns the cases of RunMatMul, in the order it runs them.
func MatMulCases() []MatMulCase {
	rows := quant.Scheme{Granularity: quant.PerChannel, Channel: quant.ChannelRows}
	cols := quant.Scheme{Granularity: quant.PerChannel, Channel: quant.ChannelCols}
	asym := quant.Scheme{Symmetry: quant.Asymmetric, Granularity: quant.PerChannel, Channel: quant.ChannelCols}
	return []MatMulCase{
		{Name: "per_tensor", Why: "one scale per operand, outputs in float32", M: 3, K: 64, N: 5, FA: compare.E4M3, FB: compare.E4M3, Out: compare.Float32},
		{Name: "row_and_column_scales", Why: "per-row scales of a, per-column scales of b, different counts of each", M: 4, K: 48, N: 7, A: rows, B: cols, FA: compare.E4M3, FB: compare.E5M2, GA: quant.PerChannel, GB: quant.PerChannel, Out: compare.Float32},
		{Name: "zero_points", Why: "asymmetric weights whose zero points matter", M: 2, K: 40, N: 6, A: quant.Scheme{Symmetry: quant.Asymmetric}, B: asym, FA: compare.E5M2, FB: compare.E4M3, GB: quant.PerChannel, Out: compare.Float32},
		{Name: "long_sums", Why: "K = 4096 of large codes: int32 sums beyond 2^24, which float32 cannot hold", Offset: 6, M: 2, K: 4096, N: 3, A: rows, B: cols, FA: compare.E4M3, FB: compare.E4M3, GA: quant.PerChannel, GB: quant.PerChannel, Out: compare.Float32},
		{Name: "bfloat16_out", Why: "outputs rounded to bfloat16", M: 3, K: 32, N: 4, B: cols, FA: compare.E5M2, FB: compare.E5M2, GB: quant.PerChannel, Out: compare.BFloat16},
	}
}

// sumBound is the error bound of a float32 sum of products of n terms in
// any order, γ_n·Σ|terms| with γ_n = n·u/(1 − n·u), u = 2^−24 (Higham
// 2002, "Accuracy and Stability of Numerical Algorithms", 2nd ed., §3.1,
// Eq. (3.5)), n counting the products' roundings too, plus one rounding
// of the result to out.
func sumBound(n int, abs, ref float64, out compare.Format) float64 {
	const u = 0x1p-24
	g := float64(n+1) * u / (1 - float64(n+1)*u)
	return float64(g*abs) + out.ULP(ref)
}

// judge compares got with ref element by element within bound(i), failing
// t with a message naming the case, the element and the bound.
func judge[T conformance.TB[T]](t T, name, what string, n int, got, ref []float64, bound func(i int) float64) {
	t.Helper()
	if len(got) != len(ref) {
		t.Errorf("case %s: %s has %d elements; want %d", name, what, len(got), len(ref))
		return
	}
	for i := range ref {
		if d := math.Abs(got[i] - ref[i]); !(d <= bound(i)) {
			t.Errorf("case %s: %s[%d, %d] = %.9g; want %.9g within %.3g (error %.3g)", name, what, i/n, i%n, got[i], ref[i], bound(i), got[i]-ref[i])
			return
		}
	}
}

func drawInt8(r *rand.Rand, rows, cols int, s quant.Scheme, offset float64) (quant.Tensor, error) {
	x := suite.Normal(r, rows*cols, 1)
	for i := range x {
		x[i] += 0.5 + offset // so that asymmetric zero points are not 0
	}
	return quant.Quantise(x, rows, cols, s)
}

func drawFP8(r *rand.Rand, rows, cols int, f compare.Format, g quant.Granularity, c quant.Channel) quant.FP8Matrix {
	m := quant.FP8Matrix{Rows: rows, Cols: cols, Format: f, Granularity: g, Channel: c, Codes: make([]uint8, rows*cols)}
	for i := range m.Codes {
		m.Codes[i] = uint8(f.Encode(r.NormFloat64() * 8))
	}
	n := 1
	if g == quant.PerChannel && c == quant.ChannelRows {
		n = rows
	} else if g == quant.PerChannel {
		n = cols
	}
	for range n {
		m.Scales = append(m.Scales, float64(float32(math.Ldexp(1+r.Float64(), r.IntN(6)-3))))
	}
	return m
}

// RunMatMul runs each function of k through MatMulCases and judges it
// against the exact computation on the codes it is given: quant.MatMulInt8To
// (the int32 sums exactly, the rescaled result within one unit in the last
// place of out), quant.MatMulFP8 and quant.WeightOnly (within the float32
// bound of sumBound on the exactly dequantised operands: any order of
// float32 products and sums passes).
func RunMatMul[T conformance.TB[T]](t T, k MatMulKernel) {
	t.Helper()
	if k.Int8 == nil && k.FP8 == nil && k.WeightOnly == nil {
		t.Errorf("quanttest.RunMatMul: the kernel has no function")
		return
	}
	for _, c := range MatMulCases() {
		t.Run(c.Name, func(t T) {
			t.Run("int8", func(t T) {
				r := suite.Rand(c.Name + "/int8")
				if k.Int8 == nil {
					t.Skipf("case %s/int8 skipped: the kernel has no Int8", c.Name)
					return
				}
				a, err1 := drawInt8(r, c.M, c.K, c.A, c.Offset)
				b, err2 := drawInt8(r, c.K, c.N, c.B, c.Offset)
				if err1 != nil || err2 != nil {
					t.Errorf("case %s: cannot quantise the inputs: %v %v", c.Name, err1, err2)
					return
				}
				wantAcc, want, err := quant.MatMulInt8To(a, b, c.Out)
				if err != nil {
					t.Errorf("case %s: the reference: %v", c.Name, err)
					return
				}
				acc, got, err := k.Int8(a, b, c.Out)
				if err != nil {
					t.Errorf("case %s (int8 %v × %v, out %v): the kernel: %v", c.Name, c.A.Granularity, c.B.Granularity, c.Out, err)
					return
				}
				wa, ga := make([]float64, len(wantAcc)), make([]float64, len(acc))
				for i := range wantAcc {
					wa[i] = float64(wantAcc[i])
				}
				for i := range acc {
					ga[i] = float64(acc[i])
				}
				judge(t, c.Name, "int32 sums", c.N, ga, wa, func(int) float64 { return 0 })
				judge(t, c.Name, "output", c.N, got, want, func(i int) float64 { return c.Out.ULP(want[i]) })
			})
			t.Run("fp8", func(t T) {
				r := suite.Rand(c.Name + "/fp8")
				if k.FP8 == nil {
					t.Skipf("case %s/fp8 skipped: the kernel has no FP8", c.Name)
					return
				}
				a := drawFP8(r, c.M, c.K, c.FA, c.GA, quant.ChannelRows)
				b := drawFP8(r, c.K, c.N, c.FB, c.GB, quant.ChannelCols)
				want, err := quant.MatMulFP8(a, b, c.Out)
				if err != nil {
					t.Errorf("case %s: the reference: %v", c.Name, err)
					return
				}
				got, err := k.FP8(a, b, c.Out)
				if err != nil {
					t.Errorf("case %s (fp8 %v × %v): the kernel: %v", c.Name, c.FA, c.FB, err)
					return
				}
				da, _ := quant.DecodeFP8(a)
				db, _ := quant.DecodeFP8(b)
				judge(t, c.Name, fmt.Sprintf("output (%v × %v)", c.FA, c.FB), c.N, got, want, absBound(da, db, c.M, c.K, c.N, want, c.Out))
			})
			t.Run("weight-only", func(t T) {
				r := suite.Rand(c.Name + "/weight-only")
				if k.WeightOnly == nil {
					t.Skipf("case %s/weight-only skipped: the kernel has no WeightOnly", c.Name)
					return
				}
				w, err := drawInt8(r, c.K, c.N, c.B, c.Offset)
				if err != nil {
					t.Errorf("case %s: cannot quantise the weights: %v", c.Name, err)
					return
				}
				x := compare.Narrow(suite.Normal(r, c.M*c.K, 1))
				want32, err := quant.WeightOnly32(x, c.M, w, c.Out)
				if err != nil {
					t.Errorf("case %s: the reference: %v", c.Name, err)
					return
				}
				got32, err := k.WeightOnly(x, c.M, w, c.Out)
				if err != nil {
					t.Errorf("case %s (weight-only %v): the kernel: %v", c.Name, c.B.Symmetry, err)
					return
				}
				xd := make([]float64, len(x))
				for i, v := range x {
					xd[i] = float64(v)
				}
				wd, _ := quant.Dequantise(w)
				want, got := widen(want32), widen(got32)
				judge(t, c.Name, "output", c.N, got, want, absBound(xd, wd, c.M, c.K, c.N, want, c.Out))
			})
		})
	}
}

func widen(x []float32) []float64 {
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = float64(v)
	}
	return y
}

// absBound returns the bound of sumBound for each output of the product
// of x [m, k] and y [k, n].
func absBound(x, y []float64, m, k, n int, ref []float64, out compare.Format) func(i int) float64 {
	return func(i int) float64 {
		r, c := i/n, i%n
		var abs float64
		for p := range k {
			abs += math.Abs(x[r*k+p] * y[p*n+c])
		}
		return sumBound(k, abs, ref[i], out)
	}
}
