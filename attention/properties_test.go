package attention

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
)

// randOptions draws options valid for s: layout, grouping, a mask among
// the kinds that fit, and optionally ALiBi, a cap, sinks and a bias.
func randOptions(r *rand.Rand, s Shape) Options {
	o := Options{Layout: Layout(r.IntN(2)), Group: GroupMap(r.IntN(2))}
	if s.Lq <= s.Lk {
		switch r.IntN(4) {
		case 1:
			o.Mask = mask.Causal()
		case 2:
			o.Mask, _ = mask.Window(1 + r.IntN(4))
		case 3:
			o.Mask, _ = mask.Prefix(r.IntN(s.Lk + 1))
		}
		if r.IntN(3) == 0 {
			o.Slopes = make([]float64, s.HeadsQ)
			for h := range o.Slopes {
				o.Slopes[h] = math.Ldexp(1, -1-h)
			}
			o.ALiBi = mask.ALiBiForm(r.IntN(3))
		}
	}
	if r.IntN(3) == 0 {
		o.SoftCap = 0.5 + 3*r.Float64()
	}
	if r.IntN(3) == 0 {
		o.Sinks = make([]float64, s.HeadsQ)
		for h := range o.Sinks {
			o.Sinks[h] = r.NormFloat64()
		}
	}
	if r.IntN(3) == 0 {
		o.BiasBatch, o.BiasHeads = []int{1, s.Batch}[r.IntN(2)], []int{1, s.HeadsQ}[r.IntN(2)]
		o.Bias = make([]float64, o.BiasBatch*o.BiasHeads*s.Lq*s.Lk)
		for i := range o.Bias {
			o.Bias[i] = r.NormFloat64()
		}
	}
	return o
}

// forwardPlan runs Forward and returns its results with the plan it made.
func forwardPlan(t *testing.T, q, k, v []float64, s Shape, o Options) (out, lse []float64, p *plan) {
	t.Helper()
	out, lse, err := Forward(q, k, v, s, o)
	ensure.NoError(t, err)
	p, err = newPlan("Forward", len(q), len(k), len(v), s, &o)
	ensure.NoError(t, err)
	return out, lse, p
}

// trials is the number of random trials: n, or short under go test -short.
func trials(n, short int) int {
	if testing.Short() {
		n = short
	}
	return n
}

// randNorm is n standard normal values.
func randNorm(r *rand.Rand, n int) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = r.NormFloat64()
	}
	return x
}

func randShape(r *rand.Rand, maxL int) Shape {
	hkv := 1 + r.IntN(3)
	return Shape{Batch: 1 + r.IntN(2), HeadsQ: hkv * (1 + r.IntN(3)), HeadsKV: hkv, Lq: 1 + r.IntN(maxL), Lk: 1 + r.IntN(maxL), Dk: 1 + r.IntN(6), Dv: 1 + r.IntN(6)}
}

// With V = the identity (Dv = Lk, V_j = e_j) the output row is the row of
// probabilities. They are ≥ 0, 0 on hidden keys, and sum to 1 − P_sink,
// P_sink = e^{σ − lse}.
func TestPropertyProbabilitiesSumToOne(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 12))
	for trial := range 60 {
		s := randShape(r, 9)
		s.Dv = s.Lk
		o := randOptions(r, s)
		q, k, _ := randCase(r, s)
		v := make([]float64, s.vLen())
		p := &plan{s: s, layout: o.Layout}
		for b := range s.Batch {
			for h := range s.HeadsKV {
				for j := range s.Lk {
					v[p.vOff(b, h, j)+j] = 1
				}
			}
		}
		out, lse, pl := forwardPlan(t, q, k, v, s, o)
		for r := range pl.rows {
			row := out[p.oOff(r.b, r.h, r.i):][:s.Dv]
			want := 1.0
			if o.Sinks != nil {
				want -= math.Exp(o.Sinks[r.h] - lse[p.lOff(r.b, r.h, r.i)])
			}
			var sum float64
			for j, x := range row {
				ensure.GreaterOrEqual(t, x, 0.0)
				if !pl.visible(r.b, r.i, j) {
					ensure.Zero(t, x, "trial %d: hidden key %d has weight", trial, j)
				}
				sum += x
			}
			// Each weight carries a few roundings (exp, one division):
			// |Σ − 1| ≤ Lk·4·2⁻⁵³ + the rounding of the sum, far below
			// 1e-14 for Lk ≤ 9.
			expect.InDelta(t, want, sum, 1e-14, "trial %d row %+v", trial, r)
		}
	}
}

