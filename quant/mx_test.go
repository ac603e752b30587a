package quant

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// block returns a block of e with the given scale pattern and element
// patterns (the rest 0).
func block(e Element, scale uint8, bits ...uint8) MXBlock {
	b := MXBlock{Element: e, Scale: scale}
	copy(b.Bits[:], bits)
	return b
}

func TestMXElementTables(t *testing.T) {
	// OCP MX v1.0 §5.3.3, the FP4 E2M1 table: patterns 0x0–0x7 are
	// 0, 0.5, 1, 1.5, 2, 3, 4, 6, and 0x8–0xF their negatives.
	b := block(ElemE2M1, 127, 0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15)
	v, err := DecodeMX([]MXBlock{b})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{0, 0.5, 1, 1.5, 2, 3, 4, 6}, v[:8])
	expect.Equal(t, []float64{0, -0.5, -1, -1.5, -2, -3, -4, -6}, v[8:16])
	expect.True(t, math.Signbit(v[8]), "0x8 is −0")
	// OCP MX v1.0 §5.3.2, FP6: E2M3 max normal 0x1F = 2^2·1.875 = 7.5,
	// smallest subnormal 0x01 = 2^0·2^−3 = 0.125; E3M2 max normal 0x1F =
	// 2^4·1.75 = 28, smallest subnormal 0x01 = 2^−2·2^−2 = 0.0625;
	// 0x20 is −0 in both.
	for _, c := range []struct {
		e             Element
		max, minSub   float64
		minNormalBits uint8
		minNormal     float64
	}{{ElemE2M3, 7.5, 0.125, 0x08, 1}, {ElemE3M2, 28, 0.0625, 0x04, 0.25}} {
		v, err := DecodeMX([]MXBlock{block(c.e, 127, 0x1F, 0x01, c.minNormalBits, 0x3F, 0x20)})
		ensure.NoError(t, err)
		expect.Equal(t, []float64{c.max, c.minSub, c.minNormal, -c.max, 0}, v[:5], c.e)
		expect.Equal(t, c.max, c.e.Max())
	}
	// MXINT8 (from memory): pattern q means q·2^−6; 0x7F = 127/64 and
	// 0x80 = −2.
	v, err = DecodeMX([]MXBlock{block(ElemInt8, 127, 0x40, 0x7F, 0x80, 0xFF)})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{1, 1.984375, -2, -1.0 / 64}, v[:4])
	// E8M0: 0xFF is NaN; 0 is 2^−127; 128 is 2.
	v, err = DecodeMX([]MXBlock{block(ElemE2M1, 0xFF, 2), block(ElemE2M1, 0, 2), block(ElemE2M1, 128, 2)})
	ensure.NoError(t, err)
	expect.True(t, math.IsNaN(v[0]))
	expect.Equal(t, math.Ldexp(1, -127), v[32])
	expect.Equal(t, 2.0, v[64])
}

func TestMXEveryPatternRoundTrips(t *testing.T) {
	for _, e := range Element(0).Values() {
		d := &elems[e]
		for p := range 1 << d.width {
			v, ok := d.decode(uint8(p))
			ensure.True(t, ok)
			if math.IsNaN(v) || math.IsInf(v, 0) {
				continue
			}
			if v == -2 && e == ElemInt8 {
				// MXINT8's −2 is a pattern, but conversion saturates at
				// ±max = ±127/64 (§6.3, from memory), so never produces it.
				expect.Equal(t, -1.984375, d.round(v))
				continue
			}
			expect.Equal(t, v, d.round(v), "%v pattern %#x is a value of the format", e, p)
			if got := d.encode(v); got != uint8(p) && !(v == 0 && e == ElemInt8) {
				t.Errorf("%v: encode(decode(%#x) = %v) = %#x", e, p, v, got)
			}
		}
		_, ok := d.decode(uint8(1) << d.width)
		expect.Equal(t, d.width == 8, ok, "%v: a pattern wider than the format", e)
	}
}

// full returns a block's 32 inputs: the given ones, then zeros.
func full(x ...float64) []float64 { return append(x, make([]float64, MXBlockSize-len(x))...) }

