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

// The overflow convention at the edges of OFP8 rev 1.0: E4M3's largest
// value is 448 = 1.75·2^8 and the next step would be 480; E5M2's is
// 57344 = 1.75·2^15, the next 65536 (values from the bit layouts).
func TestFP8Overflow(t *testing.T) {
	nan := math.NaN()
	for _, c := range []struct {
		e    FP8Element
		o    Overflow
		x    []float64
		want []float64
	}{
		// Scale 2: 896/2 = 448 exactly; 928/2 = 464, the tie 448|480, goes to
		// 448 (fraction 110, even); 960/2 = 480 overflows.
		{FP8E4M3, OverflowSpecial, []float64{896, 928, 960, -1000}, []float64{896, 896, nan, nan}},
		{FP8E4M3, OverflowSaturate, []float64{896, 928, 960, -1000}, []float64{896, 896, 896, -896}},
		// 61440 = 7.5·2^13, the tie 57344|65536, goes to 65536 (even), beyond max.
		{FP8E5M2, OverflowSpecial, []float64{114688, 122880, -1e9, 1}, []float64{114688, math.Inf(1), math.Inf(-1), 1}},
		{FP8E5M2, OverflowSaturate, []float64{114688, 122880, -1e9, 1}, []float64{114688, 114688, -114688, 1}},
	} {
		s := FP8Scheme{Element: c.e, Overflow: c.o}
		q, err := QuantiseFP8(c.x, 1, len(c.x), s, []float64{2})
		ensure.NoError(t, err)
		got, err := DequantiseFP8(q)
		ensure.NoError(t, err)
		for i := range got {
			if math.IsNaN(c.want[i]) {
				expect.True(t, math.IsNaN(got[i]), "%v %v: x = %v gives %v; want NaN", c.e, c.o, c.x[i], got[i])
				continue
			}
			expect.Equal(t, c.want[i], got[i], "%v %v: x = %v", c.e, c.o, c.x[i])
		}
	}
}

// The chosen scale leaves nothing to overflow, and each element is the
// exact quotient rounded once: with powers of two x/s is exact in float64,
// so compare.Format.Round of it is an independent reference.
func TestFP8ChosenScalesRoundOnce(t *testing.T) {
	r := rand.New(rand.NewPCG(8, 9))
	for _, e := range FP8Element(0).Values() {
		for _, g := range []Granularity{PerTensor, PerChannel, PerGroup} {
			for _, sf := range ScaleFormat(0).Values() {
				s := FP8Scheme{Element: e, Granularity: g, Group: 4, Scale: sf}
				x := randomTensor(r, 4*8)
				q, err := QuantiseFP8(x, 4, 8, s, nil)
				ensure.NoError(t, err, "%+v", s)
				xhat, err := DequantiseFP8(q)
				ensure.NoError(t, err)
				gr, _ := s.grid("test", 4, 8)
				f := e.format()
				for i, v := range x {
					sc := q.Scales[gr.block(i/8, i%8)]
					expect.True(t, !math.IsNaN(xhat[i]) && !math.IsInf(xhat[i], 0), "%+v: x = %v overflowed", s, v)
					want := roundReference(v, sc, f)
					expect.Equal(t, want*sc, xhat[i], "%+v: x = %v, s = %v", s, v, sc)
				}
			}
		}
	}
}

// roundReference rounds v/sc to f (finite results only): with big.Float
// at f's precision in f's normal range, and by exactNearest as a multiple
// of the smallest subnormal below it, a path independent of roundRat's
// rounding to odd.
func roundReference(v, sc float64, f compare.Format) float64 {
	quo := new(big.Rat).Quo(rat(v), rat(sc))
	approx, _ := quo.Float64()
	if math.Abs(approx) < f.MinNormal() {
		return math.Copysign(float64(exactNearest(v, sc*f.MinSubnormal(), HalfEven))*f.MinSubnormal(), v)
	}
	out, _ := new(big.Float).SetPrec(uint(f.Precision())).SetMode(big.ToNearestEven).SetRat(quo).Float64()
	return out
}

