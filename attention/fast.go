package attention

import (
	"math"
	"sync"
	"sync/atomic"

	"github.com/plumbref/plumb/internal/num"
)

// This file holds the fast form: blocks of rowBlock query rows at a time,
// the products through plumb's own matrix product (num.MatrixProductSerial), in
// parallel over independent outputs. Every sum is the direct form's sum,
// term for term and in the same order, so the fast form is the direct form
// bit for bit (see ForwardFast).

// rowBlock is the number of query rows a task handles at once. The scores
// of one task are rowBlock × (visible keys), so a worker holds at most
// rowBlock·Lk values.
const rowBlock = 64

// The products go through num.MatrixProductSerial: the fast form is already
// parallel over independent tasks, and nested parallelism inside the
// product only adds scheduling and cache contention. num.MatrixProductSerial sums
// each element as the plain loop does, from zero (or from C), products
// rounded, in ascending order of the summed index; a product with the
// scale α rounds α·a first, as the direct form's dt *= scale does.

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
// products Q·Kᵀ and P·V done by plumb's own blocked matrix product
// (internal/num's MatrixProduct, pure Go), in parallel over batch × heads × row
// blocks. Each task computes only the keys its rows can see (for a causal
// mask, about half the products), holds at most 64 × Lk scores, and writes
// its own output rows.
//
// It is Forward bit for bit, on every architecture and for any GOMAXPROCS:
// each logit is Σ_d q_d·k_d summed from 0 in ascending d with every product
// rounded, then multiplied by Scale, as Forward computes it; the softmax
// is the same code; and each output element is Σ_j P_j·v_j in ascending j,
// where the keys Forward skips (weight 0) add exact zeros. A block whose
// output holds an Inf or NaN is computed again as Forward computes it, so
// that an Inf or NaN in V where the weight is 0 (0·Inf = NaN in the
// product) is ignored there too.
// TestFastIsDirect checks the identity on random problems with every
// option.
//
// Special cases are those of Forward, except that Lk > MaxElements/192 is
// refused (ErrShape): a worker's scratch would exceed MaxElements. The
// mask is kept as one run of keys per row (2·Batch·Lq ints) for every mask
// kind of the mask package.
//
// Accuracy: that of Forward (the package documentation's table).
func ForwardFast(q, k, v []float64, s Shape, o Options) (out, lse []float64, err error) {
	return runForward("ForwardFast", q, k, v, s, o, forwardFast)
}

// ForwardFast32 is the float32 instantiation of the same body as
// ForwardFast: the straightforward low-precision implementation the
// compare package uses as a yardstick; not a reference. It is Forward32
// bit for bit, as ForwardFast is Forward, except that it computes in plain
// float32 whatever o.Idiom says (Forward32 honours it).
//
// Special cases are those of ForwardFast. Accuracy, as a yardstick: that
// of Forward32 in the package documentation's table.
func ForwardFast32(q, k, v []float32, s Shape, o Options) (out, lse []float32, err error) {
	return runForward("ForwardFast32", q, k, v, s, o, forwardFast)
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

// blockProbs turns the products q·k in sc (rows i0 … i0+len/n−1 of
// (b, h), keys lo … lo+n−1, leading dimension n) into probabilities in
// place (scaled, capped, biased and masked as Forward's logits) and writes
// each row's log-sum-exp and sink probability. It
// returns whether any row was empty. q and k, read from kv head kv, are the
// inputs of the products, for checkLogit.
func blockProbs[T num.Float](p *plan, q, k, sc, sech2 []T, b, h, kv, i0, rows, lo, n int, lse, psink []T) (anyEmpty bool) {
	sink := T(p.sinkLogit(h))
	negInf := T(math.Inf(-1))
	scale := T(p.scale)
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
			if plain {
				for jj := a; jj < z; jj++ {
					x[jj] = T(scale * x[jj])
				}
			} else {
				for jj := a; jj < z; jj++ {
					x[jj] = finishLogit(p, T(scale*x[jj]), b, h, i, lo+jj, jj, d)
				}
			}
			for jj := a; jj < z; jj++ {
				if t := x[jj]; t-t != 0 { // NaN or ±Inf: an overflow, unless an input is one
					checkLogit(p, q, k, t, b, h, kv, i, lo+jj)
				}
			}
		} else {
			for jj, t := range x {
				if p.visible(b, i, lo+jj) {
					x[jj] = finishLogit(p, T(scale*t), b, h, i, lo+jj, jj, d)
					if t := x[jj]; t-t != 0 {
						checkLogit(p, q, k, t, b, h, kv, i, lo+jj)
					}
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
// visible key at all has not been through the product).
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
	workers := fastWorkers(rowBlock*s.Lk + 2*rowBlock)
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
			num.MatrixProductSerial(false, true, rows, n, s.Dk, 1, q[p.qOff(b, h, i0):], qs, k[p.kOff(b, kv, lo):], ks, 0, sc, n)
		}
		anyEmpty := blockProbs(p, q, k, sc, nil, b, h, kv, i0, rows, lo, n, rl, ps)
		for r := range rows {
			lse[p.lOff(b, h, i0+r)] = rl[r]
		}
		if n > 0 {
			num.MatrixProductSerial(false, false, rows, s.Dv, n, 1, sc, n, v[p.vOff(b, kv, lo):], vs, 0, out[p.oOff(b, h, i0):], os)
			if !outFinite(p, out, b, h, i0, rows) {
				directPV(p, sc, v, out, b, h, kv, i0, rows, lo, n)
			}
		}
		if anyEmpty || n == 0 {
			fixEmpty(p, out, lse, b, h, i0, rows)
		}
	})
	return out, lse
}