// Each output row is a convex combination of the visible V rows (or, with
// a sink, a combination with weights summing to less than one, so a point
// of the hull of those rows and 0): every coordinate lies between the
// smallest and the largest of that coordinate over the visible rows.
func TestPropertyConvexHull(t *testing.T) {
	r := rand.New(rand.NewPCG(13, 14))
	for trial := range 60 {
		s := randShape(r, 9)
		o := randOptions(r, s)
		q, k, v := randCase(r, s)
		out, _, pl := forwardPlan(t, q, k, v, s, o)
		for r := range pl.rows {
			row := out[pl.oOff(r.b, r.h, r.i):][:s.Dv]
			for d, x := range row {
				lo, hi := math.Inf(1), math.Inf(-1)
				if o.Sinks != nil {
					lo, hi = 0, 0
				}
				for j := range s.Lk {
					if pl.visible(r.b, r.i, j) {
						y := v[pl.vOff(r.b, r.kv, j)+d]
						lo, hi = min(lo, y), max(hi, y)
					}
				}
				if math.IsInf(lo, 1) { // empty row: 0 under EmptyRowZero
					ensure.Zero(t, x)
					continue
				}
				// Rounding of a sum of Lk ≤ 9 terms of size ≤ 1: below
				// 16·2⁻⁵³ ≈ 1.8e-15.
				const slack = 2e-15
				ensure.True(t, lo-slack <= x && x <= hi+slack, "trial %d: %v outside [%v, %v]", trial, x, lo, hi)
			}
		}
	}
}

// Permuting the keys and the values together (same permutation) leaves the
// output of a mask-free, position-free call unchanged up to the order of
// the sums.
func TestPropertyKeyPermutation(t *testing.T) {
	r := rand.New(rand.NewPCG(15, 16))
	for trial := range 40 {
		s := randShape(r, 12)
		o := Options{Layout: Layout(r.IntN(2)), Group: GroupMap(r.IntN(2)), SoftCap: []float64{0, 2}[r.IntN(2)]}
		q, k, v := randCase(r, s)
		want, wantL, err := Forward(q, k, v, s, o)
		ensure.NoError(t, err)
		perm := r.Perm(s.Lk)
		p := &plan{s: s, layout: o.Layout}
		k2, v2 := make([]float64, len(k)), make([]float64, len(v))
		for b := range s.Batch {
			for h := range s.HeadsKV {
				for j, pj := range perm {
					copy(k2[p.kOff(b, h, j):][:s.Dk], k[p.kOff(b, h, pj):][:s.Dk])
					copy(v2[p.vOff(b, h, j):][:s.Dv], v[p.vOff(b, h, pj):][:s.Dv])
				}
			}
		}
		got, gotL, err := Forward(q, k2, v2, s, o)
		ensure.NoError(t, err)
		// Different summation orders of ≤ 12 terms: a few ulps.
		expect.LessOrEqual(t, golden.NormwiseRelErr(got, want), 1e-15, "trial %d", trial)
		expect.LessOrEqual(t, golden.NormwiseRelErr(gotL, wantL), 1e-15, "trial %d", trial)
	}
}

