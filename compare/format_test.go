package compare

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
)

// pow2 is 2^e, exactly.
func pow2(e int) float64 { return math.Ldexp(1, e) }

// same reports whether a and b are the same float64, NaN equal to NaN and
// the sign of zero significant.
func same(a, b float64) bool {
	if math.IsNaN(a) || math.IsNaN(b) {
		return math.IsNaN(a) && math.IsNaN(b)
	}
	return a == b && math.Signbit(a) == math.Signbit(b)
}

func TestFormatParameters(t *testing.T) {
	// Sources, as the table at Float64 lists them: binary16, binary32,
	// binary64: IEEE 754-2019 §3.6, table 3.5 (max = (2 − 2^(1−p))·2^emax,
	// min normal 2^emin, min subnormal 2^(emin−p+1)); bfloat16 (no formal
	// standard): binary32 with the low 16 fraction bits dropped, so p = 8,
	// emax = 127, emin = −126: max = (2 − 2^−7)·2^127 = 2^128 − 2^120 =
	// 3.3895313892515355e38 and min subnormal 2^(−126−7) = 2^−133; E4M3,
	// E5M2: OCP 8-bit Floating Point Specification (OFP8) 2023, whose E4M3
	// max is S.1111.110 = 1.75·2^(15−7) = 448 (§4: no infinities) and
	// E5M2 max S.11110.11 = 1.75·2^(30−15) = 57344.
	tests := []struct {
		f                      Format
		width, prec            int
		inf                    bool
		max, minNormal, minSub float64
	}{
		{Float64, 64, 53, true, math.MaxFloat64, pow2(-1022), pow2(-1074)},
		{Float32, 32, 24, true, math.MaxFloat32, pow2(-126), pow2(-149)},
		{Binary16, 16, 11, true, 65504, pow2(-14), pow2(-24)},
		{BFloat16, 16, 8, true, 3.3895313892515355e38, pow2(-126), pow2(-133)},
		{E4M3, 8, 4, false, 448, pow2(-6), pow2(-9)},
		{E5M2, 8, 3, true, 57344, pow2(-14), pow2(-16)},
	}
	for _, tc := range tests {
		t.Run(tc.f.String(), func(t *testing.T) {
			expect.True(t, tc.f.Valid())
			expect.Equal(t, tc.width, tc.f.Width())
			expect.Equal(t, tc.prec, tc.f.Precision())
			expect.Equal(t, tc.inf, tc.f.HasInf())
			expect.Equal(t, tc.max, tc.f.Max())
			expect.Equal(t, tc.minNormal, tc.f.MinNormal())
			expect.Equal(t, tc.minSub, tc.f.MinSubnormal())
			expect.Equal(t, pow2(-tc.prec), tc.f.UnitRoundoff())
		})
	}
	expect.Len(t, Formats(), int(numFormats))
}

