package kvcache

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/num"
)

// AttendSplit is one split of a split-key decoding step: attention.Decode
// of the queries at positions pos … pos+Lq−1 against the keys of the
// cache in [start, end) only, returning the partial output and
// log-sum-exp that MergeSplits combines. Each query keeps its true
// position, so the causal mask, o.Mask and ALiBi see the same positions
// as in the whole decode: the keys outside [start, end) are hidden by a
// −Inf bias added to o.Bias (one of shape [1, 1, Lq, Lk] when o.Bias is
// nil), which hides them as the mask does. For a split S and query row i,
//
//	lse_S,i = log(e^{σ_h}·[S holds the sink] + Σ_{j∈S, visible} e^{s_j})
//	O_S,i   = Σ_{j∈S, visible} e^{s_j − lse_S,i} V_j
//
// so that folding attention.Merge over the splits of a partition of
// [0, Lk) gives the whole decode (Milakov & Gimelshein 2018, "Online
// normalizer calculation for softmax", arXiv 1805.02867, §3.1; the split
// of the keys across workers of one decoding step is common practice).
// A sink is a key without a value: pass o.Sinks to exactly one split.
// A row that sees no key of its split is computed under
// attention.EmptyRowZero whatever o.EmptyRow says, so that it is a no-op
// of the merge; MergeSplits applies the policy to the merged rows.
//
// It is a reference, not a fast form: each split computes the logits of
// the whole cache and hides those outside its range.
//
// Special cases are those of attention.Decode, and:
//
//	start = end              an empty split: O 0, lse −Inf (σ_h with the sink)
//	a split after every query's position: the same (the causal mask hides it)
//	not 0 ≤ start ≤ end ≤ Lk error ErrSplit
//	Lq·Lk > MaxElements      error ErrShape (the bias), before anything is allocated
//
// Accuracy: a split's partial result is attention.Decode's over its keys;
// merged over a partition of the keys it agrees with attention.Decode
// within 1e-14 relative, normwise (TestSplitsMergeToDecode).
func AttendSplit(q, kCache, vCache []float64, s attention.Shape, pos, start, end int, o attention.Options) (out, lse []float64, err error) {
	return attendSplit("AttendSplit", ops64, q, kCache, vCache, s, pos, start, end, o)
}

// AttendSplit32 is the float32 instantiation of the same body as
// AttendSplit, calling attention.Decode32: a yardstick, not a reference.
//
// Special cases are those of AttendSplit.
func AttendSplit32(q, kCache, vCache []float32, s attention.Shape, pos, start, end int, o attention.Options) (out, lse []float32, err error) {
	return attendSplit("AttendSplit32", ops32, q, kCache, vCache, s, pos, start, end, o)
}

func attendSplit[T num.Float](fn string, f ops[T], q, k, v []T, s attention.Shape, pos, start, end int, o attention.Options) (out, lse []T, err error) {
	if err := checkHeads(fn, s); err != nil {
		return nil, nil, err
	}
	if start < 0 || start > end || end > s.Lk {
		return nil, nil, fmt.Errorf("%w: %s: [start, end) = [%d, %d); want 0 ≤ start ≤ end ≤ Lk = %d", ErrSplit, fn, start, end, s.Lk)
	}
	bb, bh := 1, 1
	if o.Bias != nil {
		bb, bh = o.BiasBatch, o.BiasHeads
		n, ok := product(math.MaxInt, bb, bh, s.Lq, s.Lk)
		if !ok || n != len(o.Bias) || (bb != 1 && bb != s.Batch) || (bh != 1 && bh != s.HeadsQ) {
			// The bias does not broadcast: attention's own check
			// refuses it, before computing anything.
			return f.decode(q, k, v, s, pos, o)
		}
	}
	if err := checkMax(fn, "the split's bias", "BiasBatch·BiasHeads·Lq·Lk", bb, bh, s.Lq, s.Lk); err != nil {
		return nil, nil, err
	}
	bias := make([]float64, bb*bh*s.Lq*s.Lk)
	copy(bias, o.Bias)
	for r := range bb * bh * s.Lq {
		row := bias[r*s.Lk : (r+1)*s.Lk]
		for j := range row {
			if j < start || j >= end {
				row[j] = math.Inf(-1)
			}
		}
	}
	o.Bias, o.BiasBatch, o.BiasHeads = bias, bb, bh
	o.EmptyRow = attention.EmptyRowZero
	return f.decode(q, k, v, s, pos, o)
}

