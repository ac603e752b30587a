package quant

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

func TestPackWorkedValues(t *testing.T) {
	// Hand derivation: codes −1, 7, −8, 0, 3. Two's complement nibbles
	// F, 7, 8, 0, 3; offset binary (q + 8) 7, F, 0, 8, B.
	codes := []int8{-1, 7, -8, 0, 3}
	for _, c := range []struct {
		p    Packing
		want []byte
	}{
		{Packing{LowFirst, TwosComplement}, []byte{0x7F, 0x08, 0x03}},
		{Packing{HighFirst, TwosComplement}, []byte{0xF7, 0x80, 0x30}},
		{Packing{LowFirst, OffsetBinary}, []byte{0xF7, 0x80, 0x0B}},
		{Packing{HighFirst, OffsetBinary}, []byte{0x7F, 0x08, 0xB0}},
	} {
		b, err := Pack4(codes, c.p)
		ensure.NoError(t, err)
		expect.Equal(t, c.want, b, c.p)
		back, err := Unpack4(b, len(codes), c.p)
		ensure.NoError(t, err)
		expect.Equal(t, codes, back, c.p)
	}
}

func TestPackRoundTrips(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 12))
	for _, o := range NibbleOrder(0).Values() {
		for _, c := range NibbleCode(0).Values() {
			p := Packing{o, c}
			// Every byte unpacks to two codes that pack back to it.
			for v := range 256 {
				q, err := Unpack4([]byte{byte(v)}, 2, p)
				ensure.NoError(t, err)
				b, err := Pack4(q, p)
				ensure.NoError(t, err)
				expect.Equal(t, []byte{byte(v)}, b, p)
			}
			for n := range 9 {
				q := make([]int8, n)
				for i := range q {
					q[i] = int8(r.IntN(16) - 8)
				}
				b, err := Pack4(q, p)
				ensure.NoError(t, err)
				expect.Len(t, b, (n+1)/2)
				back, err := Unpack4(b, n, p)
				ensure.NoError(t, err)
				expect.Equal(t, q, back)
			}
		}
	}
	_, err := Pack4([]int8{8}, Packing{})
	expect.ErrorIs(t, err, ErrCode)
	_, err = Unpack4([]byte{1, 2}, 5, Packing{})
	expect.EqualError(t, err, "quant: invalid packed buffer: Unpack4: len(b) = 2 for n = 5 codes; want ⌈n/2⌉ bytes, 0 ≤ n ≤ MaxElements")
	_, err = Unpack4(nil, -1, Packing{})
	expect.ErrorIs(t, err, ErrPacked)
	_, err = Pack4(nil, Packing{Code: 5})
	expect.ErrorIs(t, err, ErrOption)
}

// randomCodes returns a quantised [rows, cols] tensor of random codes
// under s, with random scales of s's format.
func randomCodes(r *rand.Rand, rows, cols int, s Scheme) Tensor {
	x := randomTensor(r, rows*cols)
	q, err := Quantise(x, rows, cols, s)
	if err != nil {
		panic(err)
	}
	return q
}

func TestMatMulInt8IsTheExactIntegerProduct(t *testing.T) {
	r := rand.New(rand.NewPCG(13, 14))
	const m, k, n = 5, 33, 4
	for _, sa := range []Scheme{{}, {Granularity: PerChannel}, {Symmetry: Asymmetric, Granularity: PerChannel, Scale: ScaleBFloat16}, {Width: Int4, Range: RangeClipped, Scale: ScalePow2}} {
		for _, sb := range []Scheme{{}, {Granularity: PerChannel, Channel: ChannelCols, Scale: ScaleBinary16}, {Symmetry: Asymmetric}} {
			a, b := randomCodes(r, m, k, sa), randomCodes(r, k, n, sb)
			acc, out, err := MatMulInt8(a, b)
			ensure.NoError(t, err)
			ga, _ := newGrid("", m, k, sa)
			gb, _ := newGrid("", k, n, sb)
			for i := range m {
				for j := range n {
					ba, bb := ga.block(i, 0), gb.block(0, j)
					want := new(big.Int)
					for p := range k {
						da := big.NewInt(int64(a.Codes[i*k+p]) - int64(a.zero(ba)))
						db := big.NewInt(int64(b.Codes[p*n+j]) - int64(b.zero(bb)))
						want.Add(want, da.Mul(da, db))
					}
					expect.Equal(t, want.Int64(), int64(acc[i*n+j]))
					// The rescale: sa·sb·acc exactly, rounded once.
					e := new(big.Rat).Mul(rat(a.Scales[ba]), rat(b.Scales[bb]))
					e.Mul(e, new(big.Rat).SetInt(want))
					f, _ := e.Float64()
					expect.Equal(t, f, out[i*n+j])
				}
			}
		}
	}
}

