package posenc

import (
	"fmt"
	"math"
)

// Scaling says how rotary frequencies are changed for a longer context. The
// zero value is no scaling.
//
// The factor s is Factor, or, when CurrentLength is set, the dynamic factor
// s = max(1, CurrentLength/TrainedLength) of Peng et al. 2023 §3.3 ("Dynamic
// Scaling"), computed exactly: the frequencies then depend on the length of
// the sequence being processed, and a cache built at one length is not valid
// at another. Dynamic scaling combines with Interpolation, NTKAware and
// YaRN.
type Scaling struct {
	Method Method
	// Factor is s = L′/L, finite and > 0 (s < 1 compresses instead of
	// stretching; s = 1 changes nothing). Unused when CurrentLength > 0.
	Factor float64
	// TrainedLength is L, the context length the model was trained on;
	// needed by YaRN and by dynamic scaling.
	TrainedLength int
	// CurrentLength, when > 0, is l′ of dynamic scaling.
	CurrentLength int
	// Alpha and Beta are YaRN's α and β, 0 ≤ α < β; both zero means the
	// paper's recommended α = 1, β = 32.
	Alpha, Beta float64
	// Ramp is the shape of YaRN's γ.
	Ramp Ramp
	// Factors are the per-frequency divisors f_i for PerFrequency, one
	// per rotated pair (r/2 values), each finite and > 0.
	Factors []float64
}

// The Scaling fields as messages name them: a Scaling is always reached
// through Rotary.Scaling.
const scalingField = "Rotary.Scaling."

// factor returns s as a double-double, validated for a call of fn.
func (sc Scaling) factor(fn string) (dd, error) {
	if sc.CurrentLength != 0 {
		if sc.CurrentLength < 0 {
			return dd{}, fmt.Errorf("%w: %s: %sCurrentLength = %d; want > 0 for dynamic scaling, or 0 for none", ErrLength, fn, scalingField, sc.CurrentLength)
		}
		if sc.TrainedLength <= 0 {
			return dd{}, fmt.Errorf("%w: %s: %sTrainedLength = %d; want > 0 for dynamic scaling", ErrLength, fn, scalingField, sc.TrainedLength)
		}
		if sc.CurrentLength <= sc.TrainedLength {
			return ddFrom(1), nil
		}
		return ddDiv(ddFrom(float64(sc.CurrentLength)), ddFrom(float64(sc.TrainedLength))), nil
	}
	if err := positive(fn, scalingField+"Factor", sc.Factor); err != nil {
		return dd{}, err
	}
	return ddFrom(sc.Factor), nil
}

// positive checks that v, which the caller of fn gave as name, is finite
// and > 0.
func positive(fn, name string, v float64) error {
	if !(v > 0) || math.IsInf(v, 1) {
		return fmt.Errorf("%w: %s: %s = %v; want a finite number > 0", ErrFactor, fn, name, v)
	}
	return nil
}

func (sc Scaling) bounds(fn string) (alpha, beta float64, err error) {
	alpha, beta = sc.Alpha, sc.Beta
	if alpha == 0 && beta == 0 {
		return 1, 32, nil
	}
	if !(alpha >= 0) || math.IsInf(beta, 0) || math.IsNaN(beta) || !(alpha < beta) {
		return 0, 0, fmt.Errorf("%w: %s: %sAlpha = %v, %sBeta = %v; want finite 0 ≤ Alpha < Beta (both 0 mean YaRN's 1 and 32)",
			ErrFactor, fn, scalingField, alpha, scalingField, beta)
	}
	return alpha, beta, nil
}

