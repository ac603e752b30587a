package mask

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// must stops the test on a constructor error: must(t)(Window(3)).
func must(t testing.TB) func(Mask, error) Mask {
	return func(m Mask, err error) Mask {
		t.Helper()
		ensure.NoError(t, err)
		return m
	}
}

func vis(t testing.TB, m Mask, g Geometry) []bool {
	t.Helper()
	v, err := m.Visible(g)
	ensure.NoError(t, err)
	return v
}

// TestWindowExample is the worked example of Window's documentation:
// Window(n) sees keys p − n < j ≤ p (the window of Jiang et al. 2023, arXiv
// 2310.06825, §2, as its figure and rolling cache of W entries count it),
// so Window(3) at query position 5 sees keys 3, 4 and 5.
func TestWindowExample(t *testing.T) {
	m := must(t)(Window(3))
	g := Geometry{Batch: 1, Lq: 8, Lk: 8}
	var seen []int
	for j := 0; j < 8; j++ {
		s, err := m.Sees(g, 0, 5, j)
		ensure.NoError(t, err)
		if s {
			seen = append(seen, j)
		}
	}
	expect.Equal(t, []int{3, 4, 5}, seen)
}

func TestErrors(t *testing.T) {
	g := Geometry{Batch: 1, Lq: 4, Lk: 4}
	_, errBand := Band(-2, 0)
	_, errBandAfter := Band(0, -3)
	_, errWin := Window(-1)
	_, errWin0 := Window(0)
	_, errPrefix := Prefix(-1)
	_, errPad := KeyPadding([]int{3, -1})
	_, errPackedStart := Packed([]int{1, 4}, BlockCausal)
	_, errPackedOrder := Packed([]int{0, 3, 3, 4}, BlockCausal)
	_, errPackedShort := Packed([]int{0}, BlockFull)
	_, errBlock := Packed([]int{0, 4}, Block(7))
	_, errEmpty := Intersect()
	_, errZero := Intersect(Causal(), Mask{})
	packed := must(t)(Packed([]int{0, 2, 5}, BlockCausal))
	pad := must(t)(KeyPadding([]int{2, 3}))
	pref := must(t)(Prefix(6))

	_, errNeg := Causal().Visible(Geometry{Batch: 1, Lq: -1, Lk: 4})
	_, errNegK := Full().Visible(Geometry{Batch: 1, Lq: 1, Lk: -4})
	_, errNegB := Full().Visible(Geometry{Batch: -1, Lq: 1, Lk: 4})
	_, errOffset := Causal().Visible(Geometry{Batch: 1, Lq: 2, Lk: 4, Align: AlignStart, Offset: 3})
	_, errOffsetNeg := Causal().Visible(Geometry{Batch: 1, Lq: 2, Lk: 4, Align: AlignStart, Offset: -1})
	_, errLqGtLk := Causal().Visible(Geometry{Batch: 1, Lq: 5, Lk: 4})
	_, errOverflow := Causal().Visible(Geometry{Batch: 1, Lq: 5, Lk: 8, Align: AlignStart, Offset: math.MaxInt - 1})
	_, errHuge := Full().Visible(Geometry{Batch: 1 << 30, Lq: 1 << 20, Lk: 1 << 20})
	_, errAlign := Full().Visible(Geometry{Batch: 1, Lq: 1, Lk: 1, Align: Align(9)})
	_, errTotal := packed.Visible(g)
	_, errPadBatch := pad.Visible(g)
	_, errPadLong := pad.Visible(Geometry{Batch: 2, Lq: 1, Lk: 2})
	_, errPrefixLong := pref.Visible(g)
	_, errFillNaN := Causal().BiasFill(g, math.NaN())
	_, errFillInf := Causal().BiasFill(g, math.Inf(1))
	_, errZeroMask := Mask{}.Visible(g)
	_, errIndex := Causal().Sees(g, 0, 4, 0)
	_, errRows := Causal().EmptyRows(Geometry{Lq: -2})
	_, errBias := Causal().Bias(Geometry{Lk: -2})
	errCheck := Causal().Check(Geometry{Batch: -2})

	tests := []struct {
		name     string
		err      error
		sentinel error
		want     string // the whole message
	}{
		{"band before", errBand, ErrBand, "mask: invalid band: Band: before = -2; want ≥ 0 or Unbounded"},
		{"band after", errBandAfter, ErrBand, "mask: invalid band: Band: after = -3; want ≥ 0 or Unbounded"},
		{"negative window", errWin, ErrWindow, "mask: invalid window: Window: n = -1; want ≥ 1: a window holds at least the query's own key"},
		{"zero window", errWin0, ErrWindow, "mask: invalid window: Window: n = 0; want ≥ 1: a window holds at least the query's own key"},
		{"negative prefix", errPrefix, ErrPrefix, "mask: invalid prefix: Prefix: p = -1; want ≥ 0"},
		{"negative valid length", errPad, ErrValidLength, "mask: invalid valid length: KeyPadding: valid[1] = -1; want ≥ 0"},
		{"offsets not from 0", errPackedStart, ErrSegments, "mask: invalid sequence offsets: Packed: offsets[0] = 1; want 0"},
		{"offsets not increasing", errPackedOrder, ErrSegments, "mask: invalid sequence offsets: Packed: offsets[2] = 3; want > offsets[1] = 3: offsets increase strictly"},
		{"offsets too short", errPackedShort, ErrSegments, "mask: invalid sequence offsets: Packed: offsets = [0]; want at least 2 entries (0 and the total length)"},
		{"block kind", errBlock, ErrBlock, "mask: invalid block kind: Packed: block = 7; want one of causal, full"},
		{"no masks", errEmpty, ErrEmpty, "mask: no mask: Intersect: masks has 0 elements; want at least one mask"},
		{"zero mask in intersection", errZero, ErrEmpty, "mask: no mask: Intersect: masks[1] = the zero Mask; want one made by Full, Causal, …"},
		{"negative Lq", errNeg, ErrSize, "mask: invalid size: Mask.Visible: g.Lq = -1; want ≥ 0"},
		{"negative Lk", errNegK, ErrSize, "mask: invalid size: Mask.Visible: g.Lk = -4; want ≥ 0"},
		{"negative batch", errNegB, ErrSize, "mask: invalid size: Mask.Visible: g.Batch = -1; want ≥ 0"},
		{"offset past the keys", errOffset, ErrOffset, "mask: query position out of range: Mask.Visible: g.Offset = 3; want 0 ≤ Offset ≤ 2: Causal needs every query at a key (align start, Lq = 2, Lk = 4)"},
		{"negative offset", errOffsetNeg, ErrOffset, "mask: query position out of range: Mask.Visible: g.Offset = -1; want 0 ≤ Offset ≤ 2: Causal needs every query at a key (align start, Lq = 2, Lk = 4)"},
		{"more queries than keys, end-aligned", errLqGtLk, ErrOffset, "mask: query position out of range: Mask.Visible: g.Lq = 5; want ≤ g.Lk = 4: Causal needs every query at a key"},
		{"offset overflow", errOverflow, ErrOffset, "mask: query position out of range: Mask.Visible: g.Offset = 9223372036854775806; want 0 ≤ Offset ≤ 3: Causal needs every query at a key (align start, Lq = 5, Lk = 8)"},
		{"size overflow", errHuge, ErrSize, "mask: invalid size: Mask.Visible: g.Batch·Lq·Lk = 1073741824·1048576·1048576; want a count that fits an int"},
		{"unknown alignment", errAlign, ErrAlign, "mask: invalid alignment: Mask.Visible: g.Align = 9; want one of end, start"},
		{"last offset not the total", errTotal, ErrSegments, "mask: invalid sequence offsets: Mask.Visible: Packed offsets[2] = 5, the last; want the key length g.Lk = 4"},
		{"valid lengths per batch", errPadBatch, ErrValidLength, "mask: invalid valid length: Mask.Visible: KeyPadding has 2 valid lengths; want one per batch entry, g.Batch = 1"},
		{"valid length past keys", errPadLong, ErrValidLength, "mask: invalid valid length: Mask.Visible: KeyPadding valid[1] = 3; want ≤ g.Lk = 2"},
		{"prefix past keys", errPrefixLong, ErrPrefix, "mask: invalid prefix: Mask.Visible: Prefix p = 6; want ≤ g.Lk = 4"},
		{"NaN fill", errFillNaN, ErrFill, "mask: invalid fill: Mask.BiasFill: fill = NaN; want a finite value or −Inf"},
		{"+Inf fill", errFillInf, ErrFill, "mask: invalid fill: Mask.BiasFill: fill = +Inf; want a finite value or −Inf"},
		{"zero mask", errZeroMask, ErrEmpty, "mask: no mask: Mask.Visible: the Mask is the zero Mask; want one made by Full, Causal, …"},
		{"index", errIndex, ErrIndex, "mask: index out of range: Mask.Sees: (b, i, j) = (0, 4, 0); want 0 ≤ b < g.Batch = 1, 0 ≤ i < g.Lq = 4, 0 ≤ j < g.Lk = 4"},
		{"rows", errRows, ErrSize, "mask: invalid size: Mask.EmptyRows: g.Lq = -2; want ≥ 0"},
		{"bias", errBias, ErrSize, "mask: invalid size: Mask.Bias: g.Lk = -2; want ≥ 0"},
		{"check", errCheck, ErrSize, "mask: invalid size: Mask.Check: g.Batch = -2; want ≥ 0"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			ensure.ErrorIs(t, tc.err, tc.sentinel)
			expect.EqualError(t, tc.err, tc.want)
		})
	}
}