func TestSpecialPatterns(t *testing.T) {
	// Bit patterns stated by the specifications, as the doc of Float64
	// quotes them: E4M3 max S.1111.110, NaN S.1111.111, no Inf (OFP8 2023
	// §4); E5M2 ±Inf S.11111.00, NaN S.11111.{01,10,11} (OFP8 2023, the
	// IEEE 754 layout); binary16 and bfloat16 ±Inf and max by the IEEE
	// 754-2019 layout (§3.4).
	tests := []struct {
		f    Format
		bits uint64
		want float64
	}{
		{E4M3, 0b0_1111_110, 448},
		{E4M3, 0b1_1111_110, -448},
		{E4M3, 0b0_1111_111, math.NaN()},
		{E4M3, 0b1_1111_111, math.NaN()},
		{E4M3, 0b0_1111_000, 256}, // the all-ones exponent holds numbers
		{E4M3, 0b0_0000_001, pow2(-9)},
		{E4M3, 0b0_0001_000, pow2(-6)},
		{E5M2, 0b0_11111_00, math.Inf(1)},
		{E5M2, 0b1_11111_00, math.Inf(-1)},
		{E5M2, 0b0_11111_01, math.NaN()},
		{E5M2, 0b0_11111_10, math.NaN()},
		{E5M2, 0b0_11111_11, math.NaN()},
		{E5M2, 0b0_11110_11, 57344},
		{E5M2, 0b0_00000_01, pow2(-16)},
		{Binary16, 0x7c00, math.Inf(1)},
		{Binary16, 0x7bff, 65504},
		{Binary16, 0x0001, pow2(-24)},
		{Binary16, 0x8000, math.Copysign(0, -1)},
		{Binary16, 0x3c00, 1},
		{BFloat16, 0x7f80, math.Inf(1)},
		{BFloat16, 0x7f7f, 3.3895313892515355e38},
		{BFloat16, 0x3f80, 1},
		{Float32, 0x7f7fffff, math.MaxFloat32},
	}
	for _, tc := range tests {
		got, err := tc.f.Decode(tc.bits)
		ensure.NoError(t, err)
		expect.Truef(t, same(tc.want, got), "%v.Decode(%#x) = %v, want %v", tc.f, tc.bits, got, tc.want)
	}
}

func TestDecodeOutOfRange(t *testing.T) {
	for _, f := range Formats()[1:] {
		_, err := f.Decode(1 << f.Width())
		expect.ErrorIs(t, err, ErrBits, f.String())
	}
	_, err := BFloat16.Decode(0x1ffff)
	expect.EqualError(t, err, "compare: bit pattern out of range: Format.Decode: b = 0x1ffff; want at most the 16 bits of bfloat16")
	_, err = Format(99).Decode(0)
	expect.ErrorIs(t, err, ErrFormat)
	expect.EqualError(t, err, "compare: invalid number format: Format.Decode: Format = 99; want one of float64, float32, binary16, bfloat16, e4m3, e5m2")
}

// narrowFormats are the formats small enough to test exhaustively.
var narrowFormats = []Format{Binary16, BFloat16, E4M3, E5M2}

// TestExhaustiveRoundTrip decodes every bit pattern of the 8- and 16-bit
// formats and checks that the value encodes back to the same pattern (NaNs
// to the canonical NaN), that it is a fixed point of both roundings, and
// that the NaN patterns are exactly those the specifications name.
func TestExhaustiveRoundTrip(t *testing.T) {
	// NaN patterns per format: IEEE layout 2·(2^frac − 1); E4M3 2 (OFP8).
	wantNaNs := map[Format]int{Binary16: 2 * 1023, BFloat16: 2 * 127, E4M3: 2, E5M2: 6}
	for _, f := range narrowFormats {
		nans := 0
		for b := uint64(0); b < 1<<f.Width(); b++ {
			v, err := f.Decode(b)
			ensure.NoError(t, err)
			if math.IsNaN(v) {
				nans++
				ensure.Equal(t, formats[f].nanBits, f.Encode(v))
				continue
			}
			ensure.Equalf(t, b, f.Encode(v), "%v: pattern %#x decodes to %v", f, b, v)
			ensure.Truef(t, same(v, f.Round(v)), "%v: Round(%v)", f, v)
			ensure.Truef(t, f.Contains(v), "%v: Contains(%v)", f, v)
			if !math.IsInf(v, 0) {
				ensure.Truef(t, same(v, f.RoundSaturating(v)), "%v: RoundSaturating(%v)", f, v)
			}
		}
		expect.Equal(t, wantNaNs[f], nans, f.String())
	}
}

// positives returns the non-negative values of f in pattern order, +Inf
// included where the format has it.
func positives(t *testing.T, f Format) []float64 {
	var out []float64
	for b := uint64(0); b < 1<<(f.Width()-1); b++ {
		v, err := f.Decode(b)
		ensure.NoError(t, err)
		if !math.IsNaN(v) {
			out = append(out, v)
		}
	}
	return out
}

