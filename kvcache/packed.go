package kvcache

import (
	"fmt"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
)

// AttendPacked is a causal prefill of s.Batch sequences of different
// lengths packed one after another, each with its own cached prefix:
// sequence b owns the queries queryOffsets[b] … queryOffsets[b+1]−1 and
// the keys keyOffsets[b] … keyOffsets[b+1]−1 of the packed tensors
//
//	q   [s.Lq, HeadsQ, Dk]     s.Lq the total of the queries
//	k   [s.Lk, HeadsKV, Dk]    s.Lk the total of the keys
//	v   [s.Lk, HeadsKV, Dv]
//	out [s.Lq, HeadsQ, Dv],  lse [s.Lq, HeadsQ]
//
// (token-major, the heads of one token contiguous, whatever o.Layout
// says). A sequence has at least as many keys as queries: its queries are
// its last tokens, after a cached prefix of keys − queries tokens, and are
// aligned at the end (mask.AlignEnd: the last query sees the last key of
// its own sequence), under the causal mask intersected with o.Mask. No
// query sees a key of another sequence.
//
// Sequence b's rows are attention.Forward on that sequence alone:
//
//	attention.Forward(q_b, k_b, v_b, {1, HeadsQ, HeadsKV, lq_b, lk_b, Dk, Dv}, o_b)
//
// with o_b = o but Layout attention.SeqMajor (a packed sequence's slice of
// q, k or v is that layout with Batch = 1), Align mask.AlignEnd, Offset 0
// and Mask Causal ∩ o.Mask, which o.Mask sees with positions counted from
// the sequence's first key. It is that call on those numbers, so the rows
// are Forward's bit for bit, and equal bit for bit to those of Forward on
// the sequence in attention.HeadsMajor (the layout changes which memory
// is read, not the arithmetic; TestPackedIsEachAlone).
//
// Offsets are the running totals of the lengths (offsets start at 0, do
// not decrease, and end at the total; a sequence of no queries is
// allowed; packing sequences by their running totals is common practice).
//
// Special cases are those of attention.Forward, and:
//
//	s.Batch = 0                      empty outputs (offsets [0], totals 0)
//	offsets not starting at 0, decreasing, not ending at the total,
//	  or not s.Batch+1 of them       error ErrOffsets
//	a sequence with fewer keys than queries   error ErrOffsets
//	o.Bias set                       error ErrOption (its shape would differ by sequence)
//
// Accuracy: that of attention.Forward.
func AttendPacked(q, k, v []float64, s attention.Shape, queryOffsets, keyOffsets []int, o attention.Options) (out, lse []float64, err error) {
	return attendPacked("AttendPacked", ops64, q, k, v, s, queryOffsets, keyOffsets, o)
}

// AttendPacked32 is the float32 instantiation of the same body as
// AttendPacked, calling attention.Forward32: a yardstick, not a reference.
//
// Special cases are those of AttendPacked.
func AttendPacked32(q, k, v []float32, s attention.Shape, queryOffsets, keyOffsets []int, o attention.Options) (out, lse []float32, err error) {
	return attendPacked("AttendPacked32", ops32, q, k, v, s, queryOffsets, keyOffsets, o)
}