// scaledFreqs returns the frequencies θ_i, i = 0 … r/2−1, for rotated dims
// r and base b after the scaling, in double-double, validated for a call
// of fn.
func (sc Scaling) scaledFreqs(fn string, r int, base float64) ([]dd, error) {
	h := r / 2
	lnb := ddLog(ddFrom(base))
	out := make([]dd, h)
	switch sc.Method {
	case NoScaling:
		if sc.CurrentLength != 0 {
			return nil, fmt.Errorf("%w: %s: %sCurrentLength = %d with Method none; want 0: dynamic scaling needs a method", ErrOption, fn, scalingField, sc.CurrentLength)
		}
	case Interpolation, NTKAware, YaRN:
		s, err := sc.factor(fn)
		if err != nil {
			return nil, err
		}
		if sc.Method == NTKAware {
			if r < 4 {
				return nil, fmt.Errorf("%w: %s: rotated dims r = %d with Method ntk-aware; want r ≥ 4 for b′ = b·s^{r/(r−2)}", ErrDim, fn, r)
			}
			// ln b′ = ln b + r/(r−2)·ln s
			e := ddDiv(ddFrom(float64(r)), ddFrom(float64(r-2)))
			lnb = ddAdd(lnb, ddMul(e, ddLog(s)))
		}
		baseFreqs(out, r, lnb)
		switch sc.Method {
		case Interpolation:
			for i := range out {
				out[i] = ddDiv(out[i], s)
			}
		case YaRN:
			if err := sc.yarn(fn, out, r, lnb, s); err != nil {
				return nil, err
			}
		}
		return out, nil
	case PerFrequency:
		if sc.CurrentLength != 0 {
			return nil, fmt.Errorf("%w: %s: %sCurrentLength = %d with Method per-frequency; want 0: dynamic scaling does not apply to caller-given factors",
				ErrOption, fn, scalingField, sc.CurrentLength)
		}
		if len(sc.Factors) != h {
			return nil, fmt.Errorf("%w: %s: %sFactors has %d elements; want r/2 = %d, one per pair of the %d rotated dims", ErrFactor, fn, scalingField, len(sc.Factors), h, r)
		}
		for i, f := range sc.Factors {
			if err := positive(fn, fmt.Sprintf("%sFactors[%d]", scalingField, i), f); err != nil {
				return nil, err
			}
		}
		baseFreqs(out, r, lnb)
		for i := range out {
			out[i] = ddDiv(out[i], ddFrom(sc.Factors[i]))
		}
		return out, nil
	default:
		return nil, methodWords.CheckAt(fn+": "+scalingField+"Method", sc.Method)
	}
	baseFreqs(out, r, lnb)
	return out, nil
}

// baseFreqs sets out[i] = e^{−(2i/r)·ln b} = b^{−2i/r}.
func baseFreqs(out []dd, r int, lnb dd) {
	for i := range out {
		e := ddMul(ddDiv(ddFrom(float64(2*i)), ddFrom(float64(r))), lnb)
		out[i] = ddExp(ddNeg(e))
	}
}

// yarn replaces θ_d by h(θ_d) = θ_d/s + γ_d·(θ_d − θ_d/s).
func (sc Scaling) yarn(fn string, th []dd, r int, lnb dd, s dd) error {
	if sc.TrainedLength <= 0 {
		return fmt.Errorf("%w: %s: %sTrainedLength = %d; want > 0 for YaRN", ErrLength, fn, scalingField, sc.TrainedLength)
	}
	alpha, beta, err := sc.bounds(fn)
	if err != nil {
		return err
	}
	L := ddFrom(float64(sc.TrainedLength))
	var gamma func(d int, theta dd) dd
	switch sc.Ramp {
	case RampRatio:
		a, b := ddFrom(alpha), ddFrom(beta)
		gamma = func(_ int, theta dd) dd {
			rho := ddDiv(ddMul(L, theta), ddTwoPi)
			switch {
			case ddLess(rho, a):
				return dd{}
			case ddLess(b, rho):
				return ddFrom(1)
			}
			return ddDiv(ddSub(rho, a), ddFrom(beta-alpha))
		}
	case RampDims:
		// d(x) = r·ln(L/(2πx)) / (2 ln b)
		dimAt := func(x float64) dd {
			q := ddLog(ddDiv(L, ddMulF(ddTwoPi, x)))
			return ddDiv(ddMulF(q, float64(r)), ddMulF(lnb, 2))
		}
		low := math.Max(ddFloor(dimAt(beta)), 0)
		high := float64(r - 1)
		if alpha > 0 {
			high = math.Min(ddCeil(dimAt(alpha)), high)
		}
		gamma = func(d int, _ dd) dd {
			fd := float64(d)
			if high == low {
				if fd <= low {
					return ddFrom(1)
				}
				return dd{}
			}
			t := ddDiv(ddFrom(fd-low), ddFrom(high-low))
			switch {
			case t.hi <= 0:
				return ddFrom(1)
			case t.hi >= 1:
				return dd{}
			}
			return ddSub(ddFrom(1), t)
		}
	default:
		return rampWords.CheckAt(fn+": "+scalingField+"Ramp", sc.Ramp)
	}
	for d := range th {
		inter := ddDiv(th[d], s)
		g := gamma(d, th[d])
		th[d] = ddAdd(inter, ddMul(g, ddSub(th[d], inter)))
	}
	return nil
}

