package attention

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/plumbref/plumb/internal/elem"
	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
)

// tiledBound is the normwise relative difference accepted between the
// tiled and the direct forms (and between either and the golden values):
// both are a few roundings per key away from the exact result, in
// different orders, so they differ by a small multiple of 2⁻⁵³ ≈ 1.1e-16;
// the bound is the project target.
const tiledBound = 1e-14

func TestGoldenForwardTiled(t *testing.T) {
	for _, block := range []int{1, 2, 3, 64} {
		goldenForward(t, "ForwardTiled", tiledBound, nil, func(q, k, v []float64, s Shape, o Options) ([]float64, []float64, error) {
			return ForwardTiled(q, k, v, s, block, o)
		})
	}
}

func TestGoldenForwardTiled32(t *testing.T) {
	for _, block := range []int{1, 2, 3, 64} {
		goldenForward(t, "ForwardTiled32", 0, nil, func(q, k, v []float32, s Shape, o Options) ([]float32, []float32, error) {
			return ForwardTiled32(q, k, v, s, block, o)
		})
	}
}

// randUniform is n values uniform in [−1, 1).
func randUniform(r *rand.Rand, n int) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = 2*r.Float64() - 1
	}
	return x
}

// randCase draws q, k and v of shape s, uniform in [−1, 1).
func randCase(r *rand.Rand, s Shape) (q, k, v []float64) {
	return randUniform(r, s.qLen()), randUniform(r, s.kLen()), randUniform(r, s.vLen())
}

func TestTiledMatchesDirect(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	win, _ := mask.Window(5)
	for trial := range 40 {
		hkv := 1 + r.IntN(3)
		s := Shape{Batch: 1 + r.IntN(2), HeadsQ: hkv * (1 + r.IntN(3)), HeadsKV: hkv, Lq: 1 + r.IntN(9), Lk: 1 + r.IntN(17), Dk: 1 + r.IntN(6), Dv: 1 + r.IntN(6)}
		o := Options{Layout: Layout(r.IntN(2)), Group: GroupMap(r.IntN(2))}
		if s.Lq <= s.Lk && r.IntN(2) == 0 {
			o.Mask = mask.Causal()
			if r.IntN(2) == 0 {
				o.Mask, _ = mask.Intersect(mask.Causal(), win)
			}
		}
		if r.IntN(2) == 0 {
			o.Sinks = make([]float64, s.HeadsQ)
			for h := range o.Sinks {
				o.Sinks[h] = r.NormFloat64()
			}
		}
		if r.IntN(3) == 0 {
			o.SoftCap = 0.5 + 2*r.Float64()
		}
		q, k, v := randCase(r, s)
		wantO, wantL, err := Forward(q, k, v, s, o)
		ensure.NoError(t, err)
		block := 1 + r.IntN(s.Lk+1)
		gotO, gotL, err := ForwardTiled(q, k, v, s, block, o)
		ensure.NoError(t, err)
		expect.LessOrEqual(t, golden.NormwiseRelErr(gotO, wantO), tiledBound, "trial %d %+v block %d", trial, s, block)
		expect.LessOrEqual(t, golden.NormwiseRelErr(gotL, wantL), tiledBound, "trial %d", trial)
	}
}

