package posenc

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/mask"
)

// ulps is |a − b| in units of 2^−52·max(|a|, |b|, tiny): a relative
// distance for worked values stated to 17 significant digits, whose float64
// reading may be one ulp from the exact float64 nearest to the true value.
func ulps(a, b float64) float64 {
	m := math.Max(math.Abs(a), math.Abs(b))
	if m == 0 {
		return 0
	}
	return math.Abs(a-b) / (m * 0x1p-52)
}

// --- Published and worked values, each naming its source. ---

func TestWorkedSinusoidal(t *testing.T) {
	tab, err := Sinusoidal{Dim: 4}.Table(2, 0)
	ensure.NoError(t, err)
	// Vaswani et al. 2017 §3.5: sin(0) = 0 and cos(0) = 1, exactly.
	expect.Equal(t, []float64{0, 1, 0, 1}, tab[:4], "position 0")
	// [mpmath] pos = 1, d = 4 (50 digits, rounded to 17 significant).
	want := []float64{0.84147098480789651, 0.54030230586813972, 0.0099998333341666647, 0.99995000041666528}
	for i, w := range want {
		expect.LessOrEqual(t, ulps(tab[4+i], w), 1.0, "PE(1, %d) = %v, want %v", i, tab[4+i], w)
	}
	// Position 0 of a wide table, Concatenated: all sines 0, all cosines 1.
	c, err := Sinusoidal{Dim: 64, Layout: Concatenated, Base: 500}.Table(1, 0)
	ensure.NoError(t, err)
	for i := range 32 {
		ensure.Equal(t, 0.0, c[i])
		ensure.Equal(t, 1.0, c[32+i])
	}
}

func TestWorkedRotary(t *testing.T) {
	// [mpmath] d = 4, base 10⁴ (θ = 1, 0.01), x = [1, 2, 3, 4], m = 1,
	// PairAdjacent; values rounded to 17 significant digits.
	y, err := Rotary{Dim: 4}.Apply([]float64{1, 2, 3, 4}, 1, Positions{Offset: 1})
	ensure.NoError(t, err)
	want := []float64{-1.1426396637476533, 1.9220755965441759, 2.9598506679133292, 4.0297995016691611}
	for i, w := range want {
		expect.LessOrEqual(t, ulps(y[i], w), 2.0, "y[%d] = %v, want %v", i, y[i], w)
	}
	th, err := Rotary{Dim: 4}.Frequencies()
	ensure.NoError(t, err)
	// Su et al. 2021 Eq. (15): θ_i = 10000^{−2i/d}; d = 4 gives 1 and 1/100.
	expect.Equal(t, []float64{1, 0.01}, th)
}

func TestWorkedInterpolation(t *testing.T) {
	// Chen et al. 2023, arXiv 2306.15595, §2.3 Eq. (4), f′(x, m) = f(x, m/s)
	// with s = L′/L (the formula at Interpolation): L = 2048, L′ = 8192, so
	// s = 4 and position 6000 is encoded as 6000/4 = 1500. The angles are
	// the same real numbers, and both paths round them identically.
	pi := Rotary{Dim: 64, Scaling: Scaling{Method: Interpolation, Factor: 8192.0 / 2048}}
	c1, s1, err := pi.Tables([]int{6000})
	ensure.NoError(t, err)
	c2, s2, err := Rotary{Dim: 64}.Tables([]int{1500})
	ensure.NoError(t, err)
	expect.Equal(t, c2, c1)
	expect.Equal(t, s2, s1)
}

func TestWorkedNTKBase(t *testing.T) {
	// [mpmath] |D| = 128, b = 10⁴, s = 4 → b′ = 40889.942432486216.
	b, err := NTKBase(10000, 4, 128)
	ensure.NoError(t, err)
	expect.LessOrEqual(t, ulps(b, 40889.942432486216), 1.0, "b′ = %v", b)
}

func TestWorkedYaRNMagnitude(t *testing.T) {
	m, err := YaRNMagnitude(8)
	ensure.NoError(t, err)
	// [paper] Peng et al. 2023: √(1/t) ≈ 1.208 at s = 8 (three decimals).
	expect.InDelta(t, 1.208, m, 0.0005)
	// [mpmath] 0.1·ln 8 + 1 = 1.2079441541679836.
	expect.LessOrEqual(t, ulps(m, 1.2079441541679836), 1.0)
	one, err := YaRNMagnitude(1)
	ensure.NoError(t, err)
	expect.Equal(t, 1.0, one, "ln 1 = 0")
}

func TestWorkedALiBiSlopes(t *testing.T) {
	// [paper] Press et al. 2022 §3: for 8 heads the slopes are
	// 1/2, 1/2², …, 1/2⁸.
	s8, err := ALiBiSlopes(8)
	ensure.NoError(t, err)
	expect.Equal(t, []float64{0.5, 0.25, 0.125, 0.0625, 0.03125, 0.015625, 0.0078125, 0.00390625}, s8)
	// [mpmath] 12 heads: the 8 above, then 2^{−1/2}, 2^{−3/2}, 2^{−5/2},
	// 2^{−7/2} (the authors' rule for a count that is not a power of two).
	s12, err := ALiBiSlopes(12)
	ensure.NoError(t, err)
	expect.Equal(t, s8, s12[:8])
	for i, w := range []float64{0.70710678118654752, 0.35355339059327376, 0.17677669529663688, 0.088388347648318441} {
		expect.LessOrEqual(t, ulps(s12[8+i], w), 1.0)
	}
	// [paper] §3: "for models with 16 heads … 1/2^0.5, 1/2^1, …, 1/2^8":
	// the geometric sequence with ratio 2^{−1/2}. Powers at integer
	// exponents are exact.
	s16, err := ALiBiSlopes(16)
	ensure.NoError(t, err)
	for k := 2; k <= 16; k += 2 {
		expect.Equal(t, math.Ldexp(1, -k/2), s16[k-1])
	}
}

func TestWorkedALiBiBias(t *testing.T) {
	// Press et al. 2022 §3: query i (1-based) adds m·[−(i−1), …, −1, 0] to
	// its logits against keys 1 … i. Square geometry, 2 heads. The paper
	// gives no bias for the keys after the query, which its causal model
	// never sees; each form says what they get (mask.ALiBiForm).
	slopes := []float64{0.5, 0.25}
	const L = 4
	g := mask.Geometry{Batch: 1, Lq: L, Lk: L}
	causal, sym, past := biasForms(t, slopes, g)
	for h, m := range slopes {
		for i := 1; i <= L; i++ {
			k := (h*L + i - 1) * L
			for j := 1; j <= i; j++ {
				// [paper] keys up to the query: every form
				for _, b := range [][]float64{causal, past, sym} {
					expect.Equal(t, m*float64(-(i-j)), b[k+j-1])
				}
			}
			for j := i + 1; j <= L; j++ {
				// the paper's formula −m·(i − j) for every key: positive
				expect.Equal(t, m*float64(j-i), causal[k+j-1], "causal: keys after the query get m·(j − i)")
				expect.Equal(t, 0.0, past[k+j-1], "past-only: keys after the query carry 0")
				expect.False(t, math.Signbit(past[k+j-1]), "past-only: +0, not −0")
				expect.Equal(t, m*float64(i-j), sym[k+j-1], "symmetric: −m·|i − j|")
			}
		}
	}
}

