package kvcache

import (
	"fmt"
	"math"
	"runtime"
	"slices"
	"sync"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/num"
)

// Pool is the shape of a pool of key pages and its twin pool of value
// pages: Pages pages of PageSize positions, each position holding HeadsKV
// heads of Dk key (Dv value) elements, in the order Layout says. A key
// pool holds Pages·PageSize·HeadsKV·Dk elements, a value pool
// Pages·PageSize·HeadsKV·Dv.
type Pool struct {
	Pages    int // pages in the pool ≥ 0
	PageSize int // positions per page ≥ 1
	HeadsKV  int // key/value heads ≥ 1
	Dk, Dv   int // key and value head dimensions ≥ 1
	Layout   PoolLayout
}

// offset is the offset in a pool of d values per head of the row of
// head g at slot t of page page.
func (p Pool) offset(page, t, g, d int) int {
	if p.Layout == HeadsFirst {
		return ((page*p.HeadsKV+g)*p.PageSize + t) * d
	}
	return ((page*p.PageSize+t)*p.HeadsKV + g) * d
}

// check validates the pool's shape and the lengths of its two slices.
func (p Pool) check(fn string, kn, vn int) error {
	switch {
	case p.PageSize < 1:
		return fmt.Errorf("%w: %s: Pool.PageSize = %d; want ≥ 1", ErrPageSize, fn, p.PageSize)
	case p.Pages < 0:
		return fmt.Errorf("%w: %s: Pool.Pages = %d; want ≥ 0", ErrShape, fn, p.Pages)
	case p.HeadsKV < 1:
		return fmt.Errorf("%w: %s: Pool.HeadsKV = %d; want ≥ 1", ErrShape, fn, p.HeadsKV)
	case p.Dk < 1:
		return fmt.Errorf("%w: %s: Pool.Dk = %d; want ≥ 1", ErrShape, fn, p.Dk)
	case p.Dv < 1:
		return fmt.Errorf("%w: %s: Pool.Dv = %d; want ≥ 1", ErrShape, fn, p.Dv)
	}
	if err := poolLayoutWords.CheckAt(fn+": Pool.Layout", p.Layout); err != nil {
		return err
	}
	for _, c := range []struct {
		name string
		got  int
		d    int
		dim  string
	}{{"kPool", kn, p.Dk, "Dk"}, {"vPool", vn, p.Dv, "Dv"}} {
		want, ok := product(math.MaxInt, p.Pages, p.PageSize, p.HeadsKV, c.d)
		if !ok || c.got != want {
			return fmt.Errorf("%w: %s: %s has %d elements; want Pages·PageSize·HeadsKV·%s = %s", ErrPoolSize, fn, c.name, c.got, c.dim, sizeText(ok, want, p.Pages, p.PageSize, p.HeadsKV, c.d))
		}
	}
	return nil
}

// sizeText spells a product of factors and its value, or says that it
// overflows.
func sizeText(ok bool, n int, factors ...int) string {
	if !ok {
		return num.Factors(factors...) + ", beyond an int"
	}
	return num.Factors(factors...) + " = " + fmt.Sprint(n)
}

// checkTable validates one sequence's page table and length against the
// pool: 0 ≤ length ≤ len(table)·PageSize, and every page the length uses,
// table[0 … ⌈length/PageSize⌉−1], inside the pool. Entries beyond those
// are not read and not checked. what names the table in messages.
func (p Pool) checkTable(fn, what string, table []int, length int) error {
	if length < 0 {
		return fmt.Errorf("%w: %s: length of %s = %d; want ≥ 0", ErrLength, fn, what, length)
	}
	used := usedPages(length, p.PageSize)
	if used > len(table) {
		return fmt.Errorf("%w: %s: length of %s = %d; want ≤ len(table)·PageSize = %d·%d (it needs %d pages)", ErrLength, fn, what, length, len(table), p.PageSize, used)
	}
	for i, page := range table[:used] {
		if page < 0 || page >= p.Pages {
			return fmt.Errorf("%w: %s: %s[%d] = %d; want 0 ≤ page < Pool.Pages = %d", ErrPageIndex, fn, what, i, page, p.Pages)
		}
	}
	return nil
}