// TestExhaustiveOrderAndTies walks the positive values of each narrow
// format in pattern order and checks: the values increase strictly; the
// ULP distance of neighbours is 1 (and counts across zero); ULP is the gap
// to the next value; the midpoint of two neighbours rounds to the one with
// the even pattern (ties to even) and the float64 values either side of the
// midpoint round to the nearer neighbour, for both signs.
func TestExhaustiveOrderAndTies(t *testing.T) {
	for _, f := range narrowFormats {
		vals := positives(t, f)
		for i := 0; i+1 < len(vals); i++ {
			a, b := vals[i], vals[i+1]
			ensure.Lessf(t, a, b, "%v: patterns %d and %d", f, i, i+1)
			d, ok := f.ULPDistance(a, b)
			ensure.True(t, ok)
			ensure.EqualValues(t, 1, d)
			if math.IsInf(b, 0) {
				continue // the midpoint with Inf is the overflow rule, tested apart
			}
			ensure.Equalf(t, b-a, f.ULP(a), "%v: ULP(%v)", f, a)
			m := a + (b-a)/2 // exact: the formats have at most 11 bits
			even := a
			if i%2 == 1 { // pattern i is odd, so i+1 is even
				even = b
			}
			for _, s := range []float64{1, -1} {
				ensure.Equalf(t, s*even, f.Round(s*m), "%v: tie %v", f, s*m)
				ensure.Equalf(t, s*a, f.Round(s*math.Nextafter(m, 0)), "%v: below tie %v", f, s*m)
				ensure.Equalf(t, s*b, f.Round(s*math.Nextafter(m, math.Inf(1))), "%v: above tie %v", f, s*m)
			}
		}
		// Across zero: -MinSubnormal, ±0, +MinSubnormal.
		d, ok := f.ULPDistance(-f.MinSubnormal(), f.MinSubnormal())
		ensure.True(t, ok)
		expect.EqualValues(t, 2, d)
	}
}

func TestOverflow(t *testing.T) {
	inf, nan := math.Inf(1), math.NaN()
	// The tie above Max is Max + ULP(Max)/2. In the IEEE-layout formats the
	// fraction of Max is all ones (odd), so the tie goes up and overflows
	// (IEEE 754-2019 §7.4); in E4M3 Max = S.1111.110 is even, so 464 rounds
	// to 448 and only values above 464 overflow (OFP8 §5, as Round's
	// documentation states).
	tests := []struct {
		f             Format
		x             float64
		round, satur8 float64
	}{
		{Binary16, 65519.99, 65504, 65504},
		{Binary16, 65520, inf, 65504},
		{Binary16, -65520, -inf, -65504},
		{Binary16, 1e6, inf, 65504},
		{Binary16, inf, inf, 65504},
		{Binary16, -inf, -inf, -65504},
		{E5M2, 61439, 57344, 57344},
		{E5M2, 61440, inf, 57344},
		{E5M2, inf, inf, 57344},
		{E4M3, 464, 448, 448},
		{E4M3, math.Nextafter(464, 0), 448, 448},
		{E4M3, math.Nextafter(464, 1000), nan, 448},
		{E4M3, -500, nan, -448},
		{E4M3, inf, nan, 448},
		{E4M3, -inf, nan, -448},
		{E4M3, nan, nan, nan},
		{BFloat16, math.MaxFloat32, inf, BFloat16.Max()},
		{Float32, math.MaxFloat64, inf, math.MaxFloat32},
		{Float64, inf, inf, math.MaxFloat64},
	}
	for _, tc := range tests {
		expect.Truef(t, same(tc.round, tc.f.Round(tc.x)), "%v.Round(%v) = %v, want %v", tc.f, tc.x, tc.f.Round(tc.x), tc.round)
		expect.Truef(t, same(tc.satur8, tc.f.RoundSaturating(tc.x)), "%v.RoundSaturating(%v) = %v, want %v", tc.f, tc.x, tc.f.RoundSaturating(tc.x), tc.satur8)
	}
	expect.EqualValues(t, 0b0_1111_110, E4M3.EncodeSaturating(1e9))
	expect.EqualValues(t, 0b0_1111_111, E4M3.Encode(1e9))
	expect.EqualValues(t, 0x7c00, Binary16.Encode(1e9))
	expect.EqualValues(t, 0x7bff, Binary16.EncodeSaturating(1e9))
}