// --- Properties. ---

func randVec(r *rand.Rand, n int) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = 2*r.Float64() - 1
	}
	return x
}

func norm(x []float64) float64 {
	s := 0.0
	for _, v := range x {
		s += v * v
	}
	return math.Sqrt(s)
}

func dot(a, b []float64) float64 {
	s := 0.0
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

// configs are the rotary settings the properties run over.
var configs = []Rotary{
	{Dim: 64},
	{Dim: 64, Pairing: PairHalves},
	{Dim: 40, Rotated: 16, Base: 500000},
	{Dim: 13, Rotated: 6, Pairing: PairHalves},
	{Dim: 32, Scaling: Scaling{Method: YaRN, Factor: 8, TrainedLength: 4096}},
	{Dim: 32, Pairing: PairHalves, Scaling: Scaling{Method: NTKAware, Factor: 32}},
	{Dim: 32, Scaling: Scaling{Method: Interpolation, TrainedLength: 1000, CurrentLength: 3333}},
}

func TestRotationPreservesNorm(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	for _, cfg := range configs {
		for range 20 {
			x := randVec(r, 3*cfg.Dim)
			pos := []int{r.IntN(MaxPosition), -r.IntN(1000), r.IntN(1 << 20)}
			y, err := cfg.Apply(x, 3, Positions{List: pos})
			ensure.NoError(t, err)
			for row := range 3 {
				nx, ny := norm(x[row*cfg.Dim:(row+1)*cfg.Dim]), norm(y[row*cfg.Dim:(row+1)*cfg.Dim])
				// Each rotated pair is off by at most ~3 ulps of its norm
				// (cos, sin within 1 ulp; two products and a sum); 1e-15
				// relative covers it with room and fails on any wrong angle
				// formula that stops being a rotation.
				expect.InDelta(t, nx, ny, 1e-15*nx, "%+v at %d", cfg, pos[row])
			}
		}
	}
}

func TestRelativePosition(t *testing.T) {
	// Su et al. 2021 Eq. (16): ⟨R(m)q, R(n)k⟩ depends only on m − n.
	r := rand.New(rand.NewPCG(3, 4))
	for _, cfg := range configs {
		for range 20 {
			q, k := randVec(r, cfg.Dim), randVec(r, cfg.Dim)
			m, n := r.IntN(5000), r.IntN(5000)
			shift := r.IntN(1_000_000)
			a, err := cfg.Apply(append(append([]float64{}, q...), k...), 2, Positions{List: []int{m, n}})
			ensure.NoError(t, err)
			b, err := cfg.Apply(append(append([]float64{}, q...), k...), 2, Positions{List: []int{m + shift, n + shift}})
			ensure.NoError(t, err)
			d := cfg.Dim
			// Both dot products are within ~(D+4) ulps of |q||k| of the
			// exact one; 1e-14·|q||k| allows D = 64 with room.
			expect.InDelta(t, dot(a[:d], a[d:]), dot(b[:d], b[d:]), 1e-14*norm(q)*norm(k),
				"%+v m=%d n=%d shift=%d", cfg, m, n, shift)
		}
	}
}

func TestPairingsArePermutation(t *testing.T) {
	// PairAdjacent rotates (2i, 2i+1), PairHalves (i, i + r/2): moving dim
	// 2i to i and 2i+1 to i + r/2 turns one into the other. The arithmetic
	// on each pair is the same, so the results match bit for bit; and on
	// the same unpermuted vector they differ.
	r := rand.New(rand.NewPCG(5, 6))
	for _, cfg := range []Rotary{{Dim: 16}, {Dim: 21, Rotated: 10, Base: 1e6}} {
		rot := cfg.Rotated
		if rot == 0 {
			rot = cfg.Dim
		}
		perm := func(x []float64) []float64 { // adjacent order → halves order
			y := append([]float64{}, x...)
			for row := 0; row < len(x)/cfg.Dim; row++ {
				o := row * cfg.Dim
				for i := range rot / 2 {
					y[o+i], y[o+rot/2+i] = x[o+2*i], x[o+2*i+1]
				}
			}
			return y
		}
		x := randVec(r, 4*cfg.Dim)
		pos := Positions{Offset: 999_998}
		adj, halves := cfg, cfg
		halves.Pairing = PairHalves
		ya, err := adj.Apply(x, 4, pos)
		ensure.NoError(t, err)
		yh, err := halves.Apply(perm(x), 4, pos)
		ensure.NoError(t, err)
		expect.Equal(t, perm(ya), yh, "halves(P x) = P adjacent(x)")
		yx, err := halves.Apply(x, 4, pos)
		ensure.NoError(t, err)
		expect.NotEqual(t, ya, yx, "the two pairings are different conventions")
	}
}

func TestFactorOneIsIdentity(t *testing.T) {
	// Interpolation by 1 is the identity (Chen et al. 2023 Eq. 4 with
	// L′ = L); so are NTK and YaRN at s = 1 and dynamic scaling while the
	// sequence is no longer than the trained length: bit for bit.
	plain, err := Rotary{Dim: 32}.Frequencies()
	ensure.NoError(t, err)
	for _, sc := range []Scaling{
		{Method: Interpolation, Factor: 1},
		{Method: NTKAware, Factor: 1},
		{Method: YaRN, Factor: 1, TrainedLength: 2048},
		{Method: YaRN, Factor: 1, TrainedLength: 2048, Ramp: RampDims},
		{Method: NTKAware, TrainedLength: 2048, CurrentLength: 2048},
		{Method: Interpolation, TrainedLength: 2048, CurrentLength: 7},
		{Method: PerFrequency, Factors: []float64{1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1}},
	} {
		got, err := Rotary{Dim: 32, Scaling: sc}.Frequencies()
		ensure.NoError(t, err)
		expect.Equal(t, plain, got, "%+v", sc)
	}
}

func TestScalingShapes(t *testing.T) {
	plain, err := Rotary{Dim: 64}.Frequencies()
	ensure.NoError(t, err)
	h := len(plain)
	for _, s := range []float64{2, 4, 8, 32} {
		// Interpolation divides every frequency by s (exact for powers of 2).
		pi, err := Rotary{Dim: 64, Scaling: Scaling{Method: Interpolation, Factor: s}}.Frequencies()
		ensure.NoError(t, err)
		for i := range pi {
			expect.Equal(t, plain[i]/s, pi[i])
		}
		// NTK-aware (Peng et al. 2023 Eq. 16): θ_0 = 1 unchanged, and the
		// lowest frequency b′^{−(r−2)/r} = b^{−(r−2)/r}/s divided by s.
		ntk, err := Rotary{Dim: 64, Scaling: Scaling{Method: NTKAware, Factor: s}}.Frequencies()
		ensure.NoError(t, err)
		expect.Equal(t, 1.0, ntk[0])
		expect.Equal(t, plain[h-1]/s, ntk[h-1])
		// YaRN, both ramps: high frequencies (ρ > β) are kept, low ones
		// (ρ < α) interpolated, and every frequency lies between.
		for _, ramp := range []Ramp{RampRatio, RampDims} {
			y, err := Rotary{Dim: 64, Scaling: Scaling{Method: YaRN, Factor: s, TrainedLength: 4096, Ramp: ramp}}.Frequencies()
			ensure.NoError(t, err)
			expect.Equal(t, plain[0], y[0], "θ_0: ρ = 4096/2π > β")
			expect.Equal(t, plain[h-1]/s, y[h-1], "θ_last: ρ < α")
			for i := range y {
				expect.True(t, plain[i]/s <= y[i] && y[i] <= plain[i], "%v: θ_%d = %v outside [θ/s, θ]", ramp, i, y[i])
			}
		}
	}
	// The two ramps are different numbers in the ramp region.
	a, err := Rotary{Dim: 64, Scaling: Scaling{Method: YaRN, Factor: 8, TrainedLength: 4096}}.Frequencies()
	ensure.NoError(t, err)
	b, err := Rotary{Dim: 64, Scaling: Scaling{Method: YaRN, Factor: 8, TrainedLength: 4096, Ramp: RampDims}}.Frequencies()
	ensure.NoError(t, err)
	expect.NotEqual(t, a, b)
}

func TestInverseUndoesRotation(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	for _, cfg := range configs {
		x := randVec(r, 5*cfg.Dim)
		pos := Positions{Offset: r.IntN(2_000_000)}
		y, err := cfg.Apply(x, 5, pos)
		ensure.NoError(t, err)
		back, err := cfg.ApplyInverse(y, 5, pos)
		ensure.NoError(t, err)
		// Two rotations of ~3 ulps each: 2e-15 normwise is ~10 ulps.
		for i := range x {
			expect.InDelta(t, x[i], back[i], 2e-15, "%+v [%d]", cfg, i)
		}
	}
}

func TestPositionForms(t *testing.T) {
	// Offset, a shared List and a per-row List naming the same positions
	// give the same result bit for bit.
	r := rand.New(rand.NewPCG(9, 10))
	cfg := Rotary{Dim: 8, Pairing: PairHalves}
	const B, L = 3, 4
	x := randVec(r, B*L*cfg.Dim)
	a, err := cfg.Apply(x, L, Positions{Offset: 10})
	ensure.NoError(t, err)
	b, err := cfg.Apply(x, L, Positions{List: []int{10, 11, 12, 13}})
	ensure.NoError(t, err)
	per := make([]int, 0, B*L)
	for range B {
		per = append(per, 10, 11, 12, 13)
	}
	c, err := cfg.Apply(x, L, Positions{List: per})
	ensure.NoError(t, err)
	expect.Equal(t, a, b)
	expect.Equal(t, a, c)
	// Position 0 is the identity on every pair.
	z, err := cfg.Apply(x, L, Positions{})
	ensure.NoError(t, err)
	expect.Equal(t, x[:cfg.Dim], z[:cfg.Dim])
}

func TestMagnitude(t *testing.T) {
	// Magnitude scales the rotated dims only; the inverse with Magnitude M
	// is the transpose, so Inverse(Apply(x)) = M²·x on rotated dims.
	x := []float64{1, 2, 3, 4, 5, 6}
	cfg := Rotary{Dim: 6, Rotated: 4, Magnitude: 2}
	y, err := cfg.Apply(x, 1, Positions{})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{2, 4, 6, 8, 5, 6}, y, "position 0: cos 1, sin 0")
	back, err := cfg.ApplyInverse(y, 1, Positions{})
	ensure.NoError(t, err)
	expect.Equal(t, []float64{4, 8, 12, 16, 5, 6}, back)
}

