package kvcache_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/kvcache"
)

// partition cuts [0, lk) into n ≥ 1 consecutive ranges of random,
// unequal lengths, some of them empty: the cut points are n − 1 draws from
// 0 … lk, sorted.
func partition(r *rand.Rand, lk, n int) [][2]int {
	cuts := []int{0}
	for range n - 1 {
		cuts = append(cuts, r.IntN(lk+1))
	}
	cuts = append(cuts, lk)
	for i := 1; i < len(cuts)-1; i++ { // insertion sort of the inner cuts
		for j := i; j > 1 && cuts[j] < cuts[j-1]; j-- {
			cuts[j], cuts[j-1] = cuts[j-1], cuts[j]
		}
	}
	parts := make([][2]int, n)
	for i := range parts {
		parts[i] = [2]int{cuts[i], cuts[i+1]}
	}
	return parts
}

// splitAll computes every split of parts with o, the sinks given to split
// sinkTo only (none if sinkTo < 0), and merges them.
func splitAll(t *testing.T, q, k, v []float64, s attention.Shape, pos int, o attention.Options, parts [][2]int, sinkTo int) (out, lse []float64) {
	t.Helper()
	var outs, lses [][]float64
	for i, p := range parts {
		oi := o
		if i != sinkTo {
			oi.Sinks = nil
		}
		po, pl, err := kvcache.AttendSplit(q, k, v, s, pos, p[0], p[1], oi)
		ensure.NoError(t, err, "split %v", p)
		outs, lses = append(outs, po), append(lses, pl)
	}
	out, lse, err := kvcache.MergeSplits(outs, lses, s.Dv, o.EmptyRow)
	ensure.NoError(t, err)
	return out, lse
}

// TestSplitsMergeToDecode: the merge of the splits of any partition of the
// cache equals the whole decode within 1e-14 relative, normwise, for
// output and log-sum-exp, with the queries at their true positions under
// causal and window masks, ALiBi, a soft cap and a bias, the sinks given
// to exactly one split. The bound: each of up to 9 merges rounds a few
// times (attention documents 2.2e-16 for one merge), and each split's
// softmax sum is a different grouping of the whole's.
func TestSplitsMergeToDecode(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 1))
	const bound = 1e-14
	worst := 0.0
	for trial := range 300 {
		hkv := 1 + r.IntN(2)
		s := attention.Shape{Batch: 1 + r.IntN(2), HeadsQ: hkv * (1 + r.IntN(2)), HeadsKV: hkv, Lq: 1 + r.IntN(3), Lk: 1 + r.IntN(40), Dk: 1 + r.IntN(6), Dv: 1 + r.IntN(6)}
		s.Lq = min(s.Lq, s.Lk)
		pos := r.IntN(s.Lk - s.Lq + 1) // not always at the end: later keys are hidden
		o := randOptions(r, s.HeadsQ)
		o.Mask = randWindow(r)
		if r.IntN(3) == 0 {
			o.Bias, o.BiasBatch, o.BiasHeads = uniform(r, s.HeadsQ*s.Lq*s.Lk), 1, s.HeadsQ
		}
		q, k, v := uniform(r, s.Batch*s.HeadsQ*s.Lq*s.Dk), uniform(r, s.Batch*s.HeadsKV*s.Lk*s.Dk), uniform(r, s.Batch*s.HeadsKV*s.Lk*s.Dv)
		wantOut, wantLSE, err := attention.Decode(q, k, v, s, pos, o)
		ensure.NoError(t, err)
		parts := partition(r, s.Lk, 1+r.IntN(9))
		out, lse := splitAll(t, q, k, v, s, pos, o, parts, r.IntN(len(parts)))
		eo, el := normwise(wantOut, out), normwise(wantLSE, lse)
		expect.LessOrEqual(t, eo, bound, "trial %d, %v, parts %v: out", trial, s, parts)
		expect.LessOrEqual(t, el, bound, "trial %d, %v, parts %v: lse", trial, s, parts)
		worst = max(worst, eo, el)
	}
	t.Logf("worst normwise relative difference %.2g", worst)
}

