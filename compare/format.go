package compare

import (
	"fmt"
	"math"
	"math/bits"
)

// params describes one format.
type params struct {
	width     int  // total bits
	expBits   int  // exponent field bits
	fracBits  int  // trailing significand bits; precision is fracBits+1
	bias      int  // exponent bias
	ieee      bool // all-ones exponent reserved for Inf and NaN
	emin      int  // exponent of the smallest normal number, 1 - bias
	emax      int  // exponent of the largest finite number
	max       float64
	minNormal float64
	minSub    float64
	nanBits   uint64 // the canonical NaN this package encodes
}

func newParams(width, expBits, fracBits int, ieee bool) params {
	p := params{width: width, expBits: expBits, fracBits: fracBits, ieee: ieee}
	p.bias = 1<<(expBits-1) - 1
	p.emin = 1 - p.bias
	allOnes := 1<<expBits - 1
	fracOnes := uint64(1)<<fracBits - 1
	if ieee {
		// Largest finite: exponent field all ones minus one, fraction all ones.
		p.emax = allOnes - 1 - p.bias
		p.max = math.Ldexp(2-math.Ldexp(1, -fracBits), p.emax)
		// Quiet NaN: exponent all ones, top fraction bit set.
		p.nanBits = uint64(allOnes)<<fracBits | uint64(1)<<(fracBits-1)
	} else {
		// E4M3: the all-ones exponent holds numbers; its all-ones fraction is NaN.
		p.emax = allOnes - p.bias
		p.max = math.Ldexp(2-math.Ldexp(2, -fracBits), p.emax)
		p.nanBits = uint64(allOnes)<<fracBits | fracOnes
	}
	p.minNormal = math.Ldexp(1, p.emin)
	p.minSub = math.Ldexp(1, p.emin-fracBits)
	return p
}

var formats = [numFormats]params{
	Float64:  newParams(64, 11, 52, true),
	Float32:  newParams(32, 8, 23, true),
	Binary16: newParams(16, 5, 10, true),
	BFloat16: newParams(16, 8, 7, true),
	E4M3:     newParams(8, 4, 3, false),
	E5M2:     newParams(8, 5, 2, true),
}

// Valid reports whether f is one of the declared formats.
func (f Format) Valid() bool { return f >= 0 && f < numFormats }

func (f Format) p() *params {
	if !f.Valid() {
		return nil
	}
	return &formats[f]
}

// Width is the number of bits of an encoded value (64, 32, 16 or 8); 0 for
// an invalid format.
func (f Format) Width() int {
	if p := f.p(); p != nil {
		return p.width
	}
	return 0
}

// Precision is the number of significand bits, the hidden bit included:
// 53, 24, 11, 8, 4 and 3 for Float64 … E5M2; 0 for an invalid format.
func (f Format) Precision() int {
	if p := f.p(); p != nil {
		return p.fracBits + 1
	}
	return 0
}

// HasInf reports whether the format has infinities (all but E4M3).
func (f Format) HasInf() bool {
	p := f.p()
	return p != nil && p.ieee
}

// value is a parameter of the format, computed by get, or NaN for an
// invalid format.
func (f Format) value(get func(*params) float64) float64 {
	if p := f.p(); p != nil {
		return get(p)
	}
	return math.NaN()
}

// Max is the largest finite value of the format (see the table at Float64).
func (f Format) Max() float64 { return f.value(func(p *params) float64 { return p.max }) }

// MinNormal is the smallest positive normal value, 2^(1−bias).
func (f Format) MinNormal() float64 { return f.value(func(p *params) float64 { return p.minNormal }) }

// MinSubnormal is the smallest positive value, 2^(1−bias−fraction bits).
func (f Format) MinSubnormal() float64 { return f.value(func(p *params) float64 { return p.minSub }) }

