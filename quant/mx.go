package quant

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/vocab"
)

// MXBlockSize is k, the number of elements that share one scale in every
// concrete MX format (OCP MX v1.0 §5.2, table 1; from memory).
const MXBlockSize = 32

// MXBlock is one block of an MX format: a shared scale X = 2^(Scale − 127),
// stored as E8M0 (8 exponent bits, bias 127, no sign, no fraction; 0xFF is
// NaN: OCP MX v1.0 §5.4.1, from memory), and 32 private elements, each the
// bit pattern of an Element in the low bits of a byte. Element i means
// X·Pᵢ, Pᵢ the value of its pattern (OCP MX v1.0 §5.1).
type MXBlock struct {
	Element Element
	Scale   uint8
	Bits    [MXBlockSize]uint8
}

// elem is the description of an element format.
type elem struct {
	fp         compare.Format // E4M3, E5M2 from compare; else -1
	exp, man   int            // the small floats: exponent and fraction bits
	bias, emax int
	max        float64
	width      int
}

var elems = [...]elem{
	ElemE4M3: {fp: compare.E4M3, emax: 8, max: 448, width: 8},
	ElemE5M2: {fp: compare.E5M2, emax: 15, max: 57344, width: 8},
	ElemE3M2: {fp: -1, exp: 3, man: 2, bias: 3, emax: 4, max: 28, width: 6},
	ElemE2M3: {fp: -1, exp: 2, man: 3, bias: 1, emax: 2, max: 7.5, width: 6},
	ElemE2M1: {fp: -1, exp: 2, man: 1, bias: 1, emax: 2, max: 6, width: 4},
	ElemInt8: {fp: -1, emax: 0, max: 127.0 / 64, width: 8},
}

// Max returns the largest magnitude of the element format (the table at
// Element), or NaN for an invalid Element.
func (e Element) Max() float64 {
	if e.Check() != nil {
		return math.NaN()
	}
	return elems[e].max
}

// round returns v (finite) rounded to the nearest element value, ties to
// even, saturating at ±max (the conversion of OCP MX v1.0 §6.3).
func (d *elem) round(v float64) float64 {
	switch {
	case d.fp >= 0:
		return d.fp.RoundSaturating(v)
	case d.exp == 0: // INT8: multiples of 2^−6
		return math.Ldexp(float64(clamp(int(math.RoundToEven(math.Ldexp(v, 6))), -127, 127)), -6)
	}
	a := math.Abs(v)
	if a >= d.max {
		return math.Copysign(d.max, v)
	}
	if a == 0 {
		return v
	}
	_, e := math.Frexp(a)
	q := max(e-1, 1-d.bias) - d.man // the exponent of the last fraction bit
	r := math.Ldexp(math.RoundToEven(math.Ldexp(a, -q)), q)
	return math.Copysign(min(r, d.max), v)
}

// encode returns the bit pattern of r, a value of the format.
func (d *elem) encode(r float64) uint8 {
	switch {
	case d.fp >= 0:
		return uint8(d.fp.Encode(r))
	case d.exp == 0:
		return uint8(int8(math.Ldexp(r, 6)))
	}
	var sign uint8
	if math.Signbit(r) {
		sign = 1 << (d.width - 1)
	}
	a := math.Abs(r)
	minNormal := math.Ldexp(1, 1-d.bias)
	if a < minNormal { // subnormal or zero: a multiple of the smallest subnormal
		return sign | uint8(math.Ldexp(a, d.bias-1+d.man))
	}
	frac, e := math.Frexp(a) // a = 2·frac · 2^(e−1)
	field := uint8(e - 1 + d.bias)
	f := uint8(math.Ldexp(2*frac-1, d.man))
	return sign | field<<d.man | f
}

// decode returns the value of pattern b; false if b is wider than the format.
func (d *elem) decode(b uint8) (float64, bool) {
	if d.width < 8 && b>>d.width != 0 {
		return 0, false
	}
	switch {
	case d.fp >= 0:
		v, err := d.fp.Decode(uint64(b))
		return v, err == nil
	case d.exp == 0:
		return math.Ldexp(float64(int8(b)), -6), true
	}
	field := int(b>>d.man) & (1<<d.exp - 1)
	f := float64(b & (1<<d.man - 1))
	var v float64
	if field == 0 {
		v = math.Ldexp(f, 1-d.bias-d.man)
	} else {
		v = math.Ldexp(f+math.Ldexp(1, d.man), field-d.bias-d.man)
	}
	if b>>(d.width-1) == 1 {
		v = -v
	}
	return v, true
}