// TestPositionFreeMasksTakeAnyLengths: Full and KeyPadding ignore positions,
// so cross-attention shapes (Lq > Lk, any offset) are accepted.
func TestPositionFreeMasksTakeAnyLengths(t *testing.T) {
	g := Geometry{Batch: 2, Lq: 7, Lk: 3, Align: AlignStart, Offset: 100}
	v := vis(t, Full(), g)
	expect.Len(t, v, 2*7*3)
	pad := must(t)(KeyPadding([]int{1, 3}))
	v = vis(t, pad, g)
	expect.Equal(t, []bool{true, false, false}, v[:3])
	expect.Equal(t, []bool{true, true, true}, v[7*3:7*3+3])
	expect.False(t, pad.UsesPositions())
	both := must(t)(Intersect(pad, Causal()))
	expect.True(t, both.UsesPositions())
}

func TestEmptyRowsAndZeroSizes(t *testing.T) {
	rows, err := Full().EmptyRows(Geometry{Batch: 2, Lq: 2, Lk: 0})
	ensure.NoError(t, err)
	expect.Equal(t, []Row{{0, 0}, {0, 1}, {1, 0}, {1, 1}}, rows, "Lk = 0: every row is empty")
	v, err := Causal().Visible(Geometry{Batch: 3, Lq: 0, Lk: 5})
	ensure.NoError(t, err)
	expect.Empty(t, v)
	v, err = Full().Visible(Geometry{Batch: 0, Lq: 2, Lk: 2})
	ensure.NoError(t, err)
	expect.Empty(t, v)
	pad := must(t)(KeyPadding([]int{0, 2}))
	rows, err = pad.EmptyRows(Geometry{Batch: 2, Lq: 2, Lk: 2})
	ensure.NoError(t, err)
	expect.Equal(t, []Row{{0, 0}, {0, 1}}, rows)
	b, err := pad.BiasFill(Geometry{Batch: 2, Lq: 1, Lk: 2}, -1e4)
	ensure.NoError(t, err)
	expect.Equal(t, []float64{-1e4, -1e4, 0, 0}, b)
}