// UnitRoundoff is u = 2^−p for precision p: the largest relative error of
// one rounding to nearest in the normal range, |Round(x) − x| ≤ u·|x|
// (Higham 2002, "Accuracy and Stability of Numerical Algorithms", 2nd ed.,
// §2.1, Theorem 2.2). It is half the machine epsilon 2^(1−p).
func (f Format) UnitRoundoff() float64 {
	return f.value(func(p *params) float64 { return math.Ldexp(1, -(p.fracBits + 1)) })
}

// Round returns x rounded to the nearest value of the format, ties to even,
// in one step from the float64 value (never through an intermediate format:
// rounding through float32 first can land on a different value, as for
// x = 1 + 2^−11 + 2^−40 in Binary16, which is 1 + 2^−10 here and 1 through
// float32). This is the default rounding of IEEE 754-2019 §4.3.1
// (roundTiesToEven) and the conversion of OFP8 §5.
//
// Overflow follows each specification's non-saturating rule: a value whose
// rounding, with the exponent range unbounded, exceeds Max becomes ±Inf,
// except in E4M3, which has no infinities and gives NaN (IEEE 754-2019
// §7.4; OFP8 §5). So in Binary16 65519.99… rounds to 65504 and 65520 (the
// tie, whose even neighbour 65536 lies beyond Max) overflows; in E4M3 464
// rounds to 448 and anything above 464 is NaN. See RoundSaturating for the
// clamping mode.
//
// Special cases are:
//
//	Round(±0) = ±0
//	Round(±Inf) = ±Inf (NaN in E4M3)
//	Round(NaN) = NaN
//	Round(x) = ±0 for |x| ≤ MinSubnormal/2 (the tie goes to even, 0)
//	Round(x) = x for any float64 x when f is Float64
//
// Round agrees with Go's float32(x) conversion when f is Float32 (tested
// on 1.2 million values), and with an exact rational computation on every
// tie of the 8- and 16-bit formats (see the package documentation).
func (f Format) Round(x float64) float64 { return f.round(x, false) }

// RoundSaturating is Round with the saturating overflow of OFP8 §5: a
// finite value whose rounding exceeds Max becomes ±Max, and so does ±Inf
// (in every format, so that the result is always finite or NaN). NaN stays
// NaN. The OFP8 specification defines this mode for its 8-bit formats; here
// it is offered for every format, with the same rule.
func (f Format) RoundSaturating(x float64) float64 { return f.round(x, true) }

func (f Format) round(x float64, sat bool) float64 {
	if f == Float32 && !sat && !math.IsNaN(x) {
		// Go's conversion is this rounding (the specification's IEEE 754
		// round-to-even, non-saturating) in one instruction: the bits of
		// the general path below (TestRoundMatchesLdexpForm).
		return float64(float32(x))
	}
	p := f.p()
	if p == nil || math.IsNaN(x) {
		return math.NaN()
	}
	if math.IsInf(x, 0) {
		return p.overflow(x, sat)
	}
	if x == 0 || f == Float64 {
		return x
	}
	a := math.Abs(x)
	q := max(floorLog2(a), p.emin) - p.fracBits
	// a·2^-q is exact (a power-of-two scaling that stays in float64's normal
	// range), and RoundToEven rounds it to an integer exactly: one rounding.
	// r·2^q is exact too, or overflows to +Inf as math.Ldexp would. Both
	// powers lie in float64's normal range: q is at least emin − fracBits
	// (−149 in Float32) and at most 1023 − fracBits.
	r := math.RoundToEven(a * exp2i(-q))
	v := r * exp2i(q)
	if v > p.max {
		return p.overflow(x, sat)
	}
	return math.Copysign(v, x)
}

// overflow is what rounding gives x, beyond the format's largest finite
// magnitude: ±Max when saturating, else ±Inf in a format that has it and
// NaN in one that does not.
func (p *params) overflow(x float64, sat bool) float64 {
	switch {
	case sat:
		return math.Copysign(p.max, x)
	case p.ieee:
		return math.Copysign(math.Inf(1), x)
	}
	return math.NaN()
}

