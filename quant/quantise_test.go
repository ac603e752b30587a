package quant

import (
	"math"
	"math/big"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/surface"
)

func rat(x float64) *big.Rat { return new(big.Rat).SetFloat64(x) }

// exactNearest is round(x/s) by exact rational arithmetic: the reference
// nearest is checked against.
func exactNearest(x, s float64, mode Rounding) int {
	q := new(big.Rat).Quo(rat(x), rat(s))
	fl := new(big.Int).Div(q.Num(), q.Denom()) // floor (Euclidean division, positive denominator)
	frac := new(big.Rat).Sub(q, new(big.Rat).SetInt(fl))
	k := int(fl.Int64())
	switch frac.Cmp(big.NewRat(1, 2)) {
	case 1:
		k++
	case 0:
		if mode == HalfAway && q.Sign() > 0 || mode == HalfEven && k%2 != 0 {
			k++
		}
	}
	return k
}

func TestNearestMatchesExactRationals(t *testing.T) {
	// Hand-derived ties (IEEE 754-2019 §4.3.1: ties to even, ties away).
	for _, c := range []struct {
		x          float64
		even, away int
	}{{2.5, 2, 3}, {-2.5, -2, -3}, {3.5, 4, 4}, {-3.5, -4, -4}, {0.5, 0, 1}, {-0.5, 0, -1}, {1.25, 1, 1}} {
		expect.Equal(t, c.even, nearest(c.x, 1, HalfEven), "nearest(%v, 1, half-even)", c.x)
		expect.Equal(t, c.away, nearest(c.x, 1, HalfAway), "nearest(%v, 1, half-away)", c.x)
	}
	r := rand.New(rand.NewPCG(1, 2))
	for range 20000 {
		s := float64(float32(math.Ldexp(1+r.Float64(), r.IntN(40)-20)))
		k := r.IntN(513) - 256
		x := float64(k) * s
		switch r.IntN(3) {
		case 0: // an exact tie
			x = (float64(k) + 0.5) * s
		case 1: // next to a tie
			x = math.Nextafter((float64(k)+0.5)*s, math.Inf(r.IntN(2)*2-1))
		default:
			x += (r.Float64() - 0.5) * s
		}
		for _, mode := range []Rounding{HalfEven, HalfAway} {
			if got, want := nearest(x, s, mode), exactNearest(x, s, mode); got != want {
				t.Fatalf("nearest(%v, %v, %v) = %d; exact %d", x, s, mode, got, want)
			}
		}
	}
}

// schemes lists every combination of the conventions with an integer zero
// point (or none) and the absolute-maximum rule, with group size g.
func schemes(g int) []Scheme {
	var out []Scheme
	for _, sy := range []Symmetry{Symmetric, Asymmetric} {
		for _, gr := range Granularity(0).Values() {
			for _, ch := range Channel(0).Values() {
				for _, w := range Width(0).Values() {
					for _, rg := range Range(0).Values() {
						for _, ro := range Rounding(0).Values() {
							for _, sc := range ScaleFormat(0).Values() {
								out = append(out, Scheme{Symmetry: sy, Granularity: gr, Channel: ch, Group: g, Width: w, Range: rg, Rounding: ro, Scale: sc})
							}
						}
					}
				}
			}
		}
	}
	return out
}

// randomTensor returns rows·cols values of varied magnitudes, with ties of
// the codes likely (multiples of 2^−4) and an outlier now and then.
func randomTensor(r *rand.Rand, n int) []float64 {
	x := make([]float64, n)
	for i := range x {
		switch r.IntN(4) {
		case 0:
			x[i] = float64(r.IntN(257)-128) / 16
		case 1:
			x[i] = r.NormFloat64() * 100
		default:
			x[i] = r.NormFloat64() * math.Ldexp(1, r.IntN(20)-10)
		}
	}
	return x
}

