package mask

import (
	"fmt"
	"math"
	"strings"

	"github.com/plumbref/plumb/internal/num"
)

// Unbounded as a Band extent means no limit on that side.
const Unbounded = -1

// Geometry is the shape a mask is laid on: Batch entries of Lq queries by Lk
// keys, and where the queries sit among the keys.
//
// Query i (0 ≤ i < Lq) has key position
//
//	p(i) = a + Offset + i,  a = Lk − Lq for AlignEnd, a = 0 for AlignStart.
//
// Masks that depend on positions (causal, band, window, prefix, packed)
// require 0 ≤ p(i) < Lk for every query: each query sits at one of the keys.
// Full and key-padding masks do not look at positions, so any Lq goes with
// them (cross-attention).
type Geometry struct {
	Batch  int
	Lq, Lk int
	Align  Align
	Offset int
}

// Pos is the key position p(i) of query i, exact whenever Check accepts g
// for a mask that uses positions (then 0 ≤ p(i) < Lk).
func (g Geometry) Pos(i int) int {
	a := 0
	if g.Align == AlignEnd {
		a = g.Lk - g.Lq
	}
	return a + g.Offset + i
}

func (g Geometry) String() string {
	return fmt.Sprintf("Batch=%d Lq=%d Lk=%d Align=%v Offset=%d", g.Batch, g.Lq, g.Lk, g.Align, g.Offset)
}

type kind int

const (
	kindNone kind = iota
	kindFull
	kindCausal
	kindBand
	kindPrefix
	kindPadding
	kindPacked
	kindIntersect
)

// Mask says which keys each query may see. Build one with Full, Causal,
// Band, Window, Prefix, KeyPadding, Packed or Intersect; the zero value is
// not a mask and every method reports ErrEmpty for it. A Mask is an
// immutable value, safe for concurrent use.
type Mask struct {
	kind          kind
	before, after int   // band; Unbounded or ≥ 0
	window        int   // > 0 when the band was made by Window
	prefix        int   // prefix length
	valid         []int // key padding: valid length per batch entry
	offsets       []int // packed: sequence boundaries
	block         Block
	parts         []Mask
}

// Full lets every query see every key.
func Full() Mask { return Mask{kind: kindFull} }

// Causal lets query position p see keys j ≤ p (Vaswani et al. 2017, §3.2.3:
// "prevent leftward information flow").
func Causal() Mask { return Mask{kind: kindCausal} }

// Band lets query position p see key j iff −before ≤ j − p ≤ after. An
// extent of Unbounded removes the limit on that side: Band(Unbounded, 0) is
// Causal and Band(Unbounded, Unbounded) is Full.
func Band(before, after int) (Mask, error) { return band(args{fn: "Band"}, before, after) }

// args names the arguments of a constructor in messages: fn is the
// function called, and an argument is called by its own name ("before"),
// or, when owner is set, as the field of a Spec ("specs[1].Before").
type args struct{ fn, owner string }

func (a args) name(arg, field string) string {
	if a.owner == "" {
		return arg
	}
	return a.owner + "." + field
}

func band(a args, before, after int) (Mask, error) {
	if before < 0 && before != Unbounded {
		return Mask{}, fmt.Errorf("%w: %s: %s = %d; want ≥ 0 or Unbounded", ErrBand, a.fn, a.name("before", "Before"), before)
	}
	if after < 0 && after != Unbounded {
		return Mask{}, fmt.Errorf("%w: %s: %s = %d; want ≥ 0 or Unbounded", ErrBand, a.fn, a.name("after", "After"), after)
	}
	return Mask{kind: kindBand, before: before, after: after}, nil
}

// Window is a causal sliding window of n keys ending at the query itself:
// query position p sees keys p−n+1 … p, that is p − n < j ≤ p, or
// Band(n−1, 0). For n = 3 and p = 5 the visible keys are 3, 4 and 5.
//
// Sources differ on whether a window of W counts the query: Beltagy et al.
// 2020 (arXiv 2004.05150, §3.1) describe ½w tokens on each side; Jiang et
// al. 2023 (arXiv 2310.06825, §2) write i−W ≤ j ≤ i in the text while the
// figure and a rolling cache of W entries give i−W < j ≤ i. Window(n) is the
// latter; use Band for any other reading.
func Window(n int) (Mask, error) { return window(args{fn: "Window"}, n) }