// outFinite reports whether the output rows i0 … i0+rows−1 of (b, h) are
// finite.
func outFinite[T num.Float](p *plan, out []T, b, h, i0, rows int) bool {
	for r := range rows {
		if !allFinite(out[p.oOff(b, h, i0+r):][:p.s.Dv]) {
			return false
		}
	}
	return true
}

// directPV computes the output rows i0 … i0+rows−1 of (b, h) from their
// probabilities in sc (keys lo … lo+n−1) as Forward does: the keys of
// weight 0 skipped. It is for a block whose product P·V is not finite: an
// Inf or NaN in V meets a weight 0 there (0·Inf = NaN), where Forward
// skips the key. Where no weight is 0 it computes the product's sums,
// bit for bit.
func directPV[T num.Float](p *plan, sc, v, out []T, b, h, kv, i0, rows, lo, n int) {
	s := p.s
	for r := range rows {
		oi := out[p.oOff(b, h, i0+r):][:s.Dv]
		clear(oi)
		for jj, pj := range sc[r*n:][:n] {
			if pj == 0 {
				continue
			}
			vj := v[p.vOff(b, kv, lo+jj):][:s.Dv]
			for d, x := range vj {
				oi[d] += T(pj * x)
			}
		}
	}
}

// BackwardFast is Backward computed in blocks of 64 query rows with every
// product through plumb's own blocked matrix product. Tasks are (batch
// entry, kv head) pairs: a task walks the query heads that read its kv head
// in ascending order and their row blocks in ascending order, owns the dK
// and dV of its kv head and the dQ of its query heads, and so no sum is
// split between goroutines. With a bias broadcast across tasks (one bias
// for several batch entries, or for query heads of several kv heads) the
// bias gradient is a sum across tasks, and the row blocks are computed one
// after another in Backward's order (batch entry, query head, row). A
// worker holds at most 3 × 64 × Lk values.
//
// It is Backward bit for bit, on every architecture and for any
// GOMAXPROCS: every sum has Backward's terms in Backward's order (dQ_i over
// the keys, dK_j and dV_j over the rows in the order batch entry, query
// head, row, and the sink gradient over the rows of each head in that
// order), and the keys Backward skips (weight 0) add exact zeros. When Q,
// K or dOut holds an Inf or NaN, which a weight 0 would turn into NaN, it
// computes as Backward does instead. TestFastIsDirect checks the identity.
//
// Special cases are those of Backward, and Lk > MaxElements/192 is refused
// (ErrShape): a worker's scratch would exceed MaxElements.
//
// Accuracy: that of Backward (the package documentation's table).
func BackwardFast(q, k, v, dOut, dLSE []float64, s Shape, o Options) (Grads, error) {
	return grads64(runBackward("BackwardFast", q, k, v, dOut, dLSE, s, o, backwardFast))
}

// BackwardFast32 is the float32 instantiation of the same body as
// BackwardFast: the straightforward low-precision implementation the
// compare package uses as a yardstick; not a reference. It is Backward32
// bit for bit.
//
// Special cases are those of BackwardFast.
//
// Accuracy, as a yardstick: that of Backward32 in the package
// documentation's table.
func BackwardFast32(q, k, v, dOut, dLSE []float32, s Shape, o Options) (Grads32, error) {
	return grads32(runBackward("BackwardFast32", q, k, v, dOut, dLSE, s, o, backwardFast))
}

// allFinite reports whether no element of any of xs is an Inf or NaN.
func allFinite[T num.Float](xs ...[]T) bool {
	for _, x := range xs {
		for _, v := range x {
			if v-v != 0 {
				return false
			}
		}
	}
	return true
}

