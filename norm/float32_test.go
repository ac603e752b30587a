package norm

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/surface"
)

// u32 is the unit roundoff of float32 (IEEE 754-2019 binary32, a 24-bit
// significand): a rounded operation has relative error at most 2⁻²⁴.
const u32 = 0x1p-24

// near32 asserts that the float32 result got is within bound of the
// float64 result want, normwise.
func near32(t *testing.T, got []float32, want []float64, bound float64, what string) {
	t.Helper()
	expect.LessOrEqual(t, golden.NormwiseRelErr(num.Convert[float64](got), want), bound, what)
}

// rounded32 is x rounded to float32 and back, so that the float64 and the
// float32 functions see the same inputs.
func rounded32(x []float64) []float64 { return num.Convert[float64](num.Convert[float32](x)) }

// TestFloat32 checks the float32 instantiations, forward and backward,
// against the float64 reference: normwise 1e-6 (float32 has 2⁻²⁴ ≈ 6e-8
// per rounding and the rows here are at most 64 long), and on rows near
// 1e-30, whose float32 squares underflow, the same bound: the same body
// scales them.
func TestFloat32(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 10))
	const d, rows, bound = 64, 4, 1e-6
	for _, o := range allOptions(1e-5) {
		for _, scale := range []float64{1, 1e-30, 1e30} {
			x := uniform(r, d*rows, -1, 1)
			w := rounded32(uniform(r, d, 0.5, 1.5))
			b := rounded32(uniform(r, d, -0.5, 0.5))
			for i := range x {
				x[i] = float64(float32(x[i] * scale))
			}
			oo := o
			oo.Epsilon = o.Epsilon * scale * scale
			if o.Placement == EpsilonAddedToRoot {
				oo.Epsilon = o.Epsilon * scale
			}
			what := fmt.Sprintf("scale %g %v", scale, o.Placement)
			x32, w32, b32 := num.Convert[float32](x), num.Convert[float32](w), num.Convert[float32](b)
			y, err := RMSNorm(x, d, w, oo)
			ensure.NoError(t, err)
			y32, err := RMSNorm32(x32, d, w32, oo)
			ensure.NoError(t, err)
			near32(t, y32, y, bound, "RMSNorm32 "+what)
			y, err = LayerNorm(x, d, w, b, oo)
			ensure.NoError(t, err)
			y32, err = LayerNorm32(x32, d, w32, b32, oo)
			ensure.NoError(t, err)
			near32(t, y32, y, bound, "LayerNorm32 "+what)

			dy := rounded32(uniform(r, d*rows, -1, 1))
			dy32 := num.Convert[float32](dy)
			g, err := LayerNormBackward(x, d, w, dy, oo)
			ensure.NoError(t, err)
			g32, err := LayerNormBackward32(x32, d, w32, dy32, oo)
			ensure.NoError(t, err)
			near32(t, g32.X, g.X, bound, "LayerNormBackward32 dx "+what)
			near32(t, g32.Weight, g.Weight, bound, "LayerNormBackward32 dw "+what)
			near32(t, g32.Bias, g.Bias, bound, "LayerNormBackward32 db "+what)
			g, err = RMSNormBackward(x, d, w, dy, oo)
			ensure.NoError(t, err)
			g32, err = RMSNormBackward32(x32, d, w32, dy32, oo)
			ensure.NoError(t, err)
			near32(t, g32.X, g.X, bound, "RMSNormBackward32 dx "+what)
			near32(t, g32.Weight, g.Weight, bound, "RMSNormBackward32 dw "+what)
			expect.Nil(t, g32.Bias)
		}
	}
}

// rowRef holds the float64 quantities of one row s in which the float32
// error bounds are written: x̂ = (s − μ)/r (μ = 0 for RMSNorm), the
// denominator r, σ = the root mean square of s − μ, c = the factor of the
// x̂x̂ᵀ term of ∂x̂/∂s (1 with ε in the root, r/σ added to it), mean|s| and
// mean(|x̂|·|s|).
type rowRef struct {
	xhat                        []float64
	r, sigma, c, meanS, meanXhS float64
}

