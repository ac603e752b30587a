package posenc

import "testing"

// A realistic shape: batch 1, 16 heads, 2048 positions, head dimension 128,
// laid out [batch, heads, L, D] with positions 0 … 2047.
func BenchmarkApply(b *testing.B) {
	const H, L, D = 16, 2048, 128
	x := make([]float64, H*L*D)
	for i := range x {
		x[i] = float64(i%13) - 6
	}
	r := Rotary{Dim: D, Scaling: Scaling{Method: YaRN, Factor: 8, TrainedLength: 4096}}
	b.SetBytes(int64(8 * len(x)))
	for b.Loop() {
		if _, err := r.Apply(x, L, Positions{}); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkApply32(b *testing.B) {
	const H, L, D = 16, 2048, 128
	x := make([]float32, H*L*D)
	for i := range x {
		x[i] = float32(i%13) - 6
	}
	r := Rotary{Dim: D}
	b.SetBytes(int64(4 * len(x)))
	for b.Loop() {
		if _, err := r.Apply32(x, L, Positions{}); err != nil {
			b.Fatal(err)
		}
	}
}

// The tables alone: 2048 positions × 64 frequencies.
func BenchmarkTables(b *testing.B) {
	pos := make([]int, 2048)
	for i := range pos {
		pos[i] = 1_000_000 + i
	}
	r := Rotary{Dim: 128}
	for b.Loop() {
		if _, _, err := r.Tables(pos); err != nil {
			b.Fatal(err)
		}
	}
}