func TestFP8Errors(t *testing.T) {
	x := []float64{1, 2, 3, 4}
	for _, c := range []struct {
		scales []float64
		sf     ScaleFormat
		want   string
	}{
		{[]float64{0}, ScaleFloat32, "scales[0] = 0"},
		{[]float64{-1}, ScaleFloat32, "scales[0] = -1"},
		{[]float64{math.Inf(1)}, ScaleFloat32, "scales[0] = +Inf"},
		{[]float64{math.NaN()}, ScaleFloat32, "scales[0] = NaN"},
		{[]float64{0.1}, ScaleBFloat16, "scales[0] = 0.1"},
		{[]float64{3}, ScalePow2, "scales[0] = 3"},
	} {
		_, err := QuantiseFP8(x, 1, 4, FP8Scheme{Scale: c.sf}, c.scales)
		expect.ErrorIs(t, err, ErrScale)
		expect.Contains(t, err.Error(), "QuantiseFP8: "+c.want)
	}
	_, err := QuantiseFP8(x, 1, 4, FP8Scheme{}, []float64{1, 1})
	expect.ErrorIs(t, err, ErrLength)
	_, err = QuantiseFP8(x, 1, 4, FP8Scheme{Granularity: PerGroup, Group: 3}, nil)
	expect.ErrorIs(t, err, ErrGroup)
	_, err = QuantiseFP8(x, 1, 3, FP8Scheme{}, nil)
	expect.ErrorIs(t, err, ErrLength)
	_, err = QuantiseFP8([]float64{math.NaN()}, 1, 1, FP8Scheme{}, nil)
	expect.ErrorIs(t, err, ErrValue)
	_, err = QuantiseFP8(x, 1, 4, FP8Scheme{Overflow: 7}, nil)
	expect.ErrorIs(t, err, ErrOption)
	expect.Contains(t, err.Error(), "FP8Scheme.Overflow")
	_, err = DequantiseFP8(FP8Tensor{Rows: 1, Cols: 2, Codes: []uint8{1, 2}, Scales: []float64{0}})
	expect.ErrorIs(t, err, ErrScale)
	expect.Contains(t, err.Error(), "DequantiseFP8: FP8Tensor.Scales[0] = 0")
	q, err := QuantiseFP832([]float32{1, -2}, 1, 2, FP8Scheme{Element: FP8E5M2}, []float32{0.5})
	ensure.NoError(t, err)
	got, _ := DequantiseFP8(q)
	expect.Equal(t, []float64{1, -2}, got)
}

// The percentile rule (nearest rank): of 1..100 the 90th percentile is 90,
// so s = up(90/127); elements above 90·(127.5/127) are clipped, and BoundOf
// gives them their own error while Bound's s/2 is the unclipped bound.
func TestPercentileClipsAndBoundOfSaysSo(t *testing.T) {
	x := make([]float64, 100)
	for i := range x {
		x[i] = float64(i + 1)
	}
	s := Scheme{Rule: RulePercentile, Percentile: 90}
	q, err := Quantise(x, 1, 100, s)
	ensure.NoError(t, err)
	sc, _ := ScaleFloat32.up(quotientUp(90, 127))
	expect.Equal(t, sc, q.Scales[0])
	xhat, _ := Dequantise(q)
	b, err := BoundOf(x, q)
	ensure.NoError(t, err)
	for i, v := range x {
		err := math.Abs(v - xhat[i])
		if v/sc > 127.5 {
			expect.Equal(t, int8(127), q.Codes[i])
			expect.Equal(t, err, b[i], "x = %v clipped", v)
			expect.True(t, err > sc/2)
		} else {
			expect.Equal(t, sc/2, b[i], "x = %v", v)
			expect.True(t, err <= sc/2)
		}
	}
	// p = 100 is the absolute maximum.
	all, _ := Quantise(x, 1, 100, Scheme{Rule: RulePercentile, Percentile: 100})
	am, _ := Quantise(x, 1, 100, Scheme{})
	expect.Equal(t, am.Scales, all.Scales)
	expect.Equal(t, am.Codes, all.Codes)
	for _, p := range []float64{0, -1, 101, math.NaN()} {
		_, err := Quantise(x, 1, 100, Scheme{Rule: RulePercentile, Percentile: p})
		expect.ErrorIs(t, err, ErrOption)
		expect.Contains(t, err.Error(), "Scheme.Percentile")
	}
	expect.Equal(t, 3, rankOf(2.5, 100), "⌈2.5⌉")
	expect.Equal(t, 1, rankOf(0.1, 5), "at least rank 1")
}