func TestApply32(t *testing.T) {
	// The float32 instantiation: each output within a few float32 ulps of
	// the reference (tables rounded once, two products and a sum).
	r := rand.New(rand.NewPCG(11, 12))
	for _, cfg := range configs {
		x := randVec(r, 4*cfg.Dim)
		x32 := make([]float32, len(x))
		for i, v := range x {
			x32[i] = float32(v)
			x[i] = float64(x32[i])
		}
		pos := Positions{Offset: 123456}
		want, err := cfg.Apply(x, 4, pos)
		ensure.NoError(t, err)
		got, err := cfg.Apply32(x32, 4, pos)
		ensure.NoError(t, err)
		inv, err := cfg.ApplyInverse32(got, 4, pos)
		ensure.NoError(t, err)
		for i := range want {
			expect.InDelta(t, want[i], float64(got[i]), 4*0x1p-24, "%+v [%d]", cfg, i)
			expect.InDelta(t, x[i], float64(inv[i]), 8*0x1p-24, "%+v [%d]", cfg, i)
		}
	}
}

func TestSinusoidalAdd(t *testing.T) {
	s := Sinusoidal{Dim: 6, Base: 100, Layout: Concatenated}
	x := randVec(rand.New(rand.NewPCG(13, 14)), 2*3*6)
	pe, err := s.Table(3, 5)
	ensure.NoError(t, err)
	y, err := s.Add(x, 3, 5)
	ensure.NoError(t, err)
	for i := range x {
		expect.Equal(t, x[i]+pe[i%len(pe)], y[i])
	}
	// Interleaved and Concatenated hold the same numbers in another order.
	s.Layout = Interleaved
	il, err := s.Table(3, 5)
	ensure.NoError(t, err)
	for row := range 3 {
		for i := range 3 {
			expect.Equal(t, pe[row*6+i], il[row*6+2*i])
			expect.Equal(t, pe[row*6+3+i], il[row*6+2*i+1])
		}
	}
}

// biasForms returns the ALiBi bias of slopes on g in each form.
func biasForms(t *testing.T, slopes []float64, g mask.Geometry) (causal, symmetric, pastOnly []float64) {
	t.Helper()
	out := make([][]float64, 3)
	for i, f := range []mask.ALiBiForm{mask.ALiBiCausal, mask.ALiBiSymmetric, mask.ALiBiPastOnly} {
		var err error
		out[i], err = ALiBiBias(slopes, g, f)
		ensure.NoError(t, err, "%v, %v", g, f)
	}
	return out[0], out[1], out[2]
}

