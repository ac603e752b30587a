package attentiontest

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/kvcache"
	"github.com/plumbref/plumb/mask"
)

// tiledBlock is the key block of the second yardstick form of the
// serving suites.
const tiledBlock = 16

// tiled32 is attention.ForwardTiled32 over blocks of tiledBlock keys: a
// float32 form that sums in another order than the direct one (a running
// maximum and sum per block, rescaled), the second yardstick run of the
// serving suites.
func tiled32(q, k, v []float32, s attention.Shape, o attention.Options) ([]float32, []float32, error) {
	return attention.ForwardTiled32(q, k, v, s, tiledBlock, o)
}

// rowAt is the offset of row (b, h, i) of a [B, H, L, D] tensor in the
// layout.
func rowAt(l attention.Layout, b, h, i, H, L, D int) int {
	if l == attention.SeqMajor {
		return ((b*L+i)*H + h) * D
	}
	return ((b*H+h)*L + i) * D
}

// ServingSupports declares what a ring, split or packed kernel
// implements: the layouts and group maps that multiply the cases (empty:
// the zero value alone), and whether it returns the log-sum-exp (a split
// kernel always does: its partials merge by it).
type ServingSupports struct {
	Layouts []attention.Layout
	Groups  []attention.GroupMap
	LSE     bool
}

// servingVariants expands a problem into one per declared layout (when
// layouts matter) and group map (grouped heads only), named by their
// words; set fills them in.
func servingVariants[P any](s ServingSupports, p P, hq, hkv int, layouts bool, set func(P, attention.Layout, attention.GroupMap) P) []suite.Variant[P] {
	ls := s.Layouts
	if len(ls) == 0 || !layouts {
		ls = []attention.Layout{attention.HeadsMajor}
	}
	grouped := hkv > 1 && hkv < hq
	gs := []attention.GroupMap{attention.GroupBlocks}
	if grouped && len(s.Groups) > 0 {
		gs = s.Groups
	}
	var vs []suite.Variant[P]
	for _, l := range ls {
		for _, g := range gs {
			name := l.String()
			if !layouts {
				name = "token-major"
			}
			if grouped {
				name += "/" + g.String()
			}
			vs = append(vs, suite.Variant[P]{Name: name, Problem: set(p, l, g)})
		}
	}
	return vs
}

// RingProblem is one decoding step of a ring-buffer kernel: Shape.Lk = W
// slots, the tokens at positions 0 … N−1 written to slot p mod W
// (kvcache.RingWrite), the newest, at N − 1, the query's own. The kernel
// attends q [Batch, HeadsQ, 1, Dk] (in Layout) to the min(N, W) positions
// the ring holds, as kvcache.AttendRing does: attention over all N
// positions with a sliding window of W keys. Slots not yet written (N <
// W) hold values that must not be read.
type RingProblem struct {
	Shape  attention.Shape
	N      int
	Layout attention.Layout
	Group  attention.GroupMap
	Scale  float64
}

func (p RingProblem) String() string {
	s := p.Shape
	return fmt.Sprintf("batch %d, %d query heads on %d kv heads, Dk %d, Dv %d, a ring of %d slots after %d tokens, layout %v, group %v, scale %.6g",
		s.Batch, s.HeadsQ, s.HeadsKV, s.Dk, s.Dv, s.Lk, p.N, p.Layout, p.Group, p.Scale)
}

// tiled32 is the ring's second yardstick form: the positions the ring
// holds unrolled into position order and attended by tiled32.
func (p RingProblem) tiled32(in [][]float32, o attention.Options) ([]float32, []float32, error) {
	s := p.Shape
	w, l := s.Lk, min(p.N, s.Lk)
	k, v := make([]float32, s.Batch*s.HeadsKV*l*s.Dk), make([]float32, s.Batch*s.HeadsKV*l*s.Dv)
	for b := range s.Batch {
		for g := range s.HeadsKV {
			for i := range l {
				slot := (p.N - l + i) % w
				copy(k[rowAt(p.Layout, b, g, i, s.HeadsKV, l, s.Dk):][:s.Dk], in[1][rowAt(p.Layout, b, g, slot, s.HeadsKV, w, s.Dk):])
				copy(v[rowAt(p.Layout, b, g, i, s.HeadsKV, l, s.Dv):][:s.Dv], in[2][rowAt(p.Layout, b, g, slot, s.HeadsKV, w, s.Dv):])
			}
		}
	}
	s.Lk = l
	return tiled32(in[0], k, v, s, o)
}