// Grouped attention is multi-head attention with each kv head repeated for
// the query heads that read it; the direct form does the same arithmetic in
// both cases, so the results are bit-identical (forward, and backward with
// the repeated heads' dK, dV summed in the same order).
func TestPropertyGroupedEqualsRepeated(t *testing.T) {
	r := rand.New(rand.NewPCG(17, 18))
	for trial := range 30 {
		s := randShape(r, 8)
		s.HeadsKV = 1 + r.IntN(3)
		s.HeadsQ = s.HeadsKV * (2 + r.IntN(2))
		o := randOptions(r, s)
		q, k, v := randCase(r, s)
		pl, err := newPlan("Forward", len(q), len(k), len(v), s, &o)
		ensure.NoError(t, err)
		m := s
		m.HeadsKV = s.HeadsQ
		pm := &plan{s: m, layout: o.Layout}
		k2, v2 := make([]float64, m.kLen()), make([]float64, m.vLen())
		for b := range s.Batch {
			for h := range s.HeadsQ {
				for j := range s.Lk {
					copy(k2[pm.kOff(b, h, j):][:s.Dk], k[pl.kOff(b, pl.kvHead(h), j):][:s.Dk])
					copy(v2[pm.vOff(b, h, j):][:s.Dv], v[pl.vOff(b, pl.kvHead(h), j):][:s.Dv])
				}
			}
		}
		want, wantL, err := Forward(q, k2, v2, m, o)
		ensure.NoError(t, err)
		got, gotL, err := Forward(q, k, v, s, o)
		ensure.NoError(t, err)
		ensure.Equal(t, want, got, "trial %d %v", trial, o.Group)
		ensure.Equal(t, wantL, gotL)
		// Backward: dQ identical; dK of the grouped call is the sum over
		// the group of the repeated call's dK (the direct form adds the
		// group's contributions key by key in head order, not head by
		// head, so compare within a few ulps).
		dOut := randNorm(r, s.oLen())
		gm, err := Backward(q, k2, v2, dOut, nil, m, o)
		ensure.NoError(t, err)
		gg, err := Backward(q, k, v, dOut, nil, s, o)
		ensure.NoError(t, err)
		ensure.Equal(t, gm.DQ, gg.DQ)
		sumK, sumV := make([]float64, s.kLen()), make([]float64, s.vLen())
		for b := range s.Batch {
			for h := range s.HeadsQ {
				for j := range s.Lk {
					dst, src := sumK[pl.kOff(b, pl.kvHead(h), j):][:s.Dk], gm.DK[pm.kOff(b, h, j):][:s.Dk]
					for d := range dst {
						dst[d] += src[d]
					}
					dst, src = sumV[pl.vOff(b, pl.kvHead(h), j):][:s.Dv], gm.DV[pm.vOff(b, h, j):][:s.Dv]
					for d := range dst {
						dst[d] += src[d]
					}
				}
			}
		}
		expect.LessOrEqual(t, golden.NormwiseRelErr(gg.DK, sumK), 1e-14, "trial %d", trial)
		expect.LessOrEqual(t, golden.NormwiseRelErr(gg.DV, sumV), 1e-14, "trial %d", trial)
	}
}

// Backward agrees with central differences of the scalar loss
// L = Σ dOut·O + Σ dLSE·lse, for Q, K, V, the sinks and the bias, under
// every option.
func TestPropertyFiniteDifferences(t *testing.T) {
	r := rand.New(rand.NewPCG(19, 20))
	for trial := range trials(25, 8) {
		s := randShape(r, 6)
		o := randOptions(r, s)
		q, k, v := randCase(r, s)
		dOut, dLSE := randNorm(r, s.oLen()), randNorm(r, s.lseLen())
		loss := func() float64 {
			out, lse, err := Forward(q, k, v, s, o)
			ensure.NoError(t, err)
			var l float64
			for i, x := range out {
				l += dOut[i] * x
			}
			for i, x := range lse {
				if !math.IsInf(x, -1) { // empty rows: constant
					l += dLSE[i] * x
				}
			}
			return l
		}
		g, err := Backward(q, k, v, dOut, dLSE, s, o)
		ensure.NoError(t, err)
		for _, tc := range []struct {
			name string
			x    []float64
			grad []float64
		}{{"Q", q, g.DQ}, {"K", k, g.DK}, {"V", v, g.DV}, {"Sinks", o.Sinks, g.DSinks}, {"Bias", o.Bias, g.DBias}} {
			num := make([]float64, len(tc.x))
			for i := range tc.x {
				// Central difference: truncation error O(h²) with
				// derivatives of order 1, rounding error about
				// 2⁻⁵³·|L|/h; h = 1e-5 balances them near 1e-10.
				const h = 1e-5
				x0 := tc.x[i]
				tc.x[i] = x0 + h
				lp := loss()
				tc.x[i] = x0 - h
				lm := loss()
				tc.x[i] = x0
				num[i] = (lp - lm) / (2 * h)
			}
			// With errors near 1e-10 in each entry of a gradient of norm
			// about 1, 1e-7 is a bound that a wrong formula cannot meet.
			e := golden.NormwiseRelErr(tc.grad, num)
			if len(num) > 0 && normInf(num) < 1e-6 {
				e = maxAbsDiff(tc.grad, num) // a gradient near 0: compare absolutely
			}
			expect.LessOrEqual(t, e, 1e-7, "trial %d %s: %+v %+v", trial, tc.name, s, o)
		}
	}
}

func normInf(x []float64) float64 {
	var m float64
	for _, v := range x {
		m = max(m, math.Abs(v))
	}
	return m
}

func maxAbsDiff(a, b []float64) float64 {
	var m float64
	for i := range a {
		m = max(m, math.Abs(a[i]-b[i]))
	}
	return m
}