func TestALiBiForms(t *testing.T) {
	slopes, err := ALiBiSlopes(5)
	ensure.NoError(t, err)
	for _, g := range []mask.Geometry{
		{Batch: 2, Lq: 3, Lk: 7},
		{Batch: 1, Lq: 3, Lk: 7, Align: mask.AlignStart, Offset: 2},
		{Batch: 1, Lq: 1, Lk: 9},
	} {
		c, s, po := biasForms(t, slopes, g)
		vis, err := mask.Causal().Visible(mask.Geometry{Batch: 1, Lq: g.Lq, Lk: g.Lk, Align: g.Align, Offset: g.Offset})
		ensure.NoError(t, err)
		for h := range slopes {
			for k := range g.Lq * g.Lk {
				i, j := k/g.Lk, k%g.Lk
				n := h*g.Lq*g.Lk + k
				d := float64(g.Pos(i) - j)
				if vis[k] {
					// keys a causal mask shows: every form agrees, −m·(p − j) ≤ 0
					expect.Equal(t, -slopes[h]*d, c[n])
					expect.Equal(t, c[n], s[n])
					expect.Equal(t, c[n], po[n])
				} else {
					// keys after the query: the forms differ
					expect.Equal(t, -slopes[h]*d, c[n], "causal: the same formula")
					expect.Greater(t, c[n], 0.0)
					expect.Equal(t, slopes[h]*d, s[n], "symmetric: −m·|p − j|")
					expect.Less(t, s[n], 0.0)
					expect.Equal(t, 0.0, po[n], "past-only: 0")
					expect.False(t, math.Signbit(po[n]))
				}
			}
		}
	}
}

// --- Bad input: a named error, never a panic. ---

