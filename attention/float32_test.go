package attention

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/surface"
	"github.com/plumbref/plumb/mask"
)

// u32 is the unit roundoff of float32 (IEEE 754-2019 binary32, a 24-bit
// significand): a rounded operation has relative error at most 2⁻²⁴.
const u32 = 0x1p-24

// slack32 multiplies the first-order bounds below: it covers the terms of
// order (n·u)² (n ≤ 200 here, so below 1e-3 of the bound) and the float64
// reference's own rounding (2⁻²⁹ of the bound).
const slack32 = 1.01

// bounds32 are first-order bounds on |x32 − x64|, element by element, for
// the attention forms on inputs of magnitude at most 1 (q, k, v, dOut,
// dLSE, a bias and sinks; all representable in float32, so that both
// precisions see the same problem), the default scale 1/√Dk and no
// soft-cap. A sum of n terms errs by at most (n − 1)·u·Σ|terms| in any
// order, blocked or not (Higham 2002, "Accuracy and Stability of Numerical
// Algorithms", §4.2); exp and log are taken in float64 and rounded once.
//
//   - Logits: |t| ≤ L = √Dk + 1 (|scale·q·k| ≤ Dk/√Dk, |bias| ≤ 1); a dot
//     product of Dk terms, the scale rounded and applied, the bias added:
//     |Δt| ≤ δt = ((Dk + 2)√Dk + L)u.
//   - Weights e^{t−m}: t − m ∈ [−2L, 0] rounded, then exp:
//     relative ε_e = 2δt + (2L + 1)u; their sum with the sink's, Lk + 1
//     positive terms, and one division: probabilities P (and P_sink) of
//     relative error ε_P = 2ε_e + (Lk + 1)u.
//   - O = Σ P_j V_j, Σ P_j ≤ 1: |ΔO| ≤ ε_P + (Lk + 1)u.
//     lse = m + log(sum): |Δlse| ≤ δt + ε_e + Lk·u + (L + 2λ)u, λ = log(Lk + 1)
//     (the rounding of log(sum) and of the sum m + log(sum)).
//   - The tiled form rescales its running sum and output once per block by
//     α = e^{m−m′}, rounded after a subtraction of size ≤ 2L: nb blocks add
//     nb(2L + 2)u to the relative error of the sum and of the output.
type bounds32 struct {
	L, dt, eE, eP, lambda float64
	s                     Shape
}

func newBounds32(s Shape) bounds32 {
	b := bounds32{s: s, L: math.Sqrt(float64(s.Dk)) + 1, lambda: math.Log(float64(s.Lk + 1))}
	b.dt = ((float64(s.Dk)+2)*math.Sqrt(float64(s.Dk)) + b.L) * u32
	b.eE = 2*b.dt + (2*b.L+1)*u32
	b.eP = 2*b.eE + float64(s.Lk+1)*u32
	return b
}

// forward returns the bounds on O and lse of the direct and fast forms, or
// with nb > 0 of the tiled form with nb key blocks.
func (b bounds32) forward(nb int) (o, lse float64) {
	lk := float64(b.s.Lk)
	rescale := float64(nb) * (2*b.L + 2) * u32
	o = 2*(b.eE+rescale) + (2*lk+3)*u32
	lse = b.dt + b.eE + rescale + lk*u32 + (b.L+2*b.lambda)*u32
	return slack32 * o, slack32 * lse
}