func window(a args, n int) (Mask, error) {
	if n < 1 {
		return Mask{}, fmt.Errorf("%w: %s: %s = %d; want ≥ 1: a window holds at least the query's own key", ErrWindow, a.fn, a.name("n", "Size"), n)
	}
	return Mask{kind: kindBand, before: n - 1, after: 0, window: n}, nil
}

// Prefix is the prefix-bidirectional mask: key positions below p form a
// prefix that every query sees, and the rest is causal. Query position q
// sees key j iff j < p or j ≤ q. Prefix(0) is Causal.
func Prefix(p int) (Mask, error) { return prefix(args{fn: "Prefix"}, p) }

func prefix(a args, p int) (Mask, error) {
	if p < 0 {
		return Mask{}, fmt.Errorf("%w: %s: %s = %d; want ≥ 0", ErrPrefix, a.fn, a.name("p", "Length"), p)
	}
	return Mask{kind: kindPrefix, prefix: p}, nil
}

// KeyPadding hides padded keys: in batch entry b, key j is visible iff
// j < valid[b]. valid must have one entry per batch entry, each in [0, Lk];
// that is checked when the mask is laid on a Geometry.
func KeyPadding(valid []int) (Mask, error) { return keyPadding(args{fn: "KeyPadding"}, valid) }

func keyPadding(a args, valid []int) (Mask, error) {
	for b, v := range valid {
		if v < 0 {
			return Mask{}, fmt.Errorf("%w: %s: %s[%d] = %d; want ≥ 0", ErrValidLength, a.fn, a.name("valid", "Valid"), b, v)
		}
	}
	return Mask{kind: kindPadding, valid: append([]int(nil), valid...)}, nil
}

// Packed is the block-diagonal mask of several sequences packed into one
// row of Lk keys. offsets are the sequence boundaries: sequence s holds key
// positions offsets[s] ≤ j < offsets[s+1]; offsets[0] must be 0, the
// entries must increase strictly, and the last must equal Lk (checked on a
// Geometry). Query position p sees key j iff both lie in the same sequence
// and, for BlockCausal, j ≤ p.
func Packed(offsets []int, block Block) (Mask, error) {
	return packed(args{fn: "Packed"}, offsets, block)
}

func packed(a args, offsets []int, block Block) (Mask, error) {
	if err := blockWords.CheckAt(a.fn+": "+a.name("block", "Block"), block); err != nil {
		return Mask{}, err
	}
	name := a.name("offsets", "Offsets")
	if len(offsets) < 2 {
		return Mask{}, fmt.Errorf("%w: %s: %s = %v; want at least 2 entries (0 and the total length)", ErrSegments, a.fn, name, offsets)
	}
	if offsets[0] != 0 {
		return Mask{}, fmt.Errorf("%w: %s: %s[0] = %d; want 0", ErrSegments, a.fn, name, offsets[0])
	}
	for s := 1; s < len(offsets); s++ {
		if offsets[s] <= offsets[s-1] {
			return Mask{}, fmt.Errorf("%w: %s: %s[%d] = %d; want > %s[%d] = %d: offsets increase strictly",
				ErrSegments, a.fn, name, s, offsets[s], name, s-1, offsets[s-1])
		}
	}
	return Mask{kind: kindPacked, offsets: append([]int(nil), offsets...), block: block}, nil
}

// Intersect is the mask whose visible keys are those visible in every one of
// masks. Nested intersections are flattened.
func Intersect(masks ...Mask) (Mask, error) {
	if len(masks) == 0 {
		return Mask{}, fmt.Errorf("%w: Intersect: masks has 0 elements; want at least one mask", ErrEmpty)
	}
	var parts []Mask
	for k, m := range masks {
		if m.kind == kindNone {
			return Mask{}, fmt.Errorf("%w: Intersect: masks[%d] = the zero Mask; want one made by Full, Causal, …", ErrEmpty, k)
		}
		if m.kind == kindIntersect {
			parts = append(parts, m.parts...)
		} else {
			parts = append(parts, m)
		}
	}
	if len(parts) == 1 {
		return parts[0], nil
	}
	return Mask{kind: kindIntersect, parts: parts}, nil
}

// IsZero reports whether m is the zero Mask, which is not a mask: every
// method refuses it with ErrEmpty. A caller that offers "no mask" as a
// default (attention reads it as Full) tests for it with IsZero.
func (m Mask) IsZero() bool { return m.kind == kindNone }