// sameBits returns "" when got and want are the same bits element by
// element (NaN payloads included), or where they first differ.
func sameBits[T num.Float](got, want []T) string {
	if len(got) != len(want) || (got == nil) != (want == nil) {
		return fmt.Sprintf("lengths %d and %d", len(got), len(want))
	}
	for i := range got {
		if math.Float64bits(float64(got[i])) != math.Float64bits(float64(want[i])) {
			return fmt.Sprintf("element %d: %v, want %v", i, got[i], want[i])
		}
	}
	return ""
}

// checkFastIsDirect requires the fast forms to give the direct forms'
// results bit for bit on one problem, in float64 and in float32.
func checkFastIsDirect(t *testing.T, trial int, q, k, v, dOut []float64, s Shape, o Options) {
	t.Helper()
	want, wantL, err := Forward(q, k, v, s, o)
	ensure.NoError(t, err)
	got, gotL, err := ForwardFast(q, k, v, s, o)
	ensure.NoError(t, err)
	for _, c := range []struct {
		name      string
		got, want []float64
	}{{"out", got, want}, {"lse", gotL, wantL}} {
		if d := sameBits(c.got, c.want); d != "" {
			t.Fatalf("trial %d, %v %+v: ForwardFast %s differs from Forward's: %s", trial, s, o, c.name, d)
		}
	}
	q32, k32, v32, d32 := num.Convert[float32](q), num.Convert[float32](k), num.Convert[float32](v), num.Convert[float32](dOut)
	w32, wl32, err := Forward32(q32, k32, v32, s, o)
	ensure.NoError(t, err)
	g32, gl32, err := ForwardFast32(q32, k32, v32, s, o)
	ensure.NoError(t, err)
	if d := sameBits(g32, w32) + sameBits(gl32, wl32); d != "" {
		t.Fatalf("trial %d, %v %+v: ForwardFast32 differs from Forward32: %s", trial, s, o, d)
	}
	dlse := randNorm(rand.New(rand.NewPCG(uint64(trial), 1)), s.lseLen())
	gw, err := Backward(q, k, v, dOut, dlse, s, o)
	ensure.NoError(t, err)
	gf, err := BackwardFast(q, k, v, dOut, dlse, s, o)
	ensure.NoError(t, err)
	for i, c := range [][2][]float64{{gf.DQ, gw.DQ}, {gf.DK, gw.DK}, {gf.DV, gw.DV}, {gf.DSinks, gw.DSinks}, {gf.DBias, gw.DBias}} {
		if d := sameBits(c[0], c[1]); d != "" {
			t.Fatalf("trial %d, %v %+v: BackwardFast %s differs from Backward's: %s", trial, s, o, []string{"dQ", "dK", "dV", "dSinks", "dBias"}[i], d)
		}
	}
	bw, err := Backward32(q32, k32, v32, d32, num.Convert[float32](dlse), s, o)
	ensure.NoError(t, err)
	bf, err := BackwardFast32(q32, k32, v32, d32, num.Convert[float32](dlse), s, o)
	ensure.NoError(t, err)
	for i, c := range [][2][]float32{{bf.DQ, bw.DQ}, {bf.DK, bw.DK}, {bf.DV, bw.DV}, {bf.DSinks, bw.DSinks}, {bf.DBias, bw.DBias}} {
		if d := sameBits(c[0], c[1]); d != "" {
			t.Fatalf("trial %d, %v %+v: BackwardFast32 %s differs from Backward32's: %s", trial, s, o, []string{"dQ", "dK", "dV", "dSinks", "dBias"}[i], d)
		}
	}
}