// backward returns the element bounds on the gradients of the direct and
// fast backward, for p on q and k (float64). With dP_j = dO·V_j (|dP| ≤ Dv,
// |ΔdP| ≤ ΔdP = Dv²u), c the dP of the most probable entry, the centred
// D − c = Σ_j P_j(dP_j − c) − c·P_sink (|D − c| ≤ 2Dv) errs by
// Δdc = 2Dv·ε_P + 2ΔdP + 2Dv(Lk + 3)u; h_j = (dP_j − c) − (D − c) + dLSE
// (|h| ≤ H = 4Dv + 1, three roundings) by Δh = 2ΔdP + Δdc + 3uH; and
// dS_j = P_j·h_j by P_j·E_S, E_S = Δh + (ε_P + u)H. Then, with the sums
// over the visible keys (dQ) or the G·Lq rows of a kv head's group (dK,
// dV), each term bounded by P times its magnitude:
//
//	dQ_i:   scale·(1 − P_sink,i)·(E_S + (Lk + 2)u·H)
//	dK_j:   scale·ΣP_·j·(E_S + (G·Lq + 2)u·H)
//	dV_j:   ΣP_·j·(ε_P + u + G·Lq·u)
//	dσ_h:   ΣP_sink·(Δdc + ΔdP + u·Dv + 2u(1 + Dv) + ε_P(1 + Dv) + B·Lq·u(1 + Dv))
//	dBias:  P_ij·E_S  (a bias of full shape [B, Hq, Lq, Lk]: nothing summed)
//
// where ΣP_·j sums the float64 probabilities of key j over the rows that
// read its kv head and ΣP_sink those of a head's sink over its rows.
func (b bounds32) backward(p *plan, q, k []float64) (dq, dk, dv, dsinks, dbias []float64) {
	s := b.s
	dv64, lk := float64(s.Dv), float64(s.Lk)
	rowsPerKV := float64(s.HeadsQ / s.HeadsKV * s.Lq)
	ddP := dv64 * dv64 * u32
	ddc := 2*dv64*b.eP + 2*ddP + 2*dv64*(lk+3)*u32
	H := 4*dv64 + 1
	eS := 2*ddP + ddc + 3*u32*H + (b.eP+u32)*H
	dq, dk, dv = make([]float64, s.qLen()), make([]float64, s.kLen()), make([]float64, s.vLen())
	dsinks, dbias = make([]float64, s.HeadsQ), make([]float64, s.Batch*s.HeadsQ*s.Lq*s.Lk)
	colP := make([]float64, s.Batch*s.HeadsKV*s.Lk)
	row := make([]float64, s.Lk)
	for r := range p.rows {
		_, psink, _ := probsRow(p, q, k, r, row, nil)
		for d := range s.Dk {
			dq[p.qOff(r.b, r.h, r.i)+d] = slack32 * p.scale * (1 - psink) * (eS + (lk+2)*u32*H)
		}
		dsinks[r.h] += psink
		for j, pj := range row {
			colP[(r.b*s.HeadsKV+r.kv)*s.Lk+j] += pj
			dbias[((r.b*s.HeadsQ+r.h)*s.Lq+r.i)*s.Lk+j] = slack32 * pj * eS
		}
	}
	for h := range dsinks {
		dsinks[h] *= slack32 * (ddc + ddP + u32*dv64 + 2*u32*(1+dv64) + b.eP*(1+dv64) + float64(s.Batch*s.Lq)*u32*(1+dv64))
	}
	for bb := range s.Batch {
		for kv := range s.HeadsKV {
			for j := range s.Lk {
				c := colP[(bb*s.HeadsKV+kv)*s.Lk+j]
				for d := range s.Dk {
					dk[p.kOff(bb, kv, j)+d] = slack32 * p.scale * c * (eS + (rowsPerKV+2)*u32*H)
				}
				for d := range s.Dv {
					dv[p.vOff(bb, kv, j)+d] = slack32 * c * (b.eP + u32 + rowsPerKV*u32)
				}
			}
		}
	}
	return dq, dk, dv, dsinks, dbias
}

// within asserts |got − want| ≤ bound element by element, and reports
// whether wrong, a float64 result under a wrong scale, is off by more
// than the bound somewhere (so that the bound has teeth).
func within[T num.Float](t *testing.T, what string, got []T, want, wrong []float64, bound func(i int) float64) (caught bool) {
	t.Helper()
	ensure.Len(t, got, len(want), what)
	for i := range want {
		ensure.LessOrEqual(t, math.Abs(float64(got[i])-want[i]), bound(i), "%s[%d]: float32 %v, float64 %v", what, i, got[i], want[i])
		caught = caught || math.Abs(wrong[i]-want[i]) > bound(i)
	}
	return caught
}

func constant(b float64) func(int) float64 { return func(int) float64 { return b } }

// rounded32 is x rounded to float32 and back.
func rounded32(x []float64) []float64 { return num.Convert[float64](num.Convert[float32](x)) }