// usedPages is ⌈length/pageSize⌉ for length ≥ 0, pageSize ≥ 1, without
// overflow.
func usedPages(length, pageSize int) int {
	if length == 0 {
		return 0
	}
	return (length-1)/pageSize + 1
}

// Gather copies the keys and values of one sequence out of a pool of
// pages into contiguous tensors in an attention layout: position t of the
// sequence is slot t mod PageSize of page table[⌊t/PageSize⌋] (the page
// table maps the sequence's logical pages to the pool's physical pages,
// Kwon et al. 2023, "Efficient Memory Management for Large Language Model
// Serving with PagedAttention", arXiv 2309.06180, §4), and
//
//	k[g, t, :] = kPool[table[⌊t/P⌋], t mod P, g, :]        (P = PageSize; PagesFirst)
//
// for t < length, likewise for v. k is [1, HeadsKV, length, Dk] (layout
// attention.HeadsMajor) or [1, length, HeadsKV, Dk] (attention.SeqMajor),
// v the same with Dv: the kCache and vCache of attention.Decode. The last
// page may be partly filled (its slots from length mod P on are not read),
// the table may hold more pages than the length uses (they are not read),
// and a page may appear in the tables of several sequences (a shared
// prefix) or twice in one.
//
// Special cases are:
//
//	length = 0                         empty k and v
//	length < 0, or > len(table)·P      error ErrLength
//	a used entry < 0 or ≥ Pool.Pages   error ErrPageIndex
//	PageSize < 1                       error ErrPageSize
//	a pool of the wrong length         error ErrPoolSize
//	length·HeadsKV·D > MaxElements     error ErrShape, before anything is allocated
//
// Accuracy: exact (a copy).
func Gather(kPool, vPool []float64, p Pool, table []int, length int, layout attention.Layout) (k, v []float64, err error) {
	return gather("Gather", kPool, vPool, p, table, length, layout)
}

// Gather32 is the float32 instantiation of the same body as Gather.
//
// Special cases are those of Gather.
func Gather32(kPool, vPool []float32, p Pool, table []int, length int, layout attention.Layout) (k, v []float32, err error) {
	return gather("Gather32", kPool, vPool, p, table, length, layout)
}

func gather[T num.Float](fn string, kPool, vPool []T, p Pool, table []int, length int, layout attention.Layout) (k, v []T, err error) {
	if err := p.check(fn, len(kPool), len(vPool)); err != nil {
		return nil, nil, err
	}
	if err := checkGather(fn, p, "table", table, length, layout); err != nil {
		return nil, nil, err
	}
	k, v = gatherChecked(kPool, vPool, p, table, length, layout)
	return k, v, nil
}

// checkGather validates one sequence's table, its length and the size of
// its gathered tensors.
func checkGather(fn string, p Pool, what string, table []int, length int, layout attention.Layout) error {
	if err := layout.Check(); err != nil {
		return err
	}
	if err := p.checkTable(fn, what, table, length); err != nil {
		return err
	}
	if err := checkMax(fn, "the gathered keys of "+what, "length·HeadsKV·Dk", length, p.HeadsKV, p.Dk); err != nil {
		return err
	}
	return checkMax(fn, "the gathered values of "+what, "length·HeadsKV·Dv", length, p.HeadsKV, p.Dv)
}

// gatherChecked is Gather on validated arguments.
func gatherChecked[T num.Float](kPool, vPool []T, p Pool, table []int, length int, layout attention.Layout) (k, v []T) {
	k, v = make([]T, length*p.HeadsKV*p.Dk), make([]T, length*p.HeadsKV*p.Dv)
	gatherInto(k, v, kPool, vPool, p, table, length, layout)
	return k, v
}