// MergeSplits combines the partial results of splits over disjoint key
// sets of the same queries, each out[i] with its lse[i] as AttendSplit
// (or attention.Forward) returns them, into the result over their union,
// by folding attention.Merge from the first part to the last:
//
//	(O, lse) = Merge(… Merge(Merge(part 0, part 1), part 2) …, part n−1)
//
// (Milakov & Gimelshein 2018, arXiv 1805.02867, §3.1 Eq. (3)–(4)). A part
// with lse −Inf (an empty split) is a no-op: Merge returns the other part
// exactly. Rows whose merged lse is −Inf saw no key and no sink; under
// empty = attention.EmptyRowNaN their output is NaN, as the whole decode
// gives them, and under attention.EmptyRowZero it stays 0.
//
// Special cases are those of attention.Merge, and:
//
//	one part                     that part (a copy)
//	no parts, len(outs) ≠ len(lses)  error ErrSplit
//	parts of different lengths   error ErrSplit
//
// Accuracy: each Merge rounds; over n parts the error grows at most
// linearly in n (TestSplitsMergeToDecode measures it within 1e-14 for up
// to 9 parts).
func MergeSplits(outs, lses [][]float64, dv int, empty attention.EmptyRow) (out, lse []float64, err error) {
	return mergeSplits("MergeSplits", ops64, outs, lses, dv, empty)
}

// MergeSplits32 is the float32 instantiation of the same body as
// MergeSplits, folding attention.Merge32: a yardstick, not a reference.
//
// Special cases are those of MergeSplits.
func MergeSplits32(outs, lses [][]float32, dv int, empty attention.EmptyRow) (out, lse []float32, err error) {
	return mergeSplits("MergeSplits32", ops32, outs, lses, dv, empty)
}

func mergeSplits[T num.Float](fn string, f ops[T], outs, lses [][]T, dv int, empty attention.EmptyRow) (out, lse []T, err error) {
	if err := empty.Check(); err != nil {
		return nil, nil, err
	}
	if len(outs) == 0 || len(outs) != len(lses) {
		return nil, nil, fmt.Errorf("%w: %s: len(outs) = %d; want len(lses) = %d and ≥ 1", ErrSplit, fn, len(outs), len(lses))
	}
	if dv < 1 {
		return nil, nil, fmt.Errorf("%w: %s: dv = %d; want ≥ 1", ErrShape, fn, dv)
	}
	for i := range outs {
		if len(lses[i]) != len(lses[0]) || len(outs[i]) != len(outs[0]) {
			return nil, nil, fmt.Errorf("%w: %s: part %d has %d outputs and %d lse; want those of part 0, %d and %d", ErrSplit, fn, i, len(outs[i]), len(lses[i]), len(outs[0]), len(lses[0]))
		}
	}
	out, lse = append([]T(nil), outs[0]...), append([]T(nil), lses[0]...)
	if len(outs) == 1 {
		// Merge checks the lengths of each pair; one part still gets them
		// checked.
		if _, _, err := f.merge(out, lse, out, lse, dv); err != nil {
			return nil, nil, err
		}
	}
	for i := 1; i < len(outs); i++ {
		if out, lse, err = f.merge(out, lse, outs[i], lses[i], dv); err != nil {
			return nil, nil, err
		}
	}
	if empty == attention.EmptyRowNaN {
		for r, l := range lse {
			if math.IsInf(float64(l), -1) {
				for d := range dv {
					out[r*dv+d] = T(math.NaN())
				}
			}
		}
	}
	return out, lse, nil
}
