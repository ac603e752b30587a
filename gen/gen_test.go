package gen_test

import (
	"errors"
	"math"
	"testing"

	"github.com/plumbref/plumb/gen"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
)

// plumb gen's values are pinned against the command's files in
// cmd/plumb (TestGenIsPackageGen) and against the algorithm recomputed in
// Python (TestGenOtherLanguage); the examples pin the first values its help
// states. These tests pin the package's own rules.

func TestPrefixesAndSeeds(t *testing.T) {
	// A shorter tensor is a prefix of a longer one of the same seed, an odd
	// count included (the last value takes the cosine and drops the sine).
	z, err := gen.Normal(7, 1001, 0, 1)
	ensure.NoError(t, err)
	for _, n := range []int{0, 1, 2, 3, 1000} {
		p, err := gen.Normal(7, n, 0, 1)
		ensure.NoError(t, err)
		expect.Equal(t, z[:n], p, "n = %d", n)
	}
	u, err := gen.Uniform(7, 1001, 0, 1)
	ensure.NoError(t, err)
	p, err := gen.Uniform(7, 3, 0, 1)
	ensure.NoError(t, err)
	expect.Equal(t, u[:3], p)

	// Another seed, other numbers; the same seed, the same numbers.
	z8, err := gen.Normal(8, 1001, 0, 1)
	ensure.NoError(t, err)
	expect.NotEqual(t, z[:4], z8[:4])
	again, err := gen.Normal(7, 1001, 0, 1)
	ensure.NoError(t, err)
	expect.Equal(t, z, again)

	// Standard normal and uniform [0, 1): the sample moments, loosely.
	var sum, sq float64
	for i, v := range z {
		sum += v
		sq += float64(v * v)
		expect.True(t, u[i] >= 0 && u[i] < 1, "u[%d] = %v", i, u[i])
	}
	expect.InDelta(t, 0, sum/1001, 0.1)
	expect.InDelta(t, 1, sq/1001, 0.15)
}

// TestScaled: mean + std·z and low + (high − low)·u, each product rounded
// before the addition, as the command's help states.
func TestScaled(t *testing.T) {
	z, err := gen.Normal(3, 101, 0, 1)
	ensure.NoError(t, err)
	s, err := gen.Normal(3, 101, 2, 0.3)
	ensure.NoError(t, err)
	c, err := gen.Normal(3, 5, -4, 0)
	ensure.NoError(t, err)
	u, err := gen.Uniform(3, 101, 0, 1)
	ensure.NoError(t, err)
	w, err := gen.Uniform(3, 101, -1.5, 0.25)
	ensure.NoError(t, err)
	for i := range z {
		expect.Equal(t, 2+float64(0.3*z[i]), s[i], "normal %d", i)
		expect.Equal(t, -1.5+float64(1.75*u[i]), w[i], "uniform %d", i)
	}
	expect.Equal(t, []float64{-4, -4, -4, -4, -4}, c, "std 0: the mean")
}

func TestErrors(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	for _, c := range []struct {
		name string
		call func() ([]float64, error)
		want string
	}{
		{"negative n", func() ([]float64, error) { return gen.Normal(1, -1, 0, 1) }, "gen: invalid parameter: Normal: n = -1; want 0 ≤ n ≤ MaxElements = 268435456"},
		{"n too large", func() ([]float64, error) { return gen.Uniform(1, gen.MaxElements+1, 0, 1) }, "Uniform: n = 268435457;"},
		{"mean NaN", func() ([]float64, error) { return gen.Normal(1, 2, nan, 1) }, "Normal: mean = NaN; want a finite number"},
		{"std negative", func() ([]float64, error) { return gen.Normal(1, 2, 0, -1) }, "Normal: std = -1; want a finite number ≥ 0"},
		{"std Inf", func() ([]float64, error) { return gen.Normal(1, 2, 0, inf) }, "Normal: std = +Inf;"},
		{"bounds reversed", func() ([]float64, error) { return gen.Uniform(1, 2, 1, 0) }, "Uniform: low = 1 and high = 0; want finite numbers, low < high"},
		{"bounds equal", func() ([]float64, error) { return gen.Uniform(1, 2, 1, 1) }, "low = 1 and high = 1;"},
		{"width overflows", func() ([]float64, error) { return gen.Uniform(1, 2, -math.MaxFloat64, math.MaxFloat64) }, "high − low finite"},
		{"high Inf", func() ([]float64, error) { return gen.Uniform(1, 2, 0, inf) }, "high = +Inf;"},
	} {
		x, err := c.call()
		expect.Nil(t, x, c.name)
		if expect.Error(t, err, c.name) {
			expect.True(t, errors.Is(err, gen.ErrParameter), "%s: %v", c.name, err)
			expect.Contains(t, err.Error(), c.want, c.name)
		}
	}
	x, err := gen.Uniform(1, 0, 0, 1)
	ensure.NoError(t, err)
	expect.Empty(t, x)
}
