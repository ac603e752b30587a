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

func BenchmarkRMSNorm(b *testing.B) {
	x, w, _ := benchInputs()
	o := Options{Epsilon: 1e-6}
	b.SetBytes(int64(8 * len(x)))
	for b.Loop() {
		if _, err := RMSNorm(x, benchD, w, o); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkLayerNorm(b *testing.B) {
	x, w, _ := benchInputs()
	o := Options{Epsilon: 1e-5}
	b.SetBytes(int64(8 * len(x)))
	for b.Loop() {
		if _, err := LayerNorm(x, benchD, w, w, o); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkRMSNorm32(b *testing.B) {
	x, w, _ := benchInputs()
	x32, w32 := num.Convert[float32](x), num.Convert[float32](w)
	o := Options{Epsilon: 1e-6}
	b.SetBytes(int64(4 * len(x)))
	for b.Loop() {
		if _, err := RMSNorm32(x32, benchD, w32, o); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkLayerNormBackward(b *testing.B) {
	x, w, dy := benchInputs()
	o := Options{Epsilon: 1e-5}
	b.SetBytes(int64(8 * len(x)))
	for b.Loop() {
		if _, err := LayerNormBackward(x, benchD, w, dy, o); err != nil {
			b.Fatal(err)
		}
	}
}