func TestUnderflow(t *testing.T) {
	for _, f := range Formats()[1:] {
		h := f.MinSubnormal() / 2
		// Half the smallest subnormal is a tie between 0 (even) and it.
		expect.True(t, same(0, f.Round(h)), f.String())
		expect.True(t, same(math.Copysign(0, -1), f.Round(-h)), f.String())
		expect.Equal(t, f.MinSubnormal(), f.Round(math.Nextafter(h, 1)), f.String())
		expect.Equal(t, 0.0, f.Round(math.SmallestNonzeroFloat64), f.String())
		// 1.5 × MinSubnormal is a tie between patterns 1 (odd) and 2 (even).
		expect.Equal(t, 2*f.MinSubnormal(), f.Round(1.5*f.MinSubnormal()), f.String())
	}
}

// TestNoDoubleRounding shows a value for each narrow format where rounding
// through float32 first gives a different, wrong, result: x lies just
// above the midpoint of two neighbours of the format, so it rounds up, but
// float32 rounds it onto the midpoint, and the tie then goes to even, down.
func TestNoDoubleRounding(t *testing.T) {
	for _, f := range narrowFormats {
		one := 1.0
		mid := one + f.ULP(one)/2
		x := mid + pow2(-40) // far below float32's resolution at 1
		ensure.Equal(t, mid, float64(float32(x)), "float32 lands on the midpoint")
		expect.Equal(t, one+f.ULP(one), f.Round(x), "%v: one step rounds up", f)
		expect.Equal(t, one, f.Round(float64(float32(x))), "%v: through float32 the tie goes to even", f)
	}
}

// TestFloat32MatchesGo checks Round, Encode, Contains and ULPDistance of
// Float32 against Go's own float32 conversion, which rounds to nearest,
// ties to even, in one step (The Go Programming Language Specification,
// "Conversions between numeric types": IEEE 754 round-to-even). Inputs are
// random float64 bit patterns, and values built from float32 values plus a
// low part that is exactly half an ULP, just above or below, or random.
func TestFloat32MatchesGo(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	n := 400000
	if testing.Short() {
		n = 40000
	}
	check := func(x float64) {
		want := float64(float32(x))
		got := Float32.Round(x)
		if !same(want, got) {
			t.Fatalf("Float32.Round(%x) = %x, Go float32 gives %x", x, got, want)
		}
		if !math.IsNaN(x) && Float32.Encode(x) != uint64(math.Float32bits(float32(x))) {
			t.Fatalf("Float32.Encode(%x) = %#x, Go gives %#x", x, Float32.Encode(x), math.Float32bits(float32(x)))
		}
	}
	lows := []uint64{1 << 28, 1<<28 - 1, 1<<28 + 1, 0, 1<<29 - 1}
	for i := range n {
		check(math.Float64frombits(r.Uint64()))
		// A float32 value widened: its float64 pattern has 29 low zero bits.
		// Keep the exponent near float32's range, subnormals included.
		e := r.IntN(300) - 160
		base := math.Ldexp(1+float64(r.Uint32()>>9)/(1<<23), e)
		b := math.Float64bits(base)
		var low uint64
		if i%2 == 0 {
			low = lows[r.IntN(len(lows))]
		} else {
			low = r.Uint64() & (1<<29 - 1)
		}
		check(math.Float64frombits(b | low))
		check(-math.Float64frombits(b | low))
	}
	for _, x := range []float64{0, math.Copysign(0, -1), math.Inf(1), math.Inf(-1), math.NaN(), math.MaxFloat32, math.SmallestNonzeroFloat32, math.SmallestNonzeroFloat32 / 2} {
		check(x)
	}
}