// UsesPositions reports whether the mask depends on query positions, and so
// requires every query to sit at one of the keys, 0 ≤ p(i) < Lk (see
// Geometry); every method refuses a query outside with ErrOffset. It is
// true for Causal, Band, Window, Prefix and Packed, and for an
// intersection with one of them: each compares j with p(i), and a Packed
// query must sit in one of the sequences to have keys of its own. The kind
// decides, not its parameters: Band(Unbounded, Unbounded) and a Prefix as
// long as the keys see every key wherever the query is, and still need the
// queries at keys. It is false for Full and KeyPadding, which never read
// p(i): no query position is out of range for them, and any Lq and Offset
// go with them.
func (m Mask) UsesPositions() bool {
	switch m.kind {
	case kindCausal, kindBand, kindPrefix, kindPacked:
		return true
	case kindIntersect:
		for _, p := range m.parts {
			if p.UsesPositions() {
				return true
			}
		}
	}
	return false
}

// String describes the mask, for messages.
func (m Mask) String() string {
	switch m.kind {
	case kindFull:
		return "Full"
	case kindCausal:
		return "Causal"
	case kindBand:
		if m.window > 0 {
			return fmt.Sprintf("Window(%d)", m.window)
		}
		return fmt.Sprintf("Band(%s, %s)", extent(m.before), extent(m.after))
	case kindPrefix:
		return fmt.Sprintf("Prefix(%d)", m.prefix)
	case kindPadding:
		return fmt.Sprintf("KeyPadding(%v)", m.valid)
	case kindPacked:
		return fmt.Sprintf("Packed(%v, %v)", m.offsets, m.block)
	case kindIntersect:
		s := make([]string, len(m.parts))
		for k, p := range m.parts {
			s[k] = p.String()
		}
		return "Intersect(" + strings.Join(s, ", ") + ")"
	}
	return "Mask(none)"
}

func extent(e int) string {
	if e == Unbounded {
		return "Unbounded"
	}
	return fmt.Sprint(e)
}

// Check reports whether the mask can be laid on g: sizes are not negative
// and their product fits an int, the alignment is known, query positions
// are in range where the mask uses them, and key-padding lengths and
// packed offsets fit the batch and the keys. Every other method that takes
// a Geometry checks the same, and those that write the mask out also check
// MaxElements.
func (m Mask) Check(g Geometry) error { return m.check("Mask.Check", g) }

// check is Check for a call of the method fn.
func (m Mask) check(fn string, g Geometry) error {
	if m.kind == kindNone {
		return fmt.Errorf("%w: %s: the Mask is the zero Mask; want one made by Full, Causal, …", ErrEmpty, fn)
	}
	for _, s := range []struct {
		name string
		v    int
	}{{"Batch", g.Batch}, {"Lq", g.Lq}, {"Lk", g.Lk}} {
		if s.v < 0 {
			return fmt.Errorf("%w: %s: g.%s = %d; want ≥ 0", ErrSize, fn, s.name, s.v)
		}
	}
	if err := alignWords.CheckAt(fn+": g.Align", g.Align); err != nil {
		return err
	}
	if hi := math.MaxInt / max(1, g.Lq) / max(1, g.Lk); g.Batch > hi {
		return fmt.Errorf("%w: %s: g.Batch·Lq·Lk = %d·%d·%d; want a count that fits an int", ErrSize, fn, g.Batch, g.Lq, g.Lk)
	}
	if m.UsesPositions() && g.Lq > 0 {
		// The first query sits at a + Offset and the last at a + Offset +
		// Lq − 1; both lie in [0, Lk) iff −a ≤ Offset ≤ Lk − Lq − a. The
		// bounds are compared without forming a + Offset, which could
		// overflow.
		a := 0
		if g.Align == AlignEnd {
			a = g.Lk - g.Lq
		}
		lo, hi := -a, g.Lk-g.Lq-a
		if g.Offset < lo || g.Offset > hi {
			if lo > hi {
				return fmt.Errorf("%w: %s: g.Lq = %d; want ≤ g.Lk = %d: %v needs every query at a key", ErrOffset, fn, g.Lq, g.Lk, m)
			}
			return fmt.Errorf("%w: %s: g.Offset = %d; want %d ≤ Offset ≤ %d: %v needs every query at a key (align %v, Lq = %d, Lk = %d)",
				ErrOffset, fn, g.Offset, lo, hi, m, g.Align, g.Lq, g.Lk)
		}
	}
	return m.checkParts(fn, g)
}