// A float zero point covers [min x, max x] even when it holds no zero:
// min x lands on code lo and max x on hi where z is held closely enough
// (float32, binary16 here: |z| < 512), and every element is within
// BoundOf of its exact x̂ = (q − z)·s, s/2 for every unclipped one. In
// bfloat16 z ≈ −383 has steps of 2, so an extreme can be clipped.
func TestFloatZeroPoint(t *testing.T) {
	r := rand.New(rand.NewPCG(10, 11))
	for _, sf := range []ScaleFormat{ScaleFloat32, ScaleBinary16, ScaleBFloat16} {
		for _, w := range Width(0).Values() {
			for _, ro := range Rounding(0).Values() {
				x := make([]float64, 2*16)
				for i := range x {
					x[i] = 10 + 10*r.Float64()
				}
				x[3], x[20] = 10, 20
				s := Scheme{Symmetry: AsymmetricFloat, Granularity: PerChannel, Width: w, Rounding: ro, Scale: sf}
				q, err := Quantise(x, 2, 16, s)
				ensure.NoError(t, err, "%+v", s)
				lo, hi := s.Limits()
				if sf != ScaleBFloat16 {
					expect.Equal(t, int8(lo), q.Codes[3], "%+v: min x", s)
					expect.Equal(t, int8(hi), q.Codes[20], "%+v: max x", s)
				}
				xhat, _ := Dequantise(q)
				bound, err := BoundOf(x, q)
				ensure.NoError(t, err)
				for i, v := range x {
					b := i / 16
					exact := new(big.Rat).Mul(new(big.Rat).Sub(big.NewRat(int64(q.Codes[i]), 1), rat(q.FloatZeros[b])), rat(q.Scales[b]))
					want, _ := exact.Float64()
					expect.Equal(t, want, xhat[i])
					d := new(big.Rat).Sub(rat(v), exact)
					expect.True(t, d.Abs(d).Cmp(rat(bound[i])) <= 0, "%+v: x = %v, x̂ = %v", s, v, xhat[i])
					if q.code(v, b) >= lo && q.code(v, b) <= hi {
						expect.Equal(t, q.Scales[b]/2, bound[i])
					}
				}
			}
		}
	}
	_, err := Quantise([]float64{1}, 1, 1, Scheme{Symmetry: AsymmetricFloat, Scale: ScalePow2})
	expect.ErrorIs(t, err, ErrOption)
	a, _ := Quantise([]float64{1, 2}, 1, 2, Scheme{Symmetry: AsymmetricFloat})
	_, _, err = MatMulInt8(a, Tensor{Rows: 2, Cols: 1, Codes: []int8{1, 1}, Scales: []float64{1}})
	expect.ErrorIs(t, err, ErrOption)
	a.FloatZeros[0] = math.Inf(1)
	_, err = Dequantise(a)
	expect.ErrorIs(t, err, ErrCode)
	a.FloatZeros = nil
	_, err = Dequantise(a)
	expect.ErrorIs(t, err, ErrLength)
}