func TestMatMulInt8Overflow(t *testing.T) {
	// Symmetric int8 full range: every term at most 128·128 = 2^14, so
	// K·2^14 ≤ 2^31 − 1 holds up to K = 131071; one operand clipped:
	// K·127·128 up to K = 132104 (2^31 − 1 = 2147483647; 2147483647/16256 =
	// 132104.06).
	for _, c := range []struct {
		k        int
		clippedB bool
		ok       bool
	}{{131071, false, true}, {131072, false, false}, {132104, true, true}, {132105, true, false}} {
		a := Tensor{Rows: 1, Cols: c.k, Codes: make([]int8, c.k), Scales: []float64{1}}
		b := Tensor{Rows: c.k, Cols: 1, Codes: make([]int8, c.k), Scales: []float64{1}}
		if c.clippedB {
			b.Scheme.Range = RangeClipped
		}
		_, _, err := MatMulInt8(a, b)
		if c.ok {
			expect.NoError(t, err, c.k)
		} else {
			expect.ErrorIs(t, err, ErrOverflow, c.k)
		}
	}
	// The bound is met: K = 131071 codes of −128 sum to 131071·2^14.
	const k = 131071
	a := Tensor{Rows: 1, Cols: k, Codes: make([]int8, k), Scales: []float64{1}}
	b := Tensor{Rows: k, Cols: 1, Codes: make([]int8, k), Scales: []float64{1}}
	for i := range a.Codes {
		a.Codes[i], b.Codes[i] = -128, -128
	}
	acc, _, err := MatMulInt8(a, b)
	ensure.NoError(t, err)
	expect.Equal(t, int32(k<<14), acc[0])

	_, _, err = MatMulInt8(Tensor{Rows: 1, Cols: 2, Codes: make([]int8, 2), Scales: []float64{1}}, Tensor{Rows: 3, Cols: 1, Codes: make([]int8, 3), Scales: []float64{1}})
	expect.EqualError(t, err, "quant: invalid size: MatMulInt8: b.Rows = 3; want a.Cols = 2")
	_, _, err = MatMulInt8(Tensor{Rows: 1, Cols: 2, Codes: make([]int8, 2), Scales: []float64{1, 1}, Scheme: Scheme{Granularity: PerChannel, Channel: ChannelCols}}, Tensor{Rows: 2, Cols: 1, Codes: make([]int8, 2), Scales: []float64{1}})
	expect.ErrorIs(t, err, ErrOption, "per-column scales of a cross the sum")
}

// nearestIn returns the value of f nearest the exact rational e, ties to
// even, found among the neighbours of a float64 approximation: the
// reference WeightOnly's single rounding is checked against.
func nearestIn(f compare.Format, e *big.Rat) float64 {
	approx, _ := e.Float64()
	v := f.Round(approx)
	if math.IsInf(v, 0) {
		return v // beyond the format: its overflow
	}
	best := v
	for _, c := range []float64{v - f.ULP(v), v + f.ULP(v), v - f.ULP(v)/2, v + f.ULP(v)/2} {
		if c = f.Round(c); math.IsInf(c, 0) {
			continue
		}
		dc := new(big.Rat).Sub(rat(c), e)
		db := new(big.Rat).Sub(rat(best), e)
		switch dc.Abs(dc).Cmp(db.Abs(db)) {
		case -1:
			best = c
		case 0:
			if f.Encode(c)&1 == 0 {
				best = c
			}
		}
	}
	return best
}

func TestWeightOnlyIsTheExactProductRoundedOnce(t *testing.T) {
	r := rand.New(rand.NewPCG(15, 16))
	const m, k, n = 3, 40, 5
	for _, s := range []Scheme{{Width: Int4, Granularity: PerGroup, Channel: ChannelCols, Group: 8}, {Symmetry: Asymmetric, Granularity: PerChannel, Channel: ChannelCols}} {
		w := randomCodes(r, k, n, s)
		wd, _ := Dequantise(w)
		x := randomTensor(r, m*k)
		x32 := make([]float32, len(x))
		for i := range x {
			x32[i] = float32(x[i])
		}
		for _, f := range []compare.Format{compare.Float64, compare.Float32, compare.Binary16, compare.BFloat16} {
			y, err := WeightOnly(x, m, w, f)
			ensure.NoError(t, err)
			y32, err := WeightOnly32(x32, m, w, f)
			ensure.NoError(t, err)
			for i := range m {
				for j := range n {
					e, e32 := new(big.Rat), new(big.Rat)
					for p := range k {
						e.Add(e, new(big.Rat).Mul(rat(x[i*k+p]), rat(wd[p*n+j])))
						e32.Add(e32, new(big.Rat).Mul(rat(float64(x32[i*k+p])), rat(wd[p*n+j])))
					}
					want := nearestIn(f, e)
					if f == compare.Float64 {
						want, _ = e.Float64()
					}
					expect.Equal(t, want, y[i*n+j], "%v", f)
					f32 := f
					if f == compare.Float64 {
						f32 = compare.Float32
					}
					expect.Equal(t, float32(nearestIn(f32, e32)), y32[i*n+j], "%v, float32 activations", f)
				}
			}
		}
	}
	w := randomCodes(r, 2, 2, Scheme{})
	y, err := WeightOnly([]float64{math.Inf(1), 1}, 1, w, compare.Float32)
	ensure.NoError(t, err)
	expect.True(t, math.IsInf(y[0], 0) || math.IsNaN(y[0]), "an infinite activation")
	_, err = WeightOnly([]float64{1}, 1, w, compare.Float32)
	expect.ErrorIs(t, err, ErrLength)
	_, err = WeightOnly([]float64{1, 1}, 1, w, 99)
	expect.ErrorIs(t, err, ErrOption)
	w.Scales[0] = -1
	_, err = WeightOnly([]float64{1, 1}, 1, w, compare.Float32)
	expect.ErrorIs(t, err, ErrScale)
}

