package kvcache_test

import (
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/kvcache"
	"github.com/plumbref/plumb/mask"
)

// TestPackedIsEachAlone: each packed sequence's rows are, bit for bit,
// attention.Forward on that sequence alone, in HeadsMajor, causal and
// aligned at the end (its cached prefix before its queries). The packed
// call runs Forward in SeqMajor on slices of the packed tensors; the
// layout changes which memory is read, not the arithmetic, so the bits
// agree.
func TestPackedIsEachAlone(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 1))
	for trial := range 60 {
		hkv := 1 + r.IntN(2)
		s := attention.Shape{Batch: r.IntN(5), HeadsQ: hkv * (1 + r.IntN(3)), HeadsKV: hkv, Dk: 1 + r.IntN(5), Dv: 1 + r.IntN(5)}
		qo, ko := []int{0}, []int{0}
		for range s.Batch {
			nq := r.IntN(6)      // may be 0
			nk := nq + r.IntN(8) // a cached prefix of 0 … 7
			qo, ko = append(qo, qo[len(qo)-1]+nq), append(ko, ko[len(ko)-1]+nk)
		}
		s.Lq, s.Lk = qo[s.Batch], ko[s.Batch]
		o := randOptions(r, s.HeadsQ)
		o.Mask = randWindow(r)
		o.Layout = attention.Layout(r.IntN(2)) // ignored: packed is token-major
		q, k, v := uniform(r, s.Lq*s.HeadsQ*s.Dk), uniform(r, s.Lk*hkv*s.Dk), uniform(r, s.Lk*hkv*s.Dv)
		out, lse, err := kvcache.AttendPacked(q, k, v, s, qo, ko, o)
		ensure.NoError(t, err, "trial %d", trial)
		ensure.Len(t, out, s.Lq*s.HeadsQ*s.Dv)
		for b := range s.Batch {
			nq, nk := qo[b+1]-qo[b], ko[b+1]-ko[b]
			sb := attention.Shape{Batch: 1, HeadsQ: s.HeadsQ, HeadsKV: hkv, Lq: nq, Lk: nk, Dk: s.Dk, Dv: s.Dv}
			ob := o
			ob.Layout = attention.HeadsMajor
			ob.Mask = mask.Causal()
			if !o.Mask.IsZero() {
				ob.Mask, err = mask.Intersect(mask.Causal(), o.Mask)
				ensure.NoError(t, err)
			}
			qb := unpack(q, qo[b], nq, s.HeadsQ, s.Dk)
			kb, vb := unpack(k, ko[b], nk, hkv, s.Dk), unpack(v, ko[b], nk, hkv, s.Dv)
			wantOut, wantLSE, err := attention.Forward(qb, kb, vb, sb, ob)
			ensure.NoError(t, err)
			gotOut := unpack(out, qo[b], nq, s.HeadsQ, s.Dv)
			gotLSE := unpack(lse, qo[b], nq, s.HeadsQ, 1)
			expect.Equal(t, wantOut, gotOut, "trial %d sequence %d: out", trial, b)
			expect.Equal(t, wantLSE, gotLSE, "trial %d sequence %d: lse", trial, b)
		}
	}
}

// unpack returns tokens from … from+n−1 of a packed tensor [tokens,
// heads, d] as [1, heads, n, d] in HeadsMajor.
func unpack(x []float64, from, n, heads, d int) []float64 {
	y := make([]float64, heads*n*d)
	for t := range n {
		for g := range heads {
			copy(y[at(attention.HeadsMajor, 0, heads, n, g, t, d):][:d], x[((from+t)*heads+g)*d:][:d])
		}
	}
	return y
}

// TestPackedOffsetErrors: offsets that do not start at 0, decrease, do
// not end at the total or are not one per sequence plus one, and a
// sequence with fewer keys than queries, are refused with ErrOffsets.
func TestPackedOffsetErrors(t *testing.T) {
	s := attention.Shape{Batch: 2, HeadsQ: 1, HeadsKV: 1, Lq: 3, Lk: 5, Dk: 1, Dv: 1}
	q, k, v := make([]float64, 3), make([]float64, 5), make([]float64, 5)
	for _, c := range []struct {
		name   string
		qo, ko []int
		msg    string
	}{
		{"start", []int{1, 2, 3}, []int{0, 2, 5}, "kvcache: invalid sequence offsets: AttendPacked: queryOffsets[0] = 1; want 0"},
		{"decrease", []int{0, 2, 3}, []int{0, 4, 3}, "kvcache: invalid sequence offsets: AttendPacked: keyOffsets[2] = 3; want ≥ keyOffsets[1] = 4"},
		{"end", []int{0, 1, 2}, []int{0, 2, 5}, "kvcache: invalid sequence offsets: AttendPacked: queryOffsets[2] = 2; want the total Shape.Lq = 3"},
		{"count", []int{0, 3}, []int{0, 2, 5}, "kvcache: invalid sequence offsets: AttendPacked: len(queryOffsets) = 2; want Batch+1 = 3"},
		{"keys", []int{0, 3, 3}, []int{0, 2, 5}, "kvcache: invalid sequence offsets: AttendPacked: sequence 0 has 2 keys; want ≥ its 3 queries (the queries are its last tokens)"},
	} {
		_, _, err := kvcache.AttendPacked(q, k, v, s, c.qo, c.ko, attention.Options{})
		expect.ErrorIs(t, err, kvcache.ErrOffsets, c.name)
		expect.EqualError(t, err, c.msg, c.name)
	}
}
