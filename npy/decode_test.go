package npy

import (
	"math"
	"testing"

	"github.com/stretchr/testify/assert"
)

// Published values of each format: IEEE 754-2019 binary16 (§3.6, Table 3.5
// parameters: max 65504, min normal 2⁻¹⁴, min subnormal 2⁻²⁴); bfloat16
// (upper half of binary32: max 3.3895313892515355e38, min normal 2⁻¹²⁶, min
// subnormal 2⁻¹³³); OCP 8-bit Floating Point Specification (OFP8) 2023,
// E4M3 (max 448 = S.1111.110, min normal 2⁻⁶, min subnormal 2⁻⁹, NaN
// S.1111.111) and E5M2 (max 57344 = S.11110.11, min normal 2⁻¹⁴, min
// subnormal 2⁻¹⁶, ±Inf S.11111.00).
func TestDecodeSpecificationValues(t *testing.T) {
	type row struct {
		bits uint16
		want float64
	}
	cases := []struct {
		name   string
		decode func(uint16) float64
		rows   []row
	}{
		{"binary16", DecodeFloat16, []row{
			{0x7bff, 65504}, {0x0400, 0x1p-14}, {0x0001, 0x1p-24}, {0x3c00, 1}, {0x3555, 0x1.554p-2},
			{0x7c00, math.Inf(1)}, {0xfc00, math.Inf(-1)}, {0x8000, math.Copysign(0, -1)}, {0x83ff, -0x1.ff8p-15},
		}},
		{"bfloat16", DecodeBFloat16, []row{
			{0x7f7f, 3.3895313892515355e38}, {0x0080, 0x1p-126}, {0x0001, 0x1p-133}, {0x3f80, 1}, {0xc049, -0x1.92p1},
			{0x7f80, math.Inf(1)}, {0x8000, math.Copysign(0, -1)},
		}},
		{"E4M3", func(b uint16) float64 { return DecodeE4M3(uint8(b)) }, []row{
			{0x7e, 448}, {0xfe, -448}, {0x08, 0x1p-6}, {0x01, 0x1p-9}, {0x07, 0x1.cp-7}, {0x38, 1}, {0x78, 256}, {0x80, math.Copysign(0, -1)},
		}},
		{"E5M2", func(b uint16) float64 { return DecodeE5M2(uint8(b)) }, []row{
			{0x7b, 57344}, {0x04, 0x1p-14}, {0x01, 0x1p-16}, {0x03, 0x1.8p-15}, {0x3c, 1},
			{0x7c, math.Inf(1)}, {0xfc, math.Inf(-1)}, {0x80, math.Copysign(0, -1)},
		}},
	}
	for _, c := range cases {
		for _, r := range c.rows {
			got := c.decode(r.bits)
			assert.Equal(t, math.Float64bits(r.want), math.Float64bits(got), "%s %#04x: got %v want %v", c.name, r.bits, got, r.want)
		}
	}
}

// Every NaN pattern and only those decode to NaN: binary16 and E5M2 have
// all-ones exponent with a non-zero fraction (2·(2^f − 1) patterns);
// bfloat16 likewise; E4M3 only S.1111.111 (OFP8 2023).
func TestDecodeNaNPatterns(t *testing.T) {
	count := func(n int, f func(int) float64) int {
		k := 0
		for b := 0; b < n; b++ {
			if math.IsNaN(f(b)) {
				k++
			}
		}
		return k
	}
	assert.Equal(t, 2*(1<<10-1), count(1<<16, func(b int) float64 { return DecodeFloat16(uint16(b)) }))
	assert.Equal(t, 2*(1<<7-1), count(1<<16, func(b int) float64 { return DecodeBFloat16(uint16(b)) }))
	assert.Equal(t, 2, count(1<<8, func(b int) float64 { return DecodeE4M3(uint8(b)) }))
	assert.Equal(t, 2*(1<<2-1), count(1<<8, func(b int) float64 { return DecodeE5M2(uint8(b)) }))
}

// Exhaustive: each decoder against a second spelling of the same
// definition. A positive pattern with exponent field e and fraction field m
// of f bits is 2^(1−bias)·m/2^f when e = 0 and 2^(e−bias)·(1 + m/2^f)
// otherwise, computed here with math.Pow; the sign bit negates. E5M2 is
// also the upper byte of binary16 (same exponent width and bias), and
// bfloat16 the upper half of binary32.
func TestDecodeExhaustive(t *testing.T) {
	spec := func(bits uint32, ebits, fbits int, special func(e, m uint32) (float64, bool)) float64 {
		bias := 1<<(ebits-1) - 1
		e := bits >> fbits & (1<<ebits - 1)
		m := bits & (1<<fbits - 1)
		var v float64
		if s, ok := special(e, m); ok {
			v = s
		} else if e == 0 {
			v = math.Pow(2, float64(1-bias)) * float64(m) / math.Pow(2, float64(fbits))
		} else {
			v = math.Pow(2, float64(int(e)-bias)) * (1 + float64(m)/math.Pow(2, float64(fbits)))
		}
		if bits>>(ebits+fbits)&1 == 1 {
			v = -v
		}
		return v
	}
	ieee := func(ebits int) func(e, m uint32) (float64, bool) {
		return func(e, m uint32) (float64, bool) {
			switch {
			case e == 1<<ebits-1 && m != 0:
				return math.NaN(), true
			case e == 1<<ebits-1:
				return math.Inf(1), true
			}
			return 0, false
		}
	}
	// same fails unless got is want bit for bit (for NaN: NaN of the same
	// sign). Plain comparisons: it runs 200 000 times.
	same := func(t *testing.T, name string, bits int, want, got float64) {
		t.Helper()
		ok := math.Float64bits(want) == math.Float64bits(got)
		if math.IsNaN(want) {
			ok = math.IsNaN(got) && math.Signbit(want) == math.Signbit(got)
		}
		if !ok {
			t.Fatalf("%s %#x: got %v (%#x), want %v (%#x)", name, bits, got, math.Float64bits(got), want, math.Float64bits(want))
		}
	}
	for b := 0; b < 1<<16; b++ {
		u := uint32(b)
		same(t, "binary16", b, spec(u, 5, 10, ieee(5)), DecodeFloat16(uint16(b)))
		same(t, "bfloat16", b, spec(u, 8, 7, ieee(8)), DecodeBFloat16(uint16(b)))
		same(t, "bfloat16 as binary32", b, float64(math.Float32frombits(u<<16)), DecodeBFloat16(uint16(b)))
	}
	e4m3 := func(e, m uint32) (float64, bool) {
		if e == 15 && m == 7 {
			return math.NaN(), true
		}
		return 0, false
	}
	for b := 0; b < 1<<8; b++ {
		u := uint32(b)
		same(t, "E4M3", b, spec(u, 4, 3, e4m3), DecodeE4M3(uint8(b)))
		same(t, "E5M2", b, spec(u, 5, 2, ieee(5)), DecodeE5M2(uint8(b)))
		same(t, "E5M2 as binary16", b, DecodeFloat16(uint16(b)<<8), DecodeE5M2(uint8(b)))
	}
}
