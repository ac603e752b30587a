// Package fastattn is a worked example: a float32 attention kernel written
// the way a kernel engineer writes one, and tested against plumb with one
// call to the attentiontest conformance suite.
//
// The kernel walks the keys in tiles of Tile keys with an online softmax
// (Milakov & Gimelshein 2018, "Online normalizer calculation for softmax",
// arXiv 1805.02867, Algorithm 3, extended to the weighted sum of values:
// a running maximum m, a running sum ℓ and an unnormalised output a,
// rescaled by e^{m−m′} when the maximum grows), applies the rotary encoding
// (Su et al. 2021, "RoFormer", arXiv 2104.09864) to q and k itself, skips
// the tiles a row cannot see under a causal or sliding-window mask, takes
// Rows query rows at a time so that each key and value row is read once
// for all of them, and runs the (batch, head) pairs in parallel. All of its
// arithmetic is float32 except the exponentials and the rotary tables,
// which are computed in float64 and rounded.
//
// Speed: BenchmarkForward (a causal prefill of 512 positions, 16 query
// heads on 4 kv heads, head dimension 128, rotary) takes about 0.21 s on
// the shared 2-core test machine, against 0.20 s for
// attention.ForwardFast32 (plumb's blocked matrix product, no rotary) on
// the same problem, medians of three alternated runs at a load average
// near 3: scalar Go, whose point is the structure of a tiled kernel, not
// its speed.
//
// Its test file is the point of the example: TestConformance is a single
// call to attentiontest.Run, and TestSuiteCatchesSlips runs the suite on a
// copy of this kernel with one convention wrong and shows the message the
// suite gives.
package fastattn

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"sync"
)

// Tile is the number of keys processed per step of the online softmax,
// and Rows the number of query rows processed together (each key and
// value row is read once for all of them).
const (
	Tile = 32
	Rows = 4
)

// rowState is the running state of one query row: its rotated q, the
// keys it sees (lo ≤ j < hi), the running maximum m, sum ℓ and
// unnormalised output acc.
type rowState struct {
	q, acc []float32
	lo, hi int
	m, l   float32
}

// online folds one tile of logits s (−Inf where hidden) into the row's
// running state, and leaves in s the weights e^{s_j − m} the tile's
// values are to be added with.
func (st *rowState) online(s []float32) {
	tm := st.m
	for _, v := range s {
		tm = max(tm, v)
	}
	if math.IsInf(float64(tm), -1) { // nothing seen yet, nor in this tile
		clear(s)
		return
	}
	if corr := float32(math.Exp(float64(st.m - tm))); corr != 1 {
		st.l *= corr
		for x := range st.acc {
			st.acc[x] *= corr
		}
	}
	for j, v := range s {
		e := float32(math.Exp(float64(v - tm)))
		s[j] = e
		st.l += e
	}
	st.m = tm
}

// dot4 is the dot product of k with each of four query rows.
func dot4(q0, q1, q2, q3, k []float32) (s0, s1, s2, s3 float32) {
	k, q1, q2, q3 = k[:len(q0)], q1[:len(q0)], q2[:len(q0)], q3[:len(q0)]
	for x, kx := range k {
		s0 += q0[x] * kx
		s1 += q1[x] * kx
		s2 += q2[x] * kx
		s3 += q3[x] * kx
	}
	return
}

// axpy4 adds e_r·v to each of four output rows.
func axpy4(e0, e1, e2, e3 float32, v, a0, a1, a2, a3 []float32) {
	a0, a1, a2, a3 = a0[:len(v)], a1[:len(v)], a2[:len(v)], a3[:len(v)]
	for x, vx := range v {
		a0[x] += e0 * vx
		a1[x] += e1 * vx
		a2[x] += e2 * vx
		a3[x] += e3 * vx
	}
}

// Params describe one call.
type Params struct {
	Batch, HeadsQ, HeadsKV int
	Lq, Lk                 int
	HeadDim                int // the head dimension of q, k and v

	// SeqMajor lays q, k, v and out out as [batch, seq, heads, dim]
	// instead of [batch, heads, seq, dim]; lse follows the output rows,
	// [batch, seq, heads] or [batch, heads, seq].
	SeqMajor bool

	// StartPos is the position of query 0 among the keys: query i is at
	// key position StartPos + i (Lk − Lq for the last Lq positions).
	StartPos int
	// Causal hides the keys after each query's position; Window > 0
	// hides in addition all but the Window keys ending at it.
	Causal bool
	Window int

	// Scale multiplies q·k; 0 means 1/√HeadDim.
	Scale float32

	// RopeBase > 0 turns on the rotary encoding of q (at StartPos + i)
	// and k (at j), over the first RopeDims dims (0: all), pairing dims
	// (i, i + RopeDims/2) when RopeHalves is set and (2i, 2i+1) otherwise.
	RopeBase   float64
	RopeDims   int
	RopeHalves bool
}