func TestRoundTripWithinBoundForEveryScheme(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	const rows, cols = 6, 8
	for _, s := range schemes(2) {
		for trial := range 4 {
			x := randomTensor(r, rows*cols)
			if trial == 3 {
				x = make([]float64, rows*cols) // all zeros
			}
			q, err := Quantise(x, rows, cols, s)
			ensure.NoError(t, err, "%+v", s)
			xhat, err := Dequantise(q)
			ensure.NoError(t, err)
			bound, err := Bound(q)
			ensure.NoError(t, err)
			lo, hi := s.Limits()
			for i := range x {
				// |x − x̂| ≤ s/2, exactly.
				d := new(big.Rat).Sub(rat(x[i]), rat(xhat[i]))
				if d.Abs(d).Cmp(rat(bound[i])) > 0 {
					t.Fatalf("%+v: x[%d] = %v, x̂ = %v: error beyond the bound %v", s, i, x[i], xhat[i], bound[i])
				}
				if c := int(q.Codes[i]); c < lo || c > hi {
					t.Fatalf("%+v: code %d outside %d..%d", s, c, lo, hi)
				}
			}
			// The scale rule: s is of the format and ≥ the exact quotient;
			// the format value below s is < it (float formats), or s/2 is
			// (powers of two above 2^−127).
			g, _ := newGrid("test", rows, cols, s)
			amax, xmin, xmax := make([]float64, g.blocks), make([]float64, g.blocks), make([]float64, g.blocks)
			for i, v := range x {
				b := g.block(i/cols, i%cols)
				amax[b], xmin[b], xmax[b] = max(amax[b], math.Abs(v)), min(xmin[b], v), max(xmax[b], v)
			}
			for b, sc := range q.Scales {
				ensure.True(t, s.Scale.contains(sc), "%+v: scale %v", s, sc)
				exact := new(big.Rat).Quo(rat(amax[b]), big.NewRat(int64(hi), 1))
				if s.Symmetry == Asymmetric {
					exact.Quo(new(big.Rat).Sub(rat(xmax[b]), rat(xmin[b])), big.NewRat(int64(hi-lo), 1))
				}
				if exact.Sign() == 0 {
					expect.Equal(t, 1.0, sc, "a block of zeros takes the scale 1")
					continue
				}
				expect.True(t, rat(sc).Cmp(exact) >= 0, "%+v: scale %v below the exact quotient %v", s, sc, exact.FloatString(20))
				below := sc / 2
				if f, ok := s.Scale.format(); ok {
					below = math.Nextafter(sc, 0)
					below = f.Round(below)
					if below == sc {
						below -= f.ULP(math.Nextafter(sc, 0))
					}
				}
				if s.Scale != ScalePow2 || sc > math.Ldexp(1, minPow2) {
					expect.True(t, rat(below).Cmp(exact) < 0, "%+v: scale %v is not the smallest ≥ %v", s, sc, exact.FloatString(20))
				}
			}
			// Codes round trip: x̂/s + z gives the codes back, exactly.
			for i := range x {
				b := g.block(i/cols, i%cols)
				expect.Equal(t, float64(q.Codes[i]), xhat[i]/q.Scales[b]+float64(q.zero(b)))
			}
		}
	}
}

func TestQuantise32IsQuantiseOfWidened(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	x := randomTensor(r, 4*8)
	x32 := make([]float32, len(x))
	for i, v := range x {
		x32[i] = float32(v)
		x[i] = float64(x32[i])
	}
	for _, s := range schemes(4)[:64] {
		a, err := Quantise(x, 4, 8, s)
		ensure.NoError(t, err)
		b, err := Quantise32(x32, 4, 8, s)
		ensure.NoError(t, err)
		expect.Equal(t, a, b)
	}
}

