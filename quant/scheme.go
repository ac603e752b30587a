package quant

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/vocab"
)

// Scheme is one quantisation convention: every choice Quantise makes. Its
// zero value is symmetric, per-tensor, int8, full range, ties to even,
// float32 scales.
type Scheme struct {
	Symmetry    Symmetry
	Granularity Granularity
	Channel     Channel // the index the scales follow (PerChannel, PerGroup)
	Group       int     // elements per group (PerGroup only; ignored otherwise)
	Width       Width
	Range       Range
	Rounding    Rounding
	Scale       ScaleFormat
	Rule        ScaleRule
	Percentile  float64 // p, 0 < p ≤ 100 (RulePercentile only; ignored otherwise)
}

// Limits returns the smallest and largest code of the scheme's width and
// range: −128 and 127, −127 and 127, −8 and 7, or −7 and 7.
func (s Scheme) Limits() (lo, hi int) {
	hi = 127
	if s.Width == Int4 {
		hi = 7
	}
	if s.Range == RangeClipped {
		return -hi, hi
	}
	return -hi - 1, hi
}

// check validates every convention of s, naming each field for fn.
func (s Scheme) check(fn string) error {
	for _, c := range []struct {
		field string
		err   error
	}{
		{"Symmetry", s.Symmetry.Check()},
		{"Granularity", s.Granularity.Check()},
		{"Channel", s.Channel.Check()},
		{"Width", s.Width.Check()},
		{"Range", s.Range.Check()},
		{"Rounding", s.Rounding.Check()},
		{"Scale", s.Scale.Check()},
		{"Rule", s.Rule.Check()},
	} {
		if c.err != nil {
			return vocab.At(c.err, ErrOption, fn+": Scheme."+c.field)
		}
	}
	if s.Rule == RulePercentile && !(s.Percentile > 0 && s.Percentile <= 100) {
		return fmt.Errorf("%w: %s: Scheme.Percentile = %v; want 0 < p ≤ 100 with the percentile rule", ErrOption, fn, s.Percentile)
	}
	if s.Symmetry == AsymmetricFloat && s.Scale == ScalePow2 {
		return fmt.Errorf("%w: %s: Scheme.Scale = %v with Scheme.Symmetry = %v; want a floating scale format (float32, binary16, bfloat16) to hold the zero points", ErrOption, fn, s.Scale, s.Symmetry)
	}
	return nil
}

// checkShape validates a [rows, cols] shape for fn, and n, the length of
// the slice that holds it, when n ≥ 0. Each dimension is bounded as well as
// the product, for an empty tensor's per-row or per-column scales are as
// many as its rows or columns.
func checkShape(fn, what string, n, rows, cols int) error {
	if rows < 0 || cols < 0 {
		return fmt.Errorf("%w: %s: %s shape = [%d, %d]; want dimensions ≥ 0", ErrSize, fn, what, rows, cols)
	}
	if rows > MaxElements || cols > MaxElements || cols > 0 && rows > MaxElements/cols {
		return fmt.Errorf("%w: %s: %s shape = [%d, %d]; want at most MaxElements = %d elements", ErrSize, fn, what, rows, cols, MaxElements)
	}
	if n >= 0 && n != rows*cols {
		return fmt.Errorf("%w: %s: %s has %d elements; want Rows·Cols = %d·%d = %d", ErrLength, fn, what, n, rows, cols, rows*cols)
	}
	return nil
}

// grid is a scheme laid on a [rows, cols] tensor: how many blocks (sets of
// elements sharing a scale) there are and which block each element is in.
type grid struct {
	rows, cols int
	s          Scheme
	blocks     int
}