func (m Mask) checkParts(fn string, g Geometry) error {
	switch m.kind {
	case kindPadding:
		if len(m.valid) != g.Batch {
			return fmt.Errorf("%w: %s: KeyPadding has %d valid lengths; want one per batch entry, g.Batch = %d", ErrValidLength, fn, len(m.valid), g.Batch)
		}
		for b, v := range m.valid {
			if v > g.Lk {
				return fmt.Errorf("%w: %s: KeyPadding valid[%d] = %d; want ≤ g.Lk = %d", ErrValidLength, fn, b, v, g.Lk)
			}
		}
	case kindPacked:
		if last := m.offsets[len(m.offsets)-1]; last != g.Lk {
			return fmt.Errorf("%w: %s: Packed offsets[%d] = %d, the last; want the key length g.Lk = %d", ErrSegments, fn, len(m.offsets)-1, last, g.Lk)
		}
	case kindPrefix:
		if m.prefix > g.Lk {
			return fmt.Errorf("%w: %s: Prefix p = %d; want ≤ g.Lk = %d", ErrPrefix, fn, m.prefix, g.Lk)
		}
	case kindIntersect:
		for _, p := range m.parts {
			if err := p.checkParts(fn, g); err != nil {
				return err
			}
		}
	}
	return nil
}

// sees is the definition; the caller has checked g and the indices.
func (m Mask) sees(g Geometry, b, i, j int) bool {
	switch m.kind {
	case kindFull:
		return true
	case kindCausal:
		return j <= g.Pos(i)
	case kindBand:
		d := j - g.Pos(i)
		return (m.before == Unbounded || -m.before <= d) && (m.after == Unbounded || d <= m.after)
	case kindPrefix:
		return j < m.prefix || j <= g.Pos(i)
	case kindPadding:
		return j < m.valid[b]
	case kindPacked:
		p := g.Pos(i)
		if segment(m.offsets, p) != segment(m.offsets, j) {
			return false
		}
		return m.block == BlockFull || j <= p
	case kindIntersect:
		for _, part := range m.parts {
			if !part.sees(g, b, i, j) {
				return false
			}
		}
		return true
	}
	return false
}

// segment is the index s with offsets[s] ≤ x < offsets[s+1], by bisection.
func segment(offsets []int, x int) int {
	lo, hi := 0, len(offsets)-1
	for hi-lo > 1 {
		mid := int(uint(lo+hi) >> 1)
		if offsets[mid] <= x {
			lo = mid
		} else {
			hi = mid
		}
	}
	return lo
}

// within checks, for a call of fn, that count, the product of the sizes
// named by what (with the values vals, for the message), is at most
// MaxElements; each factor is divided out in turn, so nothing overflows.
func within(fn, what string, vals ...int) error {
	room := MaxElements
	for _, v := range vals {
		if v == 0 {
			return nil
		}
	}
	for _, v := range vals {
		if v > room {
			return fmt.Errorf("%w: %s: %s = %s; want at most MaxElements = %d", ErrSize, fn, what, num.Factors(vals...), MaxElements)
		}
		room /= v
	}
	return nil
}

// Sees reports whether, in batch entry b, query i may see key j.
func (m Mask) Sees(g Geometry, b, i, j int) (bool, error) {
	const fn = "Mask.Sees"
	if err := m.check(fn, g); err != nil {
		return false, err
	}
	if b < 0 || b >= g.Batch || i < 0 || i >= g.Lq || j < 0 || j >= g.Lk {
		return false, fmt.Errorf("%w: %s: (b, i, j) = (%d, %d, %d); want 0 ≤ b < g.Batch = %d, 0 ≤ i < g.Lq = %d, 0 ≤ j < g.Lk = %d",
			ErrIndex, fn, b, i, j, g.Batch, g.Lq, g.Lk)
	}
	return m.sees(g, b, i, j), nil
}

// Visible is the boolean form of the mask on g: a [Batch, Lq, Lk] row-major
// slice, true where the query may see the key.
//
// Special cases are:
//
//	Lk = 0: every row is empty (see EmptyRows)
//	Lq = 0 or Batch = 0: an empty slice
//	Batch·Lq·Lk > MaxElements: ErrSize
func (m Mask) Visible(g Geometry) ([]bool, error) { return m.visible("Mask.Visible", g) }

