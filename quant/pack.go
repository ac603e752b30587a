package quant

import "fmt"

// Packing is the layout of int4 codes two to a byte.
type Packing struct {
	Order NibbleOrder
	Code  NibbleCode
}

func (p Packing) check(fn string) error {
	if err := p.Order.Check(); err != nil {
		return err
	}
	return p.Code.Check()
}

// Pack4 returns int4 codes packed two to a byte under p: ⌈len(codes)/2⌉
// bytes, byte i holding codes 2i and 2i+1 in the halves p.Order says, each
// written as p.Code says. An odd count leaves the second half of the last
// byte 0.
//
// Special cases are:
//
//	empty codes               empty result
//	a code outside −8..7      error ErrCode
//	an invalid Order or Code  error ErrOption
func Pack4(codes []int8, p Packing) ([]byte, error) {
	if err := p.check("Pack4"); err != nil {
		return nil, fmt.Errorf("%w: Pack4: Packing = %+v; want valid words", ErrOption, p)
	}
	for i, q := range codes {
		if q < -8 || q > 7 {
			return nil, fmt.Errorf("%w: Pack4: codes[%d] = %d; want -8 ≤ code ≤ 7", ErrCode, i, q)
		}
	}
	out := make([]byte, (len(codes)+1)/2)
	for i, q := range codes {
		n := byte(q) & 0xF // two's complement: q mod 16
		if p.Code == OffsetBinary {
			n = byte(q + 8)
		}
		if (i%2 == 0) == (p.Order == LowFirst) {
			out[i/2] |= n
		} else {
			out[i/2] |= n << 4
		}
	}
	return out, nil
}

// Unpack4 returns the n int4 codes that Pack4 packed into b under p. It is
// the inverse of Pack4: Unpack4(Pack4(q, p), len(q), p) = q for every q of
// codes in −8..7, and every buffer of the right length unpacks (every
// nibble is a code in both encodings).
//
// Special cases are:
//
//	n = 0 and b empty           empty result
//	n < 0 or len(b) ≠ ⌈n/2⌉     error ErrPacked
//	an invalid Order or Code    error ErrOption
func Unpack4(b []byte, n int, p Packing) ([]int8, error) {
	if err := p.check("Unpack4"); err != nil {
		return nil, fmt.Errorf("%w: Unpack4: Packing = %+v; want valid words", ErrOption, p)
	}
	if n < 0 || n > MaxElements || len(b) != (n+1)/2 {
		return nil, fmt.Errorf("%w: Unpack4: len(b) = %d for n = %d codes; want ⌈n/2⌉ bytes, 0 ≤ n ≤ MaxElements", ErrPacked, len(b), n)
	}
	out := make([]int8, n)
	for i := range out {
		nib := b[i/2] & 0xF
		if (i%2 == 0) != (p.Order == LowFirst) {
			nib = b[i/2] >> 4
		}
		if p.Code == OffsetBinary {
			out[i] = int8(nib) - 8
		} else {
			out[i] = int8(nib<<4) >> 4 // sign-extend bit 3
		}
	}
	return out, nil
}