// bound32Case draws a problem for the bounds: inputs, a sink per head and a
// bias of full shape, all uniform in [−1, 1) and representable in float32,
// a causal mask on Lq ≤ Lk (so no row is empty), both layouts and group
// maps.
func bound32Case(r *rand.Rand, s Shape) (q, k, v, dOut, dLSE []float64, o Options) {
	q, k, v = randCase(r, s)
	q, k, v = rounded32(q), rounded32(k), rounded32(v)
	dOut, dLSE = rounded32(randUniform(r, s.oLen())), rounded32(randUniform(r, s.lseLen()))
	o = Options{Layout: Layout(r.IntN(2)), Group: GroupMap(r.IntN(2)), Mask: mask.Causal(),
		Sinks: rounded32(randUniform(r, s.HeadsQ)), Bias: rounded32(randUniform(r, s.Batch*s.HeadsQ*s.Lq*s.Lk)),
		BiasBatch: s.Batch, BiasHeads: s.HeadsQ}
	return q, k, v, dOut, dLSE, o
}

// wrongScale is o with the scale 1/Dk instead of 1/√Dk, a common slip.
func wrongScale(o Options, s Shape) Options {
	o.Scale = 1 / float64(s.Dk)
	return o
}

// TestFloat32Bounds checks the float32 twins against their float64
// counterparts within the bounds of bounds32, on problems large enough for
// two row blocks of the fast forms, and checks that each bound would catch
// the float64 result under a wrong scale (1/Dk for 1/√Dk).
func TestFloat32Bounds(t *testing.T) {
	r := rand.New(rand.NewPCG(41, 42))
	for trial := range trials(6, 2) {
		s := Shape{Batch: 2, HeadsQ: 4, HeadsKV: 2, Lq: 66 + r.IntN(10), Dk: 4 + r.IntN(5), Dv: 2 + r.IntN(5)}
		s.Lk = s.Lq + r.IntN(12)
		q, k, v, dOut, dLSE, o := bound32Case(r, s)
		f := num.Convert[float32, float64]
		q32, k32, v32, dOut32, dLSE32 := f(q), f(k), f(v), f(dOut), f(dLSE)
		b := newBounds32(s)
		bo, bl := b.forward(0)

		// Forward forms: direct, fast, decode (pos = Lk − Lq, the same
		// rows), tiled with several blocks.
		type run struct {
			name           string
			out, lse       []float32
			want, wantL    []float64
			wrong, wrongL  []float64
			boundO, boundL float64
		}
		want, wantL, err := Forward(q, k, v, s, o)
		ensure.NoError(t, err)
		wrong, wrongL, err := Forward(q, k, v, s, wrongScale(o, s))
		ensure.NoError(t, err)
		var runs []run
		out, lse, err := Forward32(q32, k32, v32, s, o)
		ensure.NoError(t, err)
		runs = append(runs, run{"Forward32", out, lse, want, wantL, wrong, wrongL, bo, bl})
		out, lse, err = ForwardFast32(q32, k32, v32, s, o)
		ensure.NoError(t, err)
		runs = append(runs, run{"ForwardFast32", out, lse, want, wantL, wrong, wrongL, bo, bl})
		od := o
		od.Mask = mask.Mask{}
		dWant, dWantL, err := Decode(q, k, v, s, s.Lk-s.Lq, od)
		ensure.NoError(t, err)
		dWrong, dWrongL, err := Decode(q, k, v, s, s.Lk-s.Lq, wrongScale(od, s))
		ensure.NoError(t, err)
		out, lse, err = Decode32(q32, k32, v32, s, s.Lk-s.Lq, od)
		ensure.NoError(t, err)
		runs = append(runs, run{"Decode32", out, lse, dWant, dWantL, dWrong, dWrongL, bo, bl})
		for _, block := range []int{1, 7, 64} {
			tWant, tWantL, err := ForwardTiled(q, k, v, s, block, o)
			ensure.NoError(t, err)
			tWrong, tWrongL, err := ForwardTiled(q, k, v, s, block, wrongScale(o, s))
			ensure.NoError(t, err)
			out, lse, err = ForwardTiled32(q32, k32, v32, s, block, o)
			ensure.NoError(t, err)
			tbo, tbl := b.forward((s.Lk + block - 1) / block)
			runs = append(runs, run{"ForwardTiled32", out, lse, tWant, tWantL, tWrong, tWrongL, tbo, tbl})
		}
		for _, x := range runs {
			expect.True(t, within(t, x.name+" out", x.out, x.want, x.wrong, constant(x.boundO)), "trial %d %s: the bound on O misses a wrong scale", trial, x.name)
			expect.True(t, within(t, x.name+" lse", x.lse, x.wantL, x.wrongL, constant(x.boundL)), "trial %d %s: the bound on lse misses a wrong scale", trial, x.name)
		}

		// Backward forms.
		p, err := newPlan("Backward", len(q), len(k), len(v), s, &o)
		ensure.NoError(t, err)
		bq, bk, bv, bs, bb := b.backward(p, q, k)
		for _, fast := range []bool{false, true} {
			var g, gw Grads
			var g32 Grads32
			if fast {
				g, err = BackwardFast(q, k, v, dOut, dLSE, s, o)
				ensure.NoError(t, err)
				gw, err = BackwardFast(q, k, v, dOut, dLSE, s, wrongScale(o, s))
				ensure.NoError(t, err)
				g32, err = BackwardFast32(q32, k32, v32, dOut32, dLSE32, s, o)
			} else {
				g, err = Backward(q, k, v, dOut, dLSE, s, o)
				ensure.NoError(t, err)
				gw, err = Backward(q, k, v, dOut, dLSE, s, wrongScale(o, s))
				ensure.NoError(t, err)
				g32, err = Backward32(q32, k32, v32, dOut32, dLSE32, s, o)
			}
			ensure.NoError(t, err)
			at := func(b []float64) func(int) float64 { return func(i int) float64 { return b[i] } }
			for _, c := range []struct {
				name      string
				got       []float32
				want, off []float64
				bound     []float64
			}{
				{"dQ", g32.DQ, g.DQ, gw.DQ, bq},
				{"dK", g32.DK, g.DK, gw.DK, bk},
				{"dV", g32.DV, g.DV, gw.DV, bv},
				{"dSinks", g32.DSinks, g.DSinks, gw.DSinks, bs},
				{"dBias", g32.DBias, g.DBias, gw.DBias, bb},
			} {
				caught := within(t, c.name, c.got, c.want, c.off, at(c.bound))
				expect.True(t, caught, "trial %d fast=%v: the bound on %s misses a wrong scale", trial, fast, c.name)
			}
		}

		// Merge: parts with lse in [−3, 3) and some empty rows. With
		// M = max, the weights e^{lse − M} (a subtraction of size ≤ 6 and
		// an exp: relative 7u), their sum (8u), lse = M + log(sum)
		// (≤ 8u + u·log 2 + u·|lse| ≤ 13u), the normalised weights (16u)
		// and O = wA·OA + wB·OB (two products and a sum, wA + wB = 1,
		// |OA|, |OB| ≤ 1): |ΔO| ≤ 18u. The wrong merge for the check of
		// teeth leaves the weights unnormalised (O off by the factor
		// wA + wB) and takes log₂ for log.
		rows := 3 * s.Lq
		outA, outB := rounded32(randUniform(r, rows*s.Dv)), rounded32(randUniform(r, rows*s.Dv))
		lseA, lseB := rounded32(randUniform(r, rows)), rounded32(randUniform(r, rows))
		for i := range lseA {
			lseA[i] *= 3
			lseB[i] *= 3
			if i%7 == 3 {
				lseA[i] = math.Inf(-1)
			}
		}
		mo, ml, err := Merge(outA, lseA, outB, lseB, s.Dv)
		ensure.NoError(t, err)
		mo32, ml32, err := Merge32(f(outA), f(lseA), f(outB), f(lseB), s.Dv)
		ensure.NoError(t, err)
		mWrong, mWrongL := make([]float64, len(mo)), make([]float64, len(ml))
		for i := range ml {
			m := math.Max(lseA[i], lseB[i])
			wa, wb := math.Exp(lseA[i]-m), math.Exp(lseB[i]-m)
			mWrongL[i] = m + math.Log2(wa+wb) // a logarithm of the wrong base
			for d := range s.Dv {
				mWrong[i*s.Dv+d] = wa*outA[i*s.Dv+d] + wb*outB[i*s.Dv+d]
			}
		}
		expect.True(t, within(t, "Merge32 out", mo32, mo, mWrong, constant(slack32*18*u32)), "the bound on the merged O misses unnormalised weights")
		expect.True(t, within(t, "Merge32 lse", ml32, ml, mWrongL, constant(slack32*13*u32)), "the bound on the merged lse misses a logarithm of the wrong base")
	}
}

