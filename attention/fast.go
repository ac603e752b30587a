package attention

import (
	"math"
	"runtime"
	"sync"
	"sync/atomic"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas32"
	"gonum.org/v1/gonum/blas/blas64"

	"github.com/plumbref/plumb/internal/num"
)

// This file holds the fast form: blocks of rowBlock query rows at a time,
// the products through BLAS, in parallel over independent outputs.

// rowBlock is the number of query rows a task handles at once. The scores
// of one task are rowBlock × (visible keys), so a worker holds at most
// rowBlock·Lk values.
const rowBlock = 64

// tileRows × tileCols is the largest tile of C that gonum's Dgemm computes
// without starting goroutines of its own (it does so from 4 blocks of
// 64×64 up). The fast form is already parallel over independent tasks, and
// nested parallelism only adds scheduling and cache contention.
const (
	tileRows = 64
	tileCols = 3 * 64
)

// gemm is C = alpha·op(A)·op(B) + beta·C through the blas64 or blas32
// implementation (gonum's own unless the program installed another), one
// tile of C at a time so that each call takes gonum's serial path. The
// tiling is fixed by the sizes alone, so every element of C is the same sum
// whatever GOMAXPROCS is.
func gemm[T num.Float](tA, tB blas.Transpose, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	for i := 0; i < m; i += tileRows {
		var ai []T
		if tA == blas.Trans {
			ai = a[i:] // row i of op(A) = column i of A
		} else {
			ai = a[i*lda:]
		}
		for j := 0; j < n; j += tileCols {
			var bj []T
			if tB == blas.Trans {
				bj = b[j*ldb:] // column j of op(B) = row j of B
			} else {
				bj = b[j:]
			}
			gemm1(tA, tB, min(tileRows, m-i), min(tileCols, n-j), k, alpha, ai, lda, bj, ldb, beta, c[i*ldc+j:], ldc)
		}
	}
}

func gemm1[T num.Float](tA, tB blas.Transpose, m, n, k int, alpha T, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	switch a := any(a).(type) {
	case []float64:
		blas64.Implementation().Dgemm(tA, tB, m, n, k, float64(alpha), a, lda, any(b).([]float64), ldb, float64(beta), any(c).([]float64), ldc)
	case []float32:
		blas32.Implementation().Sgemm(tA, tB, m, n, k, float32(alpha), a, lda, any(b).([]float32), ldb, float32(beta), any(c).([]float32), ldc)
	}
}

// parallel runs task(w, t) for t = 0 … n−1 on up to workers goroutines; w
// is the worker's index, for its own scratch space. Which worker runs which
// task does not change any result: every task writes its own outputs.
func parallel(n, workers int, task func(w, t int)) {
	workers = max(1, min(workers, n))
	if workers == 1 {
		for t := range n {
			task(0, t)
		}
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	for w := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				t := int(next.Add(1) - 1)
				if t >= n {
					return
				}
				task(w, t)
			}
		}()
	}
	wg.Wait()
}

// ForwardFast is Forward computed in blocks of 64 query rows with the
// products Q·Kᵀ and P·V done by gonum's BLAS (blas64; blas32 for the
// float32 instantiation), in parallel over batch × heads × row blocks.
// Each task computes only the keys its rows can see (for a causal mask,
// about half the products), holds at most 64 × Lk scores, and writes its
// own output rows, so the result is bit-identical for any GOMAXPROCS. (That
// holds for gonum's own BLAS, the default; a program that installs another
// implementation with blas64.Use or blas32.Use gets its speed and its
// determinism.) The mask is kept as one run of keys per row (2·Batch·Lq
// ints) for every mask kind of the mask package.
//
// It is not bit-identical to Forward: BLAS sums q·k and P·V in its own
// order. The tests bound the normwise relative difference from Forward and
// from the golden values by 1e-14.
//
// Special cases are those of Forward, except that an Inf or NaN in a V row
// that a row block computes with weight 0 gives NaN (0·Inf) where Forward
// skips the key.
//
// Accuracy: against the 55 golden cases the worst normwise relative error
// is 9.7e-16 for O and 2.7e-16 for lse; on random problems of up to 164
// rows it stays within 1e-14 of Forward (TestPropertyFastMatchesDirect).
func ForwardFast(q, k, v []float64, s Shape, o Options) (out, lse []float64, err error) {
	p, err := newPlan(len(q), len(k), len(v), s, &o)
	if err != nil {
		return nil, nil, err
	}
	out, lse = forwardFast(p, q, k, v)
	return out, lse, nil
}

