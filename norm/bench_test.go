package norm

import (
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/num"
)

// Benchmarks at a realistic shape: 512 tokens of width 4096 (one sequence
// chunk of a model with hidden size 4096), weight present.
const benchRows, benchD = 512, 4096

func benchInputs() (x, w, dy []float64) {
	r := rand.New(rand.NewPCG(13, 14))
	return uniform(r, benchRows*benchD, -2, 2), uniform(r, benchD, 0.5, 1.5), uniform(r, benchRows*benchD, -1, 1)
}

// bench times call, which reads bytes of input.
func bench(b *testing.B, bytes int, call func() error) {
	b.SetBytes(int64(bytes))
	for b.Loop() {
		if err := call(); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkRMSNorm(b *testing.B) {
	x, w, _ := benchInputs()
	bench(b, 8*len(x), func() error { _, err := RMSNorm(x, benchD, w, Options{Epsilon: 1e-6}); return err })
}

func BenchmarkLayerNorm(b *testing.B) {
	x, w, _ := benchInputs()
	bench(b, 8*len(x), func() error { _, err := LayerNorm(x, benchD, w, w, Options{Epsilon: 1e-5}); return err })
}

func BenchmarkRMSNorm32(b *testing.B) {
	x, w, _ := benchInputs()
	x32, w32 := num.Convert[float32](x), num.Convert[float32](w)
	bench(b, 4*len(x), func() error { _, err := RMSNorm32(x32, benchD, w32, Options{Epsilon: 1e-6}); return err })
}

func BenchmarkLayerNormBackward(b *testing.B) {
	x, w, dy := benchInputs()
	bench(b, 8*len(x), func() error { _, err := LayerNormBackward(x, benchD, w, dy, Options{Epsilon: 1e-5}); return err })
}