// TestSpecialCases32 checks the special cases the float64 documentation
// promises on the float32 twins: the NaN and Inf policy of the forward
// forms, hidden Inf values ignored by every form, the
// empty rows of the backward forms under both policies, and Merge's empty
// and NaN parts.
func TestSpecialCases32(t *testing.T) {
	s := nanInfShape
	r := rand.New(rand.NewPCG(43, 44))
	q64, k64, v64 := randCase(r, s)
	q, k, v := num.Convert[float32](q64), num.Convert[float32](k64), num.Convert[float32](v64)
	forms := map[string]func(q, k, v []float32, s Shape, o Options) ([]float32, []float32, error){
		"Forward32":     Forward32,
		"ForwardFast32": ForwardFast32,
		"ForwardTiled32": func(q, k, v []float32, s Shape, o Options) ([]float32, []float32, error) {
			return ForwardTiled32(q, k, v, s, 3, o)
		},
	}
	for name, f := range forms {
		t.Run(name, func(t *testing.T) {
			on := func(q, k, v []float32, o Options) ([]float32, []float32, error) { return f(q, k, v, s, o) }
			checkNaNInfPolicy(t, q, k, v, on)
			checkHiddenInfIgnored(t, q, k, v, on)
			// Batch = 0 and Lq = 0: empty outputs.
			for _, e := range []Shape{{0, 2, 1, 3, 4, 2, 2}, {1, 2, 1, 0, 4, 2, 2}} {
				out, lse, err := f(nil, make([]float32, e.kLen()), make([]float32, e.vLen()), e, Options{})
				ensure.NoError(t, err)
				expect.Empty(t, out)
				expect.Empty(t, lse)
			}
		})
	}

	// Backward: batch entry 0 sees no key; under EmptyRowNaN its dQ and the
	// dK and dV of its kv head are NaN, under EmptyRowZero they are 0; batch
	// entry 1 is finite either way.
	bs := Shape{Batch: 2, HeadsQ: 2, HeadsKV: 1, Lq: 3, Lk: 4, Dk: 2, Dv: 2}
	bq, bk, bv := randCase(r, bs)
	dOut := randUniform(r, bs.oLen())
	pad, _ := mask.KeyPadding([]int{0, 4})
	for _, pol := range []EmptyRow{EmptyRowZero, EmptyRowNaN} {
		o := Options{Mask: pad, EmptyRow: pol}
		for name, run := range map[string]func(q, k, v, d []float32, s Shape, o Options) (Grads32, error){
			"Backward32": func(q, k, v, d []float32, s Shape, o Options) (Grads32, error) {
				return Backward32(q, k, v, d, nil, s, o)
			},
			"BackwardFast32": func(q, k, v, d []float32, s Shape, o Options) (Grads32, error) {
				return BackwardFast32(q, k, v, d, nil, s, o)
			},
		} {
			g, err := run(f32(bq), f32(bk), f32(bv), f32(dOut), bs, o)
			ensure.NoError(t, err)
			for _, c := range []struct {
				name string
				x    []float32
			}{{"dQ", g.DQ}, {"dK", g.DK}, {"dV", g.DV}} {
				half := len(c.x) / 2 // batch entry 0, then 1 (heads-major)
				for i, x := range c.x {
					switch {
					case i >= half:
						ensure.False(t, x != x, "%s %v: %s[%d] of the visible batch entry is NaN", name, pol, c.name, i)
					case pol == EmptyRowNaN:
						ensure.True(t, x != x, "%s %v: %s[%d] = %v, want NaN", name, pol, c.name, i, x)
					default:
						ensure.Zero(t, x, "%s %v: %s[%d]", name, pol, c.name, i)
					}
				}
			}
		}
	}

	checkMergeSpecialCases(t, Merge32)
}

// TestFloat32Surface holds the package to its float32 rule (see the package
// documentation): every exported function whose signature has a tensor
// ([]float64, or Grads) has a twin named with the suffix 32 whose signature
// is the same in float32, and every function named …32 is such a twin.
func TestFloat32Surface(t *testing.T) {
	twinned, problems, err := surface.Twins(".", strings.NewReplacer("float64", "float32", "Grads", "Grads32"))
	ensure.NoError(t, err)
	expect.Empty(t, problems)
	expect.Len(t, twinned, 9, "functions with a float32 twin: %v", twinned)
}