func backwardFast[T num.Float](p *plan, q, k, v, dout, dlse []T) grads[T] {
	if !allFinite(q, k, dout) {
		return backward(p, q, k, v, dout, dlse) // see BackwardFast
	}
	s := p.s
	g := grads[T]{dq: make([]T, s.qLen()), dk: make([]T, s.kLen()), dv: make([]T, s.vLen())}
	var sinkTerms []T // [Batch, HeadsQ, Lq]: each row's term of its head's sink gradient
	if p.sinks != nil {
		g.dsinks = make([]T, s.HeadsQ)
		sinkTerms = make([]T, s.Batch*s.HeadsQ*s.Lq)
	}
	if p.bias != nil {
		g.dbias = make([]T, len(p.bias))
	}
	ntask := s.Batch * s.HeadsKV
	newTask := func(sb *bwdScratch[T], t int) *bwdTask[T] {
		return &bwdTask[T]{p: p, g: &g, sinkTerms: sinkTerms, sb: sb, q: q, k: k, v: v, dout: dout, dlse: dlse, b: t / s.HeadsKV, kv: t % s.HeadsKV}
	}
	if p.bias != nil && ((!p.biasB && s.Batch > 1) || (!p.biasH && s.HeadsKV > 1)) {
		// The bias gradient sums across tasks: every block in Backward's
		// order, on this goroutine.
		sb := newBwdScratch[T](p)
		tasks := make([]*bwdTask[T], ntask)
		for t := range tasks {
			tasks[t] = newTask(sb, t)
			tasks[t].strides()
		}
		for b := range s.Batch {
			for h := range s.HeadsQ {
				t := tasks[b*s.HeadsKV+p.kvHead(h)]
				for i0 := 0; i0 < s.Lq; i0 += rowBlock {
					t.block(h, i0, min(rowBlock, s.Lq-i0))
				}
			}
		}
		for _, t := range tasks {
			t.finish()
		}
	} else {
		workers := fastWorkers(3*rowBlock*s.Lk + 2*rowBlock)
		bufs := make([]*bwdScratch[T], min(workers, max(1, ntask)))
		parallel(ntask, workers, func(w, t int) {
			if bufs[w] == nil {
				bufs[w] = newBwdScratch[T](p)
			}
			newTask(bufs[w], t).run()
		})
	}
	if g.dsinks != nil {
		// Backward's order: batch entry, then row, for each head.
		for b := range s.Batch {
			for h := range s.HeadsQ {
				for _, x := range sinkTerms[(b*s.HeadsQ+h)*s.Lq:][:s.Lq] {
					g.dsinks[h] += x
				}
			}
		}
	}
	return g
}

// bwdScratch is a worker's scratch space for one block of rows: the scores
// (then probabilities) sc, dP then dS in dp, the cap's derivative, and each
// row's log-sum-exp and sink probability.
type bwdScratch[T num.Float] struct{ sc, dp, sech2, rl, ps []T }

func newBwdScratch[T num.Float](p *plan) *bwdScratch[T] {
	lk := p.s.Lk
	sb := &bwdScratch[T]{sc: make([]T, rowBlock*lk), dp: make([]T, rowBlock*lk), rl: make([]T, rowBlock), ps: make([]T, rowBlock)}
	if p.softCap > 0 {
		sb.sech2 = make([]T, rowBlock*lk)
	}
	return sb
}

// bwdTask is one task of backwardFast: batch entry b, kv head kv, and
// every query head that reads it.
type bwdTask[T num.Float] struct {
	p                   *plan
	g                   *grads[T]
	sinkTerms           []T
	sb                  *bwdScratch[T]
	q, k, v, dout, dlse []T
	b, kv               int
	nanHead             bool // a row of the task is empty under EmptyRowNaN
	qs, ks, vs, os      int  // row strides
}

// run computes the task's blocks: the query heads that read kv head kv in
// ascending order (as Backward visits them), each head's row blocks in
// ascending order.
func (t *bwdTask[T]) run() {
	p, s := t.p, t.p.s
	t.strides()
	group := s.HeadsQ / s.HeadsKV
	for gi := range group {
		h := t.kv*group + gi
		if p.group == GroupCycle {
			h = gi*s.HeadsKV + t.kv
		}
		for i0 := 0; i0 < s.Lq; i0 += rowBlock {
			t.block(h, i0, min(rowBlock, s.Lq-i0))
		}
	}
	t.finish()
}

// strides sets the row strides of the task's tensors.
func (t *bwdTask[T]) strides() {
	p, s := t.p, t.p.s
	t.qs, t.ks, t.vs, t.os = stride(p.layout, s.HeadsQ, s.Dk), stride(p.layout, s.HeadsKV, s.Dk), stride(p.layout, s.HeadsKV, s.Dv), stride(p.layout, s.HeadsQ, s.Dv)
}