func refRow(s []float64, center bool, o Options) rowRef {
	n := float64(len(s))
	var mu, ss, ma float64
	if center {
		for _, v := range s {
			mu += v
		}
		mu /= n
	}
	for _, v := range s {
		ss += (v - mu) * (v - mu)
		ma += math.Abs(v)
	}
	f := rowRef{sigma: math.Sqrt(ss / n), meanS: ma / n, c: 1}
	f.r = math.Sqrt(ss/n + o.Epsilon)
	if o.Placement == EpsilonAddedToRoot {
		f.r = f.sigma + o.Epsilon
		f.c = f.r / f.sigma
	}
	f.xhat = make([]float64, len(s))
	for j, v := range s {
		f.xhat[j] = (v - mu) / f.r
		f.meanXhS += math.Abs(f.xhat[j]*v) / n
	}
	return f
}

// The float32 error of one row, to first order in u = 2⁻²⁴, step by step
// through normalizeRow and the forward and backward bodies (d elements;
// powers of two scale exactly; sums of n terms err by at most
// (n − 1)·u·Σ|terms|, Higham 2002, "Accuracy and Stability of Numerical
// Algorithms", §4.2):
//
//   - deviations: the compensated mean is exact to O(d²u²·mean|s|)
//     (Ogita, Rump & Oishi 2005, Sum2), and (s_j − μ_hi) − μ_lo rounds
//     twice: |Δdev_j| ≤ 2u|dev_j| + u·mean|s| (the last term covering the
//     O(u²) ones for d ≤ 64);
//   - the mean square: d rounded squares summed, one division, and the
//     deviations' error: relative (d + 5)u + 2u·mean|s|/σ; ε scaled and
//     added (or the root and ε), one root: the relative error of r is
//     ρ_r ≤ (d/2 + 4)u + u·mean|s|/σ;
//   - x̂_j = dev_j/r, one division: |Δx̂_j| ≤ E_j =
//     u·((d/2 + 7)|x̂_j| + |x̂_j|·mean|s|/σ + mean|s|/r).
//
// RMSNorm has no deviations to form, so these bounds hold for it a
// fortiori.
func xhatErr(f rowRef, j, d int) float64 {
	a := math.Abs(f.xhat[j])
	return u32 * ((float64(d)/2+7)*a + a*f.meanS/f.sigma + f.meanS/f.r)
}

func rootErr(f rowRef, d int) float64 { return u32 * (float64(d)/2 + 4 + f.meanS/f.sigma) }