// visible is Visible for a call of the method fn.
func (m Mask) visible(fn string, g Geometry) ([]bool, error) {
	if err := m.check(fn, g); err != nil {
		return nil, err
	}
	if err := within(fn, "g.Batch·Lq·Lk", g.Batch, g.Lq, g.Lk); err != nil {
		return nil, err
	}
	out := make([]bool, g.Batch*g.Lq*g.Lk)
	m.rows(g, func(b, i int, row []bool) {
		copy(out[(b*g.Lq+i)*g.Lk:], row)
	})
	return out, nil
}

// Rows calls fn for every (batch entry, query) in order with the row of Lk
// visibility flags; row is reused between calls. It lets a kernel walk a
// mask without holding all of it. It checks g as Check does (and returns
// that error before any call of fn); Lk > MaxElements is ErrSize and a nil
// fn ErrEmpty.
func (m Mask) Rows(g Geometry, fn func(b, i int, row []bool)) error {
	const name = "Mask.Rows"
	if err := m.check(name, g); err != nil {
		return err
	}
	if g.Lk > MaxElements {
		return fmt.Errorf("%w: %s: g.Lk = %d; want at most MaxElements = %d keys in the row lent to fn", ErrSize, name, g.Lk, MaxElements)
	}
	if fn == nil {
		return fmt.Errorf("%w: %s: fn = nil; want a function to call with each row", ErrEmpty, name)
	}
	m.rows(g, fn)
	return nil
}

// rows is Rows once g has been checked.
func (m Mask) rows(g Geometry, fn func(b, i int, row []bool)) {
	row := make([]bool, g.Lk)
	for b := 0; b < g.Batch; b++ {
		for i := 0; i < g.Lq; i++ {
			for j := range row {
				row[j] = m.sees(g, b, i, j)
			}
			fn(b, i, row)
		}
	}
}

// Bias is the additive form of the mask on g with fill −Inf: a [Batch, Lq,
// Lk] slice holding 0 where the query may see the key and −Inf elsewhere, to
// be added to attention logits before the softmax (Vaswani et al. 2017,
// §3.2.3). See BiasFill for a finite fill.
func (m Mask) Bias(g Geometry) ([]float64, error) {
	return m.biasFill("Mask.Bias", g, math.Inf(-1))
}

// BiasFill is Bias with a fill chosen by the caller: 0 where visible, fill
// elsewhere. A finite fill (a large negative number such as −1e9 or the
// lowest value of a low-precision format) is what many kernels use instead
// of −Inf; note that with a finite fill a row that sees no key gets a
// uniform softmax over all keys instead of an empty one.
//
// Special cases are:
//
//	fill = NaN or +Inf: error ErrFill
//	fill = −Inf: same as Bias
//	Batch·Lq·Lk > MaxElements: ErrSize (so also for Bias)
func (m Mask) BiasFill(g Geometry, fill float64) ([]float64, error) {
	return m.biasFill("Mask.BiasFill", g, fill)
}

func (m Mask) biasFill(fn string, g Geometry, fill float64) ([]float64, error) {
	if math.IsNaN(fill) || math.IsInf(fill, 1) {
		return nil, fmt.Errorf("%w: %s: fill = %v; want a finite value or −Inf", ErrFill, fn, fill)
	}
	vis, err := m.visible(fn, g)
	if err != nil {
		return nil, err
	}
	out := make([]float64, len(vis))
	for k, v := range vis {
		if !v {
			out[k] = fill
		}
	}
	return out, nil
}

// Row names one query row of one batch entry.
type Row struct{ Batch, Query int }

// EmptyRows lists, in order, the (batch entry, query) rows that see no key
// at all on g. Attention over such a row has an empty softmax; what a
// kernel outputs there is a convention of its own (see the attention
// package's empty-row policy).
//
// Special cases are:
//
//	Batch·Lq > MaxElements (the rows it could list): ErrSize
//	Lk > MaxElements: ErrSize
func (m Mask) EmptyRows(g Geometry) ([]Row, error) {
	const fn = "Mask.EmptyRows"
	if err := m.check(fn, g); err != nil {
		return nil, err
	}
	if err := within(fn, "g.Batch·Lq", g.Batch, g.Lq); err != nil {
		return nil, err
	}
	if err := within(fn, "g.Lk", g.Lk); err != nil {
		return nil, err
	}
	var rows []Row
	m.rows(g, func(b, i int, row []bool) {
		for _, v := range row {
			if v {
				return
			}
		}
		rows = append(rows, Row{b, i})
	})
	return rows, nil
}
