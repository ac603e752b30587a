package attention

import (
	"math"

	"github.com/plumbref/plumb/internal/elem"
	"github.com/plumbref/plumb/internal/num"
)

// This file holds the direct form: one query row at a time, every formula
// written out as it reads. The float64 instantiation is the reference.

// logitsRow writes the final logits of row (b, h, i) for keys j0, j0+1, …,
// j0+len(s)−1 into s (−Inf where the mask hides the key). When sech2 is not
// nil and a cap is set it also writes the derivative of the cap,
// 1/cosh²(t/c), per key, indexed like s.
func logitsRow[T num.Float](p *plan, q, k []T, b, h, i, j0 int, s, sech2 []T) {
	dk := p.s.Dk
	qi := q[p.qOff(b, h, i):][:dk]
	kv := p.kvHead(h)
	for jj := range s {
		if !p.visible(b, i, j0+jj) {
			s[jj] = T(math.Inf(-1))
			continue
		}
		kj := k[p.kOff(b, kv, j0+jj):][:dk]
		var acc T
		if a := p.idiom.Accumulation; a != AccumulateFloat32 {
			for d, x := range qi {
				acc = accumulate(a, acc, T(x*kj[d]))
			}
		} else {
			for d, x := range qi {
				acc += T(x * kj[d])
			}
		}
		t := finishLogit(p, T(T(p.scale)*acc), b, h, i, j0+jj, jj, sech2)
		if t-t != 0 { // NaN or ±Inf: an overflow, unless an input is one
			checkLogit(p, q, k, t, b, h, kv, i, j0+jj)
		}
		s[jj] = t
	}
}

// finishLogit applies the cap, the bias and ALiBi to the scaled logit t of
// key j in row (b, h, i), in that order. With sech2 not nil and a cap set
// it stores the cap's derivative in sech2[at].
func finishLogit[T num.Float](p *plan, t T, b, h, i, j, at int, sech2 []T) T {
	if c := p.softCap; c > 0 {
		u := float64(t) / c
		if sech2 != nil {
			ch := elem.Cosh(u)
			sech2[at] = T(1 / (ch * ch))
		}
		t = T(c * elem.Tanh(u))
	}
	if r := p.biasRow(b, h, i); r >= 0 {
		t += T(p.bias[r+j])
	}
	if p.slopes != nil {
		d := p.alibi.Distance(p.geom.Pos(i), j)
		t -= T(T(p.slopes[h]) * T(d))
	}
	return t
}

// sinkLogit is the sink logit of head h, −Inf for none.
func (p *plan) sinkLogit(h int) float64 {
	if p.sinks == nil {
		return math.Inf(-1)
	}
	return p.sinks[h]
}

// rowMax returns the largest of the logits s and the sink logit, a NaN if
// any logit is NaN (a NaN logit makes the whole row NaN). A row whose
// maximum is −Inf sees no key: rowMax then fills s with 0, or NaN under
// emptyNaN, and returns empty.
func rowMax[T num.Float](s []T, sink T, emptyNaN bool) (m T, empty bool) {
	m = sink
	for _, x := range s {
		if x > m || x != x {
			m = x
		}
	}
	if !math.IsInf(float64(m), -1) {
		return m, false
	}
	fill := T(0)
	if emptyNaN {
		fill = T(math.NaN())
	}
	for j := range s {
		s[j] = fill
	}
	return m, true
}

// softmaxRow turns the logits s into probabilities in place, with the sink
// logit sink (−Inf for none) joining the denominator. It returns the
// natural log-sum-exp of the logits and the sink, the sink's probability,
// and whether the row is empty (every logit and the sink −Inf). An empty
// row's probabilities are 0, or NaN under EmptyRowNaN; its log-sum-exp is
// −Inf.
func softmaxRow[T num.Float](s []T, sink T, emptyNaN bool) (lse, psink T, empty bool) {
	m, empty := rowMax(s, sink, emptyNaN)
	if empty {
		return T(math.Inf(-1)), 0, true
	}
	var sum T
	for j, x := range s {
		e := T(elem.Exp(float64(x - m)))
		s[j] = e
		sum += e
	}
	es := T(elem.Exp(float64(sink - m)))
	sum += es
	for j := range s {
		s[j] /= sum
	}
	return m + T(elem.Log(float64(sum))), es / sum, false
}

