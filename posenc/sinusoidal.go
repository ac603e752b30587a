package posenc

import (
	"fmt"

	"github.com/plumbref/plumb/internal/num"
)

// Sinusoidal is the fixed absolute position encoding of Vaswani et al.
// 2017, "Attention Is All You Need", arXiv 1706.03762, §3.5:
//
//	PE(m, 2i)   = sin(m·ω_i),
//	PE(m, 2i+1) = cos(m·ω_i),   ω_i = b^{−2i/d},  i = 0 … d/2 − 1,
//
// with d = Dim (the model dimension, even), b = Base (10000 in the paper)
// and m ≥ 0 the position. Layout chooses the column order. The angles are
// computed as for Rotary (double-double frequency and product, then
// math.Sincos): each entry is within a few ulps of the exact value up to
// MaxPosition.
//
// The zero value of each field but Dim selects the default: Base 0 means
// 10000, the zero Layout is Interleaved.
type Sinusoidal struct {
	Dim    int
	Base   float64
	Layout Layout
}

// check validates the configuration for a call of the method fn and
// returns the base.
func (s Sinusoidal) check(fn string) (float64, error) {
	if s.Dim <= 0 || s.Dim%2 != 0 || s.Dim > MaxDim {
		return 0, fmt.Errorf("%w: %s: Sinusoidal.Dim = %d; want an even number in 2 … MaxDim = %d", ErrDim, fn, s.Dim, MaxDim)
	}
	base := s.Base
	if base == 0 {
		base = 10000
	}
	if err := checkBase(fn, "Sinusoidal.Base", base); err != nil {
		return 0, err
	}
	if err := layoutWords.CheckAt(fn+": Sinusoidal.Layout", s.Layout); err != nil {
		return 0, err
	}
	return base, nil
}

// Table returns the encoding of positions offset … offset+n−1 as a
// row-major [n, Dim] array.
//
// Special cases are:
//
//	n = 0                         empty table
//	position 0                    0, 1, 0, 1, … (Interleaved)
//	n < 0 or n·Dim > MaxElements  ErrShape
//	offset < 0                    ErrPosition (absolute positions start at 0)
//	offset + n − 1 > MaxPosition  ErrPosition
//	Dim odd, ≤ 0 or > MaxDim       ErrDim
//	Base ≤ 1, NaN or +Inf         ErrBase
func (s Sinusoidal) Table(n, offset int) ([]float64, error) {
	return s.table("Sinusoidal.Table", "n", n, offset)
}

// table is Table for a call of fn, which names the count of positions
// nName.
func (s Sinusoidal) table(fn, nName string, n, offset int) ([]float64, error) {
	base, err := s.check(fn)
	if err != nil {
		return nil, err
	}
	if n < 0 || n > MaxElements/s.Dim {
		return nil, fmt.Errorf("%w: %s: %s = %d; want 0 ≤ %s and %s·Dim ≤ MaxElements = %d (Dim = %d)", ErrShape, fn, nName, n, nName, nName, MaxElements, s.Dim)
	}
	if err := checkPosition(fn, "offset", offset, false); err != nil {
		return nil, err
	}
	if n > 0 {
		if err := checkPosition(fn, "offset + "+nName+" − 1", offset+n-1, false); err != nil {
			return nil, err
		}
	}
	w := make([]dd, s.Dim/2)
	baseFreqs(w, s.Dim, ddLog(ddFrom(base)))
	d, h := s.Dim, s.Dim/2
	out := make([]float64, n*d)
	for t := range n {
		row := out[t*d : (t+1)*d]
		for i, wi := range w {
			sn, cs := sincosDD(angle(offset+t, wi))
			if s.Layout == Interleaved {
				row[2*i], row[2*i+1] = sn, cs
			} else {
				row[i], row[h+i] = sn, cs
			}
		}
	}
	return out, nil
}

// Add returns x + PE: x is a row-major [..., L, Dim] tensor of embeddings
// and token l of every sequence gets the encoding of position offset + l
// (Vaswani et al. 2017 §3.5: "we add positional encodings to the input
// embeddings"). Each sum is one float64 addition of the Table entry, so the
// error is half an ulp of the sum beyond that of the table. x is not
// modified.
//
// Special cases are:
//
//	len(x) = 0                      empty result
//	len(x) not a multiple of L·Dim  ErrShape
//	L ≤ 0                           ErrShape
//	otherwise                       the special cases of Table
func (s Sinusoidal) Add(x []float64, L, offset int) ([]float64, error) {
	return addTable("Sinusoidal.Add", s, x, L, offset, func(v float64) float64 { return v })
}

// Add32 is the float32 instantiation of the same body as Add: the
// straightforward low-precision implementation the compare package uses as
// a yardstick; not a reference. The table is the reference table rounded to
// float32; the addition is float32.
func (s Sinusoidal) Add32(x []float32, L, offset int) ([]float32, error) {
	return addTable("Sinusoidal.Add32", s, x, L, offset, func(v float64) float32 { return float32(v) })
}

func addTable[T num.Float](fn string, s Sinusoidal, x []T, L, offset int, conv func(float64) T) ([]T, error) {
	if err := checkL(fn, L); err != nil {
		return nil, err
	}
	pe64, err := s.table(fn, "L", L, offset)
	if err != nil {
		return nil, err
	}
	if len(x)%len(pe64) != 0 {
		return nil, fmt.Errorf("%w: %s: x has %d elements; want a multiple of L·Dim = %d·%d = %d", ErrShape, fn, len(x), L, s.Dim, len(pe64))
	}
	pe := make([]T, len(pe64))
	for k, v := range pe64 {
		pe[k] = conv(v)
	}
	y := make([]T, len(x))
	for k := range x {
		y[k] = x[k] + pe[k%len(pe)]
	}
	return y, nil
}