// kvHeadOf maps a query head to its kv head: consecutive query heads share
// one kv head.
func kvHeadOf(h, headsQ, headsKV int) int { return h / (headsQ / headsKV) }

// Forward computes attention: out has the shape of q, lse one value per
// query row. A row that sees no key gives out 0 and lse −Inf.
func Forward(q, k, v []float32, p Params) (out, lse []float32, err error) {
	return forward(q, k, v, p, kvHeadOf, pairOf)
}

// pairOf returns the two dims that rotary frequency i rotates among r.
func pairOf(i, r int, halves bool) (int, int) {
	if halves {
		return i, i + r/2
	}
	return 2 * i, 2*i + 1
}

func forward(q, k, v []float32, p Params, kvHead func(h, hq, hkv int) int, pair func(i, r int, halves bool) (int, int)) (out, lse []float32, err error) {
	if err := p.check(len(q), len(k), len(v)); err != nil {
		return nil, nil, err
	}
	c := newCall(q, k, v, p, kvHead, pair)
	c.run()
	return c.out, c.lse, nil
}

// call is one call of the kernel: its parameters, the inputs prepared for
// the workers, and the outputs they fill.
type call struct {
	p          Params
	d          int     // the head dimension
	scale      float32 // multiplies q·k
	r          int     // the rotated dims
	kvHead     func(h, hq, hkv int) int
	pair       func(i, r int, halves bool) (int, int)
	q          []float32
	kr, vr     []float32 // k (rotated) and v as [batch, kvhead, key, dim]
	cosQ, sinQ []float32 // the rotary tables of the query positions, nil without rotary
	out, lse   []float32
}

func newCall(q, k, v []float32, p Params, kvHead func(h, hq, hkv int) int, pair func(i, r int, halves bool) (int, int)) *call {
	c := &call{p: p, d: p.HeadDim, scale: p.Scale, r: p.RopeDims, kvHead: kvHead, pair: pair, q: q}
	if c.scale == 0 {
		c.scale = float32(1 / math.Sqrt(float64(c.d)))
	}
	if c.r == 0 {
		c.r = c.d
	}
	c.packKV(k, v)
	if p.RopeBase > 0 {
		c.cosQ, c.sinQ = ropeTables(p.RopeBase, c.r, p.StartPos, p.Lq)
	}
	c.out = make([]float32, len(q))
	c.lse = make([]float32, p.Batch*p.HeadsQ*p.Lq)
	return c
}

// idx is the offset of row l of head h of batch entry b in a tensor of
// that many heads and rows, in the call's layout.
func (c *call) idx(b, h, l, heads, L int) int {
	if c.p.SeqMajor {
		return ((b*L+l)*heads + h) * c.d
	}
	return ((b*heads+h)*L + l) * c.d
}

// packKV copies k, rotated once, and v into [batch, kvhead, key, dim], so
// that a tile of keys is contiguous.
func (c *call) packKV(k, v []float32) {
	p, d, r := c.p, c.d, c.r
	c.kr = make([]float32, len(k))
	c.vr = make([]float32, len(v))
	var cosK, sinK []float32
	if p.RopeBase > 0 {
		cosK, sinK = ropeTables(p.RopeBase, r, 0, p.Lk)
	}
	for b := 0; b < p.Batch; b++ {
		for g := 0; g < p.HeadsKV; g++ {
			for j := 0; j < p.Lk; j++ {
				dst := ((b*p.HeadsKV+g)*p.Lk + j) * d
				src := c.idx(b, g, j, p.HeadsKV, p.Lk)
				copy(c.kr[dst:dst+d], k[src:src+d])
				copy(c.vr[dst:dst+d], v[src:src+d])
				if cosK != nil {
					rotate(c.kr[dst:dst+d], cosK[j*r/2:(j+1)*r/2], sinK[j*r/2:(j+1)*r/2], r, p.RopeHalves, c.pair)
				}
			}
		}
	}
}

// run computes every (batch, head) pair, in parallel.
func (c *call) run() {
	tasks := make(chan [2]int)
	var wg sync.WaitGroup
	for w := 0; w < runtime.GOMAXPROCS(0); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			wk := c.newWorker()
			for t := range tasks {
				wk.head(t[0], t[1])
			}
		}()
	}
	for b := 0; b < c.p.Batch; b++ {
		for h := 0; h < c.p.HeadsQ; h++ {
			tasks <- [2]int{b, h}
		}
	}
	close(tasks)
	wg.Wait()
}

