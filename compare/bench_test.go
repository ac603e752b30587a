package compare

import (
	"math/rand/v2"
	"testing"
)

func BenchmarkRound(b *testing.B) {
	r := rand.New(rand.NewPCG(1, 1))
	x := make([]float64, 1024)
	for i := range x {
		x[i] = r.NormFloat64()
	}
	for _, f := range []Format{Float32, BFloat16, E4M3} {
		b.Run(f.String(), func(b *testing.B) {
			for b.Loop() {
				for _, v := range x {
					_ = f.Round(v)
				}
			}
			b.SetBytes(int64(8 * len(x)))
		})
	}
}

// BenchmarkDiff compares one head's output at a realistic shape: 2048
// positions, head dimension 128 (262 144 elements), in bfloat16.
func BenchmarkDiff(b *testing.B) {
	r := rand.New(rand.NewPCG(2, 2))
	n := 2048 * 128
	ref := make([]float64, n)
	got := make([]float64, n)
	for i := range ref {
		ref[i] = r.NormFloat64()
		got[i] = BFloat16.Round(ref[i] * (1 + 1e-3*r.NormFloat64()))
	}
	tol := Tolerance{Abs: 1e-2}
	b.SetBytes(int64(16 * n))
	for b.Loop() {
		if _, err := Diff(ref, got, []int{2048, 128}, Options{Format: BFloat16, Tolerance: &tol}); err != nil {
			b.Fatal(err)
		}
	}
}
