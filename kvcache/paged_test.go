package kvcache_test

import (
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/kvcache"
)

// pagedCase is a pool holding several sequences, and each sequence's keys
// and values written out contiguously, [1, HeadsKV, L, D] in HeadsMajor.
type pagedCase struct {
	pool           kvcache.Pool
	kPool, vPool   []float64
	tables         [][]int
	lengths        []int
	kSeq, vSeq     [][]float64 // HeadsMajor, one batch entry each
	sharedPrefixOf int         // sequence 1 shares its first page with sequence 0 when ≥ 0
}

// poolAt is the offset in a pool of the row of head g at slot t of page
// page, written out from the layouts' definitions.
func poolAt(p kvcache.Pool, page, t, g, d int) int {
	if p.Layout == kvcache.HeadsFirst {
		return (((page*p.HeadsKV)+g)*p.PageSize + t) * d
	}
	return (((page*p.PageSize)+t)*p.HeadsKV + g) * d
}

// newPagedCase draws sequences of random lengths (the last page partly
// filled in most), assigns them pages of the pool in a random order, lets
// sequence 1 share sequence 0's first page (a common prefix) when both
// are long enough, and writes each sequence's keys and values into its
// pages. Every length is at least minLen.
func newPagedCase(r *rand.Rand, layout kvcache.PoolLayout, minLen int) pagedCase {
	c := pagedCase{sharedPrefixOf: -1}
	hkv := 1 + r.IntN(3)
	c.pool = kvcache.Pool{PageSize: 1 + r.IntN(5), HeadsKV: hkv, Dk: 1 + r.IntN(5), Dv: 1 + r.IntN(5), Layout: layout}
	n := 1 + r.IntN(4)
	c.lengths = make([]int, n)
	need := 0
	for b := range c.lengths {
		c.lengths[b] = max(minLen, r.IntN(4*c.pool.PageSize*3))
		need += (c.lengths[b] + c.pool.PageSize - 1) / c.pool.PageSize
	}
	c.pool.Pages = need + r.IntN(3) // spare pages nobody uses
	perm := r.Perm(c.pool.Pages)
	c.kPool = uniform(r, c.pool.Pages*c.pool.PageSize*hkv*c.pool.Dk)
	c.vPool = uniform(r, c.pool.Pages*c.pool.PageSize*hkv*c.pool.Dv)
	for b, l := range c.lengths {
		pages := (l + c.pool.PageSize - 1) / c.pool.PageSize
		c.tables = append(c.tables, perm[:pages])
		perm = perm[pages:]
		if b == 1 && pages > 0 && c.lengths[0] >= c.pool.PageSize {
			c.tables[1][0] = c.tables[0][0] // shared prefix page
			c.sharedPrefixOf = 0
		}
		if r.IntN(2) == 0 {
			c.tables[b] = append(c.tables[b], r.IntN(c.pool.Pages)) // a spare entry, not read
		}
	}
	for b, l := range c.lengths {
		k := make([]float64, hkv*l*c.pool.Dk)
		v := make([]float64, hkv*l*c.pool.Dv)
		for t := range l {
			page, slot := c.tables[b][t/c.pool.PageSize], t%c.pool.PageSize
			for g := range hkv {
				for d := range c.pool.Dk {
					k[at(attention.HeadsMajor, 0, hkv, l, g, t, c.pool.Dk)+d] = c.kPool[poolAt(c.pool, page, slot, g, c.pool.Dk)+d]
				}
				for d := range c.pool.Dv {
					v[at(attention.HeadsMajor, 0, hkv, l, g, t, c.pool.Dv)+d] = c.vPool[poolAt(c.pool, page, slot, g, c.pool.Dv)+d]
				}
			}
		}
		c.kSeq, c.vSeq = append(c.kSeq, k), append(c.vSeq, v)
	}
	return c
}

// relayout returns x, [1, heads, length, d] in HeadsMajor, in layout l.
func relayout(x []float64, heads, length, d int, l attention.Layout) []float64 {
	return rangeRows(x, 1, heads, length, 0, length, d, l)
}