// RingKernel is a ring-buffer kernel under test.
type RingKernel[E compare.Float] struct {
	Attend   func(q, kRing, vRing []E, p RingProblem) (out, lse []E, err error)
	Format   compare.Format
	Supports ServingSupports
}

// RingCase is one problem of the ring suite.
type RingCase struct {
	Name    string
	Why     string
	Problem RingProblem
}

// RingCases returns the ring suite's cases, in the order RunRing runs
// them.
func RingCases() []RingCase {
	rc := func(name, why string, hq, hkv, d, w, n int) RingCase {
		return RingCase{name, why, RingProblem{Shape: shape(1, hq, hkv, 1, w, d), N: n, Scale: 1 / math.Sqrt(float64(d))}}
	}
	return []RingCase{
		rc("ring_filling", "3 tokens in a ring of 8: five slots hold values never written, which must not be read", 4, 2, 16, 8, 3),
		rc("ring_full", "8 tokens in a ring of 8: every slot, none overwritten", 4, 2, 16, 8, 8),
		rc("ring_wrapped", "9 tokens in a ring of 8: slot 0 holds position 8, the oldest position 0 is gone", 4, 2, 16, 8, 9),
		rc("ring_far_past_wrap", "100 tokens in a ring of 8: the window is positions 92 … 99", 4, 2, 16, 8, 100),
		rc("ring_of_one", "a ring of one slot: the query sees only itself", 2, 1, 16, 1, 5),
		rc("ring_realistic", "8 query heads on 2 kv heads, head dimension 64, 1000 tokens in a ring of 256", 8, 2, 64, 256, 1000),
	}
}

// RunRing runs every case of RingCases against a ring kernel and judges
// its output (and log-sum-exp) against kvcache.AttendRing, the yardstick
// being that of kvcache.AttendRing32 and of the unrolled ring attended
// block by block (attention.ForwardTiled32, blocks of 16 keys), as
// RunPaged's; subtests are named case/layout[/group].
// Special cases are those of RunPaged.
func RunRing[T conformance.TB[T], E compare.Float](t T, k RingKernel[E]) {
	t.Helper()
	suite.Run[T, E](t, "attentiontest ring", k.Attend != nil, "RingKernel.Attend is nil", k.Format,
		RingCases(), func(c RingCase) string { return c.Name },
		func(c RingCase) []suite.Variant[RingProblem] {
			return servingVariants(k.Supports, c.Problem, c.Problem.Shape.HeadsQ, c.Problem.Shape.HeadsKV, true,
				func(p RingProblem, l attention.Layout, g attention.GroupMap) RingProblem {
					p.Layout, p.Group = l, g
					return p
				})
		},
		func(t T, f compare.Format, c RingCase, p RingProblem, r *rand.Rand) {
			s := p.Shape
			o := attention.Options{Layout: p.Layout, Group: p.Group, Scale: p.Scale}
			judgeServing(t, f, c.Name, p.String(), "batch", servingRun[E]{
				inputs: [][]float64{
					f.RoundSlice(suite.Normal(r, s.Batch*s.HeadsQ*s.Dk, 1)),
					f.RoundSlice(suite.Normal(r, s.Batch*s.HeadsKV*s.Lk*s.Dk, 1)),
					f.RoundSlice(suite.Normal(r, s.Batch*s.HeadsKV*s.Lk*s.Dv, 1)),
				},
				shape: s, layout: p.Layout, lse: k.Supports.LSE,
				ref: func(in [][]float64) ([]float64, []float64, error) {
					return kvcache.AttendRing(in[0], in[1], in[2], s, p.N, o)
				},
				refs32: []func(in [][]float32) ([]float32, []float32, error){
					func(in [][]float32) ([]float32, []float32, error) {
						return kvcache.AttendRing32(in[0], in[1], in[2], s, p.N, o)
					},
					func(in [][]float32) ([]float32, []float32, error) { return p.tiled32(in, o) },
				},
				kernel: func(in [][]E) ([]E, []E, error) { return k.Attend(in[0], in[1], in[2], p) },
			})
		})
}

// SplitProblem is one split of a split-key decoding step: the queries at
// positions Pos … Pos+Lq−1 of a cache of Shape.Lk keys, causal, attend to
// the keys in [Start, End) only, and the kernel returns that split's
// partial output and log-sum-exp (kvcache.AttendSplit): a split whose
// keys the queries cannot see gives output 0 and log-sum-exp −Inf.
type SplitProblem struct {
	Shape      attention.Shape
	Pos        int
	Start, End int
	Layout     attention.Layout
	Group      attention.GroupMap
	Scale      float64
}