// TestFused32Bound checks the fused float32 twins against their float64
// counterparts element by element, within the first-order bounds below
// (times 1.01 for the terms of order (d·u)² and the float64 reference's
// own rounding, 2⁻²⁹ of the bound), and checks that the bounds would catch
// a wrong scale: the unbiased variance (divided by d − 1), a factor
// √(d/(d − 1)) on x̂, is off by more than the bound somewhere.
//
// Forward, on sum rounded once to float32 (|Δs_j| ≤ u|s_j|) instead of the
// float64 sum: the Jacobian ∂x̂/∂s = (I − 11ᵀ/d − c·x̂x̂ᵀ/d)/r moves x̂_j by
// at most I_j = u(|s_j| + mean|s| + c|x̂_j|·mean(|x̂||s|))/r; then
// γ_j = 1 + w_j and γ_j·x̂_j round once each and adding b_j once:
//
//	|Δy_j| ≤ |γ_j|(E_j + I_j) + 2u|γ_j x̂_j| + u|y_j|
//
// Backward, on the same float32 sum, dy and dsum: with g = dy∘γ
// (|Δg_j| ≤ 2u|g_j|), m_g = mean g (LayerNorm only; |Δm_g| ≤
// (d + 2)u·mean|g|), m_gx = mean(g∘x̂) (|Δm_gx| ≤ mean(|g|E) +
// (d + 3)u·mean|g x̂|), c (with ε added to the root r/ρ: |Δc| ≤
// c(2ρ_r + u)) and c·m_gx (|Δ| ≤ c|Δm_gx| + |m_gx||Δc| + u|c m_gx|),
// v_j = (g_j − m_g) − (c m_gx)·x̂_j errs by
//
//	|Δv_j| ≤ 3u|g_j| + |Δm_g| + u|m_g| + |c m_gx|E_j + |x̂_j||Δ(c m_gx)| + u|c m_gx x̂_j| + u|v_j|
//
// and ∂L/∂x_j = v_j/r + dsum_j by |Δv_j|/r + (ρ_r + u)|v_j|/r + u|∂L/∂x_j|.
// The weight gradient Σ_rows dy_j x̂_j errs by Σ_rows (|dy_j|E_j +
// u|dy_j x̂_j|) + (rows − 1)u·Σ_rows |dy_j x̂_j|, the bias gradient
// Σ_rows dy_j by (rows − 1)u·Σ_rows |dy_j|. (RMSNorm with d = 1 takes
// another closed form and is left out, and so is d = 2: there LayerNorm's
// centred row is always parallel to x̂, the ill-conditioned direction of
// the package documentation, where ∂L/∂x is of the order of ε and any
// bound is larger than it.)
func TestFused32Bound(t *testing.T) {
	r := rand.New(rand.NewPCG(33, 34))
	const rows, slack = 4, 1.01
	for _, center := range []bool{true, false} {
		for _, o := range allOptions(1e-5) {
			for _, d := range []int{3, 7, 64} {
				name := fmt.Sprintf("center=%v/%v/%v/d=%d", center, o.Placement, o.Weight, d)
				x := rounded32(uniform(r, d*rows, -1, 1))
				res := rounded32(uniform(r, d*rows, -8, 8))
				w := rounded32(uniform(r, d, -0.5, 0.5))
				b := rounded32(uniform(r, d, -0.5, 0.5))
				dy := rounded32(uniform(r, d*rows, -1, 1))
				ds := rounded32(uniform(r, d*rows, -1, 1))
				var bias []float64
				if center {
					bias = b
				}
				// Forward.
				var y, sum, gx, gw, gb []float64
				var y32, gx32, gw32, gb32 []float32
				var err error
				var g Grads
				var g32 Grads32
				conv := num.Convert[float32, float64]
				if center {
					y, sum, err = AddLayerNorm(x, res, d, w, bias, o)
					ensure.NoError(t, err)
					y32, _, err = AddLayerNorm32(conv(x), conv(res), d, conv(w), conv(bias), o)
					ensure.NoError(t, err)
					g, err = AddLayerNormBackward(rounded32(sum), d, w, dy, ds, o)
					ensure.NoError(t, err)
					g32, err = AddLayerNormBackward32(conv(sum), d, conv(w), conv(dy), conv(ds), o)
				} else {
					y, sum, err = AddRMSNorm(x, res, d, w, o)
					ensure.NoError(t, err)
					y32, _, err = AddRMSNorm32(conv(x), conv(res), d, conv(w), o)
					ensure.NoError(t, err)
					g, err = AddRMSNormBackward(rounded32(sum), d, w, dy, ds, o)
					ensure.NoError(t, err)
					g32, err = AddRMSNormBackward32(conv(sum), d, conv(w), conv(dy), conv(ds), o)
				}
				ensure.NoError(t, err)
				gx, gw, gb, gx32, gw32, gb32 = g.X, g.Weight, g.Bias, g32.X, g32.Weight, g32.Bias

				yBound := make([]float64, len(y))
				dxBound := make([]float64, len(y))
				dwBound := make([]float64, d)
				dwSum, dbSum := make([]float64, d), make([]float64, d)
				caught, caughtDx := false, false
				fac := math.Sqrt(float64(d-1) / float64(d))
				s32 := rounded32(sum)
				for lo := 0; lo < len(y); lo += d {
					fy := refRow(sum[lo:lo+d], center, o)
					fb := refRow(s32[lo:lo+d], center, o)
					rho := rootErr(fb, d)
					var mg, mAbsG, mgx, mAbsGE, mAbsGX float64
					gam := make([]float64, d)
					for j := range d {
						gam[j] = gammaOf(w, j, o.Weight)
						gj := dy[lo+j] * gam[j]
						if center {
							mg += gj / float64(d)
						}
						mAbsG += math.Abs(gj) / float64(d)
						mgx += gj * fb.xhat[j] / float64(d)
						mAbsGE += math.Abs(gj) * xhatErr(fb, j, d) / float64(d)
						mAbsGX += math.Abs(gj*fb.xhat[j]) / float64(d)
					}
					var dmg float64
					if center {
						dmg = (float64(d) + 2) * u32 * mAbsG
					}
					dmgx := mAbsGE + (float64(d)+3)*u32*mAbsGX
					var dc float64
					if o.Placement == EpsilonAddedToRoot {
						dc = fb.c * (2*rho + u32)
					}
					dcm := fb.c*dmgx + math.Abs(mgx)*dc + u32*math.Abs(fb.c*mgx)
					for j := range d {
						i := lo + j
						in := u32 * (math.Abs(sum[i]) + fy.meanS + fy.c*math.Abs(fy.xhat[j])*fy.meanXhS) / fy.r
						gxh := math.Abs(gam[j] * fy.xhat[j])
						yBound[i] = slack * (math.Abs(gam[j])*(xhatErr(fy, j, d)+in) + 2*u32*gxh + u32*math.Abs(y[i]))
						// A wrong scale: x̂ times √((d−1)/d), as the unbiased
						// variance would give.
						wrong := bias0(bias, j) + (y[i]-bias0(bias, j))*fac
						caught = caught || math.Abs(wrong-y[i]) > yBound[i]

						gj := dy[i] * gam[j]
						v := gj - mg - fb.c*fb.xhat[j]*mgx
						dv := 3*u32*math.Abs(gj) + dmg + u32*math.Abs(mg) + math.Abs(fb.c*mgx)*xhatErr(fb, j, d) +
							math.Abs(fb.xhat[j])*dcm + u32*math.Abs(fb.c*mgx*fb.xhat[j]) + u32*math.Abs(v)
						dxBound[i] = slack * (dv/fb.r + (rho+u32)*math.Abs(v)/fb.r + u32*math.Abs(gx[i]))
						wrongDx := ds[i] + (gx[i]-ds[i])/fac
						caughtDx = caughtDx || math.Abs(wrongDx-gx[i]) > dxBound[i]

						dwBound[j] += math.Abs(dy[i])*xhatErr(fb, j, d) + u32*math.Abs(dy[i]*fb.xhat[j])
						dwSum[j] += math.Abs(dy[i] * fb.xhat[j])
						dbSum[j] += math.Abs(dy[i])
					}
				}
				for i := range y {
					ensure.LessOrEqual(t, math.Abs(float64(y32[i])-y[i]), yBound[i], "%s: y[%d]", name, i)
					ensure.LessOrEqual(t, math.Abs(float64(gx32[i])-gx[i]), dxBound[i], "%s: dx[%d]", name, i)
				}
				for j := range d {
					bw := slack * (dwBound[j] + (rows-1)*u32*dwSum[j])
					ensure.LessOrEqual(t, math.Abs(float64(gw32[j])-gw[j]), bw, "%s: dweight[%d]", name, j)
					if center {
						ensure.LessOrEqual(t, math.Abs(float64(gb32[j])-gb[j]), slack*(rows-1)*u32*dbSum[j], "%s: dbias[%d]", name, j)
					}
				}
				expect.True(t, caught, "%s: the bound on y misses a wrong scale", name)
				expect.True(t, caughtDx, "%s: the bound on dx misses a wrong scale", name)
			}
		}
	}
}