// ForwardFast32 is the float32 instantiation of the same body as
// ForwardFast, through blas32: the straightforward low-precision
// implementation the compare package uses as a yardstick; not a reference.
//
// Special cases are those of ForwardFast. Accuracy, as a yardstick: 3.9e-7
// (O) and 6.0e-8 (lse) against the golden cases, as Forward32.
func ForwardFast32(q, k, v []float32, s Shape, o Options) (out, lse []float32, err error) {
	p, err := newPlan(len(q), len(k), len(v), s, &o)
	if err != nil {
		return nil, nil, err
	}
	out, lse = forwardFast(p, q, k, v)
	return out, lse, nil
}

// keyRange is the smallest range [lo, hi) of keys holding every key that
// one of the rows i0 … i1−1 of batch entry b sees; lo = hi when none.
func (p *plan) keyRange(b, i0, i1 int) (lo, hi int) {
	lk := p.s.Lk
	lo, hi = lk, 0
	for i := i0; i < i1; i++ {
		if p.vis == nil {
			if r := b*p.s.Lq + i; p.runLo[r] < p.runHi[r] {
				lo, hi = min(lo, p.runLo[r]), max(hi, p.runHi[r])
			}
			continue
		}
		vis := p.vis[(b*p.s.Lq+i)*lk:][:lk]
		for j := 0; j < lo; j++ {
			if vis[j] {
				lo = j
				break
			}
		}
		for j := lk - 1; j >= hi; j-- {
			if vis[j] {
				hi = j + 1
				break
			}
		}
	}
	return lo, max(lo, hi)
}

// blockProbs turns the scaled products in sc (rows i0 … i0+len/n−1 of
// (b, h), keys lo … lo+n−1, leading dimension n) into probabilities in
// place and writes each row's log-sum-exp and sink probability. It
// returns whether any row was empty.
func blockProbs[T num.Float](p *plan, sc, sech2 []T, b, h, i0, rows, lo, n int, lse, psink []T) (anyEmpty bool) {
	sink := T(p.sinkLogit(h))
	negInf := T(math.Inf(-1))
	plain := p.softCap == 0 && p.bias == nil && p.slopes == nil
	for r := range rows {
		i := i0 + r
		x := sc[r*n:][:n]
		var d []T
		if sech2 != nil {
			d = sech2[r*n:][:n]
		}
		// The row's visible keys within the block are x[a:z] when the mask
		// is kept as runs; otherwise every key is looked up.
		a, z := 0, n
		if p.vis == nil {
			rr := b*p.s.Lq + i
			a = min(max(p.runLo[rr]-lo, 0), n)
			z = max(min(p.runHi[rr]-lo, n), a)
			if !plain {
				for jj := a; jj < z; jj++ {
					x[jj] = finishLogit(p, x[jj], b, h, i, lo+jj, jj, d)
				}
			}
		} else {
			for jj, t := range x {
				if p.visible(b, i, lo+jj) {
					x[jj] = finishLogit(p, t, b, h, i, lo+jj, jj, d)
				} else {
					x[jj] = negInf
				}
			}
		}
		// Keys outside x[a:z] have probability 0 exactly (e^{−Inf}); they
		// would add only zeros to the sum, so the softmax over x[a:z] is
		// the softmax over the row, bit for bit.
		l, ps, empty := softmaxRow(x[a:z], sink, p.emptyNaN)
		clear(x[:a])
		clear(x[z:])
		lse[r], psink[r] = l, ps
		anyEmpty = anyEmpty || empty
	}
	return anyEmpty
}

// fixEmpty sets the output rows of empty rows to 0 or NaN (a block with no
// visible key at all has not been through BLAS).
func fixEmpty[T num.Float](p *plan, out, lse []T, b, h, i0, rows int) {
	for r := range rows {
		if lse[p.lOff(b, h, i0+r)] != T(math.Inf(-1)) {
			continue
		}
		x := T(0)
		if p.emptyNaN {
			x = T(math.NaN())
		}
		oi := out[p.oOff(b, h, i0+r):][:p.s.Dv]
		for d := range oi {
			oi[d] = x
		}
	}
}

