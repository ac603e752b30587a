package fastattn

import (
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/mask"
)

// benchParams is a causal prefill: batch 1, 16 heads on 4 kv heads, 512
// positions, head dimension 128, rotary over every dim.
var benchParams = Params{Batch: 1, HeadsQ: 16, HeadsKV: 4, Lq: 512, Lk: 512, HeadDim: 128, Causal: true, RopeBase: 10000}

func benchInputs() (q, k, v []float32) {
	r := rand.New(rand.NewPCG(1, 2))
	p := benchParams
	draw := func(n int) []float32 {
		x := make([]float32, n)
		for i := range x {
			x[i] = float32(r.NormFloat64())
		}
		return x
	}
	return draw(p.Batch * p.HeadsQ * p.Lq * p.HeadDim), draw(p.Batch * p.HeadsKV * p.Lk * p.HeadDim), draw(p.Batch * p.HeadsKV * p.Lk * p.HeadDim)
}

func BenchmarkForward(b *testing.B) {
	q, k, v := benchInputs()
	for b.Loop() {
		if _, _, err := Forward(q, k, v, benchParams); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkPlumbForwardFast32 times the float32 blocked form of the
// attention package on the same problem without the rotary encoding, for
// scale.
func BenchmarkPlumbForwardFast32(b *testing.B) {
	q, k, v := benchInputs()
	p := benchParams
	s := attention.Shape{Batch: p.Batch, HeadsQ: p.HeadsQ, HeadsKV: p.HeadsKV, Lq: p.Lq, Lk: p.Lk, Dk: p.HeadDim, Dv: p.HeadDim}
	for b.Loop() {
		if _, _, err := attention.ForwardFast32(q, k, v, s, attention.Options{Mask: mask.Causal()}); err != nil {
			b.Fatal(err)
		}
	}
}