// bias0 is b_j, or 0 without a bias.
func bias0(b []float64, j int) float64 {
	if b == nil {
		return 0
	}
	return b[j]
}

// badCall is one invalid call, in float64; a pair runs it in float64 and,
// converted, in float32.
type badCall struct {
	name                   string
	x, res, w, b, dy, dsum []float64
	d                      int
	o                      Options
}

// twin is an exported function and its float32 twin, each run on a
// badCall.
type twin struct {
	fn         string
	run, run32 func(c badCall) error
}

func twins() []twin {
	f := num.Convert[float32, float64]
	grad := func(_ any, err error) error { return err }
	fwd := func(_, _ any, err error) error { return err }
	return []twin{
		{"LayerNorm", func(c badCall) error { return grad(LayerNorm(c.x, c.d, c.w, c.b, c.o)) },
			func(c badCall) error { return grad(LayerNorm32(f(c.x), c.d, f(c.w), f(c.b), c.o)) }},
		{"RMSNorm", func(c badCall) error { return grad(RMSNorm(c.x, c.d, c.w, c.o)) },
			func(c badCall) error { return grad(RMSNorm32(f(c.x), c.d, f(c.w), c.o)) }},
		{"LayerNormBackward", func(c badCall) error { return grad(LayerNormBackward(c.x, c.d, c.w, c.dy, c.o)) },
			func(c badCall) error { return grad(LayerNormBackward32(f(c.x), c.d, f(c.w), f(c.dy), c.o)) }},
		{"RMSNormBackward", func(c badCall) error { return grad(RMSNormBackward(c.x, c.d, c.w, c.dy, c.o)) },
			func(c badCall) error { return grad(RMSNormBackward32(f(c.x), c.d, f(c.w), f(c.dy), c.o)) }},
		{"AddLayerNorm", func(c badCall) error { return fwd(AddLayerNorm(c.x, c.res, c.d, c.w, c.b, c.o)) },
			func(c badCall) error { return fwd(AddLayerNorm32(f(c.x), f(c.res), c.d, f(c.w), f(c.b), c.o)) }},
		{"AddRMSNorm", func(c badCall) error { return fwd(AddRMSNorm(c.x, c.res, c.d, c.w, c.o)) },
			func(c badCall) error { return fwd(AddRMSNorm32(f(c.x), f(c.res), c.d, f(c.w), c.o)) }},
		{"AddLayerNormBackward", func(c badCall) error { return grad(AddLayerNormBackward(c.x, c.d, c.w, c.dy, c.dsum, c.o)) },
			func(c badCall) error {
				return grad(AddLayerNormBackward32(f(c.x), c.d, f(c.w), f(c.dy), f(c.dsum), c.o))
			}},
		{"AddRMSNormBackward", func(c badCall) error { return grad(AddRMSNormBackward(c.x, c.d, c.w, c.dy, c.dsum, c.o)) },
			func(c badCall) error {
				return grad(AddRMSNormBackward32(f(c.x), c.d, f(c.w), f(c.dy), f(c.dsum), c.o))
			}},
	}
}

