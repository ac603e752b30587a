package attentiontest

import (
	"math/rand/v2"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/posenc"
)

// Case is one problem of the suite: a name, what it is there to catch, and
// the problem before the conventions (layout, group map, rotary pairing,
// empty-row policy) are filled in from the kernel's Supports.
type Case struct {
	Name    string
	Why     string
	Problem Problem
	// draw returns q, k and v; nil means standard normal.
	drawFn func(r *rand.Rand, p Problem) (q, k, v []float64)
	// rotaryOnly: the case is about the rotary encoding, and is skipped
	// rather than posed without it for a kernel that has none.
	rotaryOnly bool
}

func (c Case) draw(r *rand.Rand, p Problem) (q, k, v []float64) {
	if c.drawFn != nil {
		return c.drawFn(r, p)
	}
	s := p.Shape
	return suite.Normal(r, s.Batch*s.HeadsQ*s.Lq*s.Dk, 1), suite.Normal(r, s.Batch*s.HeadsKV*s.Lk*s.Dk, 1),
		suite.Normal(r, s.Batch*s.HeadsKV*s.Lk*s.Dv, 1)
}

// shape is a Shape with Dv = Dk.
func shape(b, hq, hkv, lq, lk, d int) attention.Shape {
	return attention.Shape{Batch: b, HeadsQ: hq, HeadsKV: hkv, Lq: lq, Lk: lk, Dk: d, Dv: d}
}

// rope is a full rotary encoding of d dims with base b (the pairing is
// filled in per variant).
func rope(d int, b float64) *posenc.Rotary { return &posenc.Rotary{Dim: d, Rotated: d, Base: b} }

