package kvcache_test

import (
	"math"
	"math/rand/v2"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/mask"
)

// uniform draws n values uniform in [−1, 1).
func uniform(r *rand.Rand, n int) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = 2*r.Float64() - 1
	}
	return x
}

// normwise is ‖got − want‖₂ / ‖want‖₂, treating equal infinities (an lse
// of −Inf in both) as no difference; a NaN where the other is not makes it
// +Inf.
func normwise(want, got []float64) float64 {
	if len(want) != len(got) {
		return math.Inf(1)
	}
	var d, w float64
	for i := range want {
		if want[i] == got[i] || (math.IsNaN(want[i]) && math.IsNaN(got[i])) {
			if !math.IsInf(want[i], 0) && !math.IsNaN(want[i]) {
				w += want[i] * want[i]
			}
			continue
		}
		if math.IsInf(want[i], 0) || math.IsInf(got[i], 0) || math.IsNaN(want[i]) || math.IsNaN(got[i]) {
			return math.Inf(1)
		}
		d += (got[i] - want[i]) * (got[i] - want[i])
		w += want[i] * want[i]
	}
	if d == 0 {
		return 0
	}
	return math.Sqrt(d) / math.Sqrt(w)
}

// randOptions draws the conventions and extras of a call of HeadsQ query
// heads: layout, group map, soft cap, ALiBi slopes and sinks, each present
// or not.
func randOptions(r *rand.Rand, headsQ int) attention.Options {
	o := attention.Options{Layout: attention.Layout(r.IntN(2)), Group: attention.GroupMap(r.IntN(2))}
	if r.IntN(3) == 0 {
		o.SoftCap = 1 + 3*r.Float64()
	}
	if r.IntN(2) == 0 {
		o.Slopes = make([]float64, headsQ)
		for h := range o.Slopes {
			o.Slopes[h] = math.Exp2(-8 * float64(h+1) / float64(headsQ)) // Press et al. 2022, arXiv 2108.12409, §3
		}
	}
	if r.IntN(2) == 0 {
		o.Sinks = uniform(r, headsQ)
	}
	return o
}

// randWindow is a sliding window mask of 1 to 6 keys, or none.
func randWindow(r *rand.Rand) mask.Mask {
	if r.IntN(2) == 0 {
		return mask.Mask{}
	}
	w, _ := mask.Window(1 + r.IntN(6))
	return w
}

// at is the offset of row t of head g of batch entry b in a tensor of
// heads heads, length rows of d values, in layout l, written out from
// the layouts' definitions.
func at(l attention.Layout, b, heads, length, g, t, d int) int {
	if l == attention.SeqMajor {
		return ((b*length+t)*heads + g) * d
	}
	return ((b*heads+g)*length + t) * d
}

// batchRows returns the rows of batch entry b of a tensor [batch, …] of
// n elements per entry.
func batchRows[T any](x []T, b, n int) []T { return x[b*n : (b+1)*n] }

func to32(x []float64) []float32 {
	if x == nil {
		return nil
	}
	y := make([]float32, len(x))
	for i, v := range x {
		y[i] = float32(v)
	}
	return y
}