// TestFastIsDirect: the fast forms are the direct forms bit for bit
// (ForwardFast's and BackwardFast's documentation), on random problems of
// more than one row block with every option: layouts, grouping, masks,
// ALiBi, a cap, sinks, broadcast biases, empty rows under either
// convention; and with an Inf or NaN in V, Q, K or dOut at a hidden key.
func TestFastIsDirect(t *testing.T) {
	r := rand.New(rand.NewPCG(21, 22))
	for trial := range trials(16, 4) {
		s := randShape(r, 150)
		s.Lq = 65 + r.IntN(100)
		s.Lk = s.Lq + r.IntN(40)
		s.Dk, s.Dv = 8+r.IntN(9), 8+r.IntN(9)
		o := randOptions(r, s)
		if r.IntN(2) == 0 {
			o.EmptyRow = EmptyRowNaN
		}
		if trial%4 == 3 {
			// Rows that see no key: a prefix of 0 keys.
			o.Mask, _ = mask.Prefix(0)
			o.Sinks = nil
		}
		q, k, v := randCase(r, s)
		checkFastIsDirect(t, trial, q, k, v, randNorm(r, s.oLen()), s, o)
	}
	// A non-finite value where a weight is 0: the last key, hidden from
	// every row but the last by the causal mask; the last query, whose
	// gradient meets the hidden keys.
	s := Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 70, Lk: 70, Dk: 5, Dv: 6}
	for i, x := range []float64{math.Inf(1), math.NaN()} {
		for _, in := range []string{"v", "k", "q", "dout"} {
			q, k, v := randCase(r, s)
			dOut := randNorm(r, s.oLen())
			switch in {
			case "v":
				v[s.vLen()-1] = x
			case "k":
				k[s.kLen()-1] = x
			case "q":
				q[s.qLen()-1] = x
			case "dout":
				dOut[0] = x
			}
			checkFastIsDirect(t, 100+i, q, k, v, dOut, s, Options{Mask: mask.Causal(), Layout: SeqMajor})
		}
	}
}

// The fast form gives bit-identical results for any GOMAXPROCS.
func TestPropertyDeterministicAcrossGOMAXPROCS(t *testing.T) {
	r := rand.New(rand.NewPCG(23, 24))
	s := Shape{Batch: 2, HeadsQ: 4, HeadsKV: 2, Lq: 150, Lk: 170, Dk: 16, Dv: 12}
	q, k, v := randCase(r, s)
	dOut := randNorm(r, s.oLen())
	o := Options{Mask: mask.Causal(), Sinks: []float64{0, 1, -1, 2}, Bias: make([]float64, s.Lq*s.Lk), BiasBatch: 1, BiasHeads: 1}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	var outs [][]float64
	var grads []Grads
	for _, n := range []int{1, 2, 3} {
		runtime.GOMAXPROCS(n)
		out, _, err := ForwardFast(q, k, v, s, o)
		ensure.NoError(t, err)
		g, err := BackwardFast(q, k, v, dOut, nil, s, o)
		ensure.NoError(t, err)
		outs, grads = append(outs, out), append(grads, g)
	}
	for n := 1; n < len(outs); n++ {
		ensure.Equal(t, outs[0], outs[n])
		ensure.Equal(t, grads[0], grads[n])
	}
}

// The NaN and Inf policy of the package doc.
func TestPropertyNaNInfPolicy(t *testing.T) {
	s := nanInfShape
	r := rand.New(rand.NewPCG(25, 26))
	q, k, v := randCase(r, s)
	forms := map[string]func(q, k, v []float64, o Options) ([]float64, []float64, error){
		"direct": func(q, k, v []float64, o Options) ([]float64, []float64, error) { return Forward(q, k, v, s, o) },
		"tiled": func(q, k, v []float64, o Options) ([]float64, []float64, error) {
			return ForwardTiled(q, k, v, s, 3, o)
		},
		"fast": func(q, k, v []float64, o Options) ([]float64, []float64, error) { return ForwardFast(q, k, v, s, o) },
	}
	for name, f := range forms {
		t.Run(name, func(t *testing.T) {
			checkNaNInfPolicy(t, q, k, v, f)
			checkHiddenInfIgnored(t, q, k, v, f)
			// Every logit near +1000 or −1000: finite, equal to the shifted problem.
			big := make([]float64, 12)
			for _, shift := range []float64{1000, -1000} {
				for i := range big {
					big[i] = shift
				}
				ob, lb, err := f(q, k, v, Options{Bias: big, BiasBatch: 1, BiasHeads: 1})
				ensure.NoError(t, err)
				o0, l0, err := f(q, k, v, Options{})
				ensure.NoError(t, err)
				expect.LessOrEqual(t, golden.NormwiseRelErr(ob, o0), 1e-13, "shift %v", shift)
				for i := range lb {
					// lse shifts by exactly the bias up to the rounding of
					// logits near 1000 (ulp 1.1e-13).
					expect.InDelta(t, l0[i]+shift, lb[i], 1e-12)
				}
			}
		})
	}
}

// nanInfShape is the shape checkNaNInfPolicy and checkHiddenInfIgnored
// work on: two query heads on one kv head, 3 queries, 4 keys.
var nanInfShape = Shape{Batch: 1, HeadsQ: 2, HeadsKV: 1, Lq: 3, Lk: 4, Dk: 2, Dv: 2}