func attendPacked[T num.Float](fn string, f ops[T], q, k, v []T, s attention.Shape, qo, ko []int, o attention.Options) (out, lse []T, err error) {
	if err := checkHeads(fn, s); err != nil {
		return nil, nil, err
	}
	if err := checkOffsets(fn, "queryOffsets", qo, s.Batch, s.Lq, "Lq"); err != nil {
		return nil, nil, err
	}
	if err := checkOffsets(fn, "keyOffsets", ko, s.Batch, s.Lk, "Lk"); err != nil {
		return nil, nil, err
	}
	for b := range s.Batch {
		if nq, nk := qo[b+1]-qo[b], ko[b+1]-ko[b]; nk < nq {
			return nil, nil, fmt.Errorf("%w: %s: sequence %d has %d keys; want ≥ its %d queries (the queries are its last tokens)", ErrOffsets, fn, b, nk, nq)
		}
	}
	if o.Bias != nil {
		return nil, nil, fmt.Errorf("%w: %s: Options.Bias has %d elements; want none (a bias's shape would differ by sequence)", ErrOption, fn, len(o.Bias))
	}
	for _, c := range []struct {
		name    string
		got     int
		formula string
		dims    []int
	}{
		{"q", len(q), "Lq·HeadsQ·Dk", []int{s.Lq, s.HeadsQ, s.Dk}},
		{"k", len(k), "Lk·HeadsKV·Dk", []int{s.Lk, s.HeadsKV, s.Dk}},
		{"v", len(v), "Lk·HeadsKV·Dv", []int{s.Lk, s.HeadsKV, s.Dv}},
	} {
		if err := checkLen(fn, c.name, c.got, c.formula, c.dims...); err != nil {
			return nil, nil, err
		}
	}
	if err := checkMax(fn, "out", "Lq·HeadsQ·Dv", s.Lq, s.HeadsQ, s.Dv); err != nil {
		return nil, nil, err
	}
	ob := o
	ob.Layout, ob.Align, ob.Offset, ob.Mask = attention.SeqMajor, mask.AlignEnd, 0, mask.Causal()
	if !o.Mask.IsZero() {
		if ob.Mask, err = mask.Intersect(mask.Causal(), o.Mask); err != nil {
			return nil, nil, fmt.Errorf("%w: %s: Options.Mask = %v; want a mask the causal mask can be intersected with (%w)", ErrOption, fn, o.Mask, err)
		}
	}
	out = make([]T, 0, s.Lq*s.HeadsQ*s.Dv)
	lse = make([]T, 0, s.Lq*s.HeadsQ)
	for b := range s.Batch {
		sb := attention.Shape{Batch: 1, HeadsQ: s.HeadsQ, HeadsKV: s.HeadsKV, Lq: qo[b+1] - qo[b], Lk: ko[b+1] - ko[b], Dk: s.Dk, Dv: s.Dv}
		if sb.Lq == 0 {
			continue
		}
		qb := q[qo[b]*s.HeadsQ*s.Dk : qo[b+1]*s.HeadsQ*s.Dk]
		kb := k[ko[b]*s.HeadsKV*s.Dk : ko[b+1]*s.HeadsKV*s.Dk]
		vb := v[ko[b]*s.HeadsKV*s.Dv : ko[b+1]*s.HeadsKV*s.Dv]
		o1, l1, err := f.forward(qb, kb, vb, sb, ob)
		if err != nil {
			return nil, nil, err
		}
		out, lse = append(out, o1...), append(lse, l1...)
	}
	return out, lse, nil
}

// checkOffsets validates the running totals offsets of n sequences whose
// lengths add up to total (named totalName).
func checkOffsets(fn, name string, offsets []int, n, total int, totalName string) error {
	if len(offsets) != n+1 {
		return fmt.Errorf("%w: %s: len(%s) = %d; want Batch+1 = %d", ErrOffsets, fn, name, len(offsets), n+1)
	}
	if offsets[0] != 0 {
		return fmt.Errorf("%w: %s: %s[0] = %d; want 0", ErrOffsets, fn, name, offsets[0])
	}
	for i := 1; i < len(offsets); i++ {
		if offsets[i] < offsets[i-1] {
			return fmt.Errorf("%w: %s: %s[%d] = %d; want ≥ %s[%d] = %d", ErrOffsets, fn, name, i, offsets[i], name, i-1, offsets[i-1])
		}
	}
	if offsets[n] != total {
		return fmt.Errorf("%w: %s: %s[%d] = %d; want the total Shape.%s = %d", ErrOffsets, fn, name, n, offsets[n], totalName, total)
	}
	return nil
}