// TestMergeSplitsKeys splits the keys at every point, runs Forward on each
// part with a key-padding style bias hiding the other part, and merges.
func TestMergeSplitsKeys(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	s := Shape{Batch: 2, HeadsQ: 4, HeadsKV: 2, Lq: 5, Lk: 9, Dk: 4, Dv: 3}
	q, k, v := randCase(r, s)
	sinks := []float64{0.3, -1, 2, math.Inf(-1)}
	for _, layout := range []Layout{HeadsMajor, SeqMajor} {
		o := Options{Layout: layout, Mask: mask.Causal(), Sinks: sinks}
		want, wantL, err := Forward(q, k, v, s, o)
		ensure.NoError(t, err)
		for cut := 0; cut <= s.Lk; cut++ {
			hideB := make([]float64, s.Lq*s.Lk)
			hideA := make([]float64, s.Lq*s.Lk)
			for i := range s.Lq {
				for j := range s.Lk {
					if j < cut {
						hideB[i*s.Lk+j] = math.Inf(-1)
					} else {
						hideA[i*s.Lk+j] = math.Inf(-1)
					}
				}
			}
			oa := o
			oa.Bias, oa.BiasBatch, oa.BiasHeads = hideA, 1, 1
			ob := o
			ob.Bias, ob.BiasBatch, ob.BiasHeads, ob.Sinks = hideB, 1, 1, nil // the sink goes with part A only
			outA, lseA, err := Forward(q, k, v, s, oa)
			ensure.NoError(t, err)
			outB, lseB, err := Forward(q, k, v, s, ob)
			ensure.NoError(t, err)
			got, gotL, err := Merge(outA, lseA, outB, lseB, s.Dv)
			ensure.NoError(t, err)
			expect.LessOrEqual(t, golden.NormwiseRelErr(got, want), tiledBound, "%v cut %d", layout, cut)
			expect.LessOrEqual(t, golden.NormwiseRelErr(gotL, wantL), tiledBound, "%v cut %d", layout, cut)
			// Commutative: exactly, since the formula is symmetric in A, B
			// except for the order of one addition of two terms.
			got2, gotL2, err := Merge(outB, lseB, outA, lseA, s.Dv)
			ensure.NoError(t, err)
			expect.Equal(t, gotL, gotL2)
			expect.LessOrEqual(t, golden.NormwiseRelErr(got2, got), 1e-15)
		}
	}
}

// checkMergeSpecialCases checks the special cases of Merge's
// documentation on a merge of either precision: both parts empty give 0
// and −Inf (the EmptyRowZero convention), one empty part gives the other
// exactly, a NaN lse gives a NaN row.
func checkMergeSpecialCases[T num.Float](t *testing.T, merge func(outA, lseA, outB, lseB []T, dv int) ([]T, []T, error)) {
	t.Helper()
	inf := T(math.Inf(-1))
	o, l, err := merge([]T{0, 0}, []T{inf}, []T{0, 0}, []T{inf}, 2)
	ensure.NoError(t, err)
	expect.Equal(t, []T{0, 0}, o)
	expect.Equal(t, []T{inf}, l)
	o, l, err = merge([]T{0.1, -0.7}, []T{3.25}, []T{0, 0}, []T{inf}, 2)
	ensure.NoError(t, err)
	expect.Equal(t, []T{0.1, -0.7}, o)
	expect.Equal(t, []T{3.25}, l)
	o, l, err = merge([]T{1}, []T{T(math.NaN())}, []T{1}, []T{0}, 1)
	ensure.NoError(t, err)
	expect.True(t, o[0] != o[0] && l[0] != l[0])
}

func TestMergeSpecialCases(t *testing.T) {
	checkMergeSpecialCases(t, Merge)
	// Worked value [mpmath, 40 digits]: x = [1, 3, 2] has lse
	// 3.4076059644443803; merging the part {1, 3} (lse = log(e + e³)) with
	// {2} must give it. Outputs are the weights when V = e_j.
	// (the inputs through elem, so that they are the same bits on every
	// machine: math.Log and math.Exp differ in the last bit on s390x)
	la := elem.Log(math.E + elem.Exp(3))
	pa0 := elem.Exp(1 - la)
	pa1 := elem.Exp(3 - la)
	o, l, err := Merge([]float64{pa0, pa1, 0}, []float64{la}, []float64{0, 0, 1}, []float64{2}, 3)
	ensure.NoError(t, err)
	// lse = m + log(Σ e^(lse_i − m)): two correctly rounded exps, a
	// rounded sum, a correctly rounded log and a rounded addition, each
	// within half an ulp of its result; the error at 3.4 stays within 2
	// ulps (the value reached is 1 ulp above the nearest float64).
	const want = 3.4076059644443803
	expect.InDelta(t, want, l[0], 2*(math.Nextafter(want, math.Inf(1))-want))
	weights := []float64{0.090030573170380458, 0.66524095577482189, 0.24472847105479765}
	expect.LessOrEqual(t, golden.NormwiseRelErr(o, weights), 1e-15)
}