// roundLdexp and encodeLdexp are round and encode as first written, with
// math.Frexp and math.Ldexp where format.go now reads and builds float64
// bit patterns, and without its Float32 shortcuts (Go's conversion): the
// reference of TestRoundMatchesLdexpForm. They share round's overflow rule
// (params.overflow), which the exhaustive format tests check on their own.
func roundLdexp(f Format, x float64, sat bool) float64 {
	p := f.p()
	if math.IsNaN(x) {
		return math.NaN()
	}
	if math.IsInf(x, 0) {
		return p.overflow(x, sat)
	}
	if x == 0 || f == Float64 {
		return x
	}
	a := math.Abs(x)
	_, e2 := math.Frexp(a)
	q := max(e2-1, p.emin) - p.fracBits
	v := math.Ldexp(math.RoundToEven(math.Ldexp(a, -q)), q)
	if v > p.max {
		return p.overflow(x, sat)
	}
	return math.Copysign(v, x)
}

func encodeLdexp(f Format, v float64) uint64 {
	p := f.p()
	if math.IsNaN(v) {
		return p.nanBits
	}
	if f == Float64 {
		return math.Float64bits(v)
	}
	var sign uint64
	if math.Signbit(v) {
		sign = 1 << (p.width - 1)
	}
	a := math.Abs(v)
	switch {
	case a == 0:
		return sign
	case math.IsInf(a, 0):
		return sign | uint64(1<<p.expBits-1)<<p.fracBits
	case a < p.minNormal:
		return sign | uint64(a/p.minSub)
	}
	m, e2 := math.Frexp(a)
	return sign | uint64(e2-1+p.bias)<<p.fracBits | uint64(math.Ldexp(2*m-1, p.fracBits))
}

// TestRoundMatchesLdexpForm: Round, RoundSaturating and Encode give the
// bits of the math.Frexp and math.Ldexp form in every format, on random
// float64 bit patterns (subnormals, huge values and the special values
// among them) and on the neighbours of every format's ties near 1, near
// Max and in the subnormal range.
func TestRoundMatchesLdexpForm(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	var xs []float64
	for range 100000 {
		xs = append(xs, math.Float64frombits(r.Uint64()))
	}
	for _, f := range Formats() {
		for _, at := range []float64{1, f.Max(), f.MinSubnormal(), f.MinNormal(), 3 * f.MinSubnormal()} {
			u := f.ULP(at)
			for _, x := range []float64{at - u/2, at + u/2, at - u, at + u, at} {
				for _, y := range []float64{x, math.Nextafter(x, 0), math.Nextafter(x, math.Inf(1))} {
					xs = append(xs, y, -y)
				}
			}
		}
	}
	xs = append(xs, 0, math.Copysign(0, -1), math.Inf(1), math.Inf(-1), math.NaN(), math.SmallestNonzeroFloat64, math.MaxFloat64)
	for _, f := range Formats() {
		for _, x := range xs {
			for _, sat := range []bool{false, true} {
				want, got := roundLdexp(f, x, sat), f.round(x, sat)
				if !same(want, got) {
					t.Fatalf("%v.round(%x, %v) = %x; the Ldexp form gives %x", f, x, sat, got, want)
				}
				if w, g := encodeLdexp(f, want), f.encode(got); w != g {
					t.Fatalf("%v.encode(%x) = %#x; the Ldexp form gives %#x", f, got, g, w)
				}
			}
		}
	}
}

// roundConfig is the "config" object of the cases in
// testdata/golden/compare/round.json, written by testdata/gen/fam_compare.py:
// the format by its word.
type roundConfig struct {
	Format Format `json:"format"`
}

// TestRoundGolden checks Round, RoundSaturating, Encode, EncodeSaturating
// and ULP against conversions computed exactly with rational arithmetic by
// testdata/gen/fam_compare.py, one case per format; every format has one.
// tensor returns the tensor name of the case c, read by get (c.Float,
// c.Ints); the test stops if it is missing or malformed.
func tensor[V any](t *testing.T, c *golden.Case, name string, get func(string) (V, []int, error)) V {
	t.Helper()
	v, _, err := get(name)
	ensure.NoError(t, err, "%s: tensor %s", c, name)
	return v
}

