package kvcache_test

import (
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/kvcache"
)

// TestDraftIsSteps: scoring k drafts in one pass equals, bit for bit, k
// single decoding steps, each appending its own key and value to the
// cache first.
func TestDraftIsSteps(t *testing.T) {
	r := rand.New(rand.NewPCG(6, 1))
	for trial := range 60 {
		hkv := 1 + r.IntN(2)
		s := attention.Shape{Batch: 1 + r.IntN(2), HeadsQ: hkv * (1 + r.IntN(2)), HeadsKV: hkv, Lq: 1 + r.IntN(5), Lk: r.IntN(9), Dk: 1 + r.IntN(5), Dv: 1 + r.IntN(5)}
		o := randOptions(r, s.HeadsQ)
		o.Mask = randWindow(r)
		total := s.Lk + s.Lq
		// Every position's key and value, HeadsMajor; the cache and the
		// drafts are views of them in o.Layout.
		kAll, vAll := uniform(r, s.Batch*hkv*total*s.Dk), uniform(r, s.Batch*hkv*total*s.Dv)
		kc, vc := rangeRows(kAll, s.Batch, hkv, total, 0, s.Lk, s.Dk, o.Layout), rangeRows(vAll, s.Batch, hkv, total, 0, s.Lk, s.Dv, o.Layout)
		kd, vd := rangeRows(kAll, s.Batch, hkv, total, s.Lk, total, s.Dk, o.Layout), rangeRows(vAll, s.Batch, hkv, total, s.Lk, total, s.Dv, o.Layout)
		q := uniform(r, s.Batch*s.HeadsQ*s.Lq*s.Dk) // in o.Layout
		out, lse, err := kvcache.VerifyDraft(q, kc, vc, kd, vd, s, o)
		ensure.NoError(t, err, "trial %d", trial)
		for i := range s.Lq {
			step := s
			step.Lq, step.Lk = 1, s.Lk+i+1
			k := rangeRows(kAll, s.Batch, hkv, total, 0, step.Lk, s.Dk, o.Layout)
			v := rangeRows(vAll, s.Batch, hkv, total, 0, step.Lk, s.Dv, o.Layout)
			qi := rowsOf(q, s.Batch, s.HeadsQ, s.Lq, i, s.Dk, o.Layout)
			wantOut, wantLSE, err := attention.Decode(qi, k, v, step, s.Lk+i, o)
			ensure.NoError(t, err)
			expect.Equal(t, wantOut, rowsOf(out, s.Batch, s.HeadsQ, s.Lq, i, s.Dv, o.Layout), "trial %d draft %d: out", trial, i)
			expect.Equal(t, wantLSE, rowsOf(lse, s.Batch, s.HeadsQ, s.Lq, i, 1, o.Layout), "trial %d draft %d: lse", trial, i)
		}
	}
}

// rangeRows returns positions from … to−1 of x, [batch, heads, steps, d]
// in HeadsMajor, as [batch, heads, to − from, d] in layout l.
func rangeRows(x []float64, batch, heads, steps, from, to, d int, l attention.Layout) []float64 {
	n := to - from
	y := make([]float64, batch*heads*n*d)
	for b := range batch {
		for g := range heads {
			for t := range n {
				copy(y[at(l, b, heads, n, g, t, d):][:d], x[at(attention.HeadsMajor, b, heads, steps, g, from+t, d):][:d])
			}
		}
	}
	return y
}

// rowsOf returns row i of every head of x, [batch, heads, n, d] in layout
// l, as [batch, heads, 1, d].
func rowsOf(x []float64, batch, heads, n, i, d int, l attention.Layout) []float64 {
	y := make([]float64, 0, batch*heads*d)
	for b := range batch {
		for g := range heads {
			y = append(y, x[at(l, b, heads, n, g, i, d):][:d]...)
		}
	}
	return y
}