func TestQuantiseWorkedValues(t *testing.T) {
	// Hand derivation: int4 symmetric, amax 7, 7/7 = 1, float32 scale 1;
	// −3.5 and 2.5 are ties.
	x := []float64{-3.5, 2.5, 0.25, 7}
	for _, c := range []struct {
		mode Rounding
		want []int8
	}{{HalfEven, []int8{-4, 2, 0, 7}}, {HalfAway, []int8{-4, 3, 0, 7}}} {
		q, err := Quantise(x, 1, 4, Scheme{Width: Int4, Rounding: c.mode})
		ensure.NoError(t, err)
		expect.Equal(t, c.want, q.Codes, c.mode)
		expect.Equal(t, []float64{1}, q.Scales)
	}
	// Hand derivation: asymmetric int8 on [−1, 254]: s = 255/255 = 1,
	// z = −128 − round(−1) = −127; 10.5 is a tie, to even 10, code −117.
	q, err := Quantise([]float64{-1, 254, 0, 10.5}, 1, 4, Scheme{Symmetry: Asymmetric})
	ensure.NoError(t, err)
	expect.Equal(t, []int8{-128, 127, -127, -117}, q.Codes)
	expect.Equal(t, []int8{-127}, q.Zeros)
	expect.Equal(t, []float64{1}, q.Scales)
	// Hand derivation: amax 1, 1/127 = 0.0078740…; bfloat16 near it has the
	// spacing 2^−14 (binade [2^−7, 2^−6)), and 2^14/127 = 129.0079…, so the
	// nearest is 129·2^−14 < 1/127 and the scale rounds up to 130·2^−14;
	// 1/s = 8192/65 = 126.03 gives the code 126, not 127.
	q, err = Quantise([]float64{1, -0.5}, 1, 2, Scheme{Scale: ScaleBFloat16})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{130.0 / 16384}, q.Scales)
	expect.Equal(t, []int8{126, -63}, q.Codes)
	// Hand derivation: powers of two: 1/127 lies in (2^−7, 2^−6], s = 2^−6.
	q, err = Quantise([]float64{1}, 1, 1, Scheme{Scale: ScalePow2})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{1.0 / 64}, q.Scales)
	expect.Equal(t, []int8{64}, q.Codes)
	// Per-group along the rows of [2, 4], groups of 2: blocks
	// (0,0–1) (0,2–3) (1,0–1) (1,2–3), amax 127, 254, 63.5, 508, chosen so
	// that every scale is exact: 127/127 = 1, 254/127 = 2, 63.5/127 = 0.5,
	// 508/127 = 4.
	q, err = Quantise([]float64{127, 1, 2, -254, 63.5, 0, 508, 4}, 2, 4, Scheme{Granularity: PerGroup, Group: 2})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{1, 2, 0.5, 4}, q.Scales)
	expect.Equal(t, []int8{127, 1, 1, -127, 127, 0, 127, 1}, q.Codes)
	// The same down the columns, groups of 2 rows: blocks are the columns,
	// amax 127, 1, 508, 254. Column 1: 1/127 in the float32 binade
	// [2^−7, 2^−6) of spacing 2^−30 is 2^30/127 = 8454660.03… steps, so the
	// scale rounds up to 8454661·2^−30.
	q, err = Quantise([]float64{127, 1, 2, -254, 63.5, 0, 508, 4}, 2, 4, Scheme{Granularity: PerGroup, Channel: ChannelCols, Group: 2})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{1, 8454661.0 / (1 << 30), 4, 2}, q.Scales)
}