// TestErrors32: on every invalid input each float32 twin fails exactly
// when its float64 function does, with an error wrapping the same sentinel
// and the same message, its own name in place of the float64 one.
func TestErrors32(t *testing.T) {
	x := []float64{1, 2, 3, 4, 5, 6}
	ok := Options{Epsilon: 1e-5}
	calls := []badCall{
		{name: "d zero", x: x, res: x, dy: x, d: 0, o: ok},
		{name: "len not multiple", x: x, res: x, dy: x, d: 4, o: ok},
		{name: "weight length", x: x, res: x, dy: x, d: 3, w: []float64{1}, o: ok},
		{name: "bias length", x: x, res: x, dy: x, d: 3, b: []float64{}, o: ok},
		{name: "epsilon zero", x: x, res: x, dy: x, d: 3},
		{name: "epsilon NaN", x: x, res: x, dy: x, d: 3, o: Options{Epsilon: math.NaN()}},
		{name: "placement", x: x, res: x, dy: x, d: 3, o: Options{Epsilon: 1, Placement: 9}},
		{name: "weight form", x: x, res: x, dy: x, d: 3, o: Options{Epsilon: 1, Weight: 9}},
		{name: "residual length", x: x, res: x[:3], dy: x, d: 3, o: ok},
		{name: "dy length", x: x, res: x, dy: x[:5], d: 3, o: ok},
		{name: "dsum length", x: x, res: x, dy: x, dsum: []float64{}, d: 3, o: ok},
	}
	sentinels := []error{ErrShape, ErrEpsilon, ErrOption}
	which := func(err error) []bool {
		var is []bool
		for _, s := range sentinels {
			is = append(is, errors.Is(err, s))
		}
		return is
	}
	for _, tw := range twins() {
		failed := 0
		for _, c := range calls {
			err, err32 := tw.run(c), tw.run32(c)
			ensure.Equal(t, err == nil, err32 == nil, "%s, %s: %v / %v", tw.fn, c.name, err, err32)
			if err == nil {
				continue
			}
			failed++
			expect.Equal(t, which(err), which(err32), "%s, %s: sentinels of %q and %q", tw.fn, c.name, err, err32)
			want := strings.Replace(err.Error(), ": "+tw.fn+": ", ": "+tw.fn+"32: ", 1)
			expect.Equal(t, want, err32.Error(), "%s, %s", tw.fn, c.name)
		}
		// Every function refuses at least the shape, epsilon and option
		// errors of the first eight calls.
		expect.GreaterOrEqual(t, failed, 7, tw.fn)
	}
}