// EncodeMX returns x in MX blocks of element format e, 32 elements a block,
// by the conversion of OCP MX v1.0 §6.3 (from memory):
//
//	shared exponent  E = ⌊log₂ amax⌋ − emax,   amax = max |x| over the block
//	scale            X = 2^E, E8M0 pattern E + 127
//	elements         Pᵢ = round(xᵢ / X), to nearest, ties to even, saturating at ±max
//
// with emax and max from the table at Element. xᵢ/X is exact (a power-of-two
// scaling). Since amax/X lies in [2^emax, 2^(emax+1)), the block's largest
// elements may exceed max and saturate (by up to 2 − max/2^emax of X·2^emax:
// 448 of 512 in E4M3, 6 of 8 in E2M1); BoundMX gives the error this allows.
//
// Special cases are:
//
//	a block of zeros           Scale 0 (X = 2^−127), elements +0
//	E < −127 (amax < 2^(emax−127))   E = −127; elements round on that scale
//	E > 127                    error ErrValue (beyond E8M0's largest scale, 2^127)
//	a NaN or ±Inf in a block   Scale 0xFF (NaN), elements 0 (the spec's NaN scale; from memory)
//	len(x) not a multiple of 32  error ErrLength
//	an invalid e               error ErrOption
func EncodeMX(x []float64, e Element) ([]MXBlock, error) { return encodeMX("EncodeMX", x, e) }

// EncodeMX32 is EncodeMX of float32 values, which widen to float64 exactly:
// the same blocks as EncodeMX of the widened x.
//
// Special cases are those of EncodeMX.
func EncodeMX32(x []float32, e Element) ([]MXBlock, error) { return encodeMX("EncodeMX32", x, e) }

func encodeMX[T num.Float](fn string, x []T, e Element) ([]MXBlock, error) {
	if err := e.Check(); err != nil {
		return nil, vocab.At(err, ErrOption, fn+": e")
	}
	if len(x)%MXBlockSize != 0 || len(x) > MaxElements {
		return nil, fmt.Errorf("%w: %s: len(x) = %d; want a multiple of MXBlockSize = %d, at most MaxElements", ErrLength, fn, len(x), MXBlockSize)
	}
	d := &elems[e]
	out := make([]MXBlock, len(x)/MXBlockSize)
	for j := range out {
		blk := &out[j]
		blk.Element = e
		amax := 0.0
		for _, v := range x[j*MXBlockSize : (j+1)*MXBlockSize] {
			amax = max(amax, math.Abs(float64(v))) // max propagates NaN
		}
		if math.IsNaN(amax) || math.IsInf(amax, 0) {
			blk.Scale = 0xFF
			continue
		}
		E := -127
		if amax > 0 {
			_, ex := math.Frexp(amax)
			E = max(ex-1-d.emax, -127)
		}
		if E > 127 {
			return nil, fmt.Errorf("%w: %s: block %d has amax = %g, shared exponent %d; want at most 127 (amax < 2^%d)", ErrValue, fn, j, amax, E, 128+d.emax)
		}
		blk.Scale = uint8(E + 127)
		for i, v := range x[j*MXBlockSize : (j+1)*MXBlockSize] {
			blk.Bits[i] = d.encode(d.round(math.Ldexp(float64(v), -E)))
		}
	}
	return out, nil
}

// scale returns X of the block, NaN for the pattern 0xFF.
func (b *MXBlock) scale() float64 {
	if b.Scale == 0xFF {
		return math.NaN()
	}
	return math.Ldexp(1, int(b.Scale)-127)
}

// decodeMX returns the element values Pᵢ of every block and each block's
// scale X.
func decodeMX(fn, arg string, blocks []MXBlock) (p, x []float64, err error) {
	if len(blocks) > MaxElements/MXBlockSize {
		return nil, nil, fmt.Errorf("%w: %s: %s has %d blocks; want at most MaxElements/32", ErrLength, fn, arg, len(blocks))
	}
	p = make([]float64, len(blocks)*MXBlockSize)
	x = make([]float64, len(blocks))
	for j := range blocks {
		b := &blocks[j]
		if err := b.Element.Check(); err != nil {
			return nil, nil, vocab.At(err, ErrOption, fmt.Sprintf("%s: %s[%d].Element", fn, arg, j))
		}
		d := &elems[b.Element]
		x[j] = b.scale()
		for i, bits := range b.Bits {
			v, ok := d.decode(bits)
			if !ok {
				return nil, nil, fmt.Errorf("%w: %s: %s[%d].Bits[%d] = %#x; want at most the %d bits of %v", ErrCode, fn, arg, j, i, bits, d.width, b.Element)
			}
			p[j*MXBlockSize+i] = v
		}
	}
	return p, x, nil
}