func TestErrors(t *testing.T) {
	nan := math.NaN()
	beyond := MaxPosition
	beyond++ // MaxPosition + 1 (wraps to a large negative where int is 32 bits: still refused)
	x8 := make([]float64, 8)
	ok := Positions{}
	apply := func(r Rotary) error { _, err := r.Apply(x8, 1, ok); return err }
	cases := []struct {
		name string
		err  error
		want error
		msg  string // the whole message
	}{
		{"odd rotary dims", apply(Rotary{Dim: 7}), ErrDim, "posenc: invalid dimension: Rotary.Apply: rotated dims r = 7 (Rotary.Dim = 7, Rotary.Rotated = 0); want an even number: rotary rotates pairs"},
		{"odd rotated", apply(Rotary{Dim: 8, Rotated: 3}), ErrDim, "posenc: invalid dimension: Rotary.Apply: rotated dims r = 3 (Rotary.Dim = 8, Rotary.Rotated = 3); want an even number: rotary rotates pairs"},
		{"r > D", apply(Rotary{Dim: 8, Rotated: 10}), ErrDim, "posenc: invalid dimension: Rotary.Apply: Rotary.Rotated = 10; want 2 ≤ Rotated ≤ Dim = 8 (0 means Dim)"},
		{"negative r", apply(Rotary{Dim: 8, Rotated: -2}), ErrDim, "posenc: invalid dimension: Rotary.Apply: Rotary.Rotated = -2; want 2 ≤ Rotated ≤ Dim = 8 (0 means Dim)"},
		{"zero dim", apply(Rotary{}), ErrDim, "posenc: invalid dimension: Rotary.Apply: Rotary.Dim = 0; want 0 < Dim ≤ MaxDim = 1048576"},
		{"base 1", apply(Rotary{Dim: 8, Base: 1}), ErrBase, "posenc: invalid base: Rotary.Apply: Rotary.Base = 1; want a finite number > 1"},
		{"base NaN", apply(Rotary{Dim: 8, Base: nan}), ErrBase, "posenc: invalid base: Rotary.Apply: Rotary.Base = NaN; want a finite number > 1"},
		{"base +Inf", apply(Rotary{Dim: 8, Base: math.Inf(1)}), ErrBase, "posenc: invalid base: Rotary.Apply: Rotary.Base = +Inf; want a finite number > 1"},
		{"pairing", apply(Rotary{Dim: 8, Pairing: 2}), ErrOption, "posenc: invalid option: Rotary.Apply: Rotary.Pairing = 2; want one of adjacent, halves"},
		{"magnitude", apply(Rotary{Dim: 8, Magnitude: -1}), ErrFactor, "posenc: invalid scaling factor: Rotary.Apply: Rotary.Magnitude = -1; want a finite number > 0"},
		{"factor 0", apply(Rotary{Dim: 8, Scaling: Scaling{Method: Interpolation}}), ErrFactor, "posenc: invalid scaling factor: Rotary.Apply: Rotary.Scaling.Factor = 0; want a finite number > 0"},
		{"factor < 0", apply(Rotary{Dim: 8, Scaling: Scaling{Method: NTKAware, Factor: -2}}), ErrFactor, "posenc: invalid scaling factor: Rotary.Apply: Rotary.Scaling.Factor = -2; want a finite number > 0"},
		{"factor NaN", apply(Rotary{Dim: 8, Scaling: Scaling{Method: YaRN, Factor: nan, TrainedLength: 10}}), ErrFactor, "posenc: invalid scaling factor: Rotary.Apply: Rotary.Scaling.Factor = NaN; want a finite number > 0"},
		{"factor Inf", apply(Rotary{Dim: 8, Scaling: Scaling{Method: Interpolation, Factor: math.Inf(1)}}), ErrFactor, "posenc: invalid scaling factor: Rotary.Apply: Rotary.Scaling.Factor = +Inf; want a finite number > 0"},
		{"alpha ≥ beta", apply(Rotary{Dim: 8, Scaling: Scaling{Method: YaRN, Factor: 2, TrainedLength: 10, Alpha: 4, Beta: 4}}), ErrFactor, "posenc: invalid scaling factor: Rotary.Apply: Rotary.Scaling.Alpha = 4, Rotary.Scaling.Beta = 4; want finite 0 ≤ Alpha < Beta (both 0 mean YaRN's 1 and 32)"},
		{"alpha < 0", apply(Rotary{Dim: 8, Scaling: Scaling{Method: YaRN, Factor: 2, TrainedLength: 10, Alpha: -1, Beta: 4}}), ErrFactor, "posenc: invalid scaling factor: Rotary.Apply: Rotary.Scaling.Alpha = -1, Rotary.Scaling.Beta = 4; want finite 0 ≤ Alpha < Beta (both 0 mean YaRN's 1 and 32)"},
		{"beta NaN", apply(Rotary{Dim: 8, Scaling: Scaling{Method: YaRN, Factor: 2, TrainedLength: 10, Alpha: 1, Beta: nan}}), ErrFactor, "posenc: invalid scaling factor: Rotary.Apply: Rotary.Scaling.Alpha = 1, Rotary.Scaling.Beta = NaN; want finite 0 ≤ Alpha < Beta (both 0 mean YaRN's 1 and 32)"},
		{"yarn without length", apply(Rotary{Dim: 8, Scaling: Scaling{Method: YaRN, Factor: 2}}), ErrLength, "posenc: invalid context length: Rotary.Apply: Rotary.Scaling.TrainedLength = 0; want > 0 for YaRN"},
		{"ramp", apply(Rotary{Dim: 8, Scaling: Scaling{Method: YaRN, Factor: 2, TrainedLength: 10, Ramp: 5}}), ErrOption, "posenc: invalid option: Rotary.Apply: Rotary.Scaling.Ramp = 5; want one of ratio, dims"},
		{"method", apply(Rotary{Dim: 8, Scaling: Scaling{Method: 9}}), ErrOption, "posenc: invalid option: Rotary.Apply: Rotary.Scaling.Method = 9; want one of none, interpolation, ntk-aware, yarn, per-frequency"},
		{"dynamic without method", apply(Rotary{Dim: 8, Scaling: Scaling{CurrentLength: 9}}), ErrOption, "posenc: invalid option: Rotary.Apply: Rotary.Scaling.CurrentLength = 9 with Method none; want 0: dynamic scaling needs a method"},
		{"dynamic without trained", apply(Rotary{Dim: 8, Scaling: Scaling{Method: NTKAware, CurrentLength: 9}}), ErrLength, "posenc: invalid context length: Rotary.Apply: Rotary.Scaling.TrainedLength = 0; want > 0 for dynamic scaling"},
		{"negative current", apply(Rotary{Dim: 8, Scaling: Scaling{Method: NTKAware, CurrentLength: -9, TrainedLength: 4}}), ErrLength, "posenc: invalid context length: Rotary.Apply: Rotary.Scaling.CurrentLength = -9; want > 0 for dynamic scaling, or 0 for none"},
		{"dynamic per-frequency", apply(Rotary{Dim: 8, Scaling: Scaling{Method: PerFrequency, CurrentLength: 9, Factors: []float64{1, 1, 1, 1}}}), ErrOption, "posenc: invalid option: Rotary.Apply: Rotary.Scaling.CurrentLength = 9 with Method per-frequency; want 0: dynamic scaling does not apply to caller-given factors"},
		{"per-frequency count", apply(Rotary{Dim: 8, Scaling: Scaling{Method: PerFrequency, Factors: []float64{1, 2}}}), ErrFactor, "posenc: invalid scaling factor: Rotary.Apply: Rotary.Scaling.Factors has 2 elements; want r/2 = 4, one per pair of the 8 rotated dims"},
		{"per-frequency zero", apply(Rotary{Dim: 8, Scaling: Scaling{Method: PerFrequency, Factors: []float64{1, 0, 1, 1}}}), ErrFactor, "posenc: invalid scaling factor: Rotary.Apply: Rotary.Scaling.Factors[1] = 0; want a finite number > 0"},
		{"ntk r = 2", apply(Rotary{Dim: 8, Rotated: 2, Scaling: Scaling{Method: NTKAware, Factor: 2}}), ErrDim, "posenc: invalid dimension: Rotary.Apply: rotated dims r = 2 with Method ntk-aware; want r ≥ 4 for b′ = b·s^{r/(r−2)}"},
		{"data length", func() error { _, err := Rotary{Dim: 8}.Apply(make([]float64, 9), 1, ok); return err }(), ErrShape, "posenc: shape mismatch: Rotary.Apply: x has 9 elements; want a multiple of Rotary.Dim = 8"},
		{"rows not multiple of L", func() error { _, err := Rotary{Dim: 4}.Apply(x8, 3, ok); return err }(), ErrShape, "posenc: shape mismatch: Rotary.Apply: x holds 2 rows of Dim values; want a multiple of L = 3"},
		{"L = 0", func() error { _, err := Rotary{Dim: 4}.Apply(x8, 0, ok); return err }(), ErrShape, "posenc: shape mismatch: Rotary.Apply: sequence length L = 0; want > 0"},
		{"L = 0, empty x", func() error { _, err := Rotary{Dim: 4}.Apply(nil, 0, ok); return err }(), ErrShape, "posenc: shape mismatch: Rotary.Apply: sequence length L = 0; want > 0"},
		{"list length", func() error { _, err := Rotary{Dim: 4}.Apply(x8, 1, Positions{List: []int{1, 2, 3}}); return err }(), ErrShape, "posenc: shape mismatch: Rotary.Apply: pos.List has 3 elements; want L = 1, or one per row, 2"},
		{"offset and list", func() error {
			_, err := Rotary{Dim: 4}.Apply(x8, 2, Positions{Offset: 1, List: []int{1, 2}})
			return err
		}(), ErrShape, "posenc: shape mismatch: Rotary.Apply: pos.Offset = 1 with pos.List given; want 0: give one or the other"},
		{"position too large", func() error { _, err := Rotary{Dim: 4}.Apply(x8, 2, Positions{Offset: MaxPosition}); return err }(), ErrPosition, "posenc: invalid position: Rotary.Apply: pos.Offset + 1 (token 1, pos.Offset = 2147483647) = 2147483648; want −MaxPosition ≤ position ≤ MaxPosition = 2147483647"},
		{"list position too small", func() error {
			_, err := Rotary{Dim: 4}.Apply(x8, 2, Positions{List: []int{0, -beyond}})
			return err
		}(), ErrPosition, "posenc: invalid position: Rotary.Apply: pos.List[1] = -2147483648; want −MaxPosition ≤ position ≤ MaxPosition = 2147483647"},
		{"table position", func() error { _, _, err := Rotary{Dim: 4}.Tables([]int{beyond}); return err }(), ErrPosition, "posenc: invalid position: Rotary.Tables: pos[0] = 2147483648; want −MaxPosition ≤ position ≤ MaxPosition = 2147483647"},
		{"apply32 dims", func() error { _, err := Rotary{Dim: 3}.Apply32(make([]float32, 3), 1, ok); return err }(), ErrDim, "posenc: invalid dimension: Rotary.Apply32: rotated dims r = 3 (Rotary.Dim = 3, Rotary.Rotated = 0); want an even number: rotary rotates pairs"},
		{"sinusoidal odd dim", func() error { _, err := Sinusoidal{Dim: 5}.Table(1, 0); return err }(), ErrDim, "posenc: invalid dimension: Sinusoidal.Table: Sinusoidal.Dim = 5; want an even number in 2 … MaxDim = 1048576"},
		{"sinusoidal negative position", func() error { _, err := Sinusoidal{Dim: 4}.Table(1, -1); return err }(), ErrPosition, "posenc: invalid position: Sinusoidal.Table: offset = -1; want 0 ≤ position ≤ MaxPosition = 2147483647"},
		{"sinusoidal beyond MaxPosition", func() error { _, err := Sinusoidal{Dim: 4}.Table(2, MaxPosition); return err }(), ErrPosition, "posenc: invalid position: Sinusoidal.Table: offset + n − 1 = 2147483648; want 0 ≤ position ≤ MaxPosition = 2147483647"},
		{"sinusoidal negative n", func() error { _, err := Sinusoidal{Dim: 4}.Table(-1, 0); return err }(), ErrShape, "posenc: shape mismatch: Sinusoidal.Table: n = -1; want 0 ≤ n and n·Dim ≤ MaxElements = 268435456 (Dim = 4)"},
		{"sinusoidal base", func() error { _, err := Sinusoidal{Dim: 4, Base: 0.5}.Table(1, 0); return err }(), ErrBase, "posenc: invalid base: Sinusoidal.Table: Sinusoidal.Base = 0.5; want a finite number > 1"},
		{"sinusoidal layout", func() error { _, err := Sinusoidal{Dim: 4, Layout: 7}.Table(1, 0); return err }(), ErrOption, "posenc: invalid option: Sinusoidal.Table: Sinusoidal.Layout = 7; want one of interleaved, concatenated"},
		{"add shape", func() error { _, err := Sinusoidal{Dim: 4}.Add(make([]float64, 6), 1, 0); return err }(), ErrShape, "posenc: shape mismatch: Sinusoidal.Add: x has 6 elements; want a multiple of L·Dim = 1·4 = 4"},
		{"add L", func() error { _, err := Sinusoidal{Dim: 4}.Add(make([]float64, 8), 0, 0); return err }(), ErrShape, "posenc: shape mismatch: Sinusoidal.Add: sequence length L = 0; want > 0"},
		{"heads 0", func() error { _, err := ALiBiSlopes(0); return err }(), ErrHeads, "posenc: invalid heads: ALiBiSlopes: heads = 0; want 1 ≤ heads ≤ MaxElements = 268435456"},
		{"heads < 0", func() error { _, err := ALiBiSlopes(-3); return err }(), ErrHeads, "posenc: invalid heads: ALiBiSlopes: heads = -3; want 1 ≤ heads ≤ MaxElements = 268435456"},
		{"no slopes", func() error { _, err := ALiBiBias(nil, mask.Geometry{Lq: 1, Lk: 1}, mask.ALiBiCausal); return err }(), ErrHeads, "posenc: invalid heads: ALiBiBias: slopes has 0 elements; want one per head"},
		{"NaN slope", func() error {
			_, err := ALiBiBias([]float64{nan}, mask.Geometry{Lq: 1, Lk: 1}, mask.ALiBiCausal)
			return err
		}(), ErrHeads, "posenc: invalid heads: ALiBiBias: slopes[0] = NaN; want a finite number"},
		{"bias sizes", func() error {
			_, err := ALiBiBias([]float64{1}, mask.Geometry{Lq: -1, Lk: 1}, mask.ALiBiCausal)
			return err
		}(), ErrShape, "posenc: shape mismatch: ALiBiBias: g.Lq = -1; want ≥ 0"},
		{"bias too large", func() error {
			_, err := ALiBiBias([]float64{1}, mask.Geometry{Lq: 1 << 30, Lk: 1 << 30}, mask.ALiBiCausal)
			return err
		}(), ErrShape, "posenc: shape mismatch: ALiBiBias: H·Lq·Lk = 1·1073741824·1073741824; want at most MaxElements = 268435456 elements"},
		{"bias align", func() error {
			_, err := ALiBiBias([]float64{1}, mask.Geometry{Lq: 1, Lk: 1, Align: 3}, mask.ALiBiCausal)
			return err
		}(), ErrOption, "posenc: invalid option: ALiBiBias: g.Align = 3; want one of end, start"},
		{"bias align wraps mask's", func() error {
			_, err := ALiBiBias([]float64{1}, mask.Geometry{Lq: 1, Lk: 1, Align: 3}, mask.ALiBiCausal)
			return err
		}(), mask.ErrAlign, "posenc: invalid option: ALiBiBias: g.Align = 3; want one of end, start"},
		{"bias form", func() error { _, err := ALiBiBias([]float64{1}, mask.Geometry{Lq: 1, Lk: 1}, 3); return err }(), ErrOption, "posenc: invalid option: ALiBiBias: form = 3; want one of causal, symmetric, past-only"},
		{"bias form wraps mask's", func() error { _, err := ALiBiBias([]float64{1}, mask.Geometry{Lq: 1, Lk: 1}, -1); return err }(), mask.ErrALiBi, "posenc: invalid option: ALiBiBias: form = -1; want one of causal, symmetric, past-only"},
		{"causal query outside keys", func() error {
			_, err := ALiBiBias([]float64{1}, mask.Geometry{Lq: 2, Lk: 4, Offset: 1}, mask.ALiBiCausal)
			return err
		}(), ErrPosition, "posenc: invalid position: ALiBiBias: query positions p(0) … p(Lq−1) = 3 … 4 (g = Batch=0 Lq=2 Lk=4 Align=end Offset=1); want them within 0 … Lk−1 = 3 for the causal form"},
		{"past-only query outside keys", func() error {
			_, err := ALiBiBias([]float64{1}, mask.Geometry{Lq: 2, Lk: 4, Align: mask.AlignStart, Offset: -1}, mask.ALiBiPastOnly)
			return err
		}(), ErrPosition, "posenc: invalid position: ALiBiBias: query positions p(0) … p(Lq−1) = -1 … 0 (g = Batch=0 Lq=2 Lk=4 Align=start Offset=-1); want them within 0 … Lk−1 = 3 for the past-only form"},
		{"symmetric position too large", func() error {
			_, err := ALiBiBias([]float64{1}, mask.Geometry{Lq: 1, Lk: 1, Offset: beyond}, mask.ALiBiSymmetric)
			return err
		}(), ErrPosition, "posenc: invalid position: ALiBiBias: g.Offset = 2147483648; want −MaxPosition ≤ position ≤ MaxPosition = 2147483647"},
		{"ntk base r", func() error { _, err := NTKBase(10000, 2, 2); return err }(), ErrDim, "posenc: invalid dimension: NTKBase: rotated = 2; want an even number ≥ 4"},
		{"ntk base odd r", func() error { _, err := NTKBase(10000, 2, 7); return err }(), ErrDim, "posenc: invalid dimension: NTKBase: rotated = 7; want an even number ≥ 4"},
		{"ntk base s", func() error { _, err := NTKBase(10000, 0, 8); return err }(), ErrFactor, "posenc: invalid scaling factor: NTKBase: s = 0; want a finite number > 0"},
		{"ntk base b", func() error { _, err := NTKBase(nan, 2, 8); return err }(), ErrBase, "posenc: invalid base: NTKBase: base = NaN; want a finite number > 1"},
		{"ntk base overflow", func() error { _, err := NTKBase(1e300, 1e300, 8); return err }(), ErrBase, "posenc: invalid base: NTKBase: b′ = 1e+300·1e+300^{8/6} = +Inf; want a finite number > 1"},
		{"magnitude s", func() error { _, err := YaRNMagnitude(nan); return err }(), ErrFactor, "posenc: invalid scaling factor: YaRNMagnitude: s = NaN; want a finite number > 0"},
		{"magnitude tiny s", func() error { _, err := YaRNMagnitude(1e-5); return err }(), ErrFactor, "posenc: invalid scaling factor: YaRNMagnitude: s = 1e-05; want s > e^{−10}, where the multiplier 0.1·ln s + 1 (-0.1513 at this s) is > 0"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			ensure.ErrorIs(t, c.err, c.want)
			expect.EqualError(t, c.err, c.msg)
		})
	}
}