// queryRow names one query row: row i of query head h in batch entry b,
// which reads kv head kv.
type queryRow struct{ b, h, kv, i int }

// rows walks every query row, batch entry by batch entry, query head by
// query head, row by row: the order in which the direct and tiled forms
// compute (and sum) them.
func (p *plan) rows(yield func(queryRow) bool) {
	for b := range p.s.Batch {
		for h := range p.s.HeadsQ {
			kv := p.kvHead(h)
			for i := range p.s.Lq {
				if !yield(queryRow{b, h, kv, i}) {
					return
				}
			}
		}
	}
}

// probsRow writes the probabilities of every key for row r into row (and
// the cap's derivatives into sech2, when not nil) and returns softmaxRow's
// log-sum-exp, sink probability and emptiness.
func probsRow[T num.Float](p *plan, q, k []T, r queryRow, row, sech2 []T) (lse, psink T, empty bool) {
	logitsRow(p, q, k, r.b, r.h, r.i, 0, row, sech2)
	if p.idiom != (Idiom{}) {
		return softmaxRowIdiom(row, T(p.sinkLogit(r.h)), p.emptyNaN, p.idiom)
	}
	return softmaxRow(row, T(p.sinkLogit(r.h)), p.emptyNaN)
}

// forward is the direct form of Forward.
func forward[T num.Float](p *plan, q, k, v []T) (out, lse []T) {
	s := p.s
	out = make([]T, s.oLen())
	lse = make([]T, s.lseLen())
	row := make([]T, s.Lk)
	for r := range p.rows {
		l, _, empty := probsRow(p, q, k, r, row, nil)
		lse[p.lOff(r.b, r.h, r.i)] = l
		oi := out[p.oOff(r.b, r.h, r.i):][:s.Dv]
		if empty && p.emptyNaN {
			// Also when Lk = 0, where there is no weight to carry the NaN
			// into the sum below.
			nanFill(oi)
			continue
		}
		for j, pj := range row {
			if pj == 0 {
				continue // a key of weight 0 contributes nothing
			}
			vj := v[p.vOff(r.b, r.kv, j):][:s.Dv]
			if a := p.idiom.Accumulation; a != AccumulateFloat32 {
				for d, x := range vj {
					oi[d] = accumulate(a, oi[d], T(pj*x))
				}
				continue
			}
			for d, x := range vj {
				oi[d] += T(pj * x)
			}
		}
	}
	return out, lse
}

// centredD returns c and D − c, where D = Σ_j P_j dP_j is the weighted
// mean that dS = P (dP − D) subtracts and c is the dP of the most probable
// entry (0 when that is the sink, whose dP is 0). Because the weights and
// the sink sum to 1,
//
//	D − c = Σ_j P_j (dP_j − c) − c·P_sink,
//
// and dP_j − D = (dP_j − c) − (D − c). Centring on the dominant entry
// removes the cancellation dP_m − D of a row whose probability mass sits on
// one key (P_m ≈ 1), where the difference is far smaller than either term;
// otherwise it changes nothing. Entries with P_j = 0 are skipped.
func centredD[T num.Float](pr, dp []T, psink T) (c, dc T) {
	big := psink
	for j, pj := range pr {
		if pj > big {
			big, c = pj, dp[j]
		}
	}
	for j, pj := range pr {
		if pj != 0 && pj == pj {
			dc += T(pj * (dp[j] - c))
		} else if pj != 0 {
			dc += pj // NaN under EmptyRowNaN
		}
	}
	dc -= T(c * psink)
	return c, dc
}

// grads holds the gradients of one backward pass.
type grads[T num.Float] struct {
	dq, dk, dv, dsinks, dbias []T
}