func TestStrings(t *testing.T) {
	tests := []struct {
		m    Mask
		want string
	}{
		{Full(), "Full"},
		{Causal(), "Causal"},
		{must(t)(Band(2, Unbounded)), "Band(2, Unbounded)"},
		{must(t)(Window(4)), "Window(4)"},
		{must(t)(Prefix(3)), "Prefix(3)"},
		{must(t)(KeyPadding([]int{1, 2})), "KeyPadding([1 2])"},
		{must(t)(Packed([]int{0, 3}, BlockFull)), "Packed([0 3], full)"},
		{must(t)(Intersect(Causal(), must(t)(Window(2)))), "Intersect(Causal, Window(2))"},
		{Mask{}, "Mask(none)"},
	}
	for _, tc := range tests {
		expect.Equal(t, tc.want, tc.m.String())
	}
	expect.True(t, Mask{}.IsZero())
	expect.False(t, Full().IsZero())
	expect.False(t, must(t)(Intersect(Causal())).IsZero())
	// String is the word of mask/doc.go's conventions (vocabulary.json).
	expect.Equal(t, "end", AlignEnd.String())
	expect.Equal(t, "start", AlignStart.String())
	expect.Equal(t, "Align(5)", Align(5).String())
	expect.Equal(t, "causal", BlockCausal.String())
	expect.Equal(t, "full", BlockFull.String())
	expect.Equal(t, "Block(3)", Block(3).String())
	expect.Equal(t, "Batch=1 Lq=2 Lk=3 Align=start Offset=1", Geometry{1, 2, 3, AlignStart, 1}.String())
	var kinds []string
	for _, k := range KindFull.Values() {
		kinds = append(kinds, k.String())
	}
	expect.Equal(t, []string{"full", "causal", "band", "window", "prefix", "key-padding", "packed"}, kinds)
	expect.Equal(t, "Kind(7)", Kind(7).String())
	expect.Equal(t, "causal", ALiBiCausal.String())
	expect.Equal(t, "symmetric", ALiBiSymmetric.String())
	expect.Equal(t, "past-only", ALiBiPastOnly.String())
	expect.Equal(t, "ALiBiForm(3)", ALiBiForm(3).String())
}

