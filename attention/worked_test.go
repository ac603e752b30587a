package attention

import (
	"math"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/mask"
)

// Published and worked values, each with its source. Tolerances: a value
// given to 17 significant digits is checked to 2 ulps of its magnitude
// (the kernels are accurate to about an ulp on these tiny problems).

func ulps(x float64, n int) float64 {
	return float64(n) * (math.Nextafter(math.Abs(x), math.Inf(1)) - math.Abs(x))
}

func TestWorkedValues(t *testing.T) {
	t.Run("identity", func(t *testing.T) {
		// [mpmath, 40 digits] Vaswani et al. 2017 Eq. (1) with Q = K = I₂,
		// V = [[1,2],[3,4]], d_k = 2 →
		// rows (1.6604769013466861, 2.6604769013466861),
		// (2.3395230986533139, 3.3395230986533139).
		s := Shape{1, 1, 1, 2, 2, 2, 2}
		out, _, err := Forward([]float64{1, 0, 0, 1}, []float64{1, 0, 0, 1}, []float64{1, 2, 3, 4}, s, Options{})
		ensure.NoError(t, err)
		for i, w := range []float64{1.6604769013466861, 2.6604769013466861, 2.3395230986533139, 3.3395230986533139} {
			expect.InDelta(t, w, out[i], ulps(w, 2), "element %d", i)
		}
	})
	t.Run("online softmax", func(t *testing.T) {
		// [mpmath, 40 digits] x = [1, 3, 2] → lse = 3.4076059644443803,
		// softmax = [0.090030573170380458, 0.66524095577482189,
		// 0.24472847105479765]. With q = 1, k = x, Scale = 1 and V = I₃
		// the output is the softmax; the tiled form with blocks of 1 walks
		// Algorithm 3 of Milakov & Gimelshein 2018 key by key.
		s := Shape{1, 1, 1, 1, 3, 1, 3}
		q, k, v := []float64{1}, []float64{1, 3, 2}, []float64{1, 0, 0, 0, 1, 0, 0, 0, 1}
		want := []float64{0.090030573170380458, 0.66524095577482189, 0.24472847105479765}
		for _, block := range []int{0, 1, 2} {
			var out, lse []float64
			var err error
			if block == 0 {
				out, lse, err = Forward(q, k, v, s, Options{Scale: 1})
			} else {
				out, lse, err = ForwardTiled(q, k, v, s, block, Options{Scale: 1})
			}
			ensure.NoError(t, err)
			expect.InDelta(t, 3.4076059644443803, lse[0], ulps(3.4, 2), "block %d", block)
			for j, w := range want {
				expect.InDelta(t, w, out[j], ulps(w, 2), "block %d key %d", block, j)
			}
		}
	})
	t.Run("soft-cap", func(t *testing.T) {
		// [mpmath, 40 digits] Bello et al. 2016: c = 30, s = 100 →
		// c·tanh(s/c) = 29.923739024215118. With
		// one key the log-sum-exp is the capped logit itself.
		s := Shape{1, 1, 1, 1, 1, 1, 1}
		_, lse, err := Forward([]float64{10}, []float64{10}, []float64{1}, s, Options{Scale: 1, SoftCap: 30})
		ensure.NoError(t, err)
		expect.InDelta(t, 29.923739024215118, lse[0], ulps(30, 2))
	})
	t.Run("sink", func(t *testing.T) {
		// Sink logit σ = 0 against one key with logit 0: the key's weight
		// is e⁰/(e⁰ + e⁰) = ½ (the definition of a sink logit, see Options) and
		// lse = log 2.
		s := Shape{1, 1, 1, 1, 1, 1, 1}
		out, lse, err := Forward([]float64{0}, []float64{0}, []float64{6}, s, Options{Sinks: []float64{0}})
		ensure.NoError(t, err)
		expect.Equal(t, 3.0, out[0])
		expect.Equal(t, math.Ln2, lse[0])
	})
	t.Run("grouping", func(t *testing.T) {
		// Ainslie et al. 2023, §2.2 and its overview figure (contiguous
		// groups): H = 8 query heads in G = 2 groups, GroupBlocks maps
		// heads 0–3 → 0 and 4–7 → 1; GroupCycle alternates.
		p := &plan{s: Shape{HeadsQ: 8, HeadsKV: 2}}
		var blocks, cycle []int
		for h := range 8 {
			blocks = append(blocks, p.kvHead(h))
		}
		p.group = GroupCycle
		for h := range 8 {
			cycle = append(cycle, p.kvHead(h))
		}
		expect.Equal(t, []int{0, 0, 0, 0, 1, 1, 1, 1}, blocks)
		expect.Equal(t, []int{0, 1, 0, 1, 0, 1, 0, 1}, cycle)
	})
	t.Run("ALiBi", func(t *testing.T) {
		// Press et al. 2022, §3: the bias of query i over keys 1 … i is
		// m·[−(i−1), …, −1, 0]. With zero queries every logit is the bias
		// alone, so with V = I₄ the last row's weights are
		// e^{−m·(3−j)} / Σ e^{−m·(3−k)}, m = ½ (the first of 8 heads).
		s := Shape{1, 1, 1, 4, 4, 1, 4}
		v := make([]float64, 16)
		for j := range 4 {
			v[j*4+j] = 1
		}
		out, _, err := Forward(make([]float64, 4), make([]float64, 4), v, s, Options{Mask: mask.Causal(), Slopes: []float64{0.5}})
		ensure.NoError(t, err)
		var z float64
		for j := range 4 {
			z += math.Exp(-0.5 * float64(3-j))
		}
		for j := range 4 {
			w := math.Exp(-0.5*float64(3-j)) / z
			expect.InDelta(t, w, out[12+j], ulps(w, 4), "key %d", j)
		}
		// Row 1 sees keys 0 and 1 only (causal).
		expect.Zero(t, out[4+2])
		expect.Zero(t, out[4+3])
	})
	t.Run("ALiBi forms after the query", func(t *testing.T) {
		// mask.ALiBiForm: the bias is −m·d(p, j) with d = p − j (causal,
		// the paper's formula for every key, Press et al. 2022 §3),
		// |p − j| (symmetric) or max(p − j, 0) (past-only; both common
		// practice). With zero queries and no mask, query 0 (p = 0) sees
		// keys 0 … 3 all after or at it, so with V = I₄ its weights are
		// e^{m·j}, e^{−m·j} and uniform, each normalised; m = ½.
		s := Shape{1, 1, 1, 4, 4, 1, 4}
		v := make([]float64, 16)
		for j := range 4 {
			v[j*4+j] = 1
		}
		for _, tc := range []struct {
			form  mask.ALiBiForm
			logit func(j float64) float64
		}{
			{mask.ALiBiCausal, func(j float64) float64 { return 0.5 * j }},
			{mask.ALiBiSymmetric, func(j float64) float64 { return -0.5 * j }},
			{mask.ALiBiPastOnly, func(float64) float64 { return 0 }},
		} {
			out, _, err := Forward(make([]float64, 4), make([]float64, 4), v, s, Options{Slopes: []float64{0.5}, ALiBi: tc.form})
			ensure.NoError(t, err)
			var z float64
			for j := range 4 {
				z += math.Exp(tc.logit(float64(j)))
			}
			for j := range 4 {
				w := math.Exp(tc.logit(float64(j))) / z
				expect.InDelta(t, w, out[j], ulps(w, 4), "%v: key %d", tc.form, j)
			}
		}
	})
	t.Run("window", func(t *testing.T) {
		// mask.Window's definition (n keys ending at the query): Window(3) at
		// i = 5 sees keys {3, 4, 5}.
		win, _ := mask.Window(3)
		s := Shape{1, 1, 1, 6, 6, 1, 6}
		v := make([]float64, 36)
		for j := range 6 {
			v[j*6+j] = 1
		}
		out, _, err := Forward(make([]float64, 6), make([]float64, 6), v, s, Options{Mask: win})
		ensure.NoError(t, err)
		expect.Equal(t, []float64{0, 0, 0, 1.0 / 3, 1.0 / 3, 1.0 / 3}, out[30:36])
	})
}