// TestSinkInOneSplitOnly: the sink is a key without a value and belongs to
// one split. Given to every split, it is counted once per split and the
// merge is wrong by far more than rounding, which the bound of
// TestSplitsMergeToDecode would catch.
func TestSinkInOneSplitOnly(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 2))
	s := attention.Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 1, Lk: 12, Dk: 4, Dv: 3}
	o := attention.Options{Sinks: []float64{0.5, 1.5}}
	q, k, v := uniform(r, 8), uniform(r, 48), uniform(r, 36)
	wantOut, _, err := attention.Decode(q, k, v, s, 11, o)
	ensure.NoError(t, err)
	parts := [][2]int{{0, 5}, {5, 12}}
	once, _ := splitAll(t, q, k, v, s, 11, o, parts, 1)
	expect.LessOrEqual(t, normwise(wantOut, once), 1e-14)
	var outs, lses [][]float64
	for _, p := range parts {
		po, pl, err := kvcache.AttendSplit(q, k, v, s, 11, p[0], p[1], o)
		ensure.NoError(t, err)
		outs, lses = append(outs, po), append(lses, pl)
	}
	twice, _, err := kvcache.MergeSplits(outs, lses, s.Dv, attention.EmptyRowZero)
	ensure.NoError(t, err)
	expect.Greater(t, normwise(wantOut, twice), 1e-3, "a sink in both splits is counted twice")
}

// TestEmptySplit: a split with no keys, or with keys only after the
// queries, gives lse −Inf and output 0 (σ_h with the sink), and merging it
// changes nothing, bit for bit.
func TestEmptySplit(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 3))
	s := attention.Shape{Batch: 1, HeadsQ: 2, HeadsKV: 2, Lq: 1, Lk: 10, Dk: 3, Dv: 2}
	q, k, v := uniform(r, 6), uniform(r, 60), uniform(r, 40)
	for _, p := range [][2]int{{4, 4}, {0, 0}, {10, 10}, {7, 10}} {
		out, lse, err := kvcache.AttendSplit(q, k, v, s, 6, p[0], p[1], attention.Options{})
		ensure.NoError(t, err)
		expect.Equal(t, []float64{0, 0, 0, 0}, out, "split %v", p)
		expect.Equal(t, []float64{math.Inf(-1), math.Inf(-1)}, lse, "split %v", p)
		_, lse, err = kvcache.AttendSplit(q, k, v, s, 6, p[0], p[1], attention.Options{Sinks: []float64{0.25, -2}})
		ensure.NoError(t, err)
		expect.Equal(t, []float64{0.25, -2}, lse, "split %v with sinks", p)
	}
	whole, wholeLSE, err := kvcache.AttendSplit(q, k, v, s, 6, 0, 10, attention.Options{})
	ensure.NoError(t, err)
	empty, emptyLSE, err := kvcache.AttendSplit(q, k, v, s, 6, 3, 3, attention.Options{})
	ensure.NoError(t, err)
	for _, order := range [][]int{{0, 1}, {1, 0}} {
		parts := [][]float64{whole, empty}
		lses := [][]float64{wholeLSE, emptyLSE}
		out, lse, err := kvcache.MergeSplits([][]float64{parts[order[0]], parts[order[1]]}, [][]float64{lses[order[0]], lses[order[1]]}, s.Dv, attention.EmptyRowZero)
		ensure.NoError(t, err)
		expect.Equal(t, whole, out, "order %v", order)
		expect.Equal(t, wholeLSE, lse, "order %v", order)
	}
}

// TestSplitEmptyRowPolicy: a row that sees no key at all (a −Inf bias
// row) is NaN after the merge under EmptyRowNaN, as in the whole decode,
// and 0 under EmptyRowZero; each split computes it as a no-op.
func TestSplitEmptyRowPolicy(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	s := attention.Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 1, Lk: 6, Dk: 2, Dv: 2}
	q, k, v := uniform(r, 4), uniform(r, 12), uniform(r, 12)
	bias := make([]float64, 12)
	for j := range 6 {
		bias[j] = math.Inf(-1) // head 0 sees nothing
	}
	for _, policy := range []attention.EmptyRow{attention.EmptyRowZero, attention.EmptyRowNaN} {
		o := attention.Options{Bias: bias, BiasBatch: 1, BiasHeads: 2, EmptyRow: policy}
		wantOut, wantLSE, err := attention.Decode(q, k, v, s, 5, o)
		ensure.NoError(t, err)
		out, lse := splitAll(t, q, k, v, s, 5, o, [][2]int{{0, 2}, {2, 6}}, -1)
		expect.Equal(t, math.Inf(-1), lse[0], "%v: head 0", policy)
		expect.LessOrEqual(t, normwise(wantLSE[1:], lse[1:]), 1e-14, "%v: head 1", policy)
		expect.Equal(t, math.IsNaN(wantOut[0]), math.IsNaN(out[0]), "%v: head 0", policy)
		expect.LessOrEqual(t, normwise(wantOut[2:], out[2:]), 1e-14, "%v: head 1", policy)
	}
}
