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
// the tiles a row cannot see under a causal or sliding-window mask, and
// runs the (batch, head) pairs in parallel. All of its arithmetic is
// float32 except the rotary tables, which are computed in float64 and
// rounded.
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

// Tile is the number of keys processed per step of the online softmax.
const Tile = 32

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
	d := p.HeadDim
	scale := p.Scale
	if scale == 0 {
		scale = float32(1 / math.Sqrt(float64(d)))
	}
	r := p.RopeDims
	if r == 0 {
		r = d
	}
	idx := func(b, h, l, heads, L int) int {
		if p.SeqMajor {
			return ((b*L+l)*heads + h) * d
		}
		return ((b*heads+h)*L + l) * d
	}

	// Rotate k once, into [batch, kvhead, key, dim] so that a tile of keys
	// is contiguous.
	kr := make([]float32, len(k))
	vr := make([]float32, len(v))
	var cosK, sinK []float32
	if p.RopeBase > 0 {
		cosK, sinK = ropeTables(p.RopeBase, r, 0, p.Lk)
	}
	for b := 0; b < p.Batch; b++ {
		for g := 0; g < p.HeadsKV; g++ {
			for j := 0; j < p.Lk; j++ {
				dst := ((b*p.HeadsKV+g)*p.Lk + j) * d
				src := idx(b, g, j, p.HeadsKV, p.Lk)
				copy(kr[dst:dst+d], k[src:src+d])
				copy(vr[dst:dst+d], v[src:src+d])
				if cosK != nil {
					rotate(kr[dst:dst+d], cosK[j*r/2:(j+1)*r/2], sinK[j*r/2:(j+1)*r/2], r, p.RopeHalves, pair)
				}
			}
		}
	}
	var cosQ, sinQ []float32
	if p.RopeBase > 0 {
		cosQ, sinQ = ropeTables(p.RopeBase, r, p.StartPos, p.Lq)
	}

	out = make([]float32, len(q))
	lse = make([]float32, p.Batch*p.HeadsQ*p.Lq)
	tasks := make(chan [2]int)
	var wg sync.WaitGroup
	for w := 0; w < runtime.GOMAXPROCS(0); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			qi := make([]float32, d)
			acc := make([]float32, d)
			s := make([]float32, Tile)
			for t := range tasks {
				b, h := t[0], t[1]
				g := kvHead(h, p.HeadsQ, p.HeadsKV)
				keys := kr[((b*p.HeadsKV+g)*p.Lk)*d:]
				vals := vr[((b*p.HeadsKV+g)*p.Lk)*d:]
				for i := 0; i < p.Lq; i++ {
					o := idx(b, h, i, p.HeadsQ, p.Lq)
					copy(qi, q[o:o+d])
					if cosQ != nil {
						rotate(qi, cosQ[i*r/2:(i+1)*r/2], sinQ[i*r/2:(i+1)*r/2], r, p.RopeHalves, pair)
					}
					lo, hi := p.visible(i)
					m, l := float32(math.Inf(-1)), float32(0)
					clear(acc)
					for t0 := lo - lo%Tile; t0 < hi; t0 += Tile {
						j0, j1 := max(t0, lo), min(t0+Tile, hi)
						tm := m
						for j := j0; j < j1; j++ {
							var dot float32
							kj := keys[j*d : (j+1)*d]
							for x := range qi {
								dot += qi[x] * kj[x]
							}
							s[j-j0] = scale * dot
							tm = max(tm, s[j-j0])
						}
						corr := float32(math.Exp(float64(m - tm)))
						l *= corr
						for x := range acc {
							acc[x] *= corr
						}
						for j := j0; j < j1; j++ {
							e := float32(math.Exp(float64(s[j-j0] - tm)))
							l += e
							vj := vals[j*d : (j+1)*d]
							for x := range acc {
								acc[x] += e * vj[x]
							}
						}
						m = tm
					}
					row := out[o : o+d]
					li := p.lseIndex(b, h, i)
					if l == 0 {
						clear(row)
						lse[li] = float32(math.Inf(-1))
						continue
					}
					for x := range row {
						row[x] = acc[x] / l
					}
					lse[li] = m + float32(math.Log(float64(l)))
				}
			}
		}()
	}
	for b := 0; b < p.Batch; b++ {
		for h := 0; h < p.HeadsQ; h++ {
			tasks <- [2]int{b, h}
		}
	}
	close(tasks)
	wg.Wait()
	return out, lse, nil
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
var ErrParams = errors.New("fastattn: bad parameters")

func (p Params) check(nq, nk, nv int) error {
	switch {
	case p.Batch < 0 || p.Lq < 0 || p.Lk < 0 || p.HeadDim < 1 || p.HeadsQ < 1 || p.HeadsKV < 1:
		return fmt.Errorf("%w: %+v", ErrParams, p)
	case p.HeadsQ%p.HeadsKV != 0:
		return fmt.Errorf("%w: %d query heads on %d kv heads", ErrParams, p.HeadsQ, p.HeadsKV)
	case p.RopeDims%2 != 0 || p.RopeDims > p.HeadDim || p.RopeDims < 0:
		return fmt.Errorf("%w: RopeDims %d with head dimension %d", ErrParams, p.RopeDims, p.HeadDim)
	case p.Causal && (p.StartPos < 0 || p.StartPos+p.Lq > p.Lk):
		return fmt.Errorf("%w: queries at positions %d … %d of %d keys", ErrParams, p.StartPos, p.StartPos+p.Lq-1, p.Lk)
	case nq != p.Batch*p.HeadsQ*p.Lq*p.HeadDim:
		return fmt.Errorf("%w: len(q) = %d", ErrParams, nq)
	case nk != p.Batch*p.HeadsKV*p.Lk*p.HeadDim || nv != nk:
		return fmt.Errorf("%w: len(k) = %d, len(v) = %d", ErrParams, nk, nv)
	}
	return nil
}
