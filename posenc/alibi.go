package posenc

import (
	"fmt"
	"math"
	"math/bits"

	"github.com/plumbref/plumb/internal/num"
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
//	heads = 1          [2^{−8}]
//	heads ≤ 0          ErrHeads
func ALiBiSlopes(heads int) ([]float64, error) {
	if heads <= 0 {
		return nil, fmt.Errorf("%w: heads = %d; want > 0", ErrHeads, heads)
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

// ALiBiForm chooses which key distances the ALiBi bias penalises.
type ALiBiForm int

const (
	// ALiBiCausal is the paper's form (Press et al. 2022 §3, Figure 3):
	// bias[h, i, j] = −m_h·(p(i) − j) for j ≤ p(i), and 0 for j > p(i):
	// those keys must be hidden by a causal mask (mask.Causal with the same
	// Geometry), which the bias does not do. It is the zero value.
	ALiBiCausal ALiBiForm = iota
	// ALiBiSymmetric penalises distance both ways, for attention without a
	// causal mask: bias[h, i, j] = −m_h·|p(i) − j| [common practice].
	ALiBiSymmetric
)

func (f ALiBiForm) String() string {
	switch f {
	case ALiBiCausal:
		return "ALiBiCausal"
	case ALiBiSymmetric:
		return "ALiBiSymmetric"
	}
	return fmt.Sprintf("ALiBiForm(%d)", int(f))
}

// ALiBiBias returns the additive ALiBi bias for the given slopes (one per
// head, usually from ALiBiSlopes) as a row-major [H, Lq, Lk] array, H =
// len(slopes), to be added to the scaled attention logits q·k/√d of every
// batch entry (Press et al. 2022 §3: softmax(q_i Kᵀ + m·[−(i−1), …, 0])).
// Query i sits at key position p(i) as the mask package defines it:
//
//	p(i) = Lk − Lq + i + Offset (mask.AlignEnd),  i + Offset (mask.AlignStart),
//
// and bias[h, i, j] is −m_h·(p(i) − j) (ALiBiCausal, j ≤ p(i); 0 beyond) or
// −m_h·|p(i) − j| (ALiBiSymmetric). Each entry is the one rounding of the
// product of the slope and the exact integer distance, so it is bit-exact.
// g.Batch is not used: the bias is the same for every batch entry.
//
// Special cases are:
//
//	Lq = 0 or Lk = 0                empty result
//	distance 0                      +0
//	no slopes                       ErrHeads
//	NaN or ±Inf slope               ErrHeads
//	negative Lq, Lk or Batch        ErrShape
//	H·Lq·Lk > 2^40                  ErrShape
//	unknown g.Align or form         ErrOption
//	ALiBiCausal with p(i) outside 0 … Lk−1  ErrPosition
//	|p(i)| > MaxPosition            ErrPosition
func ALiBiBias(slopes []float64, g mask.Geometry, form ALiBiForm) ([]float64, error) {
	return alibiBias(slopes, g, form)
}

// ALiBiBias32 is the float32 instantiation of the same body as ALiBiBias:
// the straightforward low-precision implementation the compare package uses
// as a yardstick; not a reference. Each entry is the float32 product of the
// float32 slope and the distance (exact in float32 up to 2^24).
func ALiBiBias32(slopes []float32, g mask.Geometry, form ALiBiForm) ([]float32, error) {
	return alibiBias(slopes, g, form)
}

func alibiBias[T num.Float](slopes []T, g mask.Geometry, form ALiBiForm) ([]T, error) {
	if len(slopes) == 0 {
		return nil, fmt.Errorf("%w: no slopes; want one per head", ErrHeads)
	}
	for h, m := range slopes {
		if math.IsNaN(float64(m)) || math.IsInf(float64(m), 0) {
			return nil, fmt.Errorf("%w: slopes[%d] = %v; want a finite number", ErrHeads, h, m)
		}
	}
	if g.Batch < 0 || g.Lq < 0 || g.Lk < 0 {
		return nil, fmt.Errorf("%w: geometry %v; sizes must be ≥ 0", ErrShape, g)
	}
	if g.Align != mask.AlignEnd && g.Align != mask.AlignStart {
		return nil, fmt.Errorf("%w: Align = %d; want mask.AlignEnd or mask.AlignStart", ErrOption, int(g.Align))
	}
	if form != ALiBiCausal && form != ALiBiSymmetric {
		return nil, fmt.Errorf("%w: form = %d; want ALiBiCausal or ALiBiSymmetric", ErrOption, int(form))
	}
	H := len(slopes)
	if g.Lq > 0 && g.Lk > 0 && (g.Lk > maxElements/g.Lq || g.Lq*g.Lk > maxElements/H) {
		return nil, fmt.Errorf("%w: H·Lq·Lk = %d·%d·%d elements; want at most 2^40", ErrShape, H, g.Lq, g.Lk)
	}
	if g.Lq > 0 {
		// Offset first, so that p(i) cannot overflow.
		if err := checkPosition("Offset", g.Offset, true); err != nil {
			return nil, err
		}
		first, last := g.Pos(0), g.Pos(g.Lq-1)
		if err := checkPosition("the first query position p(0)", first, true); err != nil {
			return nil, err
		}
		if err := checkPosition("the last query position p(Lq−1)", last, true); err != nil {
			return nil, err
		}
		if form == ALiBiCausal && (first < 0 || last >= g.Lk) {
			return nil, fmt.Errorf("%w: %v puts queries at key positions %d … %d; the causal form needs them within 0 … %d",
				ErrPosition, g, first, last, g.Lk-1)
		}
	}
	out := make([]T, H*g.Lq*g.Lk)
	for h, m := range slopes {
		for i := range g.Lq {
			p := g.Pos(i)
			row := out[(h*g.Lq+i)*g.Lk : (h*g.Lq+i+1)*g.Lk]
			for j := range row {
				d := p - j
				switch {
				case d < 0 && form == ALiBiCausal:
					continue
				case d < 0:
					d = -d
				}
				if d != 0 {
					row[j] = -T(m * T(d))
				}
			}
		}
	}
	return out, nil
}