func (p SplitProblem) String() string {
	s := p.Shape
	return fmt.Sprintf("batch %d, %d query heads on %d kv heads, Lq %d at positions %d … %d, Lk %d, Dk %d, Dv %d, split [%d, %d), layout %v, group %v, scale %.6g",
		s.Batch, s.HeadsQ, s.HeadsKV, s.Lq, p.Pos, p.Pos+s.Lq-1, s.Lk, s.Dk, s.Dv, p.Start, p.End, p.Layout, p.Group, p.Scale)
}

// tiled32 is the split's second yardstick form: tiled32 over the whole
// cache with the queries at their positions (mask.AlignStart, offset Pos,
// causal) and the keys outside [Start, End) hidden by a −Inf bias.
func (p SplitProblem) tiled32(in [][]float32, o attention.Options) ([]float32, []float32, error) {
	s := p.Shape
	o.Align, o.Offset, o.Mask = mask.AlignStart, p.Pos, mask.Causal()
	o.Bias, o.BiasBatch, o.BiasHeads = make([]float64, s.Lq*s.Lk), 1, 1
	for i := range s.Lq {
		for j := range s.Lk {
			if j < p.Start || j >= p.End {
				o.Bias[i*s.Lk+j] = math.Inf(-1)
			}
		}
	}
	return tiled32(in[0], in[1], in[2], s, o)
}

// SplitKernel is a split-key decoding kernel under test; its log-sum-exp
// is always judged.
type SplitKernel[E compare.Float] struct {
	Attend   func(q, kCache, vCache []E, p SplitProblem) (out, lse []E, err error)
	Format   compare.Format
	Supports ServingSupports
}

// SplitCase is one problem of the split suite.
type SplitCase struct {
	Name    string
	Why     string
	Problem SplitProblem
}

// SplitCases returns the split suite's cases, in the order RunSplit runs
// them.
func SplitCases() []SplitCase {
	sc := func(name, why string, hq, hkv, d, lq, lk, pos, start, end int) SplitCase {
		return SplitCase{name, why, SplitProblem{Shape: shape(1, hq, hkv, lq, lk, d), Pos: pos, Start: start, End: end, Scale: 1 / math.Sqrt(float64(d))}}
	}
	return []SplitCase{
		sc("split_first_half", "keys 0 … 15 of 32 for the query at position 31", 4, 2, 16, 1, 32, 31, 0, 16),
		sc("split_second_half", "keys 16 … 31 of 32: the range ends at the query's own key", 4, 2, 16, 1, 32, 31, 16, 32),
		sc("split_empty", "an empty range: output 0, log-sum-exp −Inf", 4, 2, 16, 1, 32, 31, 8, 8),
		sc("split_after_queries", "keys 16 … 31 for the query at position 10: all hidden, output 0, log-sum-exp −Inf", 4, 2, 16, 1, 32, 10, 16, 32),
		sc("split_across_queries", "4 queries at positions 12 … 15, keys 10 … 19: each sees a different part of the range", 4, 2, 16, 4, 32, 12, 10, 20),
		sc("split_one_key", "a range of one key", 4, 2, 16, 1, 32, 31, 5, 6),
		sc("split_realistic", "8 query heads on 2 kv heads, head dimension 64, keys 256 … 767 of 1024", 8, 2, 64, 1, 1024, 1023, 256, 768),
	}
}