// newGrid checks s and lays it on [rows, cols] for fn.
func newGrid(fn string, rows, cols int, s Scheme) (grid, error) {
	if err := s.check(fn); err != nil {
		return grid{}, err
	}
	g := grid{rows: rows, cols: cols, s: s}
	switch s.Granularity {
	case PerTensor:
		g.blocks = 1
	case PerChannel:
		g.blocks = rows
		if s.Channel == ChannelCols {
			g.blocks = cols
		}
	case PerGroup:
		axis, name := cols, "Cols"
		if s.Channel == ChannelCols {
			axis, name = rows, "Rows"
		}
		if s.Group < 1 || axis%s.Group != 0 {
			return grid{}, fmt.Errorf("%w: %s: Scheme.Group = %d; want a divisor of %s = %d", ErrGroup, fn, s.Group, name, axis)
		}
		g.blocks = rows * cols / s.Group
	}
	return g, nil
}

// block returns the block of element (r, c).
func (g grid) block(r, c int) int {
	s := g.s
	switch {
	case s.Granularity == PerChannel && s.Channel == ChannelRows:
		return r
	case s.Granularity == PerChannel:
		return c
	case s.Granularity == PerGroup && s.Channel == ChannelRows:
		return r*(g.cols/s.Group) + c/s.Group
	case s.Granularity == PerGroup:
		return (r/s.Group)*g.cols + c
	}
	return 0
}

// minPow2, maxPow2 are the exponents of the smallest and largest ScalePow2
// scale, those of E8M0.
const minPow2, maxPow2 = -127, 127

// format returns the compare format of f; ScalePow2 has none.
func (f ScaleFormat) format() (compare.Format, bool) {
	switch f {
	case ScaleFloat32:
		return compare.Float32, true
	case ScaleBinary16:
		return compare.Binary16, true
	case ScaleBFloat16:
		return compare.BFloat16, true
	}
	return 0, false
}

// up returns the smallest value of f that is ≥ q, for q > 0 finite, and
// false when there is none (q beyond the format's largest value).
func (f ScaleFormat) up(q float64) (float64, bool) {
	if cf, ok := f.format(); ok {
		r := cf.Round(q)
		if r < q {
			r += cf.ULP(r) // the next value up: exact (r and its last bit)
		}
		return r, r <= cf.Max()
	}
	frac, e := math.Frexp(q) // q = frac·2^e, 0.5 ≤ frac < 1
	if frac == 0.5 {
		e-- // q is a power of two
	}
	e = max(e, minPow2)
	return math.Ldexp(1, e), e <= maxPow2
}

// contains reports whether v is a positive finite value of f.
func (f ScaleFormat) contains(v float64) bool {
	if !(v > 0) || math.IsInf(v, 0) {
		return false
	}
	if cf, ok := f.format(); ok {
		return cf.Contains(v)
	}
	frac, e := math.Frexp(v)
	return frac == 0.5 && e-1 >= minPow2 && e-1 <= maxPow2
}

// nearest returns the integer nearest the exact quotient x/s, ties broken
// by mode, for a finite x and a scale s with at most 24 significand bits
// and s ≥ 2^−149 (every ScaleFormat value). Quotients beyond ±1024, which
// every caller clamps to its codes, come back as ±1025. The result is
// exact: the float64 quotient only seeds k, and k is then fixed by exact
// comparisons of x with k·s and (k + ½)·s, products of at most 13 and 24
// significand bits that float64 holds exactly.
func nearest(x, s float64, mode Rounding) int {
	q := x / s
	switch {
	case q > 1024:
		return 1025
	case q < -1024:
		return -1025
	}
	k := math.Floor(q)
	for k*s > x {
		k--
	}
	for (k+1)*s <= x {
		k++
	}
	// Now k·s ≤ x < (k+1)·s.
	mid := (k + 0.5) * s
	switch {
	case x < mid:
	case x > mid:
		k++
	case mode == HalfAway && mid > 0:
		k++
	case mode == HalfEven && math.Mod(k, 2) != 0:
		k++
	}
	return int(k)
}

// clamp returns v limited to [lo, hi].
func clamp(v, lo, hi int) int { return min(max(v, lo), hi) }
