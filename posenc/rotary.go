package posenc

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/internal/elem"
	"github.com/plumbref/plumb/internal/num"
)

// Rotary is a rotary position encoding (RoPE) configuration: Su et al.
// 2021, "RoFormer: Enhanced Transformer with Rotary Position Embedding",
// arXiv 2104.09864, §3.2–3.4, Eq. (13)–(16) and (34).
//
// A vector x of Dim values at integer position m has its first r = Rotated
// dims rotated pairwise, pair i by the angle m·θ_i with
//
//	θ_i = b^{−2i/r},  i = 0 … r/2 − 1,  b = Base,
//
// (before Scaling), and its other Dim − r dims passed through unchanged
// (partial rotation [common practice]; the frequencies are over r, not
// Dim). With cos and sin of the angle the pair (x, y) becomes
//
//	x′ = M·(x cos mθ_i − y sin mθ_i),  y′ = M·(x sin mθ_i + y cos mθ_i),
//
// where M = Magnitude (1 unless set). The pair is (2i, 2i+1) or
// (i, i + r/2) according to Pairing.
//
// The zero value of each field but Dim selects the default: Rotated 0
// means all Dim dims, Base 0 means 10000, Magnitude 0 means 1, and the zero
// Pairing and Scaling are PairAdjacent and no scaling.
type Rotary struct {
	// Dim is D, the head dimension: the length of the last axis of the data.
	Dim int
	// Rotated is r, the number of leading dims rotated: even, 2 ≤ r ≤ Dim.
	Rotated int
	// Base is b, finite and > 1.
	Base float64
	// Pairing chooses which dims form a pair.
	Pairing Pairing
	// Scaling changes the frequencies for a longer context.
	Scaling Scaling
	// Magnitude, finite and > 0, multiplies the cos and sin tables, hence
	// the rotated dims of the output (the pass-through dims are copied
	// unscaled). It is where YaRN's √(1/t) goes (see YaRNMagnitude). With
	// M ≠ 1, ApplyInverse is the backward pass but not the inverse.
	Magnitude float64
	// Angles is how the float32 instantiations form the tables (a port's
	// precision idiom; the float64 reference ignores it): Apply32,
	// ApplyInverse32 and Tables32 honour it, Apply, ApplyInverse, Tables
	// and Frequencies do not. The zero value is AnglesFloat64.
	Angles AngleArithmetic
}

// checkBase checks the frequency base b, which the caller of fn gave as
// name.
func checkBase(fn, name string, b float64) error {
	if !(b > 1) || math.IsInf(b, 1) {
		return fmt.Errorf("%w: %s: %s = %v; want a finite number > 1", ErrBase, fn, name, b)
	}
	return nil
}

// resolved holds a validated configuration.
type resolved struct {
	D, r    int
	pairing Pairing
	mag     float64
	theta   []dd
}

// resolve validates the configuration for a call of the method fn.
func (c Rotary) resolve(fn string) (*resolved, error) {
	if c.Dim <= 0 || c.Dim > MaxDim {
		return nil, fmt.Errorf("%w: %s: Rotary.Dim = %d; want 0 < Dim ≤ MaxDim = %d", ErrDim, fn, c.Dim, MaxDim)
	}
	r := c.Rotated
	if r == 0 {
		r = c.Dim
	}
	if r < 0 || r > c.Dim {
		return nil, fmt.Errorf("%w: %s: Rotary.Rotated = %d; want 2 ≤ Rotated ≤ Dim = %d (0 means Dim)", ErrDim, fn, c.Rotated, c.Dim)
	}
	if r%2 != 0 {
		return nil, fmt.Errorf("%w: %s: rotated dims r = %d (Rotary.Dim = %d, Rotary.Rotated = %d); want an even number: rotary rotates pairs",
			ErrDim, fn, r, c.Dim, c.Rotated)
	}
	base := c.Base
	if base == 0 {
		base = 10000
	}
	if err := checkBase(fn, "Rotary.Base", base); err != nil {
		return nil, err
	}
	if err := pairingWords.CheckAt(fn+": Rotary.Pairing", c.Pairing); err != nil {
		return nil, err
	}
	if err := anglesWords.CheckAt(fn+": Rotary.Angles", c.Angles); err != nil {
		return nil, err
	}
	mag := c.Magnitude
	if mag == 0 {
		mag = 1
	}
	if err := positive(fn, "Rotary.Magnitude", mag); err != nil {
		return nil, err
	}
	theta, err := c.Scaling.scaledFreqs(fn, r, base)
	if err != nil {
		return nil, err
	}
	return &resolved{D: c.Dim, r: r, pairing: c.Pairing, mag: mag, theta: theta}, nil
}