// RunSplit runs every case of SplitCases against a split kernel and
// judges its partial output and log-sum-exp against kvcache.AttendSplit,
// the yardstick being that of kvcache.AttendSplit32 and of the split
// attended block by block (attention.ForwardTiled32), as RunPaged's;
// subtests are named
// case/layout[/group]. Special cases are those of RunPaged; a reference
// log-sum-exp of −Inf must be matched exactly.
func RunSplit[T conformance.TB[T], E compare.Float](t T, k SplitKernel[E]) {
	t.Helper()
	suite.Run[T, E](t, "attentiontest split", k.Attend != nil, "SplitKernel.Attend is nil", k.Format,
		SplitCases(), func(c SplitCase) string { return c.Name },
		func(c SplitCase) []suite.Variant[SplitProblem] {
			return servingVariants(k.Supports, c.Problem, c.Problem.Shape.HeadsQ, c.Problem.Shape.HeadsKV, true,
				func(p SplitProblem, l attention.Layout, g attention.GroupMap) SplitProblem {
					p.Layout, p.Group = l, g
					return p
				})
		},
		func(t T, f compare.Format, c SplitCase, p SplitProblem, r *rand.Rand) {
			s := p.Shape
			o := attention.Options{Layout: p.Layout, Group: p.Group, Scale: p.Scale}
			judgeServing(t, f, c.Name, p.String(), "batch", servingRun[E]{
				inputs: [][]float64{
					f.RoundSlice(suite.Normal(r, s.Batch*s.HeadsQ*s.Lq*s.Dk, 1)),
					f.RoundSlice(suite.Normal(r, s.Batch*s.HeadsKV*s.Lk*s.Dk, 1)),
					f.RoundSlice(suite.Normal(r, s.Batch*s.HeadsKV*s.Lk*s.Dv, 1)),
				},
				shape: s, layout: p.Layout, lse: true,
				ref: func(in [][]float64) ([]float64, []float64, error) {
					return kvcache.AttendSplit(in[0], in[1], in[2], s, p.Pos, p.Start, p.End, o)
				},
				refs32: []func(in [][]float32) ([]float32, []float32, error){
					func(in [][]float32) ([]float32, []float32, error) {
						return kvcache.AttendSplit32(in[0], in[1], in[2], s, p.Pos, p.Start, p.End, o)
					},
					func(in [][]float32) ([]float32, []float32, error) { return p.tiled32(in, o) },
				},
				kernel: func(in [][]E) ([]E, []E, error) { return k.Attend(in[0], in[1], in[2], p) },
			})
		})
}

// PackedProblem is a causal prefill of sequences packed token after
// token (kvcache.AttendPacked): sequence b owns the queries
// QueryOffsets[b] … QueryOffsets[b+1]−1 and the keys KeyOffsets[b] …
// KeyOffsets[b+1]−1, its queries its last tokens (after a cached prefix
// of keys − queries tokens), aligned at the end and causal, and no query
// sees a key of another sequence. q is [tokens, HeadsQ, Dk], k and v
// [tokens, HeadsKV, D], the output [tokens, HeadsQ, Dv] and the
// log-sum-exp [tokens, HeadsQ].
type PackedProblem struct {
	HeadsQ, HeadsKV, Dk, Dv  int
	QueryOffsets, KeyOffsets []int
	Group                    attention.GroupMap
	Scale                    float64
}

func (p PackedProblem) String() string {
	return fmt.Sprintf("%d query heads on %d kv heads, Dk %d, Dv %d, query offsets %v, key offsets %v, group %v, scale %.6g",
		p.HeadsQ, p.HeadsKV, p.Dk, p.Dv, p.QueryOffsets, p.KeyOffsets, p.Group, p.Scale)
}

// tiled32 is the packed problem's second yardstick form: each sequence
// alone (token-major, attention.SeqMajor with one batch entry), causal
// and aligned at its end, attended by tiled32.
func (p PackedProblem) tiled32(in [][]float32, o attention.Options) (out, lse []float32, err error) {
	o.Layout, o.Mask = attention.SeqMajor, mask.Causal()
	for b := range len(p.QueryOffsets) - 1 {
		q0, q1, k0, k1 := p.QueryOffsets[b], p.QueryOffsets[b+1], p.KeyOffsets[b], p.KeyOffsets[b+1]
		s := attention.Shape{Batch: 1, HeadsQ: p.HeadsQ, HeadsKV: p.HeadsKV, Lq: q1 - q0, Lk: k1 - k0, Dk: p.Dk, Dv: p.Dv}
		ob, lb, err := tiled32(in[0][q0*p.HeadsQ*p.Dk:q1*p.HeadsQ*p.Dk], in[1][k0*p.HeadsKV*p.Dk:k1*p.HeadsKV*p.Dk],
			in[2][k0*p.HeadsKV*p.Dv:k1*p.HeadsKV*p.Dv], s, o)
		if err != nil {
			return nil, nil, err
		}
		out, lse = append(out, ob...), append(lse, lb...)
	}
	return out, lse, nil
}

// PackedKernel is a packed-sequence kernel under test. Layouts in its
// Supports are not used: packed tensors are token-major.
type PackedKernel[E compare.Float] struct {
	Attend   func(q, k, v []E, p PackedProblem) (out, lse []E, err error)
	Format   compare.Format
	Supports ServingSupports
}

// PackedCase is one problem of the packed suite.
type PackedCase struct {
	Name    string
	Why     string
	Problem PackedProblem
}

