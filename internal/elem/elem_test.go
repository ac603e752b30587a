package elem

import (
	"testing"
)

// unary are the functions of one argument with their golden files
// (testdata/elem, written by testdata/gen/elem.py).
var unary = []struct {
	name, file string
	f          func(float64) float64
}{
	{"Exp", "exp", Exp},
	{"Expm1", "expm1", Expm1},
	{"Log", "log", Log},
	{"Log2", "log2", Log2},
	{"Log1p", "log1p", Log1p},
	{"Sin", "sin", Sin},
	{"Cos", "cos", Cos},
	{"Sincos.sin", "sin", func(x float64) float64 { s, _ := Sincos(x); return s }},
	{"Sincos.cos", "cos", func(x float64) float64 { _, c := Sincos(x); return c }},
	{"Tanh", "tanh", Tanh},
	{"Cosh", "cosh", Cosh},
	{"Erf", "erf", Erf},
	{"Erfc", "erfc", Erfc},
}

// TestGoldenCorrectlyRounded: every case of every golden file, bit for
// bit (0 ulp; any NaN for NaN): the dense samples of each domain, the
// special values and the published hard-to-round inputs, whose rounding
// the fast path cannot decide and the slow path does. The log reports how
// many cases took the slow path.
func TestGoldenCorrectlyRounded(t *testing.T) {
	for _, u := range unary {
		t.Run(u.name, func(t *testing.T) {
			cases := readGolden(t, u.file, 1)
			before := slowCalls.Load()
			bad := 0
			for _, c := range cases {
				if got := u.f(c.args[0]); !sameFloat(got, c.want) {
					bad++
					if bad <= 10 {
						t.Errorf("%s(%s) = %s, want %s", u.name, fmtF(c.args[0]), fmtF(got), fmtF(c.want))
					}
				}
			}
			t.Logf("%s: %d cases, %d not correctly rounded, %d took the slow path", u.name, len(cases), bad, slowCalls.Load()-before)
		})
	}
	t.Run("Pow", func(t *testing.T) {
		cases := readGolden(t, "pow", 2)
		before := slowCalls.Load()
		bad := 0
		for _, c := range cases {
			if got := Pow(c.args[0], c.args[1]); !sameFloat(got, c.want) {
				bad++
				if bad <= 10 {
					t.Errorf("Pow(%s, %s) = %s, want %s", fmtF(c.args[0]), fmtF(c.args[1]), fmtF(got), fmtF(c.want))
				}
			}
		}
		t.Logf("Pow: %d cases, %d not correctly rounded, %d took the slow path", len(cases), bad, slowCalls.Load()-before)
	})
}