// finish sets the task's dK and dV to NaN when one of its rows was empty
// under EmptyRowNaN.
func (t *bwdTask[T]) finish() {
	p, s := t.p, t.p.s
	if t.nanHead {
		// As in Backward: a NaN row poisons its kv head's dK and dV.
		for j := range s.Lk {
			nanFill(t.g.dk[p.kOff(t.b, t.kv, j):][:s.Dk])
			nanFill(t.g.dv[p.vOff(t.b, t.kv, j):][:s.Dv])
		}
	}
}

// block computes the gradients of the rows i0 … i0+rows−1 of query head h.
func (t *bwdTask[T]) block(h, i0, rows int) {
	p, s, g, sb, b := t.p, t.p.s, t.g, t.sb, t.b
	lo, hi := p.keyRange(b, i0, i0+rows)
	n := hi - lo
	sc, dp := sb.sc[:rows*n], sb.dp[:rows*n]
	var sech2 []T
	if sb.sech2 != nil {
		sech2 = sb.sech2[:rows*n]
	}
	scale := T(p.scale)
	qb, dob := t.q[p.qOff(b, h, i0):], t.dout[p.oOff(b, h, i0):]
	var kb, vb []T
	if n > 0 {
		kb, vb = t.k[p.kOff(b, t.kv, lo):], t.v[p.vOff(b, t.kv, lo):]
		num.MatrixProductSerial(false, true, rows, n, s.Dk, 1, qb, t.qs, kb, t.ks, 0, sc, n)
		num.MatrixProductSerial(false, true, rows, n, s.Dv, 1, dob, t.os, vb, t.vs, 0, dp, n)
	}
	blockProbs(p, t.q, t.k, sc, sech2, b, h, t.kv, i0, rows, lo, n, sb.rl, sb.ps)
	for r := range rows {
		var cap2 []T
		if sech2 != nil {
			cap2 = sech2[r*n:][:n]
		}
		t.row(h, i0+r, r, lo, sc[r*n:][:n], dp[r*n:][:n], cap2)
	}
	if n > 0 {
		num.MatrixProductSerial(false, false, rows, s.Dk, n, scale, dp, n, kb, t.ks, 0, g.dq[p.qOff(b, h, i0):], t.qs)
		num.MatrixProductSerial(true, false, n, s.Dk, rows, scale, dp, n, qb, t.qs, 1, g.dk[p.kOff(b, t.kv, lo):], t.ks)
		num.MatrixProductSerial(true, false, n, s.Dv, rows, 1, sc, n, dob, t.os, 1, g.dv[p.vOff(b, t.kv, lo):], t.vs)
	}
	// The empty rows' dQ were overwritten by the product.
	if t.nanHead {
		for r := range rows {
			if sb.rl[r] == T(math.Inf(-1)) {
				nanFill(g.dq[p.qOff(b, h, i0+r):][:s.Dk])
			}
		}
	}
}

// row turns the probabilities pr and dP dr of row i (row r of its block,
// keys lo …) into dS in place, and adds the row's share of the sink and
// bias gradients. An empty row gets dS = 0, and NaN gradients under
// EmptyRowNaN.
func (t *bwdTask[T]) row(h, i, r, lo int, pr, dr, sech2 []T) {
	p, s, g, sb, b := t.p, t.p.s, t.g, t.sb, t.b
	if sb.rl[r] == T(math.Inf(-1)) {
		if p.emptyNaN {
			t.nanHead = true
			nanFill(g.dq[p.qOff(b, h, i):][:s.Dk])
			if g.dsinks != nil {
				t.sinkTerms[(b*s.HeadsQ+h)*s.Lq+i] = T(math.NaN())
			}
			if br := p.biasRow(b, h, i); br >= 0 {
				nanFill(g.dbias[br:][:s.Lk])
			}
		}
		clear(pr)
		clear(dr)
		return
	}
	var gl T
	if t.dlse != nil {
		gl = t.dlse[p.lOff(b, h, i)]
	}
	c, dc := centredD(pr, dr, sb.ps[r])
	if g.dsinks != nil {
		t.sinkTerms[(b*s.HeadsQ+h)*s.Lq+i] = T(sb.ps[r] * (gl - (dc + c)))
	}
	br := p.biasRow(b, h, i)
	for jj, pj := range pr {
		if pj == 0 {
			dr[jj] = 0
			continue
		}
		ds := T(pj * (((dr[jj] - c) - dc) + gl))
		if br >= 0 {
			g.dbias[br+lo+jj] += ds
		}
		if sech2 != nil {
			ds *= sech2[jj]
		}
		dr[jj] = ds
	}
}

// nanFill sets every element of x to NaN.
func nanFill[T num.Float](x []T) {
	for d := range x {
		x[d] = T(math.NaN())
	}
}
