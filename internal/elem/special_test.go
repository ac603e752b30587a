package elem

import (
	"math"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
)

// The special cases of the package documentation (those of the math
// package, C99 Annex F): NaN, ±Inf and ±0 arguments, signed zeros in the
// results, overflow to ±Inf and underflow to ±0 at the range limits.
func TestSpecialCases(t *testing.T) {
	inf, nan := math.Inf(1), math.NaN()
	negz := math.Copysign(0, -1)
	const tiny = 5e-324
	type sc struct {
		x, want float64
	}
	unary := []struct {
		name  string
		f     func(float64) float64
		std   func(float64) float64
		cases []sc
	}{
		{"Exp", Exp, math.Exp, []sc{{nan, nan}, {inf, 1 * inf}, {-inf, 0}, {0, 1}, {negz, 1}, {710, inf},
			{-746, 0}, {-745.2, 0}, {-745.1, tiny}, {tiny, 1}, {-tiny, 1}, {math.MaxFloat64, inf}, {-math.MaxFloat64, 0}}},
		{"Expm1", Expm1, math.Expm1, []sc{{nan, nan}, {inf, inf}, {-inf, -1}, {0, 0}, {negz, negz}, {tiny, tiny},
			{-tiny, -tiny}, {-40, -1}, {710, inf}, {math.MaxFloat64, inf}}},
		{"Log", Log, math.Log, []sc{{nan, nan}, {inf, inf}, {-inf, nan}, {0, -inf}, {negz, -inf}, {-1, nan},
			{-tiny, nan}, {1, 0}}},
		{"Log2", Log2, math.Log2, []sc{{nan, nan}, {inf, inf}, {0, -inf}, {negz, -inf}, {-1, nan}, {1, 0},
			{2, 1}, {0.5, -1}, {tiny, -1074}, {0x1p1023, 1023}, {0x1p-1022, -1022}}},
		{"Log1p", Log1p, math.Log1p, []sc{{nan, nan}, {inf, inf}, {-1, -inf}, {-2, nan}, {-inf, nan}, {0, 0},
			{negz, negz}, {tiny, tiny}, {-tiny, -tiny}}},
		{"Sin", Sin, math.Sin, []sc{{nan, nan}, {inf, nan}, {-inf, nan}, {0, 0}, {negz, negz}, {tiny, tiny},
			{-tiny, -tiny}}},
		{"Cos", Cos, math.Cos, []sc{{nan, nan}, {inf, nan}, {-inf, nan}, {0, 1}, {negz, 1}, {tiny, 1}}},
		{"Tanh", Tanh, math.Tanh, []sc{{nan, nan}, {inf, 1}, {-inf, -1}, {0, 0}, {negz, negz}, {tiny, tiny},
			{-tiny, -tiny}, {30, 1}, {-30, -1}, {math.MaxFloat64, 1}}},
		{"Cosh", Cosh, math.Cosh, []sc{{nan, nan}, {inf, inf}, {-inf, inf}, {0, 1}, {negz, 1}, {tiny, 1},
			{711, inf}, {-711, inf}, {math.MaxFloat64, inf}}},
		{"Erf", Erf, math.Erf, []sc{{nan, nan}, {inf, 1}, {-inf, -1}, {0, 0}, {negz, negz}, {6, 1}, {-6, -1},
			{math.MaxFloat64, 1}}},
		{"Erfc", Erfc, math.Erfc, []sc{{nan, nan}, {inf, 0}, {-inf, 2}, {0, 1}, {negz, 1}, {tiny, 1}, {30, 0},
			{-30, 2}, {math.MaxFloat64, 0}}},
	}
	for _, u := range unary {
		for _, c := range u.cases {
			got := u.f(c.x)
			expect.True(t, sameFloat(got, c.want), "%s(%v) = %v, want %v", u.name, c.x, got, c.want)
			if std := u.std(c.x); !sameFloat(std, c.want) && ulpDiff(std, c.want) > 1 {
				t.Logf("note: math.%s(%v) = %v", u.name, c.x, std)
			}
		}
	}
	// Sincos has Sin's and Cos's special cases.
	for _, x := range []float64{nan, inf, -inf, 0, negz, tiny, -tiny} {
		s, c := Sincos(x)
		expect.True(t, sameFloat(s, Sin(x)) && sameFloat(c, Cos(x)), "Sincos(%v) = %v, %v", x, s, c)
	}
}

// Pow agrees bit for bit with math.Pow on every pair involving a special
// value (NaN, ±Inf, ±0, a base of ±1, an exponent of ±0 or 1), which
// math.Pow implements exactly; the other pairs of the grid are in the
// golden file, correctly rounded (math.Pow(3, 0.5) is not).
func TestPowSpecialCases(t *testing.T) {
	inf, nan := math.Inf(1), math.NaN()
	negz := math.Copysign(0, -1)
	xs := []float64{nan, inf, -inf, 0, negz, 1, -1, 2, -2, 0.5, -0.5, 3, -3, 5e-324, -5e-324, math.MaxFloat64, -math.MaxFloat64}
	ys := []float64{nan, inf, -inf, 0, negz, 1, -1, 2, -2, 3, -3, 0.5, -0.5, 2.5, -2.5, 1e300, -1e300, 1 << 53, 1<<53 + 2}
	special := func(v float64) bool { return v != v || math.IsInf(v, 0) || v == 0 }
	for _, x := range xs {
		for _, y := range ys {
			if !special(x) && !special(y) && math.Abs(x) != 1 && y != 1 {
				continue
			}
			got, want := Pow(x, y), math.Pow(x, y)
			expect.True(t, sameFloat(got, want), "Pow(%v, %v) = %v, math.Pow: %v", x, y, got, want)
		}
	}
	// Exact results, exact midpoints (rounded to even) and the rounding at
	// the ends of the range.
	for _, c := range []struct{ x, y, want float64 }{
		{9, 0.5, 3}, {4, 1.5, 8}, {2, 10, 1024}, {-2, 3, -8}, {-2, -3, -0.125}, {10, 22, 1e22},
		{2, -1074, 5e-324}, {2, -1075, 0}, {-2, -1075, negz}, {0.5, 1075, 0}, {2, 1023, 0x1p1023}, {2, 1024, inf},
		{-2, 1025, -inf}, {5e-324, 0.5, 0x1p-537},
		{(1<<27 - 1), 2, (1<<27 - 1) * (1<<27 - 1)},                        // 2⁵⁴ − 2²⁸ + 1 has 54 bits: a midpoint
		{134217729, 2, 18014398777917440},                                  // (2²⁷+1)² = 2⁵⁴ + 2²⁸ + 1 rounds to 2⁵⁴ + 2²⁸
		{float64(131073 * 131073), 1.5, float64(131073) * 131073 * 131073}, // 131073³ rounded
	} {
		got := Pow(c.x, c.y)
		expect.True(t, sameFloat(got, c.want), "Pow(%v, %v) = %v, want %v", c.x, c.y, got, c.want)
	}
}