func TestErrorsNameTheArgument(t *testing.T) {
	good, err := Quantise([]float64{1, 2, 3, 4}, 2, 2, Scheme{Symmetry: Asymmetric})
	ensure.NoError(t, err)
	with := func(f func(*Tensor)) Tensor {
		c := good
		c.Codes = append([]int8(nil), good.Codes...)
		c.Scales = append([]float64(nil), good.Scales...)
		c.Zeros = append([]int8(nil), good.Zeros...)
		f(&c)
		return c
	}
	for _, c := range []struct {
		name string
		t    Tensor
		want error
		msg  string
	}{
		{"zero scale", with(func(t *Tensor) { t.Scales[0] = 0 }), ErrScale, "quant: invalid scale: Dequantise: Tensor.Scales[0] = 0; want a positive finite float32 value"},
		{"negative scale", with(func(t *Tensor) { t.Scales[0] = -1 }), ErrScale, ""},
		{"NaN scale", with(func(t *Tensor) { t.Scales[0] = math.NaN() }), ErrScale, ""},
		{"Inf scale", with(func(t *Tensor) { t.Scales[0] = math.Inf(1) }), ErrScale, ""},
		{"scale not float32", with(func(t *Tensor) { t.Scales[0] = 0.1 }), ErrScale, ""},
		{"scale not pow2", with(func(t *Tensor) { t.Scheme.Scale = ScalePow2; t.Scales[0] = 3 }), ErrScale, ""},
		{"code beyond clipped", with(func(t *Tensor) { t.Scheme.Range = RangeClipped; t.Codes[1] = -128 }), ErrCode, "quant: code out of range: Dequantise: Tensor.Codes[1] = -128; want -127 ≤ code ≤ 127"},
		{"int4 code", with(func(t *Tensor) { t.Scheme.Width = Int4; t.Codes[0], t.Zeros[0] = 8, 0 }), ErrCode, ""},
		{"zero point", with(func(t *Tensor) { t.Scheme.Width = Int4; t.Codes = []int8{0, 0, 0, 0}; t.Zeros[0] = -9 }), ErrCode, ""},
		{"codes length", with(func(t *Tensor) { t.Codes = t.Codes[:3] }), ErrLength, "quant: length mismatch: Dequantise: Tensor has 3 elements; want Rows·Cols = 2·2 = 4"},
		{"scales length", with(func(t *Tensor) { t.Scales = nil }), ErrLength, ""},
		{"zeros when symmetric", with(func(t *Tensor) { t.Scheme.Symmetry = Symmetric }), ErrLength, ""},
		{"group", with(func(t *Tensor) { t.Scheme.Granularity, t.Scheme.Group = PerGroup, 3 }), ErrGroup, "quant: invalid group: Dequantise: Scheme.Group = 3; want a divisor of Cols = 2"},
		{"group 0", with(func(t *Tensor) { t.Scheme.Granularity = PerGroup }), ErrGroup, ""},
		{"option", with(func(t *Tensor) { t.Scheme.Rounding = 7 }), ErrOption, ""},
		{"shape", with(func(t *Tensor) { t.Rows = -1 }), ErrSize, ""},
	} {
		_, err := Dequantise(c.t)
		expect.ErrorIs(t, err, c.want, c.name)
		if c.msg != "" {
			expect.EqualError(t, err, c.msg, c.name)
		}
		_, err = Bound(c.t)
		expect.ErrorIs(t, err, c.want, c.name)
	}
	_, err = Quantise([]float64{1, math.NaN()}, 1, 2, Scheme{})
	expect.EqualError(t, err, "quant: value cannot be quantised: Quantise: x[1] = NaN; want a finite value")
	_, err = Quantise([]float64{1e9}, 1, 1, Scheme{Scale: ScaleBinary16})
	expect.ErrorIs(t, err, ErrValue, "1e9/127 is beyond binary16's 65504")
	_, err = Quantise([]float64{1e300, -1e300}, 1, 2, Scheme{Symmetry: Asymmetric})
	expect.ErrorIs(t, err, ErrValue, "2e300 overflows")
	_, err = Quantise(make([]float64, 12), 2, 6, Scheme{Granularity: PerGroup, Group: 4})
	expect.EqualError(t, err, "quant: invalid group: Quantise: Scheme.Group = 4; want a divisor of Cols = 6")
	_, err = Quantise(make([]float64, 5), 2, 3, Scheme{})
	expect.ErrorIs(t, err, ErrLength)
	_, err = Quantise(nil, 1<<20, 1<<20, Scheme{})
	expect.ErrorIs(t, err, ErrSize, "2^40 elements")
	_, err = Quantise32([]float32{1}, 1, 1, Scheme{Width: 3})
	expect.ErrorIs(t, err, ErrOption)
	expect.Contains(t, err.Error(), "Quantise32: Scheme.Width")
}

func TestEmptyTensors(t *testing.T) {
	q, err := Quantise(nil, 0, 5, Scheme{Granularity: PerChannel, Channel: ChannelCols})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{1, 1, 1, 1, 1}, q.Scales, "a column of no elements is a block of zeros")
	x, err := Dequantise(q)
	ensure.NoError(t, err)
	expect.Len(t, x, 0)
}

func TestWordsRoundTrip(t *testing.T) {
	var s Symmetry
	for _, v := range s.Values() {
		b, err := v.MarshalText()
		ensure.NoError(t, err)
		var got Symmetry
		ensure.NoError(t, got.UnmarshalText(b))
		expect.Equal(t, v, got)
	}
	var sc ScaleFormat
	expect.ErrorIs(t, sc.UnmarshalText([]byte("float8")), ErrOption)
	expect.Equal(t, "symmetric-clipped", RangeClipped.String())
	expect.Equal(t, "e2m1", ElemE2M1.String())
	expect.ErrorIs(t, Element(9).Check(), ErrOption)
}