// checkNaNInfPolicy checks the NaN and Inf policy of the package doc for
// a forward form f on nanInfShape: NaN in one query row reaches that row's
// output and lse only; a +Inf logit (through the bias) makes its row NaN;
// rows that see no key are 0 and −Inf, or NaN and −Inf.
func checkNaNInfPolicy[T num.Float](t *testing.T, q, k, v []T, f func(q, k, v []T, o Options) ([]T, []T, error)) {
	t.Helper()
	isNaN := func(x T) bool { return x != x }
	q2 := append([]T(nil), q...)
	q2[2*1] = T(math.NaN()) // head 0, row 1
	out, lse, err := f(q2, k, v, Options{})
	ensure.NoError(t, err)
	for i := range 3 {
		expect.Equal(t, i == 1, isNaN(out[2*i]) && isNaN(lse[i]), "row %d", i)
	}
	expect.False(t, isNaN(out[6]), "head 1 is untouched")
	bias := make([]float64, 12)
	bias[4] = math.Inf(1) // row 1, key 0
	out, lse, err = f(q, k, v, Options{Bias: bias, BiasBatch: 1, BiasHeads: 1})
	ensure.NoError(t, err)
	expect.True(t, isNaN(out[2]) && isNaN(lse[1]))
	expect.False(t, isNaN(out[0]) || isNaN(out[4]))
	pad, _ := mask.KeyPadding([]int{0})
	for _, pol := range []EmptyRow{EmptyRowZero, EmptyRowNaN} {
		out, lse, err := f(q, k, v, Options{Mask: pad, EmptyRow: pol})
		ensure.NoError(t, err)
		for i := range out {
			if pol == EmptyRowZero {
				ensure.Zero(t, out[i])
			} else {
				ensure.True(t, isNaN(out[i]))
			}
		}
		for _, l := range lse {
			ensure.True(t, math.IsInf(float64(l), -1))
		}
	}
}

// checkHiddenInfIgnored: for every form, an Inf in a V row that no query
// sees is ignored (nanInfShape).
func checkHiddenInfIgnored[T num.Float](t *testing.T, q, k, v []T, f func(q, k, v []T, o Options) ([]T, []T, error)) {
	t.Helper()
	v2 := append([]T(nil), v...)
	v2[2*3] = T(math.Inf(1)) // key 3
	pad, _ := mask.KeyPadding([]int{3})
	out, _, err := f(q, k, v2, Options{Mask: pad})
	ensure.NoError(t, err)
	for _, x := range out {
		ensure.False(t, math.IsNaN(float64(x)) || math.IsInf(float64(x), 0))
	}
}

// The plan keeps each row's visible keys as one run; should a mask ever
// show a row keys that are not consecutive, it falls back to the whole
// boolean layout. Both representations must give identical results: here
// the fallback is forced on masks that are runs.
func TestPropertyMaskRunsEqualBooleans(t *testing.T) {
	r := rand.New(rand.NewPCG(27, 28))
	for trial := range 30 {
		s := randShape(r, 70)
		s.Lq = min(s.Lq, s.Lk)
		o := randOptions(r, s)
		if r.IntN(2) == 0 {
			o.Mask, _ = mask.KeyPadding(make([]int, s.Batch))
		}
		q, k, v := randCase(r, s)
		dOut := randNorm(r, s.oLen())
		runs, err := newPlan("Forward", len(q), len(k), len(v), s, &o)
		ensure.NoError(t, err)
		ensure.Nil(t, runs.vis, "every mask kind is a run per row")
		bools, err := newPlan("Forward", len(q), len(k), len(v), s, &o)
		ensure.NoError(t, err)
		m := o.Mask
		if isZeroMask(m) {
			m = mask.Full()
		}
		bools.vis, err = m.Visible(bools.geom)
		ensure.NoError(t, err)
		o1, l1 := forward(runs, q, k, v)
		o2, l2 := forward(bools, q, k, v)
		ensure.Equal(t, o1, o2, "trial %d", trial)
		ensure.Equal(t, l1, l2)
		o1, l1 = forwardFast(runs, q, k, v)
		o2, l2 = forwardFast(bools, q, k, v)
		ensure.Equal(t, o1, o2, "trial %d", trial)
		ensure.Equal(t, l1, l2)
		ensure.Equal(t, backwardFast(runs, q, k, v, dOut, nil), backwardFast(bools, q, k, v, dOut, nil))
		ensure.Equal(t, backward(runs, q, k, v, dOut, nil), backward(bools, q, k, v, dOut, nil))
	}
}
