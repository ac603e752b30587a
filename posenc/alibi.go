package posenc

import (
	"fmt"
	"math"
	"math/bits"

	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/vocab"
	"github.com/plumbref/plumb/mask"
)

// ALiBiSlopes returns the per-head slopes of ALiBi (Press et al. 2022,
// "Train Short, Test Long: Attention with Linear Biases Enables Input
// Length Extrapolation", arXiv 2108.12409, §3): for n heads, n a power of
// two,
//
//	m_k = 2^{−8k/n},  k = 1 … n
//
// (8 heads: 1/2, 1/4, …, 1/256, as the paper lists). For other n the rule of
// the authors' published code: with c = 2^{⌊log₂ n⌋}, the c-head slopes,
// followed by the 2c-head slopes at 0-based positions 0, 2, 4, … until there
// are n, that is 2^{−4(2j+1)/c} for j = 0 … n−c−1. Slope h belongs to head h.
//
// Each slope is the float64 nearest to the exact power of two (integer
// exponents are exact; fractional ones are evaluated in double-double and
// rounded once), so the slopes are bit-exact against 50-digit values.
//
// Special cases are:
//
//	heads = 1              [2^{−8}]
//	heads ≤ 0              ErrHeads
//	heads > MaxElements    ErrHeads
func ALiBiSlopes(heads int) ([]float64, error) {
	if heads <= 0 || heads > MaxElements {
		return nil, fmt.Errorf("%w: ALiBiSlopes: heads = %d; want 1 ≤ heads ≤ MaxElements = %d", ErrHeads, heads, MaxElements)
	}
	c := 1 << (bits.Len(uint(heads)) - 1)
	out := make([]float64, 0, heads)
	for k := 1; k <= c; k++ {
		out = append(out, exp2Neg(8*k, c))
	}
	for j := 0; len(out) < heads; j++ {
		out = append(out, exp2Neg(4*(2*j+1), c))
	}
	return out, nil
}

// exp2Neg is 2^{−num/den} for num ≥ 0, den > 0, correctly rounded.
func exp2Neg(num, den int) float64 {
	k, rem := num/den, num%den
	v := 1.0
	if rem != 0 {
		f := ddDiv(ddFrom(float64(rem)), ddFrom(float64(den)))
		e := ddExp(ddNeg(ddMul(f, ddLn2)))
		v = e.hi + e.lo
	}
	return math.Ldexp(v, -k)
}

// ALiBiBias returns the additive ALiBi bias for the given slopes (one per
// head, usually from ALiBiSlopes) as a row-major [H, Lq, Lk] array, H =
// len(slopes), to be added to the scaled attention logits q·k/√d of every
// batch entry (Press et al. 2022 §3: softmax(q_i Kᵀ + m·[−(i−1), …, 0])).
// Query i sits at key position p(i) as the mask package defines it:
//
//	p(i) = Lk − Lq + i + Offset (mask.AlignEnd),  i + Offset (mask.AlignStart),
//
// and bias[h, i, j] = −m_h·d(p(i), j), with the distance d of the form
// (mask.ALiBiForm.Distance):
//
//	mask.ALiBiCausal     d = p(i) − j            the paper's formula, for every key
//	mask.ALiBiSymmetric  d = |p(i) − j|          common practice without a causal mask
//	mask.ALiBiPastOnly   d = max(p(i) − j, 0)
//
// For the keys up to the query, j ≤ p(i), the three forms agree:
// −m_h·(p(i) − j), as in the paper. They differ only for the keys after it,
// j > p(i): the causal form gives them m_h·(j − p(i)), of the opposite sign
// to the keys before (positive for a positive slope), the symmetric form
// −m_h·(j − p(i)) and the past-only form 0. The bias hides no key; under a
// causal mask with the same Geometry (mask.Causal), which hides exactly the
// keys after the query, all three forms give the same attention.
//
// Each entry is the one rounding of the product of the slope and the exact
// integer distance, so it is bit-exact. g.Batch is not used: the bias is the
// same for every batch entry.
//
// Special cases are:
//
//	Lq = 0 or Lk = 0                empty result
//	d(p(i), j) = 0                  +0 (j = p(i); with the past-only form every j ≥ p(i))
//	slope ±0, d ≠ 0                 ∓0 for d > 0, ±0 for d < 0 (the sign of −m·d)
//	no slopes                       ErrHeads
//	NaN or ±Inf slope               ErrHeads
//	negative Lq, Lk or Batch        ErrShape
//	H·Lq·Lk > MaxElements           ErrShape
//	g.Align or form not one of its constants  ErrOption, also wrapping mask.ErrAlign or mask.ErrALiBi
//	p(i) outside 0 … Lk−1 with the causal or past-only form  ErrPosition
//	|Offset| or |p(i)| > MaxPosition  ErrPosition
func ALiBiBias(slopes []float64, g mask.Geometry, form mask.ALiBiForm) ([]float64, error) {
	return alibiBias("ALiBiBias", slopes, g, form)
}