func TestRoundGolden(t *testing.T) {
	file := golden.MustLoadFamily(t, "compare", "round")
	ensure.Len(t, file.Cases, len(Formats()), "one case per format")
	var words golden.Words
	for _, c := range file.Cases {
		var cfg roundConfig
		ensure.NoError(t, c.DecodeConfig(&cfg), c.String())
		words.Note(cfg)
		t.Run(c.Name, func(t *testing.T) {
			f := cfg.Format
			expect.Equal(t, "round_"+f.String(), c.Name)
			x, rounded, sat, ulp := tensor(t, c, "x", c.Float), tensor(t, c, "rounded", c.Float), tensor(t, c, "saturated", c.Float), tensor(t, c, "ulp", c.Float)
			bits, bitsSat := tensor(t, c, "bits", c.Ints), tensor(t, c, "bits_saturated", c.Ints)
			for i, v := range x {
				expect.Truef(t, same(rounded[i], f.Round(v)), "Round(%x) = %x, want %x", v, f.Round(v), rounded[i])
				expect.Truef(t, same(sat[i], f.RoundSaturating(v)), "RoundSaturating(%x) = %x, want %x", v, f.RoundSaturating(v), sat[i])
				expect.Truef(t, same(ulp[i], f.ULP(v)), "ULP(%x) = %x, want %x", v, f.ULP(v), ulp[i])
				// The file holds the patterns as int64: those of negative
				// float64 values as the signed integer with the same bits.
				expect.Equalf(t, uint64(bits[i]), f.Encode(v), "Encode(%x)", v)
				expect.Equalf(t, uint64(bitsSat[i]), f.EncodeSaturating(v), "EncodeSaturating(%x)", v)
			}
		})
	}
	words.Require(t, "compare.Format")
}

func TestULP(t *testing.T) {
	tests := []struct {
		f    Format
		x    float64
		want float64
	}{
		// ULP(1) = 2^(1−p), the machine epsilon (Goldberg 1991 §1.2).
		{Float64, 1, pow2(-52)},
		{Float32, 1, pow2(-23)},
		{Binary16, 1, pow2(-10)},
		{BFloat16, 1, pow2(-7)},
		{E4M3, 1, pow2(-3)},
		{E5M2, 1, pow2(-2)},
		{Binary16, -1.999, pow2(-10)},
		{Binary16, 2, pow2(-9)},
		{Binary16, 0, pow2(-24)},
		{Binary16, pow2(-20), pow2(-24)}, // subnormal range: MinSubnormal
		{Binary16, 65504, 32},
		{Binary16, 1e9, 32}, // beyond Max: the top binade's spacing
		{E4M3, 448, 32},
		{E4M3, 256, 32},
		{Binary16, math.Inf(-1), math.Inf(1)},
		{Float64, math.SmallestNonzeroFloat64, math.SmallestNonzeroFloat64},
	}
	for _, tc := range tests {
		expect.Equalf(t, tc.want, tc.f.ULP(tc.x), "%v.ULP(%v)", tc.f, tc.x)
	}
	expect.True(t, math.IsNaN(Binary16.ULP(math.NaN())))
}