// Cases returns the suite's cases, in the order Run runs them. Each runs
// under every convention the kernel declares (see Supports).
func Cases() []Case {
	p := func(s attention.Shape, m Masking, rot *posenc.Rotary) Problem {
		return Problem{Shape: s, Mask: m, Scale: defaultScale(s.Dk), Rotary: rot}
	}
	with := func(pr Problem, f func(*Problem)) Problem { f(&pr); return pr }
	return []Case{
		{Name: "one_query_one_key", Why: "length 1: the softmax of one logit is 1, whatever its value",
			Problem: p(shape(1, 2, 2, 1, 1, 8), NoMask, rope(8, 10000))},
		{Name: "full_square", Why: "plain multi-head attention over every key, lengths that are no power of two",
			Problem: p(shape(2, 4, 4, 19, 19, 16), NoMask, rope(16, 10000))},
		{Name: "cross_fewer_queries", Why: "Lq < Lk without a mask (cross attention)",
			Problem: p(shape(1, 2, 2, 5, 23, 16), NoMask, nil)},
		{Name: "cross_more_queries", Why: "Lq > Lk without a mask",
			Problem: p(shape(1, 2, 2, 23, 5, 16), NoMask, nil)},
		{Name: "causal_square", Why: "the causal prefill",
			Problem: p(shape(2, 4, 4, 33, 33, 32), Causal, rope(32, 10000))},
		{Name: "causal_grouped", Why: "8 query heads on 2 kv heads: GroupBlocks and GroupCycle read different kv heads",
			Problem: p(shape(1, 8, 2, 40, 40, 16), Causal, rope(16, 10000))},
		{Name: "causal_multi_query", Why: "4 query heads on one kv head",
			Problem: p(shape(1, 4, 1, 21, 21, 16), Causal, rope(16, 10000))},
		{Name: "decode_step", Why: "one query at the last key position (mask.AlignEnd), grouped heads",
			Problem: p(shape(2, 4, 2, 1, 77, 16), Causal, rope(16, 10000))},
		{Name: "chunked_prefill", Why: "16 queries at the last 16 of 50 key positions (mask.AlignEnd)",
			Problem: p(shape(1, 2, 2, 16, 50, 16), Causal, rope(16, 10000))},
		{Name: "align_start", Why: "query i at key position i (mask.AlignStart): the first rows see few keys",
			Problem: with(p(shape(1, 2, 2, 12, 40, 16), Causal, rope(16, 10000)), func(q *Problem) { q.Align = mask.AlignStart })},
		{Name: "align_start_offset", Why: "queries at key positions 9 … 20 of 40 (mask.AlignStart, offset 9)",
			Problem: with(p(shape(1, 2, 2, 12, 40, 16), Causal, rope(16, 10000)), func(q *Problem) { q.Align, q.Offset = mask.AlignStart, 9 })},
		{Name: "align_end_offset", Why: "a chunk that is not the last: 8 queries at positions 30 … 37 of 48 (mask.AlignEnd, offset −10)",
			Problem: with(p(shape(1, 2, 2, 8, 48, 16), Causal, rope(16, 10000)), func(q *Problem) { q.Offset = -10 })},
		{Name: "window_edges", Why: "a window of 7 keys: the first rows are cut by the start of the sequence",
			Problem: with(p(shape(1, 2, 2, 30, 30, 16), SlidingWindow, rope(16, 10000)), func(q *Problem) { q.Window = 7 })},
		{Name: "window_one", Why: "a window of 1: each query sees only itself",
			Problem: with(p(shape(1, 2, 2, 9, 9, 16), SlidingWindow, rope(16, 10000)), func(q *Problem) { q.Window = 1 })},
		{Name: "window_wider_than_keys", Why: "a window of 64 over 20 keys: the causal mask",
			Problem: with(p(shape(1, 2, 2, 20, 20, 16), SlidingWindow, rope(16, 10000)), func(q *Problem) { q.Window = 64 })},
		{Name: "window_decode", Why: "3 queries at the end of 40 keys, a window of 8",
			Problem: with(p(shape(1, 4, 2, 3, 40, 16), SlidingWindow, rope(16, 10000)), func(q *Problem) { q.Window = 8 })},
		{Name: "no_keys", Why: "Lk = 0: every row sees no key (the declared EmptyRow; lse −Inf)",
			Problem: p(shape(1, 2, 2, 4, 0, 16), NoMask, nil)},
		{Name: "padded_keys_empty_rows", Why: "key lengths 10, 3 and 0: the last batch entry's rows see no key",
			Problem: with(p(shape(3, 2, 2, 6, 10, 16), NoMask, nil), func(q *Problem) { q.KeyLengths = []int{10, 3, 0} })},
		{Name: "logits_near_1000", Why: "logits near +1000 and −1000: a kernel that does not subtract the running maximum overflows",
			Problem: p(shape(1, 2, 2, 24, 24, 16), Causal, nil), drawFn: drawNear1000},
		{Name: "value_dim_differs", Why: "Dk 32, Dv 8",
			Problem: p(attention.Shape{Batch: 1, HeadsQ: 2, HeadsKV: 2, Lq: 17, Lk: 17, Dk: 32, Dv: 8}, Causal, rope(32, 10000))},
		{Name: "partial_rotary", Why: "the first 16 of 32 dims rotated, frequencies over 16",
			Problem: p(shape(1, 2, 2, 17, 17, 32), Causal, &posenc.Rotary{Dim: 32, Rotated: 16, Base: 10000}), rotaryOnly: true},
		{Name: "rotary_base_500000", Why: "another base, and positions up to 299",
			Problem: p(shape(1, 2, 2, 8, 300, 16), Causal, rope(16, 500000)), rotaryOnly: true},
		{Name: "custom_scale", Why: "a logit scale other than 1/√Dk",
			Problem: with(p(shape(1, 2, 2, 17, 17, 16), Causal, rope(16, 10000)), func(q *Problem) { q.Scale = 0.05 })},
		{Name: "soft_cap", Why: "logits capped at 20·tanh(s/20), with logits of tens",
			Problem: with(p(shape(1, 2, 2, 17, 17, 16), Causal, rope(16, 10000)), func(q *Problem) { q.SoftCap, q.Scale = 20, 2 })},
		{Name: "realistic_prefill", Why: "8 query heads on 2 kv heads, 128 positions, head dimension 64: several tiles of keys",
			Problem: p(shape(1, 8, 2, 128, 128, 64), Causal, rope(64, 10000))},
		{Name: "realistic_decode", Why: "one query against 512 cached keys, head dimension 64",
			Problem: p(shape(2, 8, 2, 1, 512, 64), Causal, rope(64, 10000))},
	}
}

// drawNear1000 draws q and k whose scaled logits are near +1000 (even query
// rows) or −1000 (odd query rows), spread by a few units: q = ±m·1 + noise,
// k = m·1 + noise with Scale·Dk·m² = 1000.
func drawNear1000(r *rand.Rand, p Problem) (q, k, v []float64) {
	s := p.Shape
	m := sqrt(1000 / (p.Scale * float64(s.Dk)))
	q = suite.Normal(r, s.Batch*s.HeadsQ*s.Lq*s.Dk, 0.2)
	for i := range q {
		if (i/s.Dk)%2 == 1 {
			q[i] -= m
		} else {
			q[i] += m
		}
	}
	k = suite.Normal(r, s.Batch*s.HeadsKV*s.Lk*s.Dk, 0.2)
	for i := range k {
		k[i] += m
	}
	return q, k, suite.Normal(r, s.Batch*s.HeadsKV*s.Lk*s.Dv, 1)
}