func TestEncodeMXWorkedValues(t *testing.T) {
	// Hand derivations by the rule of OCP MX v1.0 §6.3 (E = ⌊log₂ amax⌋ −
	// emax) and the E2M1 table (emax 2):
	//   amax 6: E = 2 − 2 = 0, X = 1. 2.5 lies between 2 (fraction 0) and 3
	//   (fraction 1): to even, 2. 5 between 4 and 6: 4. 0.25 between 0 and
	//   0.5 (pattern 1): 0. 0.75 between 0.5 (pattern 1) and 1 (pattern 2):
	//   1. 7 saturates to 6… but 7 would raise amax; 5.9 rounds to 6.
	b, err := EncodeMX(full(6, 2.5, 5, 0.25, 0.75, -5.9), ElemE2M1)
	ensure.NoError(t, err)
	expect.Equal(t, uint8(127), b[0].Scale)
	v, _ := DecodeMX(b)
	expect.Equal(t, []float64{6, 2, 4, 0, 1, -6}, v[:6])
	//   amax 7: E = 0, 7 saturates to 6 (max normal).
	//   amax 0.7: ⌊log₂ 0.7⌋ = −1, E = −3, X = 1/8; 0.7·8 = 5.6 → 6 → 0.75.
	b, err = EncodeMX(append(full(7), full(0.7)...), ElemE2M1)
	ensure.NoError(t, err)
	expect.Equal(t, []uint8{127, 124}, []uint8{b[0].Scale, b[1].Scale})
	v, _ = DecodeMX(b)
	expect.Equal(t, []float64{6, 0.75}, []float64{v[0], v[32]})
	// E4M3 (emax 8): amax 1 gives E = −8, 1·2^8 = 256, an E4M3 value.
	b, err = EncodeMX(full(1, 0.001), ElemE4M3)
	ensure.NoError(t, err)
	expect.Equal(t, uint8(127-8), b[0].Scale)
	// 0.001·256 = 0.256 in E4M3: binade [2^−2, 2^−1), spacing 2^−5;
	// 0.256·32 = 8.192 → 8 → 0.25 → 0.25/256 = 2^−10.
	v, _ = DecodeMX(b)
	expect.Equal(t, []float64{1, math.Ldexp(1, -10)}, v[:2])
	// MXINT8 (emax 0, from memory): amax 1.99: E = 0; 1.99·64 = 127.36 →
	// 127 → 1.984375; 0.5 → 32/64.
	b, err = EncodeMX(full(1.99, -0.5), ElemInt8)
	ensure.NoError(t, err)
	v, _ = DecodeMX(b)
	expect.Equal(t, []float64{1.984375, -0.5}, v[:2])
	// FP6 E2M3 (emax 2): amax 7.5 → E = 0, 7.5 is the max normal.
	// E3M2 (emax 4): amax 28 → E = 0.
	for _, c := range []struct {
		e Element
		m float64
	}{{ElemE2M3, 7.5}, {ElemE3M2, 28}} {
		b, err = EncodeMX(full(c.m, -c.m), c.e)
		ensure.NoError(t, err)
		v, _ = DecodeMX(b)
		expect.Equal(t, []float64{c.m, -c.m}, v[:2], c.e)
		expect.Equal(t, uint8(127), b[0].Scale, c.e)
	}
	// Special cases.
	b, err = EncodeMX(full(), ElemE2M1)
	ensure.NoError(t, err)
	expect.Equal(t, uint8(0), b[0].Scale, "a block of zeros")
	b, err = EncodeMX(full(1, math.Inf(1)), ElemE2M1)
	ensure.NoError(t, err)
	expect.Equal(t, uint8(0xFF), b[0].Scale, "an infinite input gives the NaN scale")
	_, err = EncodeMX(full(math.Ldexp(1, 200)), ElemE2M1)
	expect.ErrorIs(t, err, ErrValue, "2^200: E = 198 > 127")
	_, err = EncodeMX(make([]float64, 31), ElemE2M1)
	expect.ErrorIs(t, err, ErrLength)
	_, err = EncodeMX32(make([]float32, 32), 17)
	expect.ErrorIs(t, err, ErrOption)
	_, err = DecodeMX([]MXBlock{block(ElemE2M1, 127, 0x10)})
	expect.EqualError(t, err, "quant: code out of range: DecodeMX: blocks[0].Bits[0] = 0x10; want at most the 4 bits of e2m1")
}