// randomGeometry draws lengths with Lq ≤ Lk and an alignment and offset
// that keep every query at a key.
func randomGeometry(r *rand.Rand) Geometry {
	lk := 1 + r.IntN(12)
	lq := 1 + r.IntN(lk)
	g := Geometry{Batch: 1 + r.IntN(3), Lq: lq, Lk: lk}
	if r.IntN(2) == 0 {
		g.Align = AlignStart
		g.Offset = r.IntN(lk - lq + 1)
	} else {
		g.Offset = -r.IntN(lk - lq + 1)
	}
	return g
}

func randomMask(t testing.TB, r *rand.Rand, g Geometry, depth int) Mask {
	switch r.IntN(8) {
	case 0:
		return Full()
	case 1:
		return Causal()
	case 2:
		ext := func() int {
			if r.IntN(4) == 0 {
				return Unbounded
			}
			return r.IntN(6)
		}
		return must(t)(Band(ext(), ext()))
	case 3:
		return must(t)(Window(1 + r.IntN(8)))
	case 4:
		return must(t)(Prefix(r.IntN(g.Lk + 1)))
	case 5:
		valid := make([]int, g.Batch)
		for b := range valid {
			valid[b] = r.IntN(g.Lk + 1)
		}
		return must(t)(KeyPadding(valid))
	case 6:
		offs := []int{0}
		for offs[len(offs)-1] < g.Lk {
			offs = append(offs, offs[len(offs)-1]+1+r.IntN(g.Lk-offs[len(offs)-1]))
		}
		return must(t)(Packed(offs, Block(r.IntN(2))))
	}
	if depth > 1 {
		return Causal()
	}
	return must(t)(Intersect(randomMask(t, r, g, depth+1), randomMask(t, r, g, depth+1)))
}