func TestSQNR(t *testing.T) {
	// Hand derivation: Σx² = 1 + 4 + 9 + 16 = 30, Σ(x − x̂)² = 1:
	// 10·log₁₀ 30.
	got, err := SQNR([]float64{1, 2, 3, 4}, []float64{1, 2, 3, 5})
	ensure.NoError(t, err)
	expect.InDelta(t, 10*math.Log10(30), got, 1e-13)
	g32, err := SQNR32([]float32{1, 2, 3, 4}, []float32{1, 2, 3, 5})
	ensure.NoError(t, err)
	expect.Equal(t, float32(got), g32)

	// Against exact rational sums, on a quantised tensor whose noise is
	// tiny next to the signal (the difference x − x̂ is inexact in float64).
	r := rand.New(rand.NewPCG(17, 18))
	x := randomTensor(r, 256)
	q, err := Quantise(x, 16, 16, Scheme{Granularity: PerChannel})
	ensure.NoError(t, err)
	xhat, _ := Dequantise(q)
	sig, noise := new(big.Rat), new(big.Rat)
	for i := range x {
		d := new(big.Rat).Sub(rat(x[i]), rat(xhat[i]))
		sig.Add(sig, new(big.Rat).Mul(rat(x[i]), rat(x[i])))
		noise.Add(noise, d.Mul(d, d))
	}
	ratio, _ := new(big.Rat).Quo(sig, noise).Float64()
	got, err = SQNR(x, xhat)
	ensure.NoError(t, err)
	expect.InDelta(t, 10*math.Log10(ratio), got, 1e-12)
	expect.Greater(t, got, 30.0, "int8 per-row quantisation keeps more than 30 dB")

	for _, c := range []struct {
		x, xhat []float64
		want    float64
	}{
		{[]float64{1, 2}, []float64{1, 2}, math.Inf(1)},
		{[]float64{0, 0}, []float64{0, 1}, math.Inf(-1)},
		{nil, nil, math.Inf(1)},
	} {
		got, err := SQNR(c.x, c.xhat)
		ensure.NoError(t, err)
		expect.Equal(t, c.want, got)
	}
	got, err = SQNR([]float64{math.NaN()}, []float64{1})
	ensure.NoError(t, err)
	expect.True(t, math.IsNaN(got))
	_, err = SQNR([]float64{1}, nil)
	expect.ErrorIs(t, err, ErrLength)
}

func TestWeightOnlyRoundsOnceNotTwice(t *testing.T) {
	// Hand derivation: x = (1, 2^−24, 2^−60), ŵ = (1, 1, 1): the exact sum
	// 1 + 2^−24 + 2^−60 lies just above the float32 tie 1 + 2^−24, so it
	// rounds up to 1 + 2^−23; rounded first to float64 (1 + 2^−24, the tie)
	// and then to float32 it would go to the even 1. Likewise in bfloat16
	// with 2^−8.
	w := Tensor{Rows: 3, Cols: 1, Codes: []int8{1, 1, 1}, Scales: []float64{1}}
	for _, c := range []struct {
		f    compare.Format
		half float64
	}{{compare.Float32, 0x1p-24}, {compare.BFloat16, 0x1p-8}} {
		y, err := WeightOnly([]float64{1, c.half, 0x1p-60}, 1, w, c.f)
		ensure.NoError(t, err)
		expect.Equal(t, 1+2*c.half, y[0], c.f)
		y, err = WeightOnly([]float64{1, c.half, -0x1p-60}, 1, w, c.f)
		ensure.NoError(t, err)
		expect.Equal(t, 1.0, y[0], c.f)
	}
}
