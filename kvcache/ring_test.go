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

// TestRingPositionsBySimulation: RingPositions agrees with writing the
// positions 0 … n−1 into a ring one by one.
func TestRingPositionsBySimulation(t *testing.T) {
	for w := 1; w <= 5; w++ {
		ring := make([]int, w)
		for i := range ring {
			ring[i] = -1
		}
		for n := 0; n <= 4*w+3; n++ {
			got, err := kvcache.RingPositions(n, w)
			ensure.NoError(t, err)
			expect.Equal(t, ring, got, "W = %d, n = %d", w, n)
			slot, err := kvcache.RingSlot(n, w)
			ensure.NoError(t, err)
			ring[slot] = n
		}
	}
}

// TestRingIsSlidingWindow: at every step n, from the first W steps
// through the wrap point to many steps after, decoding the newest token
// against the ring is, bit for bit, its decode against every position so
// far under mask.Window(W), which shows the W keys p − W < j ≤ p.
func TestRingIsSlidingWindow(t *testing.T) {
	r := rand.New(rand.NewPCG(4, 1))
	for trial := range 24 {
		hkv := 1 + r.IntN(2)
		w := 1 + trial%6
		s := attention.Shape{Batch: 1 + r.IntN(2), HeadsQ: hkv * (1 + r.IntN(2)), HeadsKV: hkv, Lq: 1, Lk: w, Dk: 1 + r.IntN(4), Dv: 1 + r.IntN(4)}
		o := randOptions(r, s.HeadsQ)
		window, err := mask.Window(w)
		ensure.NoError(t, err)
		steps := 4*w + 5
		kAll := uniform(r, s.Batch*hkv*steps*s.Dk)
		vAll := uniform(r, s.Batch*hkv*steps*s.Dv)
		qAll := uniform(r, steps*s.Batch*s.HeadsQ*s.Dk)
		kRing := make([]float64, s.Batch*hkv*w*s.Dk)
		vRing := make([]float64, s.Batch*hkv*w*s.Dv)
		for n := 1; n <= steps; n++ {
			p := n - 1
			kNew, vNew := rowsOf(kAll, s.Batch, hkv, steps, p, s.Dk, attention.HeadsMajor), rowsOf(vAll, s.Batch, hkv, steps, p, s.Dv, attention.HeadsMajor)
			ensure.NoError(t, kvcache.RingWrite(kRing, vRing, kNew, vNew, s, p, o.Layout))
			q := batchRows(qAll, p, s.Batch*s.HeadsQ*s.Dk)
			out, lse, err := kvcache.AttendRing(q, kRing, vRing, s, n, o)
			ensure.NoError(t, err, "trial %d n %d", trial, n)

			full := s
			full.Lk = n
			ow := o
			ow.Mask = window
			k := rangeRows(kAll, s.Batch, hkv, steps, 0, n, s.Dk, o.Layout)
			v := rangeRows(vAll, s.Batch, hkv, steps, 0, n, s.Dv, o.Layout)
			wantOut, wantLSE, err := attention.Decode(q, k, v, full, p, ow)
			ensure.NoError(t, err)
			expect.Equal(t, wantOut, out, "trial %d, W = %d, n = %d: out", trial, w, n)
			expect.Equal(t, wantLSE, lse, "trial %d, W = %d, n = %d: lse", trial, w, n)
		}
	}
}