// gatherInto is Gather on validated arguments into k and v, whose every
// element it writes. A large sequence is copied by several goroutines,
// each owning some kv heads: the copies are disjoint, so the result is
// the same for any number of them.
func gatherInto[T num.Float](k, v, kPool, vPool []T, p Pool, table []int, length int, layout attention.Layout) {
	heads := func(from, to int) {
		for t := range length {
			page, slot := table[t/p.PageSize], t%p.PageSize
			for g := from; g < to; g++ {
				src, dst := p.offset(page, slot, g, p.Dk), rowOffset(layout, p.HeadsKV, length, g, t, p.Dk)
				copy(k[dst:dst+p.Dk], kPool[src:src+p.Dk])
				src, dst = p.offset(page, slot, g, p.Dv), rowOffset(layout, p.HeadsKV, length, g, t, p.Dv)
				copy(v[dst:dst+p.Dv], vPool[src:src+p.Dv])
			}
		}
	}
	workers := min(runtime.GOMAXPROCS(0), p.HeadsKV)
	if workers < 2 || length*p.HeadsKV*(p.Dk+p.Dv) < parallelGather {
		heads(0, p.HeadsKV)
		return
	}
	var wg sync.WaitGroup
	for w := range workers {
		wg.Go(func() { heads(w*p.HeadsKV/workers, (w+1)*p.HeadsKV/workers) })
	}
	wg.Wait()
}

// parallelGather is the number of elements from which gatherInto copies
// with several goroutines: 2^20, 8 MiB of float64, far above the cost of
// starting them.
const parallelGather = 1 << 20

// scratchPools keep the buffer a finished AttendPages call gathered into,
// for the next call, one pool per element type. Writing into memory the
// process has already touched is what keeps gathering to one pass over K
// and V: on a machine where the first touch of fresh pages is slow, a new
// buffer for every call costs several times the attention itself (see
// the package documentation's Speed). Every element of a reused buffer is
// overwritten before it is read, and attention.Decode keeps no reference
// to its inputs, so reuse changes no result.
var scratchPools [2]sync.Pool

// scratch returns a buffer of n elements from the pool of T's width.
func scratch[T num.Float](n int) (*[]T, *sync.Pool) {
	pool := &scratchPools[0]
	var z T
	if _, ok := any(z).(float32); ok {
		pool = &scratchPools[1]
	}
	if b, ok := pool.Get().(*[]T); ok && cap(*b) >= n {
		*b = (*b)[:n]
		return b, pool
	}
	b := make([]T, n)
	return &b, pool
}

// AttendPages is attention.Decode for a batch of sequences whose keys and
// values live in a pool of pages: sequence b has lengths[b] positions,
// found through its page table tables[b] (see Gather), of which the last
// lq are its new queries' own (their keys and values already written to
// the pages). Its output rows are
//
//	attention.Decode(q_b, k_b, v_b, s_b, lengths[b] − lq, o)
//
// with k_b, v_b = Gather(…, tables[b], lengths[b], o.Layout) and s_b =
// {1, headsQ, Pool.HeadsKV, lq, lengths[b], Pool.Dk, Pool.Dv}: the same
// call on the same numbers, so the rows are Decode's bit for bit. q is
// [len(tables), headsQ, lq, Dk] in o.Layout, out [len(tables), headsQ,
// lq, Dv] and lse that of attention.Forward. The options o are passed to
// every sequence's call as they are: a bias must fit [BiasBatch = 1,
// BiasHeads, lq, lengths[b]] for every b.
//
// lq = 1 is one decoding step; lq > 1 scores several new tokens at once
// (a chunk of a prefill, or draft tokens to verify, see VerifyDraft), each
// seeing the keys up to its own position.
//
// The gathered cache goes into a buffer kept for the next call (the
// package documentation's Speed says why); a finished call holds no
// reference to it, and every element is written before it is read.
//
// Special cases are those of Gather and attention.Decode, and:
//
//	len(lengths) ≠ len(tables)   error ErrLength
//	lengths[b] < lq              error ErrLength (the queries sit in the sequence)
//	no tables                    empty outputs
//
// Accuracy: that of attention.Decode.
func AttendPages(q, kPool, vPool []float64, p Pool, tables [][]int, lengths []int, headsQ, lq int, o attention.Options) (out, lse []float64, err error) {
	return attendPages("AttendPages", ops64, q, kPool, vPool, p, tables, lengths, headsQ, lq, o)
}