// TestProperties checks identities between mask kinds on random geometries
// (fixed seed).
func TestProperties(t *testing.T) {
	r := rand.New(rand.NewPCG(2026, 12))
	for iter := 0; iter < 400; iter++ {
		g := randomGeometry(r)
		causal := vis(t, Causal(), g)
		full := vis(t, Full(), g)

		// A window at least as long as the keys equals causal.
		w := must(t)(Window(g.Lk + r.IntN(5)))
		ensure.Equal(t, causal, vis(t, w, g), "Window(≥Lk) on %v", g)
		// A band unbounded on both sides equals full; unbounded before and 0
		// after equals causal.
		ensure.Equal(t, full, vis(t, must(t)(Band(Unbounded, Unbounded)), g), "%v", g)
		ensure.Equal(t, causal, vis(t, must(t)(Band(Unbounded, 0)), g), "%v", g)
		// Prefix(0) is causal.
		ensure.Equal(t, causal, vis(t, must(t)(Prefix(0)), g), "%v", g)

		// End-aligned with equal lengths and no offset equals the square
		// causal mask j ≤ i.
		sq := Geometry{Batch: 1, Lq: g.Lk, Lk: g.Lk}
		sqv := vis(t, Causal(), sq)
		for i := 0; i < g.Lk; i++ {
			for j := 0; j < g.Lk; j++ {
				ensure.Equal(t, j <= i, sqv[i*g.Lk+j])
			}
		}

		// Packed with one sequence equals its block kind.
		one := []int{0, g.Lk}
		ensure.Equal(t, causal, vis(t, must(t)(Packed(one, BlockCausal)), g), "%v", g)
		ensure.Equal(t, full, vis(t, must(t)(Packed(one, BlockFull)), g), "%v", g)

		// Intersection is commutative and idempotent, and is the
		// element-wise AND.
		a, b := randomMask(t, r, g, 0), randomMask(t, r, g, 0)
		va, vb := vis(t, a, g), vis(t, b, g)
		ab := vis(t, must(t)(Intersect(a, b)), g)
		ba := vis(t, must(t)(Intersect(b, a)), g)
		ensure.Equal(t, ab, ba, "%v ∩ %v on %v", a, b, g)
		ensure.Equal(t, va, vis(t, must(t)(Intersect(a, a)), g), "%v ∩ itself on %v", a, g)
		for k := range ab {
			ensure.Equal(t, va[k] && vb[k], ab[k])
		}

		// The bias is 0 exactly where visible and the fill elsewhere, and
		// EmptyRows lists exactly the rows with no true.
		bias, err := a.Bias(g)
		ensure.NoError(t, err)
		for k, v := range va {
			if v {
				ensure.Equal(t, 0.0, bias[k])
			} else {
				ensure.True(t, math.IsInf(bias[k], -1))
			}
		}
		rows, err := a.EmptyRows(g)
		ensure.NoError(t, err)
		var want []Row
		for bb := 0; bb < g.Batch; bb++ {
			for i := 0; i < g.Lq; i++ {
				any := false
				for j := 0; j < g.Lk; j++ {
					any = any || va[(bb*g.Lq+i)*g.Lk+j]
				}
				if !any {
					want = append(want, Row{bb, i})
				}
			}
		}
		ensure.Equal(t, want, rows, "EmptyRows of %v on %v", a, g)
	}
}

// TestConstructorsCopy: masks do not alias the caller's slices.
func TestConstructorsCopy(t *testing.T) {
	valid := []int{1}
	pad := must(t)(KeyPadding(valid))
	offs := []int{0, 2}
	pk := must(t)(Packed(offs, BlockFull))
	valid[0], offs[1] = 0, 1
	g := Geometry{Batch: 1, Lq: 2, Lk: 2}
	expect.Equal(t, []bool{true, false, true, false}, vis(t, pad, g))
	expect.Equal(t, []bool{true, true, true, true}, vis(t, pk, g))
}

