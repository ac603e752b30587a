package num_test

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/num"
)

// narrowFormats pairs each narrow format with the compare format whose
// rounding it repeats.
var narrowFormats = []struct {
	name string
	n    num.Narrow
	f    compare.Format
}{{"bfloat16", num.BFloat16, compare.BFloat16}, {"binary16", num.Binary16, compare.Binary16}}

// TestNarrowRoundIsCompareRound: Narrow.Round gives compare.Format.Round's
// value on random values of every magnitude (subnormals and overflow
// included), on every tie between two neighbouring values, and on the
// special values.
func TestNarrowRoundIsCompareRound(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 12))
	for _, c := range narrowFormats {
		check := func(x float64) {
			want, got := c.f.Round(x), c.n.Round(x)
			if math.Float64bits(want) != math.Float64bits(got) && !(math.IsNaN(want) && math.IsNaN(got)) {
				t.Fatalf("%s: Round(%v) = %v; compare.%v.Round gives %v", c.name, x, got, c.f, want)
			}
		}
		for range 200000 {
			x := math.Ldexp(1+r.Float64(), r.IntN(300)-150)
			if r.IntN(2) == 0 {
				x = -x
			}
			check(x)
			// A tie between two neighbouring values, (m + ½)·2^e with an
			// integer significand m of prec bits, and the values beside it.
			prec := c.f.Precision()
			m := float64(int(1)<<(prec-1) + r.IntN(1<<(prec-1)))
			tie := math.Ldexp(m+0.5, r.IntN(280)-140-prec)
			check(tie)
			check(math.Nextafter(tie, 0))
			check(math.Nextafter(tie, math.Inf(1)))
		}
		for _, x := range []float64{0, math.Copysign(0, -1), math.Inf(1), math.Inf(-1), math.NaN(), c.f.Max(), -c.f.Max(),
			c.f.MinSubnormal(), c.f.MinSubnormal() / 2, c.f.MinSubnormal() * 0.75, c.f.MinNormal()} {
			check(x)
		}
	}
}

// TestNarrowAddRoundsOnce: Add(a, b) is the exact sum rounded once, also
// where the float64 sum is a tie of the format and its rounding error
// decides the side (the double rounding a float64 sum rounded again
// would make).
func TestNarrowAddRoundsOnce(t *testing.T) {
	r := rand.New(rand.NewPCG(13, 14))
	for _, c := range narrowFormats {
		exact := func(a, b float64) float64 {
			s := new(big.Float).SetPrec(2000).SetFloat64(a)
			s.Add(s, new(big.Float).SetPrec(2000).SetFloat64(b))
			// Round the exact sum to the format through a sticky float64:
			// its precision is far above the format's, and a value that is
			// not exactly representable keeps a nonzero low part.
			hi, _ := s.Float64()
			lo, _ := new(big.Float).SetPrec(2000).Sub(s, new(big.Float).SetFloat64(hi)).Float64()
			if lo != 0 {
				hi = math.Nextafter(hi, math.Copysign(math.Inf(1), lo)) // off any tie, to lo's side
			}
			return c.f.Round(hi)
		}
		for range 100000 {
			a := c.f.Round(math.Ldexp(1+r.Float64(), r.IntN(20)-10))
			b := float64(float32(math.Ldexp(2*r.Float64()-1, r.IntN(40)-30)))
			expect.Equal(t, exact(a, b), c.n.Add(a, b), "%s: %v + %v", c.name, a, b)
		}
		// A tie in the float64 sum decided by a tiny addend: 1 + 2^-8 is the
		// bfloat16 tie between 1 and 1 + 2^-7 (1 + 2^-11 that of binary16);
		// a second addend 2^-80 puts the exact sum above it.
		tie := 1 + c.f.UnitRoundoff()
		ensure.Equal(t, tie, 1+c.f.UnitRoundoff(), "the tie is a float64")
		expect.Equal(t, 1+2*c.f.UnitRoundoff(), c.n.Add(tie, 0x1p-80), "%s: the exact sum lies above the tie", c.name)
		expect.Equal(t, 1.0, c.n.Add(tie, -0x1p-80), "%s: the exact sum lies below the tie", c.name)
		expect.Equal(t, 1.0, c.n.Add(tie, 0), "%s: the tie itself goes to even", c.name)
	}
}