// TestDecodeReproducesPrefill decodes one token at a time against a growing
// cache and checks that each step gives, bit for bit, the row of the full
// causal prefill: the direct form computes each row the same way, and the
// hidden keys of the prefill row add exact zeros. The same holds for
// Decode32 against Forward32, the same body in float32.
func TestDecodeReproducesPrefill(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	checkDecodePrefill(t, r, Forward, Decode)
	checkDecodePrefill(t, r, Forward32, Decode32)
}

func checkDecodePrefill[T num.Float](t *testing.T, r *rand.Rand,
	forward func(q, k, v []T, s Shape, o Options) ([]T, []T, error),
	decode func(q, kCache, vCache []T, s Shape, pos int, o Options) ([]T, []T, error)) {
	win, _ := mask.Window(3)
	for _, tc := range []struct {
		name string
		mask mask.Mask
		o    Options
	}{
		{"causal", mask.Causal(), Options{}},
		{"window", win, Options{Mask: win}},
		{"grouped_alibi_sinks_seq_major", mask.Causal(), Options{Layout: SeqMajor, Slopes: []float64{0.5, 0.25, 0.125, 0.0625}, Sinks: []float64{0, 1, -1, 0.5}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			L := 7
			s := Shape{Batch: 2, HeadsQ: 4, HeadsKV: 2, Lq: L, Lk: L, Dk: 3, Dv: 5}
			q64, k64, v64 := randCase(r, s)
			q, k, v := num.Convert[T](q64), num.Convert[T](k64), num.Convert[T](v64)
			full := tc.o
			full.Mask = tc.mask
			want, wantL, err := forward(q, k, v, s, full)
			ensure.NoError(t, err)
			p := &plan{s: s, layout: tc.o.Layout}
			for pos := range L {
				// Step pos: one query against the pos+1 cached keys.
				st := s
				st.Lq, st.Lk = 1, pos+1
				q1 := slice(p, q, s.HeadsQ, L, s.Dk, pos, pos+1)
				kc := slice(p, k, s.HeadsKV, L, s.Dk, 0, pos+1)
				vc := slice(p, v, s.HeadsKV, L, s.Dv, 0, pos+1)
				o1, l1, err := decode(q1, kc, vc, st, pos, tc.o)
				ensure.NoError(t, err)
				ensure.Equal(t, slice(p, want, s.HeadsQ, L, s.Dv, pos, pos+1), o1, "step %d", pos)
				ensure.Equal(t, slice(p, wantL, s.HeadsQ, L, 1, pos, pos+1), l1, "step %d", pos)
				// And against the whole cache, future keys present.
				st.Lk = L
				o2, _, err := decode(q1, k, v, st, pos, tc.o)
				ensure.NoError(t, err)
				ensure.Equal(t, o1, o2, "step %d, full cache", pos)
			}
		})
	}
}

// slice cuts rows i0 … i1−1 of every head out of a tensor with H heads of
// L rows of D values, in p's layout.
func slice[T num.Float](p *plan, x []T, H, L, D, i0, i1 int) []T {
	n := i1 - i0
	out := make([]T, p.s.Batch*H*n*D)
	for b := range p.s.Batch {
		for h := range H {
			for i := i0; i < i1; i++ {
				copy(out[off(p.layout, b, h, i-i0, H, n, D):][:D], x[off(p.layout, b, h, i, H, L, D):][:D])
			}
		}
	}
	return out
}

// mergeBound: each merged value is at most two products and a sum away
// from the exact result, after an exp and a log: a few ulps.
const mergeBound = 1e-15