// worker is one goroutine's state: the running state of Rows query rows
// and their logits for one tile.
type worker struct {
	*call
	rows [Rows]rowState
	sc   [Rows][Tile]float32
}

func (c *call) newWorker() *worker {
	wk := &worker{call: c}
	for r := range wk.rows {
		wk.rows[r].q, wk.rows[r].acc = make([]float32, c.d), make([]float32, c.d)
	}
	return wk
}

// head computes the output rows of query head h of batch entry b, Rows
// rows at a time, walking the keys they see tile by tile.
func (wk *worker) head(b, h int) {
	p, d := wk.p, wk.d
	g := wk.kvHead(h, p.HeadsQ, p.HeadsKV)
	keys := wk.kr[((b*p.HeadsKV+g)*p.Lk)*d:]
	vals := wk.vr[((b*p.HeadsKV+g)*p.Lk)*d:]
	for i0 := 0; i0 < p.Lq; i0 += Rows {
		n := min(Rows, p.Lq-i0)
		lo, hi := wk.load(b, h, i0, n)
		for t0 := lo - lo%Tile; t0 < hi; t0 += Tile {
			wk.tile(keys, vals, max(t0, lo), min(t0+Tile, hi))
		}
		wk.store(b, h, i0, n)
	}
}

// load starts the rows i0 … i0+n−1 of head h of batch entry b: their
// rotated q, the keys each sees and an empty running state. A short last
// block repeats its last row. It returns the keys any of them sees.
func (wk *worker) load(b, h, i0, n int) (lo, hi int) {
	p, d, r2 := wk.p, wk.d, wk.r/2
	lo, hi = p.Lk, 0
	for r := range wk.rows {
		i := i0 + min(r, n-1) // a short last block repeats its last row
		st := &wk.rows[r]
		o := wk.idx(b, h, i, p.HeadsQ, p.Lq)
		copy(st.q, wk.q[o:o+d])
		if wk.cosQ != nil {
			rotate(st.q, wk.cosQ[i*r2:(i+1)*r2], wk.sinQ[i*r2:(i+1)*r2], r2*2, p.RopeHalves, wk.pair)
		}
		st.lo, st.hi = p.visible(i)
		st.m, st.l = float32(math.Inf(-1)), 0
		clear(st.acc)
		lo, hi = min(lo, st.lo), max(hi, st.hi)
	}
	return lo, hi
}

// tile folds the keys j0 ≤ j < j1 into the rows: their scaled logits (−Inf
// where a row does not see the key), the online softmax, and the weighted
// values.
func (wk *worker) tile(keys, vals []float32, j0, j1 int) {
	d, rows, sc := wk.d, &wk.rows, &wk.sc
	for j := j0; j < j1; j++ {
		s0, s1, s2, s3 := dot4(rows[0].q, rows[1].q, rows[2].q, rows[3].q, keys[j*d:(j+1)*d])
		for r, v := range [Rows]float32{s0, s1, s2, s3} {
			if j < rows[r].lo || j >= rows[r].hi {
				v = float32(math.Inf(-1))
			} else {
				v *= wk.scale
			}
			sc[r][j-j0] = v
		}
	}
	for r := range rows {
		rows[r].online(sc[r][:j1-j0])
	}
	for j := j0; j < j1; j++ {
		jj := j - j0
		axpy4(sc[0][jj], sc[1][jj], sc[2][jj], sc[3][jj], vals[j*d:(j+1)*d], rows[0].acc, rows[1].acc, rows[2].acc, rows[3].acc)
	}
}

// store writes the outputs and log-sum-exps of the rows i0 … i0+n−1; a row
// that saw no key gives 0 and −Inf.
func (wk *worker) store(b, h, i0, n int) {
	p, d := wk.p, wk.d
	for r := 0; r < n; r++ {
		i, st := i0+r, &wk.rows[r]
		o := wk.idx(b, h, i, p.HeadsQ, p.Lq)
		row, li := wk.out[o:o+d], p.lseIndex(b, h, i)
		if st.l == 0 {
			clear(row)
			wk.lse[li] = float32(math.Inf(-1))
			continue
		}
		for x := range row {
			row[x] = st.acc[x] / st.l
		}
		wk.lse[li] = st.m + float32(math.Log(float64(st.l)))
	}
}

// visible returns the keys query i sees, lo ≤ j < hi.
func (p Params) visible(i int) (lo, hi int) {
	lo, hi = 0, p.Lk
	pos := p.StartPos + i
	if p.Causal {
		hi = min(hi, pos+1)
		if p.Window > 0 {
			lo = max(lo, pos-p.Window+1)
		}
	}
	return lo, max(lo, hi)
}