func TestULPDistance(t *testing.T) {
	tests := []struct {
		f    Format
		a, b float64
		want uint64
		ok   bool
	}{
		{Binary16, 1, 1, 0, true},
		{Binary16, 0, math.Copysign(0, -1), 0, true},
		{Binary16, 1, 1 + pow2(-10), 1, true},
		{Binary16, 1 + pow2(-10), 1, 1, true},
		{Binary16, 1, 2, 1024, true}, // one binade of 2^10 values
		{Binary16, -1, 1, 2 * 15360, true},
		{Binary16, 65504, math.Inf(1), 1, true},
		{Binary16, 1, 1.0001, 0, true},  // 1.0001 rounds to 1
		{E4M3, 448, 464, 0, true},       // 464 rounds to 448
		{E4M3, 448, 1000, 0, false},     // 1000 overflows to NaN
		{E5M2, math.NaN(), 1, 0, false}, // NaN: undefined
		{Float32, 1, 1 + pow2(-23), 1, true},
		{Float64, -math.MaxFloat64, math.MaxFloat64, 2 * (0x7fefffffffffffff), true},
		{Format(42), 1, 1, 0, false},
	}
	for _, tc := range tests {
		d, ok := tc.f.ULPDistance(tc.a, tc.b)
		expect.Equalf(t, tc.ok, ok, "%v.ULPDistance(%v, %v)", tc.f, tc.a, tc.b)
		expect.Equalf(t, tc.want, d, "%v.ULPDistance(%v, %v)", tc.f, tc.a, tc.b)
	}
}

func TestFormatByName(t *testing.T) {
	for _, f := range Formats() {
		g, err := FormatByName(f.String())
		ensure.NoError(t, err)
		expect.Equal(t, f, g)
		b, err := f.MarshalText()
		ensure.NoError(t, err)
		var h Format
		ensure.NoError(t, h.UnmarshalText(b))
		expect.Equal(t, f, h)
	}
	expect.Equal(t, []Format{Float64, Float32, Binary16, BFloat16, E4M3, E5M2}, Formats(), "widest first, the zero value first")
	var words []string
	for _, f := range Formats() {
		words = append(words, f.String())
		expect.NotEmpty(t, f.Meaning())
		expect.NoError(t, f.Check())
	}
	expect.Equal(t, []string{"float64", "float32", "binary16", "bfloat16", "e4m3", "e5m2"}, words)
	var zero Format
	expect.Equal(t, Float64, zero, "the zero value is Float64")
	// every other name FormatByName documents
	for name, want := range map[string]Format{
		"FLOAT16": Binary16, " bf16 ": BFloat16, "half": Binary16, "fp8e4m3": E4M3, "double": Float64,
		"fp64": Float64, "single": Float32, "fp32": Float32, "float16": Binary16, "fp16": Binary16,
		"bf16": BFloat16, "fp8-e4m3": E4M3, "fp8e5m2": E5M2, "fp8-e5m2": E5M2,
	} {
		g, err := FormatByName(name)
		ensure.NoError(t, err)
		expect.Equal(t, want, g, name)
		b, err := g.MarshalText()
		ensure.NoError(t, err)
		expect.Equal(t, g.String(), string(b), "an alias is read, the word is written")
	}
	_, err := FormatByName("float8")
	expect.ErrorIs(t, err, ErrFormat)
	expect.Equal(t, `compare: invalid number format: FormatByName: name = "float8"; want one of float64, float32, binary16, bfloat16, e4m3, e5m2`, err.Error())
	expect.ErrorIs(t, Format(6).Check(), ErrFormat)
	var h Format
	expect.ErrorIs(t, h.UnmarshalText([]byte("int8")), ErrFormat)
	_, err = Format(-1).MarshalText()
	expect.ErrorIs(t, err, ErrFormat)
}

func TestInvalidFormat(t *testing.T) {
	f := Format(17)
	expect.False(t, f.Valid())
	expect.Equal(t, "Format(17)", f.String())
	expect.True(t, math.IsNaN(f.Round(1)))
	expect.True(t, math.IsNaN(f.RoundSaturating(1)))
	expect.True(t, math.IsNaN(f.Max()))
	expect.True(t, math.IsNaN(f.MinNormal()))
	expect.True(t, math.IsNaN(f.MinSubnormal()))
	expect.True(t, math.IsNaN(f.UnitRoundoff()))
	expect.True(t, math.IsNaN(f.ULP(1)))
	expect.Zero(t, f.Encode(1))
	expect.Zero(t, f.Width())
	expect.Zero(t, f.Precision())
	expect.False(t, f.HasInf())
	expect.False(t, f.Contains(1))
	_, err := Diff([]float64{1}, []float64{1}, nil, Options{Format: f})
	expect.True(t, errors.Is(err, ErrFormat))
}