// DecodeMX returns the values X·Pᵢ of the blocks' elements, in order. They
// are exact in float64: Pᵢ has at most 8 significand bits and X is a power
// of two, and the product lies between 2^−143 (E5M2's smallest subnormal
// 2^−16 times 2^−127) and 57344·2^127, in float64's normal range.
//
// DecodeMX has no float32 twin (codes in, exact float64 out; see Dequantise).
//
// Special cases are:
//
//	Scale = 0xFF                 every element NaN
//	an E4M3 or E5M2 NaN pattern  NaN; E5M2 ±Inf patterns ±Inf
//	empty blocks                 empty result
//	a pattern wider than its format  error ErrCode (E3M2, E2M3 above 0x3F; E2M1 above 0xF)
//	an invalid Element           error ErrOption
func DecodeMX(blocks []MXBlock) ([]float64, error) {
	p, x, err := decodeMX("DecodeMX", "blocks", blocks)
	if err != nil {
		return nil, err
	}
	for i := range p {
		p[i] *= x[i/MXBlockSize]
	}
	return p, nil
}

// BoundMX returns, for each element of the blocks, the largest error
// EncodeMX could have made in producing it: X·ulp(Pᵢ)/2 for round to
// nearest, where ulp is the spacing of the element format in the binade of
// Pᵢ (its smallest subnormal for 0 and subnormals; 2^−6 for INT8); and at
// ±max, which also stands for every saturated value up to 2^(emax+1)·X,
// the larger of that and X·(2^(emax+1) − max). The values are exact.
//
// Special cases are those of DecodeMX.
func BoundMX(blocks []MXBlock) ([]float64, error) {
	p, x, err := decodeMX("BoundMX", "blocks", blocks)
	if err != nil {
		return nil, err
	}
	for i, v := range p {
		d := &elems[blocks[i/MXBlockSize].Element]
		var u float64
		switch {
		case d.fp >= 0:
			u = d.fp.ULP(v)
		case d.exp == 0:
			u = math.Ldexp(1, -6)
		default:
			e := 1 - d.bias
			if a := math.Abs(v); a >= math.Ldexp(1, e) {
				_, ex := math.Frexp(a)
				e = ex - 1
			}
			u = math.Ldexp(1, e-d.man)
		}
		b := u / 2
		if math.Abs(v) == d.max {
			b = max(b, math.Ldexp(1, d.emax+1)-d.max)
		}
		p[i] = b * x[i/MXBlockSize]
	}
	return p, nil
}

// DotMX returns the dot product of two MX vectors of the same length, by
// OCP MX v1.0 §6.1 and §6.2 (from memory): for blocks j,
//
//	Dot(A, B) = Σⱼ X(Aⱼ)·X(Bⱼ) · Σᵢ Pᵢ(Aⱼ)·Pᵢ(Bⱼ)
//
// computed exactly (a big-integer sum of the exact element products) and
// rounded once to float64, to nearest with ties to even. The spec leaves
// the order and precision of the sums to the implementation; this is the
// exact value they approximate. The blocks may have different element
// formats. The result is the exact value itself, with no rounding at all,
// whenever the integer sum is below 2^53, which holds for every pair of
// formats but E5M2 (in units of the smallest subnormals, an E4M3 element
// is below 2^18 and a product below 2^36, 32 of them below 2^41), as long
// as the scales of the blocks are equal; blocks with different scales and
// E5M2 operands may need the one rounding.
//
// DotMX has no float32 twin (codes in, float64 out; see Dequantise).
//
// Special cases are:
//
//	a NaN scale, or NaN or ±Inf elements  the float64 sum of the products: NaN or ±Inf
//	no blocks                    0
//	len(a) ≠ len(b)              error ErrLength
//	and those of DecodeMX
func DotMX(a, b []MXBlock) (float64, error) {
	if len(a) != len(b) {
		return math.NaN(), fmt.Errorf("%w: DotMX: len(b) = %d blocks; want len(a) = %d", ErrLength, len(b), len(a))
	}
	pa, xa, err := decodeMX("DotMX", "a", a)
	if err != nil {
		return math.NaN(), err
	}
	pb, xb, err := decodeMX("DotMX", "b", b)
	if err != nil {
		return math.NaN(), err
	}
	s := newExactSum()
	for i := range pa {
		j := i / MXBlockSize
		if math.IsNaN(xa[j]) || math.IsNaN(xb[j]) {
			return math.NaN(), nil
		}
		// X(Aⱼ)·X(Bⱼ) = 2^(a + b − 254): a shift of the exact product.
		s.addProduct(pa[i], pb[i], 1, int(a[j].Scale)+int(b[j].Scale)-254)
	}
	return s.round(compare.Float64), nil
}