func TestEmpty(t *testing.T) {
	y, err := Rotary{Dim: 4}.Apply(nil, 3, Positions{})
	ensure.NoError(t, err)
	expect.Empty(t, y)
	c, s, err := Rotary{Dim: 4}.Tables(nil)
	ensure.NoError(t, err)
	expect.Empty(t, c)
	expect.Empty(t, s)
	tab, err := Sinusoidal{Dim: 4}.Table(0, 0)
	ensure.NoError(t, err)
	expect.Empty(t, tab)
	b, err := ALiBiBias([]float64{0.5}, mask.Geometry{Lq: 0, Lk: 5}, mask.ALiBiCausal)
	ensure.NoError(t, err)
	expect.Empty(t, b)
}

func TestNonFinitePropagates(t *testing.T) {
	// NaN or Inf in one pair stays in that pair; other pairs are untouched.
	x := []float64{math.NaN(), 1, 2, 3, math.Inf(1), 0, 5}
	y, err := Rotary{Dim: 7, Rotated: 6}.Apply(x, 1, Positions{Offset: 3})
	ensure.NoError(t, err)
	expect.True(t, math.IsNaN(y[0]) && math.IsNaN(y[1]))
	expect.False(t, math.IsNaN(y[2]) || math.IsNaN(y[3]))
	expect.Equal(t, 5.0, y[6])
}