func (p Params) lseIndex(b, h, i int) int {
	if p.SeqMajor {
		return (b*p.Lq+i)*p.HeadsQ + h
	}
	return (b*p.HeadsQ+h)*p.Lq + i
}

// ropeTables returns cos and sin of (start+t)·θ_i, θ_i = base^{−2i/r},
// for t < n, as [n, r/2] tables, computed in float64 and rounded.
func ropeTables(base float64, r, start, n int) (cos, sin []float32) {
	cos = make([]float32, n*r/2)
	sin = make([]float32, n*r/2)
	for t := 0; t < n; t++ {
		for i := 0; i < r/2; i++ {
			theta := math.Pow(base, -2*float64(i)/float64(r))
			s, c := math.Sincos(float64(start+t) * theta)
			cos[t*r/2+i], sin[t*r/2+i] = float32(c), float32(s)
		}
	}
	return cos, sin
}

// rotate applies the rotary encoding to one row in place.
func rotate(x, cos, sin []float32, r int, halves bool, pair func(i, r int, halves bool) (int, int)) {
	for i := 0; i < r/2; i++ {
		a, b := pair(i, r, halves)
		xa, xb := x[a], x[b]
		x[a] = xa*cos[i] - xb*sin[i]
		x[b] = xa*sin[i] + xb*cos[i]
	}
}

// ErrParams is returned for inconsistent parameters.
var ErrParams = errors.New("fastattn: invalid parameters")

// check refuses parameters that do not describe a problem, and inputs of
// other lengths, with an error wrapping ErrParams in the form
// "fastattn: invalid parameters: Forward: Params.HeadsQ = 6; want a
// multiple of HeadsKV = 4".
func (p Params) check(nq, nk, nv int) error {
	bad := func(format string, a ...any) error {
		return fmt.Errorf("%w: Forward: "+format, append([]any{ErrParams}, a...)...)
	}
	for _, f := range []struct {
		name  string
		v, lo int
	}{
		{"Batch", p.Batch, 0}, {"HeadsQ", p.HeadsQ, 1}, {"HeadsKV", p.HeadsKV, 1},
		{"Lq", p.Lq, 0}, {"Lk", p.Lk, 0}, {"HeadDim", p.HeadDim, 1}, {"Window", p.Window, 0},
	} {
		if f.v < f.lo {
			return bad("Params.%s = %d; want ≥ %d", f.name, f.v, f.lo)
		}
	}
	switch {
	case p.HeadsQ%p.HeadsKV != 0:
		return bad("Params.HeadsQ = %d; want a multiple of HeadsKV = %d", p.HeadsQ, p.HeadsKV)
	case p.Window > 0 && !p.Causal:
		return bad("Params.Window = %d without Causal; want Causal with a window", p.Window)
	case p.RopeDims%2 != 0 || p.RopeDims > p.HeadDim || p.RopeDims < 0:
		return bad("Params.RopeDims = %d; want an even number from 0 to HeadDim = %d", p.RopeDims, p.HeadDim)
	case p.RopeBase > 0 && p.RopeDims == 0 && p.HeadDim%2 != 0:
		return bad("Params.RopeDims = 0 rotates all HeadDim = %d dims; want an even number of rotated dims: set RopeDims", p.HeadDim)
	case p.Causal && (p.StartPos < 0 || p.StartPos+p.Lq > p.Lk):
		return bad("Params.StartPos = %d; want 0 … Lk − Lq = %d, so that the Lq = %d causal queries sit among the Lk = %d keys",
			p.StartPos, p.Lk-p.Lq, p.Lq, p.Lk)
	case nq != p.Batch*p.HeadsQ*p.Lq*p.HeadDim:
		return bad("q has %d elements; want Batch·HeadsQ·Lq·HeadDim = %d·%d·%d·%d = %d",
			nq, p.Batch, p.HeadsQ, p.Lq, p.HeadDim, p.Batch*p.HeadsQ*p.Lq*p.HeadDim)
	}
	for _, t := range []struct {
		name string
		n    int
	}{{"k", nk}, {"v", nv}} {
		if want := p.Batch * p.HeadsKV * p.Lk * p.HeadDim; t.n != want {
			return bad("%s has %d elements; want Batch·HeadsKV·Lk·HeadDim = %d·%d·%d·%d = %d",
				t.name, t.n, p.Batch, p.HeadsKV, p.Lk, p.HeadDim, want)
		}
	}
	return nil
}
