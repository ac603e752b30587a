package kvcache_test

import (
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/kvcache"
)

// TestNoPanic calls every function with random sizes, negative ones
// among them, and slices of random lengths: each returns (an error, for
// most) and none panics.
func TestNoPanic(t *testing.T) {
	r := rand.New(rand.NewPCG(10, 1))
	n := func() int { return r.IntN(7) - 2 }
	sl := func() []float64 { return make([]float64, r.IntN(40)) }
	ints := func() []int {
		x := make([]int, r.IntN(5))
		for i := range x {
			x[i] = r.IntN(8) - 2
		}
		return x
	}
	errs := 0
	for trial := range 3000 {
		s := attention.Shape{Batch: n(), HeadsQ: n(), HeadsKV: n(), Lq: n(), Lk: n(), Dk: n(), Dv: n()}
		p := kvcache.Pool{Pages: n(), PageSize: n(), HeadsKV: n(), Dk: n(), Dv: n(), Layout: kvcache.PoolLayout(r.IntN(3))}
		o := attention.Options{Layout: attention.Layout(r.IntN(3))}
		if r.IntN(3) == 0 {
			o.Bias, o.BiasBatch, o.BiasHeads = sl(), n(), n()
		}
		func() {
			defer func() {
				if e := recover(); e != nil {
					t.Fatalf("trial %d: panic %v with %+v, %+v", trial, e, s, p)
				}
			}()
			var err error
			switch trial % 8 {
			case 0:
				_, _, err = kvcache.Gather(sl(), sl(), p, ints(), n(), o.Layout)
			case 1:
				_, _, err = kvcache.AttendPages(sl(), sl(), sl(), p, [][]int{ints(), ints()}, ints(), n(), n(), o)
			case 2:
				_, _, err = kvcache.AttendSplit(sl(), sl(), sl(), s, n(), n(), n(), o)
			case 3:
				_, _, err = kvcache.MergeSplits([][]float64{sl(), sl()}, [][]float64{sl(), sl()}, n(), attention.EmptyRow(r.IntN(3)))
			case 4:
				err = kvcache.RingWrite(sl(), sl(), sl(), sl(), s, n(), o.Layout)
			case 5:
				_, _, err = kvcache.AttendRing(sl(), sl(), sl(), s, n(), o)
			case 6:
				_, _, err = kvcache.AttendPacked(sl(), sl(), sl(), s, ints(), ints(), o)
			case 7:
				_, _, err = kvcache.VerifyDraft(sl(), sl(), sl(), sl(), sl(), s, o)
			}
			if err != nil {
				errs++
			}
		}()
	}
	expect.Greater(t, errs, 2000, "calls refused")
}

// TestAttendPagesNoSequences: no page tables give empty outputs.
func TestAttendPagesNoSequences(t *testing.T) {
	p := kvcache.Pool{Pages: 1, PageSize: 2, HeadsKV: 1, Dk: 1, Dv: 1}
	out, lse, err := kvcache.AttendPages(nil, make([]float64, 2), make([]float64, 2), p, nil, nil, 1, 1, attention.Options{})
	expect.NoError(t, err)
	expect.Empty(t, out)
	expect.Empty(t, lse)
}
