package num

import (
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// BenchmarkMatrixProduct times MatrixProduct against gonum's BLAS matrix product (assembly on amd64, Go
// elsewhere) on the shapes the fast forms use: a 64-row block of attention
// (Q·Kᵀ: k = 128, n keys; P·V: k keys, n = 128), a square product, and a
// feed-forward projection. Run with -cpu 1 for one core; the products of
// both are parallel above a size. It reports GFLOP/s (2·m·n·k per call) of
// wall time and, where the process CPU time is measured (unix), GFLOP/s of
// CPU time ("GFLOP/cpu-s"), which on a shared machine does not count the
// time spent waiting for a core; with -cpu 1 that is the speed of one core.
//
//	go test ./internal/num -run XXX -bench MatrixProduct -cpu 1,2
func BenchmarkMatrixProduct(b *testing.B) {
	r := rand.New(rand.NewPCG(1, 2))
	for _, s := range []struct {
		name    string
		m, n, k int
		tB      bool
	}{
		{"qk_64x1024x128", 64, 1024, 128, true},
		{"pv_64x128x1024", 64, 128, 1024, false},
		{"square_512", 512, 512, 512, false},
		{"ffn_256x1024x4096", 256, 1024, 4096, false},
	} {
		br, bc := s.k, s.n
		if s.tB {
			br, bc = s.n, s.k
		}
		a, bb, c := make([]float64, s.m*s.k), make([]float64, br*bc), make([]float64, s.m*s.n)
		for i := range a {
			a[i] = r.Float64() - 0.5
		}
		for i := range bb {
			bb[i] = r.Float64() - 0.5
		}
		flops := 2 * float64(s.m) * float64(s.n) * float64(s.k)
		var cpu0 time.Duration
		start := func() { cpu0 = processCPU() }
		report := func(b *testing.B) {
			b.ReportMetric(flops*float64(b.N)/b.Elapsed().Seconds()/1e9, "GFLOP/s")
			if cpu := processCPU() - cpu0; cpu > 0 && cpu0 > 0 {
				b.ReportMetric(flops*float64(b.N)/cpu.Seconds()/1e9, "GFLOP/cpu-s")
			}
		}
		b.Run(fmt.Sprintf("%s/plumb", s.name), func(b *testing.B) {
			start()
			for b.Loop() {
				MatrixProduct(false, s.tB, s.m, s.n, s.k, 1, a, s.k, bb, bc, 0, c, s.n)
			}
			report(b)
		})
		b.Run(fmt.Sprintf("%s/gonum", s.name), func(b *testing.B) {
			tb := blas.NoTrans
			if s.tB {
				tb = blas.Trans
			}
			start()
			for b.Loop() {
				blas64.Implementation().Dgemm(blas.NoTrans, tb, s.m, s.n, s.k, 1, a, s.k, bb, bc, 0, c, s.n)
			}
			report(b)
		})
	}
}