// goldenMerge checks a merge against the golden merge cases, within bound
// (float64) or golden32Bound (float32, on the parts rounded to float32).
func goldenMerge[T num.Float](t *testing.T, name string, bound float64, run func(outA, lseA, outB, lseB []T, dv int) (out, lse []T, err error)) {
	f := golden.MustLoadFamily(t, "attention", "merge")
	if is32[T]() {
		bound = golden32Bound
	}
	for _, c := range f.Cases {
		t.Run(c.Name, func(t *testing.T) {
			var cfg struct {
				Rows int `json:"rows"`
				Dv   int `json:"dv"`
			}
			ensure.NoError(t, c.DecodeConfig(&cfg))
			get := func(n string) []T {
				x, _, err := c.Float(n)
				ensure.NoError(t, err)
				return num.Convert[T](x)
			}
			want := func(n string) []float64 {
				x, _, err := c.Float(n)
				ensure.NoError(t, err)
				return x
			}
			out, lse, err := run(get("out_a"), get("lse_a"), get("out_b"), get("lse_b"), cfg.Dv)
			ensure.NoError(t, err)
			eo := golden.NormwiseRelErr(num.Convert[float64](out), want("out"))
			el := golden.NormwiseRelErr(num.Convert[float64](lse), want("lse"))
			accuracy.Note(name, "out", eo)
			accuracy.Note(name, "lse", el)
			expect.LessOrEqual(t, eo, bound, golden.Describe(c, "out", eo, bound))
			expect.LessOrEqual(t, el, bound, golden.Describe(c, "lse", el, bound))
		})
	}
}

func TestGoldenMerge(t *testing.T)   { goldenMerge(t, "Merge", mergeBound, Merge) }
func TestGoldenMerge32(t *testing.T) { goldenMerge(t, "Merge32", 0, Merge32) }

// TestNoKeysUnderEmptyRowNaN: with Lk = 0 every row sees no key, and every
// form, float64 and float32, gives the documented EmptyRowNaN output (NaN) and log-sum-exp (−Inf),
// or 0 under EmptyRowZero.
func TestNoKeysUnderEmptyRowNaN(t *testing.T) {
	s := Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 3, Lk: 0, Dk: 4, Dv: 2}
	q := make([]float64, 2*3*4)
	for _, policy := range []EmptyRow{EmptyRowNaN, EmptyRowZero} {
		o := Options{EmptyRow: policy}
		widen := func(out, lse []float32, err error) ([]float64, []float64, error) {
			return num.Convert[float64](out), num.Convert[float64](lse), err
		}
		q32 := num.Convert[float32](q)
		forms := map[string]func() ([]float64, []float64, error){
			"Forward":        func() ([]float64, []float64, error) { return Forward(q, nil, nil, s, o) },
			"ForwardFast":    func() ([]float64, []float64, error) { return ForwardFast(q, nil, nil, s, o) },
			"ForwardTiled":   func() ([]float64, []float64, error) { return ForwardTiled(q, nil, nil, s, 2, o) },
			"Forward32":      func() ([]float64, []float64, error) { return widen(Forward32(q32, nil, nil, s, o)) },
			"ForwardFast32":  func() ([]float64, []float64, error) { return widen(ForwardFast32(q32, nil, nil, s, o)) },
			"ForwardTiled32": func() ([]float64, []float64, error) { return widen(ForwardTiled32(q32, nil, nil, s, 2, o)) },
		}
		for name, f := range forms {
			out, lse, err := f()
			ensure.NoError(t, err, name)
			ensure.Len(t, out, 2*3*2, name)
			for _, v := range out {
				if policy == EmptyRowNaN {
					ensure.True(t, math.IsNaN(v), "%s under %v: output %v, want NaN", name, policy, v)
				} else {
					ensure.Equal(t, 0.0, v, "%s under %v", name, policy)
				}
			}
			for _, l := range lse {
				ensure.True(t, math.IsInf(l, -1), "%s: lse %v, want −Inf", name, l)
			}
		}
	}
}