// AttendPages32 is the float32 instantiation of the same body as
// AttendPages, calling attention.Decode32: the straightforward
// low-precision implementation a yardstick is measured on, not a
// reference.
//
// Special cases are those of AttendPages.
func AttendPages32(q, kPool, vPool []float32, p Pool, tables [][]int, lengths []int, headsQ, lq int, o attention.Options) (out, lse []float32, err error) {
	return attendPages("AttendPages32", ops32, q, kPool, vPool, p, tables, lengths, headsQ, lq, o)
}

func attendPages[T num.Float](fn string, f ops[T], q, kPool, vPool []T, p Pool, tables [][]int, lengths []int, headsQ, lq int, o attention.Options) (out, lse []T, err error) {
	if err := p.check(fn, len(kPool), len(vPool)); err != nil {
		return nil, nil, err
	}
	batch := len(tables)
	s := attention.Shape{Batch: batch, HeadsQ: headsQ, HeadsKV: p.HeadsKV, Lq: lq, Dk: p.Dk, Dv: p.Dv}
	if err := checkHeads(fn, s); err != nil {
		return nil, nil, err
	}
	if len(lengths) != batch {
		return nil, nil, fmt.Errorf("%w: %s: len(lengths) = %d; want len(tables) = %d", ErrLength, fn, len(lengths), batch)
	}
	if err := checkLen(fn, "q", len(q), "len(tables)·headsQ·lq·Dk", batch, headsQ, lq, p.Dk); err != nil {
		return nil, nil, err
	}
	if err := checkMax(fn, "out", "len(tables)·headsQ·lq·Dv", batch, headsQ, lq, p.Dv); err != nil {
		return nil, nil, err
	}
	for b, table := range tables {
		what := fmt.Sprintf("tables[%d]", b)
		if err := checkGather(fn, p, what, table, lengths[b], o.Layout); err != nil {
			return nil, nil, err
		}
		if lengths[b] < lq {
			return nil, nil, fmt.Errorf("%w: %s: lengths[%d] = %d; want ≥ lq = %d (the new queries sit at the last lq positions)", ErrLength, fn, b, lengths[b], lq)
		}
	}
	out = make([]T, 0, batch*headsQ*lq*p.Dv)
	lse = make([]T, 0, batch*headsQ*lq)
	qn := headsQ * lq * p.Dk
	buf, pool := scratch[T](maxLength(lengths) * p.HeadsKV * (p.Dk + p.Dv))
	defer pool.Put(buf)
	for b, table := range tables {
		kn, vn := lengths[b]*p.HeadsKV*p.Dk, lengths[b]*p.HeadsKV*p.Dv
		k, v := (*buf)[:kn], (*buf)[kn:kn+vn]
		gatherInto(k, v, kPool, vPool, p, table, lengths[b], o.Layout)
		sb := s
		sb.Batch, sb.Lk = 1, lengths[b]
		ob, lb, err := f.decode(q[b*qn:(b+1)*qn], k, v, sb, lengths[b]-lq, o)
		if err != nil {
			return nil, nil, err
		}
		out, lse = append(out, ob...), append(lse, lb...)
	}
	return out, lse, nil
}

// maxLength is the largest of lengths, or 0.
func maxLength(lengths []int) int {
	if len(lengths) == 0 {
		return 0
	}
	return slices.Max(lengths)
}