// TestSpecialCases32 checks, for the fused float32 twins, the special cases
// their documentation takes from AddLayerNorm and AddRMSNorm (and so from
// LayerNorm and RMSNorm): empty input, rows holding NaN or ±Inf, constant
// rows in LayerNorm (y = b exactly, ∂L/∂x = g − mean g over r, here
// plus dsum) and zero rows in RMSNorm (y = 0). The values follow from the
// definitions by hand.
func TestSpecialCases32(t *testing.T) {
	nan, inf := float32(math.NaN()), float32(math.Inf(1))
	for _, o := range allOptions(1e-5) {
		t.Run(fmt.Sprint(o.Placement, "/", o.Weight), func(t *testing.T) {
			y, sum, err := AddLayerNorm32(nil, nil, 4, nil, nil, o)
			ensure.NoError(t, err)
			expect.Empty(t, y)
			expect.Empty(t, sum)
			g, err := AddRMSNormBackward32([]float32{}, 4, []float32{1, 2, 3, 4}, []float32{}, nil, o)
			ensure.NoError(t, err)
			expect.Empty(t, g.X)
			expect.Equal(t, []float32{0, 0, 0, 0}, g.Weight)

			// Row 0 holds NaN, row 2 −Inf (after the add); row 1 is finite.
			x := []float32{1, nan, 2, 1, 2, 3, -inf, 0, 1}
			res := []float32{0, 0, 0, 0.5, 0.5, 0.5, 1, 1, 1}
			dy := []float32{1, 1, 1, 1, 1, 1, 1, 1, 1}
			for _, center := range []bool{true, false} {
				var y []float32
				var g Grads32
				if center {
					y, _, err = AddLayerNorm32(x, res, 3, nil, []float32{1, 1, 1}, o)
					ensure.NoError(t, err)
					g, err = AddLayerNormBackward32(x, 3, nil, dy, dy, o)
				} else {
					y, _, err = AddRMSNorm32(x, res, 3, nil, o)
					ensure.NoError(t, err)
					g, err = AddRMSNormBackward32(x, 3, nil, dy, dy, o)
				}
				ensure.NoError(t, err)
				for j := range 3 {
					expect.True(t, isNaN32(y[j]) && isNaN32(y[6+j]), "center=%v: rows 0 and 2, element %d", center, j)
					expect.False(t, isNaN32(y[3+j]), "center=%v: row 1, element %d", center, j)
					expect.True(t, isNaN32(g.X[j]) && isNaN32(g.X[6+j]), "center=%v: dx rows 0 and 2", center)
					expect.False(t, isNaN32(g.X[3+j]), "center=%v: dx row 1", center)
				}
			}

			// Constant rows (7, 1e8 and 0, after the add): y = b exactly, and
			// ∂L/∂x = dsum + (g − mean g)/r with r = √ε or ε.
			b := []float32{0.5, -0.25, 2}
			w := []float32{0.5, 1.5, -1.5}
			c := []float32{6, 6, 6, 1e8, 1e8, 1e8, -1, -1, -1}
			one := []float32{1, 1, 1, 0, 0, 0, 1, 1, 1}
			y, sum, err = AddLayerNorm32(c, one, 3, w, b, o)
			ensure.NoError(t, err)
			expect.Equal(t, []float32{7, 7, 7, 1e8, 1e8, 1e8, 0, 0, 0}, sum)
			expect.Equal(t, append(append(append([]float32{}, b...), b...), b...), y)
			dy = []float32{1, 2, 3, 1, 2, 3, 1, 2, 3}
			ds := []float32{0.25, 0.25, 0.25, 0, 0, 0, -1, -1, -1}
			g, err = AddLayerNormBackward32(sum, 3, w, dy, ds, o)
			ensure.NoError(t, err)
			want := constantRowDx(w, dy, o)
			for j := range 9 {
				// A handful of float32 roundings of values near (g − mg)/r.
				expect.InEpsilon(t, float64(ds[j])+want[j], float64(g.X[j]), 1e-5, "constant row dx %d", j)
			}
			expect.Equal(t, []float32{0, 0, 0}, g.Weight, "x̂ = 0 on constant rows")
			expect.Equal(t, []float32{3, 6, 9}, g.Bias)

			// A zero row in RMSNorm: y = 0.
			y, _, err = AddRMSNorm32([]float32{1, -2, 0.5}, []float32{-1, 2, -0.5}, 3, w, o)
			ensure.NoError(t, err)
			expect.Equal(t, []float32{0, 0, 0}, y)
		})
	}
}

func isNaN32(x float32) bool { return x != x }

// TestFloat32Surface holds the package to its float32 rule (see the package
// documentation): every exported function whose signature has a tensor
// ([]float64, or Grads) has a twin named with the suffix 32 whose signature
// is the same in float32, and every function named …32 is such a twin.
func TestFloat32Surface(t *testing.T) {
	twinned, problems, err := surface.Twins(".", strings.NewReplacer("float64", "float32", "Grads", "Grads32"))
	ensure.NoError(t, err)
	expect.Empty(t, problems)
	expect.Len(t, twinned, 8, "functions with a float32 twin: %v", twinned)
}