// The float32 rule: every exported function that takes or returns float
// tensors has a twin …32, but for those that take codes and return float64
// values exact or rounded once (the rule at Dequantise).
func TestFloat32Twins(t *testing.T) {
	twinned, problems, err := surface.Twins(".", strings.NewReplacer("float64", "float32"))
	ensure.NoError(t, err)
	codesIn := []string{"Dequantise", "DequantiseFP8", "Bound", "DecodeMX", "BoundMX", "DotMX", "MatMulInt8"}
	var left []string
	for _, p := range problems {
		exempt := false
		for _, name := range codesIn {
			exempt = exempt || strings.HasPrefix(p, name+" ")
		}
		if !exempt {
			left = append(left, p)
		}
	}
	expect.Empty(t, left)
	for _, name := range []string{"BoundOf", "EncodeMX", "Quantise", "QuantiseFP8", "SQNR", "WeightOnly"} {
		expect.Contains(t, twinned, name)
	}
}

func TestHugeEmptyShapesAreRefused(t *testing.T) {
	// [2^40, 0] holds no element but would need 2^40 per-row scales.
	_, err := Quantise(nil, 1<<40, 0, Scheme{Granularity: PerChannel})
	expect.ErrorIs(t, err, ErrSize)
	_, err = Dequantise(Tensor{Rows: 0, Cols: 1 << 40, Scheme: Scheme{Granularity: PerChannel, Channel: ChannelCols}})
	expect.ErrorIs(t, err, ErrSize)
	_, err = WeightOnly(nil, 1<<40, Tensor{Rows: 0, Cols: 1, Scales: []float64{1}}, 0)
	expect.ErrorIs(t, err, ErrSize)
}

// Random, mostly invalid tensors and blocks: every call returns, with a
// result or an error, and never panics.
func TestNoPanicOnBadInput(t *testing.T) {
	r := rand.New(rand.NewPCG(19, 20))
	pick := func(vals ...float64) float64 { return vals[r.IntN(len(vals))] }
	for range 3000 {
		rows, cols := r.IntN(4)-1, r.IntN(4)-1
		tn := Tensor{Rows: rows, Cols: cols, Scheme: Scheme{
			Symmetry: Symmetry(r.IntN(3)), Granularity: Granularity(r.IntN(4)), Channel: Channel(r.IntN(3)),
			Group: r.IntN(4) - 1, Width: Width(r.IntN(3)), Range: Range(r.IntN(3)), Rounding: Rounding(r.IntN(3)), Scale: ScaleFormat(r.IntN(5)),
		}}
		for range r.IntN(10) {
			tn.Codes = append(tn.Codes, int8(r.IntN(256)-128))
		}
		for range r.IntN(4) {
			tn.Scales = append(tn.Scales, pick(0, -1, 1, 0.5, math.NaN(), math.Inf(1), 0.1))
			tn.Zeros = append(tn.Zeros, int8(r.IntN(20)-10))
		}
		if r.IntN(2) == 0 {
			tn.Zeros = nil
		}
		_, _ = Dequantise(tn)
		_, _ = Bound(tn)
		_, _, _ = MatMulInt8(tn, tn)
		_, _ = WeightOnly(make([]float64, r.IntN(10)), r.IntN(3), tn, compare.Format(r.IntN(8)-1))
		x := make([]float64, r.IntN(10))
		for i := range x {
			x[i] = pick(0, 1, -1e300, 1e-300, math.NaN(), math.Inf(-1), 3.5)
		}
		_, _ = Quantise(x, rows, cols, tn.Scheme)
		b := MXBlock{Element: Element(r.IntN(8)), Scale: uint8(r.IntN(256))}
		for i := range b.Bits {
			b.Bits[i] = uint8(r.IntN(256))
		}
		_, _ = DecodeMX([]MXBlock{b})
		_, _ = BoundMX([]MXBlock{b})
		_, _ = DotMX([]MXBlock{b}, []MXBlock{b})
		_, _ = Unpack4(make([]byte, r.IntN(4)), r.IntN(8)-1, Packing{NibbleOrder(r.IntN(3)), NibbleCode(r.IntN(3))})
	}
}