// Frequencies returns the r/2 frequencies θ_i after scaling, in radians per
// position, each the float64 nearest to its exact value (the internal
// computation carries about 106 bits, so the rounding can only go the
// wrong way for a value within ~2^−100 relative of a rounding boundary;
// every golden frequency matches bit for bit; see the package doc).
//
// Special cases are:
//
//	the configuration is invalid    the error of Apply
func (c Rotary) Frequencies() ([]float64, error) {
	rs, err := c.resolve("Rotary.Frequencies")
	if err != nil {
		return nil, err
	}
	out := make([]float64, len(rs.theta))
	for i, t := range rs.theta {
		out[i] = t.hi + t.lo
	}
	return out, nil
}

// checkPosition validates the position m, which the caller of fn gave as
// name.
func checkPosition(fn, name string, m int, allowNegative bool) error {
	if m > MaxPosition || m < -MaxPosition || (!allowNegative && m < 0) {
		lo := "−MaxPosition"
		if !allowNegative {
			lo = "0"
		}
		return fmt.Errorf("%w: %s: %s = %d; want %s ≤ position ≤ MaxPosition = %d", ErrPosition, fn, name, m, lo, MaxPosition)
	}
	return nil
}

// tables fills cos and sin [len(pos), r/2], times the magnitude.
func (rs *resolved) tables(pos []int) (cos, sin []float64) {
	h := rs.r / 2
	cos = make([]float64, len(pos)*h)
	sin = make([]float64, len(pos)*h)
	for t, m := range pos {
		for i, th := range rs.theta {
			s, c := sincosDD(angle(m, th))
			if rs.mag != 1 {
				s, c = float64(s*rs.mag), float64(c*rs.mag)
			}
			cos[t*h+i], sin[t*h+i] = c, s
		}
	}
	return cos, sin
}

// tablesWith fills cos and sin [len(pos), r/2] as tables does, with the
// angles formed as a says: the float64 values of the tables a float32
// port of that idiom rounds to float32 (see AngleArithmetic). For
// AnglesFloat64 it is tables.
func (rs *resolved) tablesWith(pos []int, a AngleArithmetic) (cos, sin []float64) {
	if a == AnglesFloat64 {
		return rs.tables(pos)
	}
	h := rs.r / 2
	theta := make([]float32, len(rs.theta))
	for i, t := range rs.theta {
		theta[i] = float32(t.hi + t.lo) // the float64 frequency, rounded to float32
	}
	cos = make([]float64, len(pos)*h)
	sin = make([]float64, len(pos)*h)
	for t, m := range pos {
		for i, th := range theta {
			var s, c float64
			if a == AnglesFloat32Frequencies {
				s, c = sincosDD(angle(m, ddFrom(float64(th))))
			} else {
				s, c = elem.Sincos(float64(float32(float32(m) * th)))
			}
			if rs.mag != 1 {
				s, c = float64(s*rs.mag), float64(c*rs.mag)
			}
			cos[t*h+i], sin[t*h+i] = c, s
		}
	}
	return cos, sin
}

// Tables returns the cos and sin tables at the given positions: two
// row-major [len(pos), r/2] arrays with
//
//	cos[t, i] = M·cos(pos[t]·θ_i),  sin[t, i] = M·sin(pos[t]·θ_i),
//
// one column per frequency (not repeated per pair member: a kernel that
// stores r columns holds each value twice, in the order of its pairing).
// The angles are formed in double-double and reduced by math.Sincos, so
// each entry is within a few ulps of the exact value at every position up
// to MaxPosition; see the package doc for the measured error.
//
// Special cases are:
//
//	len(pos) = 0                  empty tables
//	negative positions            allowed: the rotation by −m is the inverse
//	|pos[t]| > MaxPosition        ErrPosition
//	len(pos)·r/2 > MaxElements    ErrShape
//	invalid configuration         the error of Apply
func (c Rotary) Tables(pos []int) (cos, sin []float64, err error) {
	const fn = "Rotary.Tables"
	rs, err := c.resolve(fn)
	if err != nil {
		return nil, nil, err
	}
	if err := checkTablePositions(fn, rs, pos); err != nil {
		return nil, nil, err
	}
	cos, sin = rs.tables(pos)
	return cos, sin, nil
}

// checkTablePositions checks the positions of a call of the table method
// fn: at most MaxElements entries per table, every |position| ≤
// MaxPosition.
func checkTablePositions(fn string, rs *resolved, pos []int) error {
	if h := rs.r / 2; len(pos) > MaxElements/h {
		return fmt.Errorf("%w: %s: pos has %d elements; want len(pos)·r/2 ≤ MaxElements = %d (r = %d rotated dims)", ErrShape, fn, len(pos), MaxElements, rs.r)
	}
	for t, m := range pos {
		if err := checkPosition(fn, fmt.Sprintf("pos[%d]", t), m, true); err != nil {
			return err
		}
	}
	return nil
}

