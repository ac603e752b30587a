package posenc

import (
	"errors"

	"github.com/plumbref/plumb/internal/vocab"
)

// This file is the package's vocabulary: its errors and its conventions.

// Sentinel errors. Every error returned by this package wraps exactly one of
// them, so callers can match with errors.Is. The message reads
//
//	<sentinel>: <function>: <argument> = <value>; want <expectation>
//
// naming the exported function or method called ("Rotary.Apply"), the
// argument or field, what was given and what was expected.
var (
	// ErrDim: a dimension that is not positive or exceeds MaxDim, an odd
	// number of rotated or sinusoidal dims, or more rotated dims than the
	// head has.
	ErrDim = errors.New("posenc: invalid dimension")
	// ErrBase: a frequency base that is not a finite number above 1.
	ErrBase = errors.New("posenc: invalid base")
	// ErrFactor: a scaling factor, per-frequency factor or magnitude that
	// is not finite and positive, YaRN bounds with α ≥ β or α < 0, or a
	// per-frequency list of the wrong length.
	ErrFactor = errors.New("posenc: invalid scaling factor")
	// ErrLength: a trained or current context length that is not positive
	// where a scaling method needs it.
	ErrLength = errors.New("posenc: invalid context length")
	// ErrPosition: a negative position where positions must be ≥ 0, or a
	// position beyond ±MaxPosition.
	ErrPosition = errors.New("posenc: invalid position")
	// ErrHeads: a head count that is not positive, or a slope that is not
	// finite.
	ErrHeads = errors.New("posenc: invalid heads")
	// ErrShape: a data length that does not fit the dimensions, or a
	// position list of the wrong length.
	ErrShape = errors.New("posenc: shape mismatch")
	// ErrOption: an enumerated option (layout, pairing, method, ramp, form,
	// alignment, angle arithmetic) that is not one of its named values.
	ErrOption = errors.New("posenc: invalid option")
)

// MaxPosition is the largest position magnitude accepted, 2^31 − 1 (it
// fits an int on every platform). Positions are integers; every
// |m| ≤ MaxPosition is exact in float64, the golden files test up to it, and
// the accuracy statements of this package hold up to it.
const MaxPosition = 1<<31 - 1

// MaxDim is the largest head or model dimension accepted.
const MaxDim = 1 << 20

// MaxElements is the most elements one result of this package may hold,
// 2^28: Sinusoidal.Table's n·Dim, Rotary.Tables' len(pos)·r/2 per table,
// ALiBiBias's H·Lq·Lk and ALiBiSlopes' head count. A request for more is
// refused with ErrShape (ErrHeads for the head count) before anything is
// allocated, and the sizes are multiplied only after each factor has been
// checked, so that the product cannot wrap around. 2^28 float64 values are
// 2 GiB, one allocation a test machine can make and fill; a table or bias
// beyond it (an ALiBi bias of 2^17 × 2^17, a sinusoidal table of 2^31
// positions) is a typo, not a test, and would otherwise end the program
// with an out-of-memory crash no caller can recover from. Every golden and
// test case of the package is far inside it; results computed from a
// caller's slice (Rotary.Apply, Sinusoidal.Add) are as large as that slice.
const MaxElements = 1 << 28

// Pairing says which two dims of a head one rotary frequency rotates. The
// two pairings are a fixed permutation of dims apart and give different
// outputs on the same vector: weights trained with one do not work with the
// other.
type Pairing int

const (
	// PairAdjacent rotates dims (2i, 2i+1) by angle m·θ_i, as in Su et al.
	// 2021, arXiv 2104.09864, Eq. (34). It is the zero value.
	PairAdjacent Pairing = iota
	// PairHalves rotates dims (i, i + r/2) by angle m·θ_i: the first half
	// of the rotated dims holds the first member of every pair [common
	// practice].
	PairHalves
)

var pairingWords = vocab.New("posenc", "rotary pairing", "which two dims of a head one rotary frequency rotates", ErrOption,
	vocab.W(PairAdjacent, "adjacent", "frequency i rotates dims (2i, 2i+1), as in the paper"),
	vocab.W(PairHalves, "halves", "frequency i rotates dims (i, i + r/2): the rotated dims split in two halves"),
)

// String returns p's word ("adjacent").
func (p Pairing) String() string { return pairingWords.String(p) }

// MarshalText returns p's word; a value with none is an error wrapping
// ErrOption.
func (p Pairing) MarshalText() ([]byte, error) { return pairingWords.Marshal(p) }

// UnmarshalText sets p from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (p *Pairing) UnmarshalText(b []byte) error { return pairingWords.Unmarshal(p, b) }

// Meaning returns one line saying what p means.
func (p Pairing) Meaning() string { return pairingWords.Meaning(p) }

// Values lists every Pairing, the zero value first.
func (Pairing) Values() []Pairing { return pairingWords.Values() }

// Check returns nil if p is one of the Pairing constants, or an error
// wrapping ErrOption that lists the words.
func (p Pairing) Check() error { return pairingWords.Check(p) }

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