func forwardFast[T num.Float](p *plan, q, k, v []T) (out, lse []T) {
	s := p.s
	out = make([]T, s.oLen())
	lse = make([]T, s.lseLen())
	nblk := (s.Lq + rowBlock - 1) / rowBlock
	ntask := s.Batch * s.HeadsQ * nblk
	workers := runtime.GOMAXPROCS(0)
	bufs := make([][]T, min(workers, max(1, ntask)))
	qs, ks, vs, os := stride(p.layout, s.HeadsQ, s.Dk), stride(p.layout, s.HeadsKV, s.Dk), stride(p.layout, s.HeadsKV, s.Dv), stride(p.layout, s.HeadsQ, s.Dv)
	parallel(ntask, workers, func(w, t int) {
		b, h, blk := t/(s.HeadsQ*nblk), t/nblk%s.HeadsQ, t%nblk
		kv := p.kvHead(h)
		i0 := blk * rowBlock
		rows := min(rowBlock, s.Lq-i0)
		lo, hi := p.keyRange(b, i0, i0+rows)
		n := hi - lo
		if bufs[w] == nil {
			bufs[w] = make([]T, rowBlock*s.Lk+2*rowBlock)
		}
		sc := bufs[w][:rows*n]
		rl := bufs[w][rowBlock*s.Lk:][:rows]
		ps := bufs[w][rowBlock*s.Lk+rowBlock:][:rows]
		if n > 0 {
			gemm(blas.NoTrans, blas.Trans, rows, n, s.Dk, T(p.scale), q[p.qOff(b, h, i0):], qs, k[p.kOff(b, kv, lo):], ks, 0, sc, n)
		}
		anyEmpty := blockProbs(p, sc, nil, b, h, i0, rows, lo, n, rl, ps)
		for r := range rows {
			lse[p.lOff(b, h, i0+r)] = rl[r]
		}
		if n > 0 {
			gemm(blas.NoTrans, blas.NoTrans, rows, s.Dv, n, 1, sc, n, v[p.vOff(b, kv, lo):], vs, 0, out[p.oOff(b, h, i0):], os)
		}
		if anyEmpty || n == 0 {
			fixEmpty(p, out, lse, b, h, i0, rows)
		}
	})
	return out, lse
}

// BackwardFast is Backward computed in blocks of 64 query rows with every
// product through gonum's BLAS. Tasks are (batch entry, kv head) pairs: a
// task walks the query heads that read its kv head and their row blocks in
// a fixed order, owns the dK and dV of its kv head and the dQ of its query
// heads, and so no sum is split between goroutines and the result is
// bit-identical for any GOMAXPROCS. With a bias broadcast across tasks (one
// bias for several batch entries, or for query heads of several kv heads)
// the bias gradient is a sum across tasks, and the tasks run one after
// another instead. A worker holds at most 3 × 64 × Lk values.
//
// Special cases are those of Backward.
//
// Accuracy: against the golden cases, the same worst errors as Backward
// (4.7e-15 for dQ; 1.0e-13 for the logits near ±1000, see the package
// doc); on random problems it stays within 1e-14 of Backward.
func BackwardFast(q, k, v, dOut, dLSE []float64, s Shape, o Options) (Grads, error) {
	p, err := newBackwardPlan(len(q), len(k), len(v), len(dOut), dLSE != nil, len(dLSE), s, &o)
	if err != nil {
		return Grads{}, err
	}
	g := backwardFast(p, q, k, v, dOut, dLSE)
	return Grads{DQ: g.dq, DK: g.dk, DV: g.dv, DSinks: g.dsinks, DBias: g.dbias}, nil
}