// Positions gives the position of every token of a [..., L, D] tensor.
//
// With List nil, token l (0 ≤ l < L) of every sequence is at Offset + l.
// Otherwise List holds explicit positions: either L of them, shared by
// every leading index (every batch entry and head), or one per row of D
// values (len(x)/D), in row-major order, which covers any layout, packed
// sequences and per-batch offsets; Offset must then be 0.
type Positions struct {
	Offset int
	List   []int
}

// rowPositions returns the distinct positions to tabulate and, for every
// row, the index of its table row; fn names the method called.
func (p Positions) rowPositions(fn string, rows, L int) (pos []int, index func(row int) int, err error) {
	if err := checkL(fn, L); err != nil {
		return nil, nil, err
	}
	if rows%L != 0 {
		return nil, nil, fmt.Errorf("%w: %s: x holds %d rows of Dim values; want a multiple of L = %d", ErrShape, fn, rows, L)
	}
	switch {
	case p.List == nil:
		pos = make([]int, L)
		for l := range pos {
			pos[l] = p.Offset + l
			if err := checkPosition(fn, fmt.Sprintf("pos.Offset + %d (token %d, pos.Offset = %d)", l, l, p.Offset), pos[l], true); err != nil {
				return nil, nil, err
			}
		}
		return pos, func(row int) int { return row % L }, nil
	case p.Offset != 0:
		return nil, nil, fmt.Errorf("%w: %s: pos.Offset = %d with pos.List given; want 0: give one or the other", ErrShape, fn, p.Offset)
	case len(p.List) == L || len(p.List) == rows:
		for t, m := range p.List {
			if err := checkPosition(fn, fmt.Sprintf("pos.List[%d]", t), m, true); err != nil {
				return nil, nil, err
			}
		}
		if len(p.List) == L {
			return p.List, func(row int) int { return row % L }, nil
		}
		// one position per row: tabulate each distinct position once
		seen := map[int]int{}
		idx := make([]int, rows)
		for row, m := range p.List {
			k, ok := seen[m]
			if !ok {
				k = len(pos)
				seen[m] = k
				pos = append(pos, m)
			}
			idx[row] = k
		}
		return pos, func(row int) int { return idx[row] }, nil
	}
	return nil, nil, fmt.Errorf("%w: %s: pos.List has %d elements; want L = %d, or one per row, %d", ErrShape, fn, len(p.List), L, rows)
}

// Apply returns x rotated at the given positions: x is a row-major
// [..., L, D] tensor (D = Dim), and every row of D values is transformed as
// the Rotary doc says, at its position (see Positions). x is not modified.
//
// The rotation of one row is, for the default PairAdjacent (quoted from the
// body; PairHalves uses a, b = i, i + r/2):
//
//	for i := 0; i < r/2; i++ {
//		a, b := 2*i, 2*i+1
//		y[a] = float64(x[a]*cos[i]) - float64(x[b]*sin[i])
//		y[b] = float64(x[a]*sin[i]) + float64(x[b]*cos[i])
//	}
//	copy(y[r:], x[r:])
//
// with cos and sin the row of Tables at the row's position.
//
// Accuracy: the package documentation's table, measured on 50-digit values
// over every golden case, positions up to 2^31 − 1 and every scaling
// method included.
//
// Special cases are:
//
//	len(x) = 0                     empty result, no error
//	NaN or ±Inf in x               propagate through the pair they sit in
//	len(x) not a multiple of L·D   ErrShape
//	Dim ≤ 0 or > MaxDim, r odd, r > Dim  ErrDim
//	Base ≤ 1, NaN or +Inf          ErrBase
//	negative positions             allowed (rotation by a negative angle)
//	|position| > MaxPosition       ErrPosition
//	invalid scaling                ErrFactor, ErrLength, ErrOption or ErrDim
func (c Rotary) Apply(x []float64, L int, pos Positions) ([]float64, error) {
	return applyAt("Rotary.Apply", c, x, L, pos, false, AnglesFloat64, func(v float64) float64 { return v })
}

// ApplyInverse applies the transposed rotation Rᵀ(m) = R(−m), times
// Magnitude: with Magnitude 1 it undoes Apply; in every case it is the
// backward pass of Apply, mapping the gradient of Apply's output to the
// gradient of its input (the rotation is linear, so its Jacobian is
// M·R(m) and the backward is M·R(m)ᵀ). Arguments, accuracy and special
// cases are those of Apply.
func (c Rotary) ApplyInverse(x []float64, L int, pos Positions) ([]float64, error) {
	return applyAt("Rotary.ApplyInverse", c, x, L, pos, true, AnglesFloat64, func(v float64) float64 { return v })
}