func TestHugeSizesAreErrors(t *testing.T) {
	// Sizes whose product overflows int must give an error, not a panic.
	_, err := Sinusoidal{Dim: math.MaxInt - 1}.Add(make([]float64, 4), math.MaxInt, 0)
	expect.ErrorIs(t, err, ErrDim)
	_, err = Sinusoidal{Dim: 1 << 20}.Add(make([]float64, 4), 1<<30, 0)
	expect.ErrorIs(t, err, ErrShape)
	_, err = Rotary{Dim: math.MaxInt}.Apply(make([]float64, 4), 1, Positions{})
	expect.ErrorIs(t, err, ErrDim)
	_, err = Sinusoidal{Dim: 2}.Table(math.MaxInt, 0)
	expect.ErrorIs(t, err, ErrShape)
	_, err = ALiBiBias([]float64{1, 1, 1}, mask.Geometry{Lq: math.MaxInt / 2, Lk: 3}, mask.ALiBiSymmetric)
	expect.ErrorIs(t, err, ErrShape)
}

// TestMaxElements: every result this package sizes from its arguments
// alone is refused beyond MaxElements = 2^28 elements, with the sentinel
// and message of the one error style, before anything is allocated. Each
// case below would otherwise allocate from 4 GiB (the rotary tables) to
// 2^63 bytes (the slopes) and end the program.
func TestMaxElements(t *testing.T) {
	ensure.Equal(t, 1<<28, MaxElements)
	tests := []struct {
		name     string
		call     func() error
		sentinel error
		want     string
	}{
		{"slopes of MaxInt heads", func() error { _, err := ALiBiSlopes(math.MaxInt); return err }, ErrHeads,
			fmt.Sprintf("posenc: invalid heads: ALiBiSlopes: heads = %d; want 1 ≤ heads ≤ MaxElements = 268435456", math.MaxInt)},
		{"slopes one past the limit", func() error { _, err := ALiBiSlopes(MaxElements + 1); return err }, ErrHeads,
			"posenc: invalid heads: ALiBiSlopes: heads = 268435457; want 1 ≤ heads ≤ MaxElements = 268435456"},
		{"ALiBi bias 2^17 × 2^17", func() error {
			_, err := ALiBiBias([]float64{1}, mask.Geometry{Lq: 1 << 17, Lk: 1 << 17}, mask.ALiBiCausal)
			return err
		}, ErrShape, "posenc: shape mismatch: ALiBiBias: H·Lq·Lk = 1·131072·131072; want at most MaxElements = 268435456 elements"},
		{"ALiBi bias, heads push it over", func() error {
			// 2·2^14·2^14 = 2^29: each factor fits, the product does not.
			_, err := ALiBiBias([]float64{1, 1}, mask.Geometry{Lq: 1 << 14, Lk: 1 << 14}, mask.ALiBiSymmetric)
			return err
		}, ErrShape, "posenc: shape mismatch: ALiBiBias: H·Lq·Lk = 2·16384·16384; want at most MaxElements = 268435456 elements"},
		{"sinusoidal table of 2^31 positions", func() error { _, err := Sinusoidal{Dim: 2}.Table(1<<31, 0); return err }, ErrShape,
			"posenc: shape mismatch: Sinusoidal.Table: n = 2147483648; want 0 ≤ n and n·Dim ≤ MaxElements = 268435456 (Dim = 2)"},
		{"sinusoidal add of a long table", func() error { _, err := Sinusoidal{Dim: 1 << 10}.Add(nil, 1<<18+1, 0); return err }, ErrShape,
			"posenc: shape mismatch: Sinusoidal.Add: L = 262145; want 0 ≤ L and L·Dim ≤ MaxElements = 268435456 (Dim = 1024)"},
		{"rotary tables", func() error { _, _, err := Rotary{Dim: 1 << 16}.Tables(make([]int, 1<<13+1)); return err }, ErrShape,
			"posenc: shape mismatch: Rotary.Tables: pos has 8193 elements; want len(pos)·r/2 ≤ MaxElements = 268435456 (r = 65536 rotated dims)"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			err := tc.call()
			ensure.ErrorIs(t, err, tc.sentinel)
			expect.EqualError(t, err, tc.want)
		})
	}
}

func TestOptionNames(t *testing.T) {
	// Every named option prints its word, the one spelling of
	// configurations, golden files and messages (testdata/gen/vocabulary.json);
	// an unknown value prints its type and number, so error messages and
	// test logs stay readable.
	got := []string{
		PairAdjacent.String(), PairHalves.String(), Pairing(7).String(),
		Interleaved.String(), Concatenated.String(), Layout(7).String(),
		NoScaling.String(), Interpolation.String(), NTKAware.String(), YaRN.String(), PerFrequency.String(), Method(7).String(),
		RampRatio.String(), RampDims.String(), Ramp(7).String(),
		mask.ALiBiCausal.String(), mask.ALiBiSymmetric.String(), mask.ALiBiPastOnly.String(), mask.ALiBiForm(7).String(),
	}
	want := []string{
		"adjacent", "halves", "Pairing(7)",
		"interleaved", "concatenated", "Layout(7)",
		"none", "interpolation", "ntk-aware", "yarn", "per-frequency", "Method(7)",
		"ratio", "dims", "Ramp(7)",
		"causal", "symmetric", "past-only", "ALiBiForm(7)",
	}
	expect.Equal(t, want, got)
}

