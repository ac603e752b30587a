package attention

import (
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/mask"
)

// The benchmark shapes: batch 1, 16 heads, 2048 positions, head dimension
// 128, causal (a prefill), and one query against 32768 cached keys (a
// decoding step). attention/testdata/bench_numpy.py times the same forward
// computation in numpy float64 for comparison; see the package doc.

func benchInputs(s Shape) (q, k, v, d []float64) {
	r := rand.New(rand.NewPCG(7, 8))
	u := func(n int) []float64 {
		x := make([]float64, n)
		for i := range x {
			x[i] = 2*r.Float64() - 1
		}
		return x
	}
	return u(s.qLen()), u(s.kLen()), u(s.vLen()), u(s.oLen())
}

var prefill = Shape{Batch: 1, HeadsQ: 16, HeadsKV: 16, Lq: 2048, Lk: 2048, Dk: 128, Dv: 128}

func BenchmarkForwardFastCausal(b *testing.B) {
	q, k, v, _ := benchInputs(prefill)
	o := Options{Mask: mask.Causal()}
	for b.Loop() {
		if _, _, err := ForwardFast(q, k, v, prefill, o); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkForwardFastFull is the same shape without a mask: every product
// is computed, as numpy computes them.
func BenchmarkForwardFastFull(b *testing.B) {
	q, k, v, _ := benchInputs(prefill)
	for b.Loop() {
		if _, _, err := ForwardFast(q, k, v, prefill, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkBackwardFastCausal(b *testing.B) {
	q, k, v, d := benchInputs(prefill)
	o := Options{Mask: mask.Causal()}
	for b.Loop() {
		if _, err := BackwardFast(q, k, v, d, nil, prefill, o); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkForwardDirectCausal(b *testing.B) {
	q, k, v, _ := benchInputs(prefill)
	o := Options{Mask: mask.Causal()}
	for b.Loop() {
		if _, _, err := Forward(q, k, v, prefill, o); err != nil {
			b.Fatal(err)
		}
	}
}

var decodeStep = Shape{Batch: 1, HeadsQ: 16, HeadsKV: 16, Lq: 1, Lk: 32768, Dk: 128, Dv: 128}

func BenchmarkDecodeFast(b *testing.B) {
	q, k, v, _ := benchInputs(decodeStep)
	o := Options{Mask: mask.Causal()}
	for b.Loop() {
		if _, _, err := ForwardFast(q, k, v, decodeStep, o); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkDecodeDirect(b *testing.B) {
	q, k, v, _ := benchInputs(decodeStep)
	for b.Loop() {
		if _, _, err := Decode(q, k, v, decodeStep, decodeStep.Lk-1, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}
