package kvcache_test

import (
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/kvcache"
	"github.com/plumbref/plumb/mask"
)

// sentinels are the package's sentinel errors.
var sentinels = []error{kvcache.ErrShape, kvcache.ErrPageSize, kvcache.ErrPoolSize, kvcache.ErrPageIndex, kvcache.ErrLength, kvcache.ErrSplit, kvcache.ErrOffsets, kvcache.ErrOption, kvcache.ErrSize}

// TestErrors: every bad input is an error wrapping exactly one sentinel,
// with the message "<sentinel>: <function>: <argument> = <value>; want
// <expectation>", and never a panic. The huge lengths are refused before
// anything is allocated (a test that allocated them would not finish).
func TestErrors(t *testing.T) {
	p := kvcache.Pool{Pages: 3, PageSize: 4, HeadsKV: 2, Dk: 2, Dv: 1}
	kPool, vPool := make([]float64, 3*4*2*2), make([]float64, 3*4*2*1)
	// One page of 2^20 positions, one head of dimension 1, and a table
	// that repeats it 512 times: a length of 2^29 fits the table but its
	// gathered keys would be 2^29 > MaxElements elements.
	big := kvcache.Pool{Pages: 1, PageSize: 1 << 20, HeadsKV: 1, Dk: 1, Dv: 1}
	bigPool := make([]float64, 1<<20)
	bigTable := make([]int, 512)
	s := attention.Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 1, Lk: 4, Dk: 2, Dv: 2}
	q, k, v := make([]float64, 4), make([]float64, 8), make([]float64, 8)
	win, _ := mask.Window(2)
	gather := func(p kvcache.Pool, kp, vp []float64, table []int, n int) error {
		_, _, err := kvcache.Gather(kp, vp, p, table, n, attention.HeadsMajor)
		return err
	}
	for _, c := range []struct {
		name string
		err  error
		want error
		msg  string
	}{
		{"page index ≥ pages", gather(p, kPool, vPool, []int{0, 3}, 5), kvcache.ErrPageIndex, "kvcache: invalid page index: Gather: table[1] = 3; want 0 ≤ page < Pool.Pages = 3"},
		{"negative page index", gather(p, kPool, vPool, []int{-1}, 1), kvcache.ErrPageIndex, "kvcache: invalid page index: Gather: table[0] = -1; want 0 ≤ page < Pool.Pages = 3"},
		{"length beyond the table", gather(p, kPool, vPool, []int{0, 1}, 9), kvcache.ErrLength, "kvcache: invalid length: Gather: length of table = 9; want ≤ len(table)·PageSize = 2·4 (it needs 3 pages)"},
		{"negative length", gather(p, kPool, vPool, []int{0}, -1), kvcache.ErrLength, "kvcache: invalid length: Gather: length of table = -1; want ≥ 0"},
		{"pool size", gather(p, kPool[1:], vPool, []int{0}, 1), kvcache.ErrPoolSize, "kvcache: invalid pool size: Gather: kPool has 47 elements; want Pages·PageSize·HeadsKV·Dk = 3·4·2·2 = 48"},
		{"pool size overflows", gather(kvcache.Pool{Pages: math.MaxInt / 2, PageSize: 4, HeadsKV: 1, Dk: 1, Dv: 1}, kPool, vPool, nil, 0), kvcache.ErrPoolSize, "kvcache: invalid pool size: Gather: kPool has 48 elements; want Pages·PageSize·HeadsKV·Dk = 4611686018427387903·4·1·1, beyond an int"},
		{"page size 0", gather(kvcache.Pool{Pages: 3, PageSize: 0, HeadsKV: 2, Dk: 2, Dv: 1}, kPool, vPool, []int{0}, 1), kvcache.ErrPageSize, "kvcache: invalid page size: Gather: Pool.PageSize = 0; want ≥ 1"},
		{"huge length", gather(big, bigPool, bigPool, bigTable, 1<<29), kvcache.ErrShape, "kvcache: invalid shape: Gather: the gathered keys of table would hold length·HeadsKV·Dk = 536870912·1·1 elements; want ≤ MaxElements = 268435456"},
		{"pool layout", gather(kvcache.Pool{Pages: 3, PageSize: 4, HeadsKV: 2, Dk: 2, Dv: 1, Layout: 7}, kPool, vPool, []int{0}, 1), kvcache.ErrOption, ""},
		{"lengths and tables", func() error {
			_, _, err := kvcache.AttendPages(q, kPool, vPool, p, [][]int{{0}}, nil, 2, 1, attention.Options{})
			return err
		}(), kvcache.ErrLength, "kvcache: invalid length: AttendPages: len(lengths) = 0; want len(tables) = 1"},
		{"queries beyond the sequence", func() error {
			_, _, err := kvcache.AttendPages(make([]float64, 2*2*2), kPool, vPool, p, [][]int{{0}}, []int{1}, 2, 2, attention.Options{})
			return err
		}(), kvcache.ErrLength, "kvcache: invalid length: AttendPages: lengths[0] = 1; want ≥ lq = 2 (the new queries sit at the last lq positions)"},
		{"bad table in a batch", func() error {
			_, _, err := kvcache.AttendPages(make([]float64, 2*2*2*1), kPool, vPool, p, [][]int{{0}, {5}}, []int{1, 1}, 2, 1, attention.Options{})
			return err
		}(), kvcache.ErrPageIndex, "kvcache: invalid page index: AttendPages: tables[1][0] = 5; want 0 ≤ page < Pool.Pages = 3"},
		{"split range", func() error {
			_, _, err := kvcache.AttendSplit(q, k, v, s, 3, 2, 5, attention.Options{})
			return err
		}(), kvcache.ErrSplit, "kvcache: invalid split: AttendSplit: [start, end) = [2, 5); want 0 ≤ start ≤ end ≤ Lk = 4"},
		{"split decreasing", func() error {
			_, _, err := kvcache.AttendSplit(q, k, v, s, 3, 3, 2, attention.Options{})
			return err
		}(), kvcache.ErrSplit, ""},
		{"no parts", func() error {
			_, _, err := kvcache.MergeSplits(nil, nil, 2, attention.EmptyRowZero)
			return err
		}(), kvcache.ErrSplit, "kvcache: invalid split: MergeSplits: len(outs) = 0; want len(lses) = 0 and ≥ 1"},
		{"parts of different lengths", func() error {
			_, _, err := kvcache.MergeSplits([][]float64{{1, 2}, {1}}, [][]float64{{0}, {0}}, 2, attention.EmptyRowZero)
			return err
		}(), kvcache.ErrSplit, "kvcache: invalid split: MergeSplits: part 1 has 1 outputs and 1 lse; want those of part 0, 2 and 1"},
		{"ring mask", func() error {
			_, _, err := kvcache.AttendRing(q, k, v, s, 3, attention.Options{Mask: win})
			return err
		}(), kvcache.ErrOption, "kvcache: invalid option: AttendRing: Options.Mask = Window(2); want none (the ring of 4 slots is the window)"},
		{"ring before any token", func() error {
			_, _, err := kvcache.AttendRing(q, k, v, s, 0, attention.Options{})
			return err
		}(), kvcache.ErrLength, "kvcache: invalid length: AttendRing: n = 0; want ≥ 1 (the query's own token is written)"},
		{"ring write position", kvcache.RingWrite(k, v, k[:2], v[:2], s, -1, attention.HeadsMajor), kvcache.ErrLength, "kvcache: invalid length: RingWrite: pos = -1; want ≥ 0"},
		{"ring write new rows", kvcache.RingWrite(k, v, k[:3], v[:2], s, 1, attention.HeadsMajor), kvcache.ErrLength, "kvcache: invalid length: RingWrite: kNew has 3 elements; want Batch·HeadsKV·Dk = 1·1·2 = 2"},
		{"ring slots", func() error { _, err := kvcache.RingPositions(3, 0); return err }(), kvcache.ErrShape, "kvcache: invalid shape: RingPositions: slots = 0; want 1 ≤ slots ≤ MaxElements = 268435456"},
		{"ring slot", func() error { _, err := kvcache.RingSlot(-2, 3); return err }(), kvcache.ErrLength, "kvcache: invalid length: RingSlot: pos = -2; want ≥ 0"},
		{"packed bias", func() error {
			_, _, err := kvcache.AttendPacked(q, k[:2], v[:2], attention.Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 1, Lk: 1, Dk: 2, Dv: 2}, []int{0, 1}, []int{0, 1}, attention.Options{Bias: []float64{0, 0}})
			return err
		}(), kvcache.ErrOption, "kvcache: invalid option: AttendPacked: Options.Bias has 2 elements; want none (a bias's shape would differ by sequence)"},
		{"draft lengths", func() error {
			_, _, err := kvcache.VerifyDraft(q, k, v, k[:1], v[:2], s, attention.Options{})
			return err
		}(), kvcache.ErrLength, "kvcache: invalid length: VerifyDraft: kDraft has 1 elements; want Batch·HeadsKV·Lq·Dk = 1·1·1·2 = 2"},
		{"heads", func() error {
			s := s
			s.HeadsQ, s.HeadsKV = 3, 2
			_, _, err := kvcache.VerifyDraft(q, k, v, k[:2], v[:2], s, attention.Options{})
			return err
		}(), kvcache.ErrShape, "kvcache: invalid shape: VerifyDraft: Shape.HeadsQ = 3; want a positive multiple of HeadsKV = 2"},
		{"cache size negative", func() error { _, err := kvcache.CacheSize(1, -1, 1, 1, 1, 1); return err }(), kvcache.ErrSize, "kvcache: invalid size: CacheSize: kvHeads = -1; want ≥ 0"},
		{"cache size page", func() error { _, err := kvcache.CacheSize(1, 1, 1, 1, 1, 0); return err }(), kvcache.ErrPageSize, "kvcache: invalid page size: CacheSize: pageSize = 0; want ≥ 1"},
		{"cache size overflow", func() error { _, err := kvcache.CacheSize(1<<20, 1<<20, 1<<20, 1<<4, 1, 16); return err }(), kvcache.ErrSize, "kvcache: invalid size: CacheSize: 2·layers·kvHeads·headDim·tokens·bytesPerElement = 2·1048576·1048576·1048576·16·1; want ≤ 9223372036854775807"},
	} {
		if !expect.ErrorIs(t, c.err, c.want, c.name) {
			continue
		}
		n := 0
		for _, e := range sentinels {
			if errors.Is(c.err, e) {
				n++
			}
		}
		expect.Equal(t, 1, n, "%s: sentinels wrapped by %v", c.name, c.err)
		if c.msg != "" {
			expect.EqualError(t, c.err, c.msg, c.name)
		} else {
			expect.True(t, strings.HasPrefix(c.err.Error(), c.want.Error()+": "), "%s: %v", c.name, c.err)
		}
	}
}

// TestAttentionErrorsPassThrough: a call the attention package refuses
// returns its error, wrapping its sentinel.
func TestAttentionErrorsPassThrough(t *testing.T) {
	s := attention.Shape{Batch: 1, HeadsQ: 1, HeadsKV: 1, Lq: 1, Lk: 4, Dk: 2, Dv: 2}
	q, k, v := make([]float64, 2), make([]float64, 8), make([]float64, 8)
	_, _, err := kvcache.AttendSplit(q, k, v, s, 3, 0, 2, attention.Options{Scale: -1})
	expect.ErrorIs(t, err, attention.ErrOption)
	_, _, err = kvcache.AttendSplit(q, k, v, s, 3, 0, 2, attention.Options{Bias: []float64{1}, BiasBatch: 1, BiasHeads: 1})
	expect.ErrorIs(t, err, attention.ErrBias, "a bias that does not broadcast")
	_, _, err = kvcache.AttendSplit(q, k, v, s, 4, 0, 2, attention.Options{})
	expect.ErrorIs(t, err, attention.ErrOption, "a position outside the cache")
}
