package elem

import (
	"math"
	"math/rand/v2"
	"testing"
)

// public and slow pair every function with its slow path, the oracle of
// correct rounding for any argument past the shortcuts (each public
// function returns exactly what its slow path would, or a special value).
var oracles = []struct {
	name   string
	public func(x, y float64) float64
	slow   func(x, y float64) float64
	domain func(x, y float64) bool
}{
	{"Exp", func(x, _ float64) float64 { return Exp(x) }, func(x, _ float64) float64 { return slowExp(x) },
		func(x, _ float64) bool { return x > -746 && x < 710 }},
	{"Expm1", func(x, _ float64) float64 { return Expm1(x) }, func(x, _ float64) float64 { return slowExpm1(x) },
		func(x, _ float64) bool { return x >= -38 && x < 710 && math.Abs(x) >= 0x1p-54 }},
	{"Log", func(x, _ float64) float64 { return Log(x) }, func(x, _ float64) float64 { return slowLog(x) },
		func(x, _ float64) bool { return x > 0 && !math.IsInf(x, 0) && x != 1 }},
	{"Log2", func(x, _ float64) float64 { return Log2(x) }, func(x, _ float64) float64 { return slowLog2(x) },
		func(x, _ float64) bool { return x > 0 && !math.IsInf(x, 0) && x != 1 }},
	{"Log1p", func(x, _ float64) float64 { return Log1p(x) }, func(x, _ float64) float64 { return slowLog1p(x) },
		func(x, _ float64) bool { return x > -1 && !math.IsInf(x, 0) && math.Abs(x) >= 0x1p-60 }},
	{"Sin", func(x, _ float64) float64 { return Sin(x) }, func(x, _ float64) float64 { return slowSin(x) },
		func(x, _ float64) bool { return !math.IsInf(x, 0) && math.Abs(x) >= 0x1p-27 }},
	{"Cos", func(x, _ float64) float64 { return Cos(x) }, func(x, _ float64) float64 { return slowCos(x) },
		func(x, _ float64) bool { return !math.IsInf(x, 0) && math.Abs(x) >= 0x1p-27 }},
	{"Tanh", func(x, _ float64) float64 { return Tanh(x) }, func(x, _ float64) float64 { return slowTanh(x) },
		func(x, _ float64) bool { return math.Abs(x) >= 0x1p-27 && math.Abs(x) <= 22 }},
	{"Cosh", func(x, _ float64) float64 { return Cosh(x) }, func(x, _ float64) float64 { return slowCosh(x) },
		func(x, _ float64) bool { return math.Abs(x) >= 0x1p-27 && math.Abs(x) <= 711 }},
	{"Erf", func(x, _ float64) float64 { return Erf(x) }, func(x, _ float64) float64 { return slowErf(x) },
		func(x, _ float64) bool { return x != 0 && math.Abs(x) < 6 }},
	{"Erfc", func(x, _ float64) float64 { return Erfc(x) }, func(x, _ float64) float64 { return slowErfc(x) },
		func(x, _ float64) bool { return math.Abs(x) >= 0x1p-60 && x > -6 && x <= 27.3 }},
	{"Pow", Pow, slowPow, func(x, y float64) bool {
		if !(x > 0) || math.IsInf(x, 0) || math.IsInf(y, 0) || y != y || y == 0 || x == 1 {
			return false
		}
		w := y * math.Log(x)
		return w > -745 && w < 709
	}},
}

func checkOracle(t *testing.T, i int, x, y float64) {
	o := oracles[i]
	if !o.domain(x, y) {
		return
	}
	got, want := o.public(x, y), o.slow(x, y)
	if !sameFloat(got, want) {
		t.Fatalf("%s(%v, %v) = %s, correctly rounded %s", o.name, x, y, fmtF(got), fmtF(want))
	}
}

// TestRandomCorrectlyRounded: on random arguments across each domain the
// public function returns the slow path's correctly rounded value.
func TestRandomCorrectlyRounded(t *testing.T) {
	n := 300
	if testing.Short() {
		n = 30
	}
	gens := map[string]func(*rand.Rand) []float64{}
	for _, c := range fastCases {
		gens[c.name] = c.gen
	}
	for i, o := range oracles {
		gen := gens[map[string]string{"Exp": "exp", "Expm1": "expm1", "Log": "log", "Log2": "log2", "Log1p": "log1p",
			"Sin": "sin", "Cos": "cos", "Tanh": "tanh", "Cosh": "cosh", "Erf": "erf", "Erfc": "erfc", "Pow": "pow"}[o.name]]
		r := rand.New(rand.NewPCG(uint64(i), 1234))
		for range n {
			a := append(gen(r), 0)
			checkOracle(t, i, a[0], a[1])
		}
	}
}

// FuzzCorrectlyRounded: any float64 argument (pair, for Pow) gives the
// correctly rounded value — the slow path's — or a special value outside
// the domain.
func FuzzCorrectlyRounded(f *testing.F) {
	for i := range oracles {
		for _, x := range []float64{0.5, -3.25, 700.5, 1e-300, 1e300, 27.1, -5.9, 1 + 0x1p-40, 6381956970095103 * 0x1p797} {
			f.Add(uint8(i), math.Float64bits(x), math.Float64bits(-0.75))
		}
	}
	f.Add(uint8(11), math.Float64bits(10000), math.Float64bits(-0.03125))
	f.Fuzz(func(t *testing.T, which uint8, xb, yb uint64) {
		checkOracle(t, int(which)%len(oracles), math.Float64frombits(xb), math.Float64frombits(yb))
	})
}