// mxInputs returns n values of magnitudes spread over 2^±30.
func mxInputs(r *rand.Rand, n int) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = r.NormFloat64() * math.Ldexp(1, (i/MXBlockSize)%60-30)
		if r.IntN(8) == 0 {
			x[i] *= 1000 // an outlier, so that others fall to subnormals or 0
		}
	}
	return x
}

func TestMXRoundTripWithinBound(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	x := mxInputs(r, 64*MXBlockSize)
	x32 := make([]float32, len(x))
	for i := range x {
		x32[i] = float32(x[i])
		x[i] = float64(x32[i])
	}
	for _, e := range Element(0).Values() {
		b, err := EncodeMX(x, e)
		ensure.NoError(t, err)
		b32, err := EncodeMX32(x32, e)
		ensure.NoError(t, err)
		expect.Equal(t, b, b32, "EncodeMX32 is EncodeMX of the widened values")
		v, err := DecodeMX(b)
		ensure.NoError(t, err)
		bound, err := BoundMX(b)
		ensure.NoError(t, err)
		for i := range x {
			d := new(big.Rat).Sub(rat(x[i]), rat(v[i]))
			if d.Abs(d).Cmp(rat(bound[i])) > 0 {
				t.Fatalf("%v: x[%d] = %v decodes to %v, beyond the bound %v", e, i, x[i], v[i], bound[i])
			}
		}
		// The element of largest magnitude is in the top binade of the format
		// or saturated: |P| ≥ 2^emax.
		for j := range b {
			top := 0.0
			for i := range MXBlockSize {
				top = max(top, math.Abs(v[j*MXBlockSize+i]))
			}
			expect.GreaterOrEqual(t, top, math.Ldexp(1, int(b[j].Scale)-127+elems[e].emax), "%v block %d", e, j)
		}
	}
}

func TestDotMXIsTheExactDotRoundedOnce(t *testing.T) {
	// Hand derivation: 32 E2M1 elements of 6 on X = 1, times 32 of 6 on
	// X = 2: 2·32·36 = 2304.
	a := MXBlock{Element: ElemE2M1, Scale: 127}
	b := MXBlock{Element: ElemE2M1, Scale: 128}
	for i := range a.Bits {
		a.Bits[i], b.Bits[i] = 7, 7
	}
	got, err := DotMX([]MXBlock{a}, []MXBlock{b})
	ensure.NoError(t, err)
	expect.Equal(t, 2304.0, got)

	r := rand.New(rand.NewPCG(9, 10))
	for _, ea := range Element(0).Values() {
		for _, eb := range Element(0).Values() {
			xa, err := EncodeMX(mxInputs(r, 8*MXBlockSize), ea)
			ensure.NoError(t, err)
			xb, err := EncodeMX(mxInputs(r, 8*MXBlockSize), eb)
			ensure.NoError(t, err)
			got, err := DotMX(xa, xb)
			ensure.NoError(t, err)
			va, _ := DecodeMX(xa)
			vb, _ := DecodeMX(xb)
			exact := new(big.Rat)
			for i := range va {
				exact.Add(exact, new(big.Rat).Mul(rat(va[i]), rat(vb[i])))
			}
			want, _ := exact.Float64() // nearest, ties to even
			expect.Equal(t, want, got, "%v · %v", ea, eb)
		}
	}
	_, err = DotMX(make([]MXBlock, 1), nil)
	expect.ErrorIs(t, err, ErrLength)
	got, err = DotMX([]MXBlock{{Element: ElemE2M1, Scale: 0xFF}}, []MXBlock{a})
	ensure.NoError(t, err)
	expect.True(t, math.IsNaN(got), "a NaN scale")
}