// FuzzMask builds masks from arbitrary parameters: no panic, and either an
// error wrapping a sentinel or results of consistent shapes.
func FuzzMask(f *testing.F) {
	f.Add(uint8(1), 1, 4, 4, false, 0, 2, 1, -3.5)
	f.Add(uint8(6), 2, 3, 9, true, 1, 3, 0, math.Inf(-1))
	f.Add(uint8(5), -1, 0, 0, false, -7, -1, -1, math.NaN())
	f.Fuzz(func(t *testing.T, kind uint8, batch, lq, lk int, start bool, offset, a, b int, fill float64) {
		if batch > 64 || lq > 64 || lk > 64 {
			return // keep allocations small; sizes beyond that add nothing
		}
		var m Mask
		var err error
		switch kind % 9 {
		case 0:
			m = Full()
		case 1:
			m = Causal()
		case 2:
			m, err = Band(a, b)
		case 3:
			m, err = Window(a)
		case 4:
			m, err = Prefix(a)
		case 5:
			m, err = KeyPadding([]int{a, b})
		case 6:
			m, err = Packed([]int{0, a, b}, Block(kind%3))
		case 7:
			var w Mask
			if w, err = Window(a); err == nil {
				m, err = Intersect(Causal(), w)
			}
		case 8:
			m = Mask{}
		}
		g := Geometry{Batch: batch, Lq: lq, Lk: lk, Offset: offset}
		if start {
			g.Align = AlignStart
		}
		if err == nil {
			var v []bool
			v, err = m.Visible(g)
			if err == nil {
				if len(v) != batch*lq*lk {
					t.Fatalf("%v on %v: %d flags", m, g, len(v))
				}
				bias, ferr := m.BiasFill(g, fill)
				if ferr == nil && len(bias) != len(v) {
					t.Fatalf("%v on %v: bias has %d elements", m, g, len(bias))
				}
				if ferr != nil && !errors.Is(ferr, ErrFill) {
					t.Fatalf("unexpected fill error %v", ferr)
				}
				rows, rerr := m.EmptyRows(g)
				if rerr != nil || len(rows) > batch*lq {
					t.Fatalf("EmptyRows: %v, %d rows", rerr, len(rows))
				}
			}
		}
		if err != nil {
			known := false
			for _, s := range []error{ErrSize, ErrOffset, ErrAlign, ErrBand, ErrWindow, ErrPrefix, ErrValidLength, ErrSegments, ErrBlock, ErrFill, ErrEmpty, ErrIndex} {
				known = known || errors.Is(err, s)
			}
			if !known {
				t.Fatalf("error wraps no sentinel: %v", err)
			}
		}
	})
}

