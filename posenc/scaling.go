package posenc

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/internal/vocab"
)

// Method is a context-scaling method for rotary frequencies: how a model
// trained on context length L is run on a longer context L′ = s·L.
type Method int

const (
	// NoScaling leaves the frequencies θ_i = b^{−2i/r} as they are. It is
	// the zero value.
	NoScaling Method = iota

	// Interpolation is position interpolation (Chen et al. 2023,
	// "Extending Context Window of Large Language Models via Positional
	// Interpolation", arXiv 2306.15595, §2.3 Eq. (4)): f′(x, m) = f(x, m/s)
	// with s = L′/L. It changes the positions: m → m/s. plumb applies it
	// as θ_i → θ_i/s, which gives the same angle (m/s)·θ_i = m·(θ_i/s)
	// exactly in real arithmetic and keeps positions integers.
	Interpolation

	// NTKAware changes the base (Peng et al. 2023, "YaRN: Efficient
	// Context Window Extension of Large Language Models", arXiv 2309.00071
	// v2, §3.1, Eq. (14)–(16)): b′ = b·s^{r/(r−2)}, θ_i = b′^{−2i/r}, where
	// r (the paper's |D|) is the number of rotated dims. The highest
	// frequency θ_0 = 1 is unchanged and the lowest, θ_{r/2−1}, is divided
	// by exactly s. Needs r ≥ 4.
	NTKAware

	// YaRN is the "NTK-by-parts" interpolation of Peng et al. 2023, §3.2,
	// Eq. (17)–(20): it changes each frequency by its own amount,
	//
	//	h(θ_d) = (1 − γ_d)·θ_d/s + γ_d·θ_d,
	//
	// interpolating low frequencies (γ = 0), keeping high ones (γ = 1) and
	// ramping in between; see Ramp for γ. Its temperature (Eq. 21–22) is a
	// separate multiplier on q and k: see YaRNMagnitude and
	// Rotary.Magnitude.
	YaRN

	// PerFrequency divides each frequency by a factor the caller gives:
	// θ_i → θ_i/f_i, with Scaling.Factors holding f_0 … f_{r/2−1} [common
	// practice: long-context variants ship such lists]. Factor, lengths and
	// dynamic scaling are not used.
	PerFrequency
)

var methodWords = vocab.New("posenc", "scaling method", "how rotary frequencies change for a context longer than the trained one", ErrOption,
	vocab.W(NoScaling, "none", "the frequencies as they are"),
	vocab.W(Interpolation, "interpolation", "position interpolation: every frequency divided by s"),
	vocab.W(NTKAware, "ntk-aware", "the base raised to b·s^(r/(r−2)): the lowest frequency divided by s, the highest kept"),
	vocab.W(YaRN, "yarn", "NTK-by-parts: low frequencies divided by s, high ones kept, a ramp between"),
	vocab.W(PerFrequency, "per-frequency", "frequency i divided by a factor f_i the caller gives"),
)

// String returns m's word ("none").
func (m Method) String() string { return methodWords.String(m) }

// MarshalText returns m's word; a value with none is an error wrapping
// ErrOption.
func (m Method) MarshalText() ([]byte, error) { return methodWords.Marshal(m) }

// UnmarshalText sets m from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (m *Method) UnmarshalText(b []byte) error { return methodWords.Unmarshal(m, b) }

// Meaning returns one line saying what m means.
func (m Method) Meaning() string { return methodWords.Meaning(m) }

// Values lists every Method, the zero value first.
func (Method) Values() []Method { return methodWords.Values() }

// Check returns nil if m is one of the Method constants, or an error
// wrapping ErrOption that lists the words.
func (m Method) Check() error { return methodWords.Check(m) }

// Ramp chooses how YaRN's γ_d goes from 1 (keep) to 0 (interpolate) across
// the frequencies d = 0 … r/2−1. The two options give different numbers.
type Ramp int

const (
	// RampRatio is the ramp as the paper defines it (Peng et al. 2023,
	// Eq. (17)–(18)): with the ratio of the trained length to the
	// wavelength λ_d = 2π/θ_d,
	//
	//	ρ(d) = L/λ_d = L·θ_d/(2π),
	//	γ_d = 0 if ρ < α,  1 if ρ > β,  (ρ − α)/(β − α) otherwise,
	//
	// linear in ρ. (Eq. 17 prints b′ in λ_d; the definition of λ_d in
	// Eq. 13 uses the original base b, which is what plumb uses.) It is the
	// zero value.
	RampRatio Ramp = iota

	// RampDims is the ramp as the authors' published code computes it:
	// linear in the dimension index d between the (fractional) indices
	// where ρ = β and ρ = α, rounded outward:
	//
	//	d(x)  = r·ln(L/(2πx)) / (2 ln b)     (the d with ρ(d) = x)
	//	low   = max(⌊d(β)⌋, 0),  high = min(⌈d(α)⌉, r − 1)
	//	γ_d   = 1 − clamp((d − low)/(high − low), 0, 1),
	//
	// and when low = high, γ_d = 1 for d ≤ low and 0 above (the code adds
	// 0.001 to high − low, which gives the same values at integer d). The clamp of
	// high to r − 1 (not r/2 − 1) is recalled from memory of the authors'
	// code; it only matters when d(α) falls beyond the last frequency.
	RampDims
)

var rampWords = vocab.New("posenc", "YaRN ramp", "how YaRN goes from keeping to interpolating across the frequencies", ErrOption,
	vocab.W(RampRatio, "ratio", "linear in the ratio of the trained length to the wavelength, as the paper defines it"),
	vocab.W(RampDims, "dims", "linear in the dimension index between rounded bounds, as the authors’ published code computes it"),
)

// String returns r's word ("ratio").
func (r Ramp) String() string { return rampWords.String(r) }

// MarshalText returns r's word; a value with none is an error wrapping
// ErrOption.
func (r Ramp) MarshalText() ([]byte, error) { return rampWords.Marshal(r) }

// UnmarshalText sets r from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (r *Ramp) UnmarshalText(b []byte) error { return rampWords.Unmarshal(r, b) }

// Meaning returns one line saying what r means.
func (r Ramp) Meaning() string { return rampWords.Meaning(r) }

// Values lists every Ramp, the zero value first.
func (Ramp) Values() []Ramp { return rampWords.Values() }

// Check returns nil if r is one of the Ramp constants, or an error
// wrapping ErrOption that lists the words.
func (r Ramp) Check() error { return rampWords.Check(r) }

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