// Contains reports whether x is exactly a value of the format (NaN and, in
// formats that have them, ±Inf included).
func (f Format) Contains(x float64) bool {
	if !f.Valid() {
		return false
	}
	if math.IsNaN(x) {
		return true
	}
	return f.Round(x) == x
}

// Encode returns the bit pattern of Round(x), in the low Width bits: sign,
// exponent field, fraction field, as the specification lays them out. NaN
// is encoded as the format's canonical quiet NaN with the sign bit clear:
// exponent field all ones and the top fraction bit set (0x7ff8000000000000,
// 0x7fc00000, 0x7e00, 0x7fc0, 0x7e for E5M2), and 0x7f, the only NaN
// magnitude, for E4M3. Payloads are not carried. An invalid format gives 0.
func (f Format) Encode(x float64) uint64 { return f.encode(f.Round(x)) }

// EncodeSaturating returns the bit pattern of RoundSaturating(x).
func (f Format) EncodeSaturating(x float64) uint64 { return f.encode(f.RoundSaturating(x)) }

// encode lays out v, a value of the format.
func (f Format) encode(v float64) uint64 {
	p := f.p()
	if p == nil {
		return 0
	}
	if math.IsNaN(v) {
		return p.nanBits
	}
	switch f {
	case Float64:
		return math.Float64bits(v)
	case Float32:
		return uint64(math.Float32bits(float32(v))) // exact: v is a value of the format
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
		return sign | uint64(a/p.minSub) // exact: a is a multiple of minSub
	}
	// a is a normal float64 (every format's normal range lies in float64's):
	// its exponent field gives e, and the top fracBits of its 52 fraction
	// bits are the format's fraction (the others are 0 in a value of the
	// format).
	b := math.Float64bits(a)
	e := int(b>>52) - 1023
	frac := (b & (1<<52 - 1)) >> (52 - p.fracBits)
	return sign | uint64(e+p.bias)<<p.fracBits | frac
}

// floorLog2 returns ⌊log₂ a⌋ for a finite a > 0 (math.Frexp's exponent
// minus 1), float64 subnormals included.
func floorLog2(a float64) int {
	b := math.Float64bits(a)
	if e := int(b >> 52); e != 0 {
		return e - 1023
	}
	return bits.Len64(b) - 1 - 1074 // a = b·2^−1074
}

// exp2i returns 2^k for −1022 ≤ k ≤ 1023, exactly.
func exp2i(k int) float64 { return math.Float64frombits(uint64(k+1023) << 52) }

// Decode returns the value a bit pattern encodes. Every pattern of Width
// bits decodes: in IEEE-layout formats an all-ones exponent field is ±Inf
// (zero fraction) or NaN; in E4M3 only S.1111.111 is NaN. A pattern with a
// bit set above Width gives an error wrapping ErrBits. Decode and Encode
// are inverse on every pattern that is not NaN.
func (f Format) Decode(b uint64) (float64, error) {
	p := f.p()
	if p == nil {
		return math.NaN(), formatWords.CheckAt("Format.Decode: Format", f)
	}
	if p.width < 64 && b>>p.width != 0 {
		return math.NaN(), fmt.Errorf("%w: Format.Decode: b = %#x; want at most the %d bits of %v", ErrBits, b, p.width, f)
	}
	if f == Float64 {
		return math.Float64frombits(b), nil
	}
	neg := b>>(p.width-1)&1 == 1
	expField := int(b >> p.fracBits & (1<<p.expBits - 1))
	frac := b & (1<<p.fracBits - 1)
	allOnes := 1<<p.expBits - 1
	var v float64
	switch {
	case p.ieee && expField == allOnes && frac == 0:
		v = math.Inf(1)
	case p.ieee && expField == allOnes:
		return math.NaN(), nil
	case !p.ieee && expField == allOnes && frac == 1<<p.fracBits-1:
		return math.NaN(), nil
	case expField == 0:
		v = math.Ldexp(float64(frac), p.emin-p.fracBits)
	default:
		v = math.Ldexp(float64(frac|1<<p.fracBits), expField-p.bias-p.fracBits)
	}
	if neg {
		v = -v
	}
	return v, nil
}