// NTKBase returns the NTK-aware base b′ = b·s^{r/(r−2)} of Peng et al.
// 2023, arXiv 2309.00071, Eq. (16), for base b, factor s and r rotated dims
// (the paper's |D|), correctly rounded except in cases closer to a rounding
// boundary than 2^−100 relative.
//
// Special cases are:
//
//	s = 1                    b
//	b not finite, or b ≤ 1   ErrBase
//	s ≤ 0, NaN or ±Inf       ErrFactor
//	r odd or r < 4           ErrDim
//	b′ beyond float64        ErrBase
func NTKBase(base, s float64, rotated int) (float64, error) {
	const fn = "NTKBase"
	if err := checkBase(fn, "base", base); err != nil {
		return 0, err
	}
	if err := positive(fn, "s", s); err != nil {
		return 0, err
	}
	if rotated < 4 || rotated%2 != 0 {
		return 0, fmt.Errorf("%w: %s: rotated = %d; want an even number ≥ 4", ErrDim, fn, rotated)
	}
	e := ddDiv(ddFrom(float64(rotated)), ddFrom(float64(rotated-2)))
	v := ddExp(ddAdd(ddLog(ddFrom(base)), ddMul(e, ddLog(ddFrom(s)))))
	b := v.hi + v.lo
	if math.IsInf(b, 0) || !(b > 1) {
		return 0, fmt.Errorf("%w: %s: b′ = %v·%v^{%d/%d} = %v; want a finite number > 1", ErrBase, fn, base, s, rotated, rotated-2, b)
	}
	return b, nil
}

// YaRNMagnitude returns √(1/t) = 0.1·ln s + 1, the multiplier YaRN applies
// to both q and k so that the attention logits are divided by the
// temperature t (Peng et al. 2023, arXiv 2309.00071, Eq. (21)–(22)); the
// paper recommends it for s > 1 and gives √(1/t) ≈ 1.208 at s = 8.
// Applied through Rotary.Magnitude it scales the cos and sin tables, which
// is the same as scaling q and k for the rotated dims. The result is
// correctly rounded except closer than 2^−100 relative to a boundary.
//
// Special cases are:
//
//	s = 1                    1
//	s ≤ 0, NaN or ±Inf       ErrFactor
//	s < e^{−10}              ErrFactor (the multiplier would be ≤ 0)
func YaRNMagnitude(s float64) (float64, error) {
	if err := positive("YaRNMagnitude", "s", s); err != nil {
		return 0, err
	}
	v := ddAdd(ddFrom(1), ddDiv(ddLog(ddFrom(s)), ddFrom(10)))
	m := v.hi + v.lo
	if !(m > 0) {
		return 0, fmt.Errorf("%w: YaRNMagnitude: s = %v; want s > e^{−10}, where the multiplier 0.1·ln s + 1 (%.4g at this s) is > 0", ErrFactor, s, m)
	}
	return m, nil
}