// TestGatherIsTheSequence: gathering a sequence's pages gives its keys and
// values exactly, in both pool layouts and both attention layouts, with
// partly filled last pages, a shared prefix page and spare table entries.
func TestGatherIsTheSequence(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 1))
	shared := 0
	for trial := range 60 {
		c := newPagedCase(r, kvcache.PoolLayout(trial%2), 0)
		if c.sharedPrefixOf >= 0 {
			shared++
		}
		for _, l := range []attention.Layout{attention.HeadsMajor, attention.SeqMajor} {
			for b := range c.tables {
				k, v, err := kvcache.Gather(c.kPool, c.vPool, c.pool, c.tables[b], c.lengths[b], l)
				ensure.NoError(t, err)
				expect.Equal(t, relayout(c.kSeq[b], c.pool.HeadsKV, c.lengths[b], c.pool.Dk, l), k, "trial %d, %v, sequence %d: keys", trial, l, b)
				expect.Equal(t, relayout(c.vSeq[b], c.pool.HeadsKV, c.lengths[b], c.pool.Dv, l), v, "trial %d, %v, sequence %d: values", trial, l, b)
			}
		}
	}
	expect.Greater(t, shared, 10, "trials with a shared prefix page")
}

// TestAttendPagesIsDecode: each sequence's rows of AttendPages are
// attention.Decode on that sequence's contiguous cache, bit for bit, for
// one and several new queries, with the options drawn at random.
func TestAttendPagesIsDecode(t *testing.T) {
	r := rand.New(rand.NewPCG(2, 1))
	for trial := range 80 {
		lq := 1 + r.IntN(3)
		c := newPagedCase(r, kvcache.PoolLayout(trial%2), lq) // the queries sit in the sequence
		hq := c.pool.HeadsKV * (1 + r.IntN(3))
		o := randOptions(r, hq)
		o.Mask = randWindow(r)
		q := uniform(r, len(c.tables)*hq*lq*c.pool.Dk)
		out, lse, err := kvcache.AttendPages(q, c.kPool, c.vPool, c.pool, c.tables, c.lengths, hq, lq, o)
		ensure.NoError(t, err, "trial %d", trial)
		for b, l := range c.lengths {
			s := attention.Shape{Batch: 1, HeadsQ: hq, HeadsKV: c.pool.HeadsKV, Lq: lq, Lk: l, Dk: c.pool.Dk, Dv: c.pool.Dv}
			k := relayout(c.kSeq[b], c.pool.HeadsKV, l, c.pool.Dk, o.Layout)
			v := relayout(c.vSeq[b], c.pool.HeadsKV, l, c.pool.Dv, o.Layout)
			wantOut, wantLSE, err := attention.Decode(batchRows(q, b, hq*lq*c.pool.Dk), k, v, s, l-lq, o)
			ensure.NoError(t, err)
			expect.Equal(t, wantOut, batchRows(out, b, hq*lq*c.pool.Dv), "trial %d sequence %d: out", trial, b)
			expect.Equal(t, wantLSE, batchRows(lse, b, hq*lq), "trial %d sequence %d: lse", trial, b)
		}
	}
}

// TestGatherLargeInParallel: a sequence large enough to be copied by
// several goroutines (beyond 2^20 elements) is gathered exactly too, in
// every pool and attention layout.
func TestGatherLargeInParallel(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	const length, hkv, d = 3001, 3, 128
	for _, pl := range []kvcache.PoolLayout{kvcache.PagesFirst, kvcache.HeadsFirst} {
		p := kvcache.Pool{Pages: 200, PageSize: 16, HeadsKV: hkv, Dk: d, Dv: d / 2, Layout: pl}
		kPool, vPool := uniform(r, 200*16*hkv*d), uniform(r, 200*16*hkv*d/2)
		table := r.Perm(200)[:188]
		for _, l := range []attention.Layout{attention.HeadsMajor, attention.SeqMajor} {
			k, v, err := kvcache.Gather(kPool, vPool, p, table, length, l)
			ensure.NoError(t, err)
			wrong := 0
			for pos := range length {
				page, slot := table[pos/16], pos%16
				for g := range hkv {
					for i := range d {
						if k[at(l, 0, hkv, length, g, pos, d)+i] != kPool[poolAt(p, page, slot, g, d)+i] {
							wrong++
						}
					}
					for i := range d / 2 {
						if v[at(l, 0, hkv, length, g, pos, d/2)+i] != vPool[poolAt(p, page, slot, g, d/2)+i] {
							wrong++
						}
					}
				}
			}
			expect.Equal(t, 0, wrong, "%v, %v: elements gathered wrong", pl, l)
		}
	}
}