// TestErrOffsetEveryKind: every mask that uses positions (Causal, Band,
// Window, Prefix, Packed, and an intersection with one of them) refuses a
// query outside the keys with ErrOffset, from every method, whichever way
// the query falls outside: past the last key, before the first, or more
// queries than keys with AlignEnd. Full and KeyPadding never read
// positions and take the same geometries.
func TestErrOffsetEveryKind(t *testing.T) {
	positional := []Mask{
		Causal(),
		must(t)(Band(1, 1)),
		must(t)(Band(Unbounded, Unbounded)), // sees every key, but is a Band
		must(t)(Window(2)),
		must(t)(Prefix(4)), // as long as the keys: sees every key, but is a Prefix
		must(t)(Packed([]int{0, 2, 4}, BlockCausal)),
		must(t)(Packed([]int{0, 1, 4}, BlockFull)),
		must(t)(Intersect(Full(), must(t)(Packed([]int{0, 4}, BlockFull)))),
	}
	free := []Mask{Full(), must(t)(KeyPadding([]int{3, 4})), must(t)(Intersect(Full(), must(t)(KeyPadding([]int{1, 0}))))}
	outside := []struct {
		g    Geometry
		want string // the message after "Mask.Visible: "
	}{
		{Geometry{Batch: 2, Lq: 2, Lk: 4, Align: AlignStart, Offset: 3}, "g.Offset = 3; want 0 ≤ Offset ≤ 2: %v needs every query at a key (align start, Lq = 2, Lk = 4)"},
		{Geometry{Batch: 2, Lq: 2, Lk: 4, Align: AlignStart, Offset: -1}, "g.Offset = -1; want 0 ≤ Offset ≤ 2: %v needs every query at a key (align start, Lq = 2, Lk = 4)"},
		{Geometry{Batch: 2, Lq: 2, Lk: 4, Offset: 1}, "g.Offset = 1; want -2 ≤ Offset ≤ 0: %v needs every query at a key (align end, Lq = 2, Lk = 4)"},
		{Geometry{Batch: 2, Lq: 5, Lk: 4}, "g.Lq = 5; want ≤ g.Lk = 4: %v needs every query at a key"},
		{Geometry{Batch: 2, Lq: 5, Lk: 4, Align: AlignStart}, "g.Lq = 5; want ≤ g.Lk = 4: %v needs every query at a key"},
	}
	for _, m := range positional {
		ensure.True(t, m.UsesPositions(), "%v", m)
		for _, o := range outside {
			want := "mask: query position out of range: Mask.Visible: " + fmt.Sprintf(o.want, m)
			_, err := m.Visible(o.g)
			ensure.ErrorIs(t, err, ErrOffset, "%v on %v", m, o.g)
			expect.EqualError(t, err, want)
			errs := []error{m.Check(o.g)}
			_, err = m.Bias(o.g)
			errs = append(errs, err)
			_, err = m.BiasFill(o.g, -1e9)
			errs = append(errs, err)
			_, err = m.Sees(o.g, 0, 0, 0)
			errs = append(errs, err)
			_, err = m.EmptyRows(o.g)
			errs = append(errs, err)
			errs = append(errs, m.Rows(o.g, func(int, int, []bool) { t.Fatalf("%v on %v: Rows called fn", m, o.g) }))
			for k, err := range errs {
				expect.ErrorIs(t, err, ErrOffset, "%v on %v, method %d", m, o.g, k)
			}
		}
	}
	for _, m := range free {
		ensure.False(t, m.UsesPositions(), "%v", m)
		for _, o := range outside {
			v, err := m.Visible(o.g)
			ensure.NoError(t, err, "%v on %v", m, o.g)
			expect.Len(t, v, o.g.Batch*o.g.Lq*o.g.Lk)
		}
	}
}

// TestMaxElements: the methods that write a mask out refuse more than
// MaxElements = 2^28 entries with ErrSize before allocating them; a
// 2^20 × 2^20 mask (2^40 entries, 8 TiB as a bias) would otherwise end the
// program. Check and Sees take such a geometry: they write nothing out.
func TestMaxElements(t *testing.T) {
	ensure.Equal(t, 1<<28, MaxElements)
	big := Geometry{Batch: 1, Lq: 1 << 20, Lk: 1 << 20}
	const want = "mask: invalid size: %s: g.Batch·Lq·Lk = 1·1048576·1048576; want at most MaxElements = 268435456"
	_, err := Causal().Visible(big)
	ensure.ErrorIs(t, err, ErrSize)
	expect.EqualError(t, err, fmt.Sprintf(want, "Mask.Visible"))
	_, err = Causal().Bias(big)
	ensure.ErrorIs(t, err, ErrSize)
	expect.EqualError(t, err, fmt.Sprintf(want, "Mask.Bias"))
	_, err = Full().BiasFill(big, -1e9)
	ensure.ErrorIs(t, err, ErrSize)
	expect.EqualError(t, err, fmt.Sprintf(want, "Mask.BiasFill"))
	// Batch pushes it over, each factor fitting.
	_, err = Full().Visible(Geometry{Batch: 5, Lq: 1 << 13, Lk: 1 << 13})
	expect.EqualError(t, err, "mask: invalid size: Mask.Visible: g.Batch·Lq·Lk = 5·8192·8192; want at most MaxElements = 268435456")

	expect.NoError(t, Causal().Check(big))
	s, err := Causal().Sees(big, 0, 1<<20-1, 0)
	ensure.NoError(t, err)
	expect.True(t, s)

	// EmptyRows lists up to Batch·Lq rows: with no keys, all of them.
	_, err = Full().EmptyRows(Geometry{Batch: 1 << 20, Lq: 1 << 20, Lk: 0})
	ensure.ErrorIs(t, err, ErrSize)
	expect.EqualError(t, err, "mask: invalid size: Mask.EmptyRows: g.Batch·Lq = 1048576·1048576; want at most MaxElements = 268435456")
	_, err = Full().EmptyRows(Geometry{Batch: 1, Lq: 1, Lk: MaxElements + 1})
	expect.EqualError(t, err, "mask: invalid size: Mask.EmptyRows: g.Lk = 268435457; want at most MaxElements = 268435456")

	// Rows lends one row of Lk flags.
	err = Full().Rows(Geometry{Batch: 1, Lq: 1, Lk: MaxElements + 1}, func(int, int, []bool) {})
	ensure.ErrorIs(t, err, ErrSize)
	expect.EqualError(t, err, "mask: invalid size: Mask.Rows: g.Lk = 268435457; want at most MaxElements = 268435456 keys in the row lent to fn")
}