// Layout is the order of the sine and cosine columns of a sinusoidal table.
type Layout int

const (
	// Interleaved puts sin and cos of each frequency side by side:
	// PE(m, 2i) = sin(m·ω_i), PE(m, 2i+1) = cos(m·ω_i), as in Vaswani et al.
	// 2017 §3.5. It is the zero value.
	Interleaved Layout = iota
	// Concatenated puts all sines first, then all cosines:
	// PE(m, i) = sin(m·ω_i), PE(m, d/2 + i) = cos(m·ω_i) [common practice].
	Concatenated
)

var layoutWords = vocab.New("posenc", "sinusoidal layout", "the order of the sine and cosine columns of a sinusoidal table", ErrOption,
	vocab.W(Interleaved, "interleaved", "sin and cos of each frequency side by side: sin, cos, sin, cos, …"),
	vocab.W(Concatenated, "concatenated", "all sines first, then all cosines"),
)

// String returns l's word ("interleaved").
func (l Layout) String() string { return layoutWords.String(l) }

// MarshalText returns l's word; a value with none is an error wrapping
// ErrOption.
func (l Layout) MarshalText() ([]byte, error) { return layoutWords.Marshal(l) }

// UnmarshalText sets l from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (l *Layout) UnmarshalText(b []byte) error { return layoutWords.Unmarshal(l, b) }

// Meaning returns one line saying what l means.
func (l Layout) Meaning() string { return layoutWords.Meaning(l) }

// Values lists every Layout, the zero value first.
func (Layout) Values() []Layout { return layoutWords.Values() }

// Check returns nil if l is one of the Layout constants, or an error
// wrapping ErrOption that lists the words.
func (l Layout) Check() error { return layoutWords.Check(l) }

// AngleArithmetic says how the float32 instantiations of the rotary
// encoding (Rotary.Apply32, ApplyInverse32, Tables32) form their cos and
// sin tables: a port's precision idiom. The float64 reference ignores it:
// Apply, ApplyInverse and Tables always form the angles to about 106 bits.
type AngleArithmetic int

const (
	// AnglesFloat64 forms the tables as the reference does (the angle
	// m·θ_i in double-double, cos and sin to a few float64 ulps) and
	// rounds each entry to float32 once: the error of the float32
	// rotation alone. It is the zero value.
	AnglesFloat64 AngleArithmetic = iota
	// AnglesFloat32Frequencies rounds every frequency θ_i (after scaling)
	// to float32 and forms the angles m·θ_i from the rounded values as the
	// reference does, each table entry rounded once [common practice: a
	// port that stores its inverse frequencies in float32]. The angle
	// error is m·|fl32(θ_i) − θ_i| ≤ m·θ_i·2⁻²⁴: it grows linearly with
	// the position.
	AnglesFloat32Frequencies
	// AnglesFloat32 rounds θ_i to float32, takes the position m as a
	// float32 (exact up to 2²⁴), forms the angle as the float32 product
	// fl32(m·θ_i) and takes cos and sin of that float32 angle (in float64,
	// rounded to float32) [common practice: the usual framework idiom,
	// positions times inverse frequencies in float32]. The angle error is
	// about |m·θ_i|·2⁻²³ in the worst case: linear in the position, and
	// well above the float32 rotation's from a few tens of positions on.
	AnglesFloat32
)

var anglesWords = vocab.New("posenc", "rotary angle arithmetic", "how a float32 port forms the rotary angles m·θ (a precision idiom: the yardstick's float32 run follows it, the reference ignores it)", ErrOption,
	vocab.W(AnglesFloat64, "float64", "the angles and tables formed as the reference forms them, each entry rounded to float32 once"),
	vocab.W(AnglesFloat32Frequencies, "float32-frequencies", "the frequencies θ rounded to float32, the angles m·θ then formed exactly, the tables rounded once"),
	vocab.W(AnglesFloat32, "float32-angles", "θ and m in float32, the angle the float32 product m·θ, its cos and sin rounded to float32"),
)

// String returns a's word ("float64").
func (a AngleArithmetic) String() string { return anglesWords.String(a) }

// MarshalText returns a's word; a value with none is an error wrapping
// ErrOption.
func (a AngleArithmetic) MarshalText() ([]byte, error) { return anglesWords.Marshal(a) }

// UnmarshalText sets a from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (a *AngleArithmetic) UnmarshalText(b []byte) error { return anglesWords.Unmarshal(a, b) }

// Meaning returns one line saying what a means.
func (a AngleArithmetic) Meaning() string { return anglesWords.Meaning(a) }

// Values lists every AngleArithmetic, the zero value first.
func (AngleArithmetic) Values() []AngleArithmetic { return anglesWords.Values() }

// Check returns nil if a is one of the AngleArithmetic constants, or an
// error wrapping ErrOption that lists the words.
func (a AngleArithmetic) Check() error { return anglesWords.Check(a) }
