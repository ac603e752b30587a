package elem

import (
	"math"
	"math/big"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// The slow path is what decides the hard cases, so it is checked on its
// own against the same 50-digit data: every function's slow path on a
// subset of its golden file (all of the published hard cases among them
// reach it through the public functions in TestGoldenCorrectlyRounded).
func TestSlowPathGolden(t *testing.T) {
	slow := map[string]func(float64) float64{
		"exp": slowExp, "expm1": slowExpm1, "log": slowLog, "log2": slowLog2, "log1p": slowLog1p,
		"sin": slowSin, "cos": slowCos, "tanh": slowTanh, "cosh": slowCosh, "erf": slowErf, "erfc": slowErfc,
	}
	// inDomain: the arguments the slow path is meant for (finite, past the
	// shortcuts every public function takes first).
	inDomain := map[string]func(float64) bool{
		"exp":   func(x float64) bool { return x > -746 && x < 710 },
		"expm1": func(x float64) bool { return x > -38 && x < 710 && math.Abs(x) >= 0x1p-54 },
		"log":   func(x float64) bool { return x > 0 && x < math.Inf(1) && x != 1 },
		"log2":  func(x float64) bool { return x > 0 && x < math.Inf(1) && x != 1 },
		"log1p": func(x float64) bool { return x > -1 && x < math.Inf(1) && math.Abs(x) >= 0x1p-60 },
		"sin":   func(x float64) bool { return math.Abs(x) >= 0x1p-27 && !math.IsInf(x, 0) },
		"cos":   func(x float64) bool { return math.Abs(x) >= 0x1p-27 && !math.IsInf(x, 0) },
		"tanh":  func(x float64) bool { return math.Abs(x) >= 0x1p-27 && math.Abs(x) <= 22 },
		"cosh":  func(x float64) bool { return math.Abs(x) >= 0x1p-27 && math.Abs(x) <= 711 },
		"erf":   func(x float64) bool { return x != 0 && math.Abs(x) < 6 },
		"erfc":  func(x float64) bool { return math.Abs(x) >= 0x1p-60 && x > -6 && x <= 27.3 },
	}
	step := 40
	if testing.Short() {
		step = 400
	}
	for name, f := range slow {
		t.Run(name, func(t *testing.T) {
			n := 0
			for i, c := range readGolden(t, name, 1) {
				x := c.args[0]
				if i%step != 0 || !inDomain[name](x) {
					continue
				}
				n++
				if got := f(x); !sameFloat(got, c.want) {
					t.Errorf("slow %s(%s) = %s, want %s", name, fmtF(x), fmtF(got), fmtF(c.want))
				}
			}
			ensure.NotZero(t, n)
		})
	}
	t.Run("pow", func(t *testing.T) {
		for i, c := range readGolden(t, "pow", 2) {
			x, y := c.args[0], c.args[1]
			if i%step != 0 || !(x > 0 && x < math.Inf(1)) || math.IsInf(y, 0) || y != y || y == 0 || x == 1 {
				continue
			}
			if w := y * math.Log(x); w > 709 || w < -745 {
				continue
			}
			if got := slowPow(x, y); !sameFloat(got, c.want) {
				t.Errorf("slow Pow(%s, %s) = %s, want %s", fmtF(x), fmtF(y), fmtF(got), fmtF(c.want))
			}
		}
	})
}

// big.Float.Float64, on which the slow path's last step rests, rounds to
// nearest with ties to even, through the subnormal range and at overflow.
func TestBigFloat64Rounds(t *testing.T) {
	at := func(mant int64, exp int) float64 {
		v := new(big.Float).SetPrec(200).SetInt64(mant)
		f, _ := v.SetMantExp(v, exp).Float64()
		return f
	}
	// 1 + 2⁻⁵³ (a tie) to 1, 1 + 3·2⁻⁵³ to 1 + 2⁻⁵¹, 1 + 2⁻⁵³ + 2⁻¹⁰⁰ up.
	expect.Equal(t, 1.0, at(1<<53+1, -53))
	expect.Equal(t, 1+0x1p-51, at(1<<53+3, -53))
	v := new(big.Float).SetPrec(200).SetInt64(1<<53 + 1)
	v.SetMantExp(v, -53)
	v.Add(v, big.NewFloat(0x1p-100))
	f, _ := v.Float64()
	expect.Equal(t, 1+0x1p-52, f)
	// subnormals: 2⁻¹⁰⁷⁵ (a tie) to 0, 3·2⁻¹⁰⁷⁵ to 2⁻¹⁰⁷³, 2⁻¹⁰⁷⁵(1+2⁻⁶⁰) up
	expect.Equal(t, 0.0, at(1, -1075))
	expect.Equal(t, 0x1p-1073, at(3, -1075))
	expect.Equal(t, 5e-324, at(1<<60+1, -1075-60))
	expect.Equal(t, 0x1p-1073, at(5, -1075)) // 2.5 units of 2⁻¹⁰⁷⁴: to the even 2
	// overflow: the midpoint between MaxFloat64 and 2¹⁰²⁴ rounds up to Inf
	expect.Equal(t, math.MaxFloat64, at(1<<54-2, 1024-54))
	expect.True(t, math.IsInf(at(1<<54-1, 1024-54), 1))
}