// ALiBiBias32 is the float32 instantiation of the same body as ALiBiBias:
// the straightforward low-precision implementation the compare package uses
// as a yardstick; not a reference. Each entry is the float32 product of the
// float32 slope and the distance (exact in float32 up to 2^24).
func ALiBiBias32(slopes []float32, g mask.Geometry, form mask.ALiBiForm) ([]float32, error) {
	return alibiBias("ALiBiBias32", slopes, g, form)
}

func alibiBias[T num.Float](fn string, slopes []T, g mask.Geometry, form mask.ALiBiForm) ([]T, error) {
	if len(slopes) == 0 {
		return nil, fmt.Errorf("%w: %s: slopes has 0 elements; want one per head", ErrHeads, fn)
	}
	for h, m := range slopes {
		if math.IsNaN(float64(m)) || math.IsInf(float64(m), 0) {
			return nil, fmt.Errorf("%w: %s: slopes[%d] = %v; want a finite number", ErrHeads, fn, h, m)
		}
	}
	for _, s := range []struct {
		name string
		v    int
	}{{"Batch", g.Batch}, {"Lq", g.Lq}, {"Lk", g.Lk}} {
		if s.v < 0 {
			return nil, fmt.Errorf("%w: %s: g.%s = %d; want ≥ 0", ErrShape, fn, s.name, s.v)
		}
	}
	if err := g.Align.Check(); err != nil {
		return nil, vocab.At(err, ErrOption, fn+": g.Align")
	}
	if err := form.Check(); err != nil {
		return nil, vocab.At(err, ErrOption, fn+": form")
	}
	H := len(slopes)
	// Each factor is checked before the next multiplication, so that the
	// product cannot wrap around.
	if g.Lq > 0 && g.Lk > 0 && (H > MaxElements || g.Lq > MaxElements/H || g.Lk > MaxElements/(H*g.Lq)) {
		return nil, fmt.Errorf("%w: %s: H·Lq·Lk = %d·%d·%d; want at most MaxElements = %d elements", ErrShape, fn, H, g.Lq, g.Lk, MaxElements)
	}
	if g.Lq > 0 {
		// Offset first, so that p(i) cannot overflow.
		if err := checkPosition(fn, "g.Offset", g.Offset, true); err != nil {
			return nil, err
		}
		first, last := g.Pos(0), g.Pos(g.Lq-1)
		if err := checkPosition(fn, "the first query position p(0)", first, true); err != nil {
			return nil, err
		}
		if err := checkPosition(fn, "the last query position p(Lq−1)", last, true); err != nil {
			return nil, err
		}
		if form != mask.ALiBiSymmetric && (first < 0 || last >= g.Lk) {
			return nil, fmt.Errorf("%w: %s: query positions p(0) … p(Lq−1) = %d … %d (g = %v); want them within 0 … Lk−1 = %d for the %s form",
				ErrPosition, fn, first, last, g, g.Lk-1, form)
		}
	}
	out := make([]T, H*g.Lq*g.Lk)
	for h, m := range slopes {
		for i := range g.Lq {
			p := g.Pos(i)
			row := out[(h*g.Lq+i)*g.Lk : (h*g.Lq+i+1)*g.Lk]
			for j := range row {
				if d := form.Distance(p, j); d != 0 {
					row[j] = -T(m * T(d))
				}
			}
		}
	}
	return out, nil
}
