package attention

import (
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/mask"
)

// The benchmark shapes: batch 1, 16 heads, 2048 positions, head dimension
// 128, causal (a prefill), and one query against 32768 cached keys (a
// decoding step). internal/benchdoc runs them beside numpy float64 on the
// same computations and renders BENCHMARKS.md; see the package doc.

func benchInputs(s Shape) (q, k, v, d []float64) {
	r := rand.New(rand.NewPCG(7, 8))
	q, k, v = randCase(r, s)
	return q, k, v, randUniform(r, s.oLen())
}

// bench times call.
func bench(b *testing.B, call func() error) {
	for b.Loop() {
		if err := call(); err != nil {
			b.Fatal(err)
		}
	}
}

// benchForward times a forward form on inputs of shape s.
func benchForward(b *testing.B, s Shape, o Options, form forwardRun[float64]) {
	q, k, v, _ := benchInputs(s)
	bench(b, func() error { _, _, err := form(q, k, v, s, o); return err })
}

var prefill = Shape{Batch: 1, HeadsQ: 16, HeadsKV: 16, Lq: 2048, Lk: 2048, Dk: 128, Dv: 128}

func BenchmarkForwardFastCausal(b *testing.B) {
	benchForward(b, prefill, Options{Mask: mask.Causal()}, ForwardFast)
}

// BenchmarkForwardFastFull is the same shape without a mask: every product
// is computed, as numpy computes them.
func BenchmarkForwardFastFull(b *testing.B) { benchForward(b, prefill, Options{}, ForwardFast) }

func BenchmarkBackwardFastCausal(b *testing.B) {
	q, k, v, d := benchInputs(prefill)
	o := Options{Mask: mask.Causal()}
	bench(b, func() error { _, err := BackwardFast(q, k, v, d, nil, prefill, o); return err })
}

func BenchmarkForwardDirectCausal(b *testing.B) {
	benchForward(b, prefill, Options{Mask: mask.Causal()}, Forward)
}

var decodeStep = Shape{Batch: 1, HeadsQ: 16, HeadsKV: 16, Lq: 1, Lk: 32768, Dk: 128, Dv: 128}

func BenchmarkDecodeFast(b *testing.B) {
	benchForward(b, decodeStep, Options{Mask: mask.Causal()}, ForwardFast)
}

func BenchmarkDecodeDirect(b *testing.B) {
	benchForward(b, decodeStep, Options{}, func(q, k, v []float64, s Shape, o Options) ([]float64, []float64, error) {
		return Decode(q, k, v, s, s.Lk-1, o)
	})
}
