package elem

import (
	"math"
	"math/rand/v2"
	"testing"
)

// Benchmarks of each function against its math package counterpart on
// arguments like the kernels' (go test -bench . -run XXX ./internal/elem):
// the ratio of the two is the cost of correct rounding on the common
// path; the slow path is not reached on these arguments.

var sink float64

type benchFn struct {
	name      string
	ours, std func(float64) float64
	lo, hi    float64
}

var benchFns = []benchFn{
	{"Exp", Exp, math.Exp, -20, 20},
	{"Expm1", Expm1, math.Expm1, -1, 1},
	{"Log", Log, math.Log, 1e-3, 1e3},
	{"Log2", Log2, math.Log2, 1e-3, 1e3},
	{"Log1p", Log1p, math.Log1p, -0.5, 10},
	{"Sin", Sin, math.Sin, -1e4, 1e4},
	{"Cos", Cos, math.Cos, -1e4, 1e4},
	{"Sincos", func(x float64) float64 { s, c := Sincos(x); return s + c },
		func(x float64) float64 { s, c := math.Sincos(x); return s + c }, -1e4, 1e4},
	{"Tanh", Tanh, math.Tanh, -5, 5},
	{"Cosh", Cosh, math.Cosh, -10, 10},
	{"Erf", Erf, math.Erf, -4, 4},
	{"Erfc", Erfc, math.Erfc, -3, 10},
	{"Pow", func(y float64) float64 { return Pow(10000, y) }, func(y float64) float64 { return math.Pow(10000, y) }, -1, 0},
}

func benchArgs(lo, hi float64) []float64 {
	r := rand.New(rand.NewPCG(1, 1))
	xs := make([]float64, 1024)
	for i := range xs {
		xs[i] = uniformIn(r, lo, hi)
	}
	return xs
}

func BenchmarkElem(b *testing.B) {
	for _, f := range benchFns {
		xs := benchArgs(f.lo, f.hi)
		f.ours(xs[0]) // build the tables outside the timing
		b.Run(f.name, func(b *testing.B) {
			s := 0.0
			for i := 0; b.Loop(); i++ {
				s += f.ours(xs[i&1023])
			}
			sink = s
		})
	}
}

func BenchmarkMath(b *testing.B) {
	for _, f := range benchFns {
		xs := benchArgs(f.lo, f.hi)
		b.Run(f.name, func(b *testing.B) {
			s := 0.0
			for i := 0; b.Loop(); i++ {
				s += f.std(xs[i&1023])
			}
			sink = s
		})
	}
}