// ULP returns the unit in the last place of the format at x: the spacing
// 2^(e−p+1) of the format's values in the binade of x, where p is the
// precision and e = max(⌊log₂|x|⌋, emin) (so every subnormal, and 0, has
// the spacing MinSubnormal). Values beyond Max use the spacing of the top
// binade. This is the definition of Goldberg 1991, "What Every Computer
// Scientist Should Know About Floating-Point Arithmetic", ACM Computing
// Surveys 23(1), §1.2. Other definitions differ only at powers of two,
// where they take the smaller spacing below x (ULP(1) = 2^−p rather than
// 2^(1−p)); Muller 2005, "On the definition of ulp(x)", INRIA research
// report RR-5504, compares them.
//
// Special cases are:
//
//	ULP(±Inf) = +Inf
//	ULP(NaN) = NaN
//	ULP(0) = MinSubnormal
func (f Format) ULP(x float64) float64 {
	p := f.p()
	if p == nil || math.IsNaN(x) {
		return math.NaN()
	}
	if math.IsInf(x, 0) {
		return math.Inf(1)
	}
	e := p.emin
	if x != 0 {
		_, e2 := math.Frexp(x)
		e = min(max(e2-1, p.emin), p.emax)
	}
	return math.Ldexp(1, e-p.fracBits)
}

// ordinal maps a value of the format to its position on the number line:
// consecutive values have consecutive ordinals, ±0 both have 0, and ±Inf
// (where they exist) come one after ±Max. The magnitude bits of every format
// here increase with the magnitude, so the ordinal is the signed magnitude
// field of the encoding.
func (f Format) ordinal(v float64) (mag uint64, neg bool) {
	b := f.encode(v)
	w := f.p().width
	return b &^ (1 << (w - 1)), b>>(w-1) == 1
}

// ULPDistance returns the number of steps between Round(a) and Round(b) on
// the format's grid of values: 0 when they are equal (+0 and −0 included),
// 1 for neighbours, and so on, counting across zero (the distance from
// −MinSubnormal to +MinSubnormal is 2) and from ±Max to ±Inf (1). Both
// arguments are rounded first, with Round, so a float64 reference can be
// measured against a candidate of the format: a distance of 0 then means
// the candidate is the correctly rounded reference.
//
// Near zero the grid is dense: values of opposite sign a little above the
// subnormal range are tens of thousands of steps apart in bfloat16 (the
// count crosses every binade down to zero and back), so a large distance
// there means a sign flip of a tiny value, not a large error.
//
// The second result is false, and the distance 0, when either rounded value
// is NaN (NaN inputs, and in E4M3 values beyond the overflow threshold).
func (f Format) ULPDistance(a, b float64) (uint64, bool) {
	if !f.Valid() {
		return 0, false
	}
	return f.ulpsBetween(f.Round(a), f.Round(b))
}

// ulpsBetween is ULPDistance of two values of the format, rounded already.
func (f Format) ulpsBetween(ra, rb float64) (uint64, bool) {
	if math.IsNaN(ra) || math.IsNaN(rb) {
		return 0, false
	}
	ma, na := f.ordinal(ra)
	mb, nb := f.ordinal(rb)
	if na == nb {
		if ma > mb {
			return ma - mb, true
		}
		return mb - ma, true
	}
	// Opposite signs: the steps to zero from each side. Each magnitude is
	// below 2^63, so the sum fits.
	d, _ := bits.Add64(ma, mb, 0)
	return d, true
}

// RoundSlice returns a new slice holding Round of each element of x: a
// float64 tensor as the format stores it.
func (f Format) RoundSlice(x []float64) []float64 {
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = f.Round(v)
	}
	return out
}