// TestRows: Rows checks its geometry and its function, and walks the rows
// in order with the flags of Visible.
func TestRows(t *testing.T) {
	m := must(t)(Window(2))
	g := Geometry{Batch: 2, Lq: 2, Lk: 3}
	var got []bool
	var order []Row
	ensure.NoError(t, m.Rows(g, func(b, i int, row []bool) {
		order = append(order, Row{b, i})
		got = append(got, row...)
	}))
	expect.Equal(t, vis(t, m, g), got)
	expect.Equal(t, []Row{{0, 0}, {0, 1}, {1, 0}, {1, 1}}, order)

	err := m.Rows(Geometry{Batch: 1, Lq: 1, Lk: -1}, func(int, int, []bool) {})
	ensure.ErrorIs(t, err, ErrSize)
	expect.EqualError(t, err, "mask: invalid size: Mask.Rows: g.Lk = -1; want ≥ 0")
	err = m.Rows(g, nil)
	ensure.ErrorIs(t, err, ErrEmpty)
	expect.EqualError(t, err, "mask: no mask: Mask.Rows: fn = nil; want a function to call with each row")
	err = Mask{}.Rows(g, func(int, int, []bool) {})
	expect.ErrorIs(t, err, ErrEmpty)
}

// TestNilReceivers: the decoding methods on a nil pointer are errors
// wrapping the type's sentinel, not panics.
func TestNilReceivers(t *testing.T) {
	for _, tc := range []struct {
		err, sentinel error
		want          string
	}{
		{(*Align)(nil).UnmarshalText([]byte("end")), ErrAlign, "mask: invalid alignment: Align.UnmarshalText: receiver = nil; want a *Align to set"},
		{(*Block)(nil).UnmarshalText([]byte("full")), ErrBlock, "mask: invalid block kind: Block.UnmarshalText: receiver = nil; want a *Block to set"},
		{(*Kind)(nil).UnmarshalText([]byte("causal")), ErrKind, "mask: invalid mask kind: Kind.UnmarshalText: receiver = nil; want a *Kind to set"},
		{(*ALiBiForm)(nil).UnmarshalText([]byte("causal")), ErrALiBi, "mask: invalid ALiBi form: ALiBiForm.UnmarshalText: receiver = nil; want a *ALiBiForm to set"},
		{(*Spec)(nil).UnmarshalJSON([]byte(`{"kind": "causal"}`)), ErrSpec, "mask: invalid mask description: Spec.UnmarshalJSON: receiver = nil; want a *Spec to set"},
	} {
		expect.ErrorIs(t, tc.err, tc.sentinel)
		expect.EqualError(t, tc.err, tc.want)
	}
}