// Apply32 is the float32 instantiation of the same body as Apply: the
// straightforward low-precision implementation the compare package uses as a
// yardstick; not a reference. Its cos and sin tables are those of Tables32:
// with the zero Angles, the reference tables rounded to float32, so that
// with the float32 rotation arithmetic it measures the error of a float32
// rotation alone. A port that forms the angles m·θ in float32 has a much
// larger error at large positions; Angles = AnglesFloat32 (or
// AnglesFloat32Frequencies) makes Apply32 such a port, the yardstick of
// that idiom.
func (c Rotary) Apply32(x []float32, L int, pos Positions) ([]float32, error) {
	return applyAt("Rotary.Apply32", c, x, L, pos, false, c.Angles, func(v float64) float32 { return float32(v) })
}

// ApplyInverse32 is the float32 instantiation of the same body as
// ApplyInverse; see Apply32 (it honours Angles too). Not a reference.
func (c Rotary) ApplyInverse32(x []float32, L int, pos Positions) ([]float32, error) {
	return applyAt("Rotary.ApplyInverse32", c, x, L, pos, true, c.Angles, func(v float64) float32 { return float32(v) })
}

// Tables32 returns the float32 cos and sin tables that Apply32 rotates
// with, at the given positions, laid out as Tables lays them out: with the
// zero Angles each entry is that of Tables rounded to float32; with
// AnglesFloat32Frequencies or AnglesFloat32 they are formed as that idiom
// says (see AngleArithmetic). Not a reference. Special cases are those of
// Tables.
func (c Rotary) Tables32(pos []int) (cos, sin []float32, err error) {
	const fn = "Rotary.Tables32"
	rs, err := c.resolve(fn)
	if err != nil {
		return nil, nil, err
	}
	if err := checkTablePositions(fn, rs, pos); err != nil {
		return nil, nil, err
	}
	c64, s64 := rs.tablesWith(pos, c.Angles)
	return num.Convert[float32](c64), num.Convert[float32](s64), nil
}

func applyAt[T num.Float](fn string, c Rotary, x []T, L int, pos Positions, inverse bool, angles AngleArithmetic, conv func(float64) T) ([]T, error) {
	rs, err := c.resolve(fn)
	if err != nil {
		return nil, err
	}
	D := rs.D
	if len(x)%D != 0 {
		return nil, fmt.Errorf("%w: %s: x has %d elements; want a multiple of Rotary.Dim = %d", ErrShape, fn, len(x), D)
	}
	rows := len(x) / D
	if rows == 0 {
		if err := checkL(fn, L); err != nil {
			return nil, err
		}
		return []T{}, nil
	}
	tpos, index, err := pos.rowPositions(fn, rows, L)
	if err != nil {
		return nil, err
	}
	c64, s64 := rs.tablesWith(tpos, angles)
	cos, sin := make([]T, len(c64)), make([]T, len(s64))
	for i := range c64 {
		cos[i], sin[i] = conv(c64[i]), conv(s64[i])
	}
	y := make([]T, len(x))
	rotate(y, x, D, rs.r, rs.pairing, cos, sin, index, inverse)
	return y, nil
}

// checkL checks the sequence length L of a call of fn.
func checkL(fn string, L int) error {
	if L <= 0 {
		return fmt.Errorf("%w: %s: sequence length L = %d; want > 0", ErrShape, fn, L)
	}
	return nil
}

// rotate is the kernel body: y = R(m)x (or R(m)ᵀx) row by row, with cos
// and sin tables of r/2 columns and index giving each row's table row.
func rotate[T num.Float](y, x []T, D, r int, pairing Pairing, cos, sin []T, index func(row int) int, inverse bool) {
	h := r / 2
	for row := 0; row < len(x)/D; row++ {
		xr, yr := x[row*D:(row+1)*D], y[row*D:(row+1)*D]
		t := index(row)
		cr, sr := cos[t*h:(t+1)*h], sin[t*h:(t+1)*h]
		for i := range h {
			a, b := 2*i, 2*i+1
			if pairing == PairHalves {
				a, b = i, i+h
			}
			c, s := cr[i], sr[i]
			if inverse {
				s = -s
			}
			xa, xb := xr[a], xr[b]
			yr[a] = T(xa*c) - T(xb*s)
			yr[b] = T(xa*s) + T(xb*c)
		}
		copy(yr[r:], xr[r:])
	}
}