func backwardFast[T num.Float](p *plan, q, k, v, dout, dlse []T) grads[T] {
	s := p.s
	g := grads[T]{dq: make([]T, s.qLen()), dk: make([]T, s.kLen()), dv: make([]T, s.vLen())}
	var sinkPart []T // [Batch, HeadsQ]
	if p.sinks != nil {
		g.dsinks = make([]T, s.HeadsQ)
		sinkPart = make([]T, s.Batch*s.HeadsQ)
	}
	if p.bias != nil {
		g.dbias = make([]T, len(p.bias))
	}
	ntask := s.Batch * s.HeadsKV
	workers := runtime.GOMAXPROCS(0)
	if p.bias != nil && ((!p.biasB && s.Batch > 1) || (!p.biasH && s.HeadsKV > 1)) {
		workers = 1
	}
	type scratch struct{ sc, dp, sech2, rl, ps []T }
	bufs := make([]*scratch, min(workers, max(1, ntask)))
	group := s.HeadsQ / s.HeadsKV
	qs, ks, vs, os := stride(p.layout, s.HeadsQ, s.Dk), stride(p.layout, s.HeadsKV, s.Dk), stride(p.layout, s.HeadsKV, s.Dv), stride(p.layout, s.HeadsQ, s.Dv)
	scale := T(p.scale)
	negInf := T(math.Inf(-1))
	parallel(ntask, workers, func(w, t int) {
		b, kv := t/s.HeadsKV, t%s.HeadsKV
		if bufs[w] == nil {
			sb := &scratch{sc: make([]T, rowBlock*s.Lk), dp: make([]T, rowBlock*s.Lk), rl: make([]T, rowBlock), ps: make([]T, rowBlock)}
			if p.softCap > 0 {
				sb.sech2 = make([]T, rowBlock*s.Lk)
			}
			bufs[w] = sb
		}
		sb := bufs[w]
		nanHead := false
		for gi := range group {
			h := kv*group + gi
			if p.group == GroupCycle {
				h = gi*s.HeadsKV + kv
			}
			for i0 := 0; i0 < s.Lq; i0 += rowBlock {
				rows := min(rowBlock, s.Lq-i0)
				lo, hi := p.keyRange(b, i0, i0+rows)
				n := hi - lo
				sc, dp := sb.sc[:rows*n], sb.dp[:rows*n]
				var sech2 []T
				if sb.sech2 != nil {
					sech2 = sb.sech2[:rows*n]
				}
				qb, dob := q[p.qOff(b, h, i0):], dout[p.oOff(b, h, i0):]
				var kb, vb []T
				if n > 0 {
					kb, vb = k[p.kOff(b, kv, lo):], v[p.vOff(b, kv, lo):]
					gemm(blas.NoTrans, blas.Trans, rows, n, s.Dk, scale, qb, qs, kb, ks, 0, sc, n)
					gemm(blas.NoTrans, blas.Trans, rows, n, s.Dv, 1, dob, os, vb, vs, 0, dp, n)
				}
				blockProbs(p, sc, sech2, b, h, i0, rows, lo, n, sb.rl, sb.ps)
				for r := range rows {
					i := i0 + r
					pr, dr := sc[r*n:][:n], dp[r*n:][:n]
					if sb.rl[r] == negInf {
						if p.emptyNaN {
							nanHead = true
							dqi := g.dq[p.qOff(b, h, i):][:s.Dk]
							for d := range dqi {
								dqi[d] = T(math.NaN())
							}
							if g.dsinks != nil {
								sinkPart[b*s.HeadsQ+h] = T(math.NaN())
							}
							if br := p.biasRow(b, h, i); br >= 0 {
								for j := range s.Lk {
									g.dbias[br+j] = T(math.NaN())
								}
							}
						}
						clear(pr)
						clear(dr)
						continue
					}
					var gl T
					if dlse != nil {
						gl = dlse[p.lOff(b, h, i)]
					}
					c, dc := centredD(pr, dr, sb.ps[r])
					if g.dsinks != nil {
						sinkPart[b*s.HeadsQ+h] += T(sb.ps[r] * (gl - (dc + c)))
					}
					br := p.biasRow(b, h, i)
					for jj, pj := range pr {
						if pj == 0 {
							dr[jj] = 0
							continue
						}
						ds := pj * (((dr[jj] - c) - dc) + gl)
						if br >= 0 {
							g.dbias[br+lo+jj] += ds
						}
						if sech2 != nil {
							ds *= sech2[r*n+jj]
						}
						dr[jj] = ds
					}
				}
				if n > 0 {
					gemm(blas.NoTrans, blas.NoTrans, rows, s.Dk, n, scale, dp, n, kb, ks, 0, g.dq[p.qOff(b, h, i0):], qs)
					gemm(blas.Trans, blas.NoTrans, n, s.Dk, rows, scale, dp, n, qb, qs, 1, g.dk[p.kOff(b, kv, lo):], ks)
					gemm(blas.Trans, blas.NoTrans, n, s.Dv, rows, 1, sc, n, dob, os, 1, g.dv[p.vOff(b, kv, lo):], vs)
				}
				// The empty rows' dQ were overwritten by the product.
				if nanHead {
					for r := range rows {
						if sb.rl[r] == negInf {
							dqi := g.dq[p.qOff(b, h, i0+r):][:s.Dk]
							for d := range dqi {
								dqi[d] = T(math.NaN())
							}
						}
					}
				}
			}
		}
		if nanHead {
			// As in Backward: a NaN row poisons its kv head's dK and dV.
			for j := range s.Lk {
				for _, x := range [][]T{g.dk[p.kOff(b, kv, j):][:s.Dk], g.dv[p.vOff(b, kv, j):][:s.Dv]} {
					for d := range x {
						x[d] = T(math.NaN())
					}
				}
			}
		}
	})
	if g.dsinks != nil {
		for b := range s.Batch {
			for h := range s.HeadsQ {
				g.dsinks[h] += sinkPart[b*s.HeadsQ+h]
			}
		}
	}
	return g
}