// nanRow sets the gradients that the empty row r reaches under
// EmptyRowNaN to NaN: its dQ, its sink's and bias row's gradients, and the
// dK and dV of its key/value head, as the fast form does.
func nanRow[T num.Float](p *plan, g grads[T], r queryRow) {
	s := p.s
	nanFill(g.dq[p.qOff(r.b, r.h, r.i):][:s.Dk])
	if g.dsinks != nil {
		g.dsinks[r.h] = T(math.NaN())
	}
	if br := p.biasRow(r.b, r.h, r.i); br >= 0 {
		nanFill(g.dbias[br:][:s.Lk])
	}
	for j := 0; j < s.Lk; j++ {
		nanFill(g.dk[p.kOff(r.b, r.kv, j):][:s.Dk])
		nanFill(g.dv[p.vOff(r.b, r.kv, j):][:s.Dv])
	}
}

// backward is the direct form of Backward. dlse may be nil.
func backward[T num.Float](p *plan, q, k, v, dout, dlse []T) grads[T] {
	s := p.s
	g := grads[T]{dq: make([]T, s.qLen()), dk: make([]T, s.kLen()), dv: make([]T, s.vLen())}
	if p.sinks != nil {
		g.dsinks = make([]T, s.HeadsQ)
	}
	if p.bias != nil {
		g.dbias = make([]T, len(p.bias))
	}
	row := make([]T, s.Lk)
	dp := make([]T, s.Lk)
	var sech2 []T
	if p.softCap > 0 {
		sech2 = make([]T, s.Lk)
	}
	scale := T(p.scale)
	for r := range p.rows {
		b, h, kv, i := r.b, r.h, r.kv, r.i
		_, psink, empty := probsRow(p, q, k, r, row, sech2)
		if empty {
			// Under EmptyRowZero an empty row is constant: no gradient.
			// Under EmptyRowNaN its output is NaN, and so is every
			// gradient it reaches, also when there is no key to carry
			// the NaN (Lk = 0).
			if p.emptyNaN {
				nanRow(p, g, r)
			}
			continue
		}
		var gl T
		if dlse != nil {
			gl = dlse[p.lOff(b, h, i)]
		}
		doi := dout[p.oOff(b, h, i):][:s.Dv]
		qi := q[p.qOff(b, h, i):][:s.Dk]
		dqi := g.dq[p.qOff(b, h, i):][:s.Dk]
		// dP_j = dO_i · v_j.
		for j, pj := range row {
			if pj == 0 {
				continue
			}
			vj := v[p.vOff(b, kv, j):][:s.Dv]
			var acc T
			for d, x := range doi {
				acc += T(x * vj[d])
			}
			dp[j] = acc
		}
		c, dsum := centredD(row, dp, psink)
		if g.dsinks != nil {
			// dσ = P_sink (dLSE − D) with D − c = dsum and the
			// sink's own dP = 0.
			g.dsinks[h] += T(psink * (gl - (dsum + c)))
		}
		br := p.biasRow(b, h, i)
		for j, pj := range row {
			if pj == 0 {
				continue
			}
			// dS_ij = P_ij (dP_ij − D_i + dLSE_i).
			ds := T(pj * (((dp[j] - c) - dsum) + gl)) // rounded: not fused into the dbias sum
			if br >= 0 {
				g.dbias[br+j] += ds
			}
			dt := ds
			if sech2 != nil {
				dt *= sech2[j]
			}
			dt *= scale
			kj := k[p.kOff(b, kv, j):][:s.Dk]
			dkj := g.dk[p.kOff(b, kv, j):][:s.Dk]
			for d := range qi {
				dqi[d] += T(dt * kj[d])
				dkj[d] += T(dt * qi[d])
			}
			dvj := g.dv[p.vOff(b, kv, j):][:s.Dv]
			for d, x := range doi {
				dvj[d] += T(pj * x)
			}
		}
	}
	return g
}