// PackedCases returns the packed suite's cases, in the order RunPacked
// runs them.
func PackedCases() []PackedCase {
	pk := func(name, why string, hq, hkv, d int, qoff, koff []int) PackedCase {
		return PackedCase{name, why, PackedProblem{HeadsQ: hq, HeadsKV: hkv, Dk: d, Dv: d, QueryOffsets: qoff, KeyOffsets: koff,
			Scale: 1 / math.Sqrt(float64(d))}}
	}
	return []PackedCase{
		pk("packed_no_prefix", "three sequences of 5, 1 and 7 tokens, keys the queries' own: a query that sees another sequence's keys fails",
			4, 2, 16, []int{0, 5, 6, 13}, []int{0, 5, 6, 13}),
		pk("packed_cached_prefixes", "queries 2, 4 and 1 after cached prefixes of 7, 0 and 6 keys: a kernel that aligns the queries at the start fails",
			4, 2, 16, []int{0, 2, 6, 7}, []int{0, 9, 13, 20}),
		pk("packed_sequence_without_queries", "a sequence with keys but no queries between two others",
			4, 2, 16, []int{0, 3, 3, 5}, []int{0, 3, 7, 9}),
		pk("packed_single_tokens", "four sequences of one token: each query sees only itself",
			2, 1, 16, []int{0, 1, 2, 3, 4}, []int{0, 1, 2, 3, 4}),
		pk("packed_realistic", "8 query heads on 2 kv heads, head dimension 64, four sequences of 100, 37, 64 and 1 queries after prefixes of 0, 90, 16 and 200 keys",
			8, 2, 64, []int{0, 100, 137, 201, 202}, []int{0, 100, 227, 307, 508}),
	}
}

// RunPacked runs every case of PackedCases against a packed kernel and
// judges its output (and log-sum-exp) against kvcache.AttendPacked, the
// yardstick being that of kvcache.AttendPacked32 and of each sequence
// attended block by block (attention.ForwardTiled32), as RunPaged's;
// subtests are named
// case/token-major[/group]. Special cases are those of RunPaged.
func RunPacked[T conformance.TB[T], E compare.Float](t T, k PackedKernel[E]) {
	t.Helper()
	suite.Run[T, E](t, "attentiontest packed", k.Attend != nil, "PackedKernel.Attend is nil", k.Format,
		PackedCases(), func(c PackedCase) string { return c.Name },
		func(c PackedCase) []suite.Variant[PackedProblem] {
			return servingVariants(k.Supports, c.Problem, c.Problem.HeadsQ, c.Problem.HeadsKV, false,
				func(p PackedProblem, _ attention.Layout, g attention.GroupMap) PackedProblem { p.Group = g; return p })
		},
		func(t T, f compare.Format, c PackedCase, p PackedProblem, r *rand.Rand) {
			n := len(p.QueryOffsets) - 1
			tq, tk := p.QueryOffsets[n], p.KeyOffsets[n]
			s := attention.Shape{Batch: n, HeadsQ: p.HeadsQ, HeadsKV: p.HeadsKV, Lq: tq, Lk: tk, Dk: p.Dk, Dv: p.Dv}
			o := attention.Options{Group: p.Group, Scale: p.Scale}
			judgeServing(t, f, c.Name, p.String(), "token", servingRun[E]{
				inputs: [][]float64{
					f.RoundSlice(suite.Normal(r, tq*p.HeadsQ*p.Dk, 1)),
					f.RoundSlice(suite.Normal(r, tk*p.HeadsKV*p.Dk, 1)),
					f.RoundSlice(suite.Normal(r, tk*p.HeadsKV*p.Dv, 1)),
				},
				lse:      k.Supports.LSE,
				outShape: []int{tq, p.HeadsQ, p.Dv}, lseShape: []int{tq, p.HeadsQ},
				outDims: "[token, head, dim]", lseDims: "[token, head]",
				ref: func(in [][]float64) ([]float64, []float64, error) {
					return kvcache.AttendPacked(in[0], in[1], in[2], s, p.QueryOffsets, p.KeyOffsets, o)
				},
				refs32: []func(in [][]float32) ([]float32, []float32, error){
					func(in [][]float32) ([]float32, []float32, error) {
						return kvcache.AttendPacked32(in[0], in[1], in[2], s, p.QueryOffsets, p.KeyOffsets, o)
					},
					func(in [][]float32) ([]float32, []float32, error) { return p.tiled32(in, o) },
				},
				kernel: func(in [][]E) ([]E, []E, error) { return k.Attend(in[0], in[1], in[2], p) },
			})
		})
}