func TestOptionWords(t *testing.T) {
	// JSON reads and writes each option as its word; any other word is an
	// error wrapping ErrOption that lists the words. The zero value of each
	// type is its default (see Rotary, Sinusoidal, Scaling).
	type cfg struct {
		Layout  Layout  `json:"layout"`
		Pairing Pairing `json:"pairing"`
		Method  Method  `json:"method"`
		Ramp    Ramp    `json:"ramp"`
	}
	for _, c := range []cfg{
		{},
		{Concatenated, PairHalves, NTKAware, RampDims},
		{Interleaved, PairAdjacent, PerFrequency, RampRatio},
		{Method: Interpolation}, {Method: YaRN},
	} {
		b, err := json.Marshal(c)
		ensure.NoError(t, err)
		want := fmt.Sprintf(`{"layout":%q,"pairing":%q,"method":%q,"ramp":%q}`, c.Layout, c.Pairing, c.Method, c.Ramp)
		expect.Equal(t, want, string(b))
		var back cfg
		ensure.NoError(t, json.Unmarshal(b, &back))
		expect.Equal(t, c, back)
	}
	expect.Equal(t, []Method{NoScaling, Interpolation, NTKAware, YaRN, PerFrequency}, NoScaling.Values())
	expect.Equal(t, []Layout{Interleaved, Concatenated}, Interleaved.Values())
	expect.Equal(t, []Pairing{PairAdjacent, PairHalves}, PairAdjacent.Values())
	expect.Equal(t, []Ramp{RampRatio, RampDims}, RampRatio.Values())
	for _, bad := range []struct{ json, msg string }{
		{`{"layout":"interleave"}`, `posenc: invalid option: sinusoidal layout = "interleave"; want one of interleaved, concatenated`},
		{`{"pairing":"PairHalves"}`, `posenc: invalid option: rotary pairing = "PairHalves"; want one of adjacent, halves`},
		{`{"method":"ntk"}`, `posenc: invalid option: scaling method = "ntk"; want one of none, interpolation, ntk-aware, yarn, per-frequency`},
		{`{"method":"per_frequency"}`, `posenc: invalid option: scaling method = "per_frequency"; want one of none, interpolation, ntk-aware, yarn, per-frequency`},
		{`{"ramp":"ratios"}`, `posenc: invalid option: YaRN ramp = "ratios"; want one of ratio, dims`},
	} {
		var c cfg
		err := json.Unmarshal([]byte(bad.json), &c)
		ensure.Error(t, err, bad.json)
		expect.ErrorIs(t, err, ErrOption, bad.json)
		expect.Contains(t, err.Error(), bad.msg)
		expect.Equal(t, cfg{}, c, "a refused word leaves the value alone")
	}
	// Marshalling a value that has no word is refused, not written as a number.
	_, err := json.Marshal(cfg{Method: 9})
	expect.ErrorIs(t, err, ErrOption)
}

func TestOptionErrors(t *testing.T) {
	// An option that is not one of its constants is named by the field or
	// argument that holds it, in the vocabulary's form
	// "<sentinel>: <function>: <where> = <value>; want one of <words>".
	x8 := make([]float64, 8)
	apply := func(r Rotary) error { _, err := r.Apply(x8, 1, Positions{}); return err }
	alibi := func(g mask.Geometry, f mask.ALiBiForm) error {
		_, err := ALiBiBias([]float64{1}, g, f)
		return err
	}
	_, tableErr := Sinusoidal{Dim: 4, Layout: 7}.Table(1, 0)
	for _, c := range []struct {
		err  error
		also error // a second sentinel the error wraps, or nil
		msg  string
	}{
		{apply(Rotary{Dim: 8, Pairing: 2}), nil, "posenc: invalid option: Rotary.Apply: Rotary.Pairing = 2; want one of adjacent, halves"},
		{apply(Rotary{Dim: 8, Scaling: Scaling{Method: 9}}), nil,
			"posenc: invalid option: Rotary.Apply: Rotary.Scaling.Method = 9; want one of none, interpolation, ntk-aware, yarn, per-frequency"},
		{apply(Rotary{Dim: 8, Scaling: Scaling{Method: YaRN, Factor: 2, TrainedLength: 10, Ramp: 5}}), nil,
			"posenc: invalid option: Rotary.Apply: Rotary.Scaling.Ramp = 5; want one of ratio, dims"},
		{tableErr, nil, "posenc: invalid option: Sinusoidal.Table: Sinusoidal.Layout = 7; want one of interleaved, concatenated"},
		{alibi(mask.Geometry{Lq: 1, Lk: 1, Align: 3}, mask.ALiBiCausal), mask.ErrAlign,
			"posenc: invalid option: ALiBiBias: g.Align = 3; want one of end, start"},
		{alibi(mask.Geometry{Lq: 1, Lk: 1}, 7), mask.ErrALiBi,
			"posenc: invalid option: ALiBiBias: form = 7; want one of causal, symmetric, past-only"},
	} {
		ensure.Error(t, c.err, c.msg)
		expect.ErrorIs(t, c.err, ErrOption)
		if c.also != nil {
			expect.ErrorIs(t, c.err, c.also)
		}
		expect.Equal(t, c.msg, c.err.Error())
	}
}

func TestFloat32Yardsticks(t *testing.T) {
	// Add32 and ALiBiBias32 are the float32 instantiations: each entry is
	// within one float32 rounding of the table or slope plus one of the
	// operation, 2 ulps of float32 relative to the entry's magnitude.
	s := Sinusoidal{Dim: 16}
	x := randVec(rand.New(rand.NewPCG(15, 16)), 2*3*16)
	x32 := make([]float32, len(x))
	for i, v := range x {
		x32[i] = float32(v)
		x[i] = float64(x32[i])
	}
	want, err := s.Add(x, 3, 999_000)
	ensure.NoError(t, err)
	got, err := s.Add32(x32, 3, 999_000)
	ensure.NoError(t, err)
	for i := range want {
		expect.InDelta(t, want[i], float64(got[i]), 2*0x1p-24*math.Max(2, math.Abs(want[i])))
	}
	_, err = s.Add32(x32[:5], 3, 0)
	expect.ErrorIs(t, err, ErrShape)

	slopes, err := ALiBiSlopes(12)
	ensure.NoError(t, err)
	sl32 := make([]float32, len(slopes))
	for i, v := range slopes {
		sl32[i] = float32(v)
	}
	g := mask.Geometry{Batch: 1, Lq: 4, Lk: 50}
	// every form, on a geometry with keys after the queries
	for _, gf := range []mask.Geometry{g, {Batch: 1, Lq: 4, Lk: 50, Align: mask.AlignStart, Offset: 20}} {
		for _, form := range mask.ALiBiCausal.Values() {
			b64, err := ALiBiBias(slopes, gf, form)
			ensure.NoError(t, err)
			b32, err := ALiBiBias32(sl32, gf, form)
			ensure.NoError(t, err)
			for i := range b64 {
				expect.InDelta(t, b64[i], float64(b32[i]), 2*0x1p-24*math.Abs(b64[i]), "%v %v [%d]", gf, form, i)
			}
		}
	}
	_, err = ALiBiBias32([]float32{float32(math.NaN())}, g, mask.ALiBiCausal)
	expect.ErrorIs(t, err, ErrHeads)
}