// FuzzRound checks, on any float64, properties every rounding must have:
// the result is a value of the format (a fixed point, encoding and decoding
// back to itself); rounding is odd-symmetric; it is within half an ULP when
// no overflow happens; saturation agrees with Round below Max; and Float32
// agrees with Go.
func FuzzRound(f *testing.F) {
	for _, x := range []float64{0, 1, 1 + pow2(-11) + pow2(-40), 65520, 464, 1e-8, math.Inf(1)} {
		f.Add(math.Float64bits(x))
	}
	f.Fuzz(func(t *testing.T, b uint64) {
		x := math.Float64frombits(b)
		for _, fm := range Formats() {
			v := fm.Round(x)
			if math.IsNaN(v) {
				if !math.IsNaN(x) && fm.HasInf() {
					t.Fatalf("%v.Round(%v) = NaN", fm, x)
				}
				continue
			}
			if !same(v, fm.Round(v)) {
				t.Fatalf("%v.Round not idempotent at %v", fm, x)
			}
			if !same(-v, fm.Round(-x)) {
				t.Fatalf("%v.Round(−%v) = %v, want %v", fm, x, fm.Round(-x), -v)
			}
			dec, err := fm.Decode(fm.Encode(x))
			if err != nil || !same(v, dec) {
				t.Fatalf("%v: Decode(Encode(%v)) = %v, %v; want %v", fm, x, dec, err, v)
			}
			if !math.IsInf(v, 0) && math.Abs(v-x) > fm.ULP(x)/2 {
				t.Fatalf("%v.Round(%v) = %v is more than half an ULP away", fm, x, v)
			}
			if s := fm.RoundSaturating(x); math.Abs(v) <= fm.Max() && !same(s, v) {
				t.Fatalf("%v: RoundSaturating(%v) = %v, Round = %v", fm, x, s, v)
			}
		}
		if !same(float64(float32(x)), Float32.Round(x)) {
			t.Fatalf("Float32.Round(%v) = %v, Go float32 gives %v", x, Float32.Round(x), float32(x))
		}
	})
}

func TestRoundSliceWidenNarrow(t *testing.T) {
	x := []float64{1.0 / 3, -65520, math.NaN(), 0}
	got := Binary16.RoundSlice(x)
	want := []float64{Binary16.Round(1.0 / 3), math.Inf(-1), math.NaN(), 0}
	for i := range want {
		expect.True(t, same(want[i], got[i]), "element %d", i)
	}
	expect.Equal(t, 1.0/3, x[0], "the input is not modified")
	// float32(0.1) widened exactly is 0.100000001490116119384765625.
	expect.Equal(t, []float64{0.100000001490116119384765625, -2}, Widen([]float32{0.1, -2}))
	expect.Nil(t, Widen([]float64(nil)))

	// Narrow rounds as Float32.Round does: a tie to even (1 + 2⁻²⁴ to 1),
	// above a tie up, a subnormal, beyond the largest float32 to ±Inf, NaN.
	x = []float64{1 + 0x1p-24, 1 + 0x1p-24 + 0x1p-52, 0x1.8p-149, -0x1.ffffffp127, math.MaxFloat64, 0.1, math.NaN()}
	n := Narrow(x)
	expect.Equal(t, []float32{1, 1 + 0x1p-23, 0x1p-148, float32(math.Inf(-1)), float32(math.Inf(1)), 0.1}, n[:6])
	expect.True(t, math.IsNaN(float64(n[6])))
	for i, v := range Widen(n) {
		expect.True(t, same(Float32.Round(x[i]), v), "element %d: Narrow gives %v, Float32.Round %v", i, v, Float32.Round(x[i]))
	}
	expect.Nil(t, Narrow(nil))
}
