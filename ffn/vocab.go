package ffn

import (
	"errors"

	"github.com/plumbref/plumb/internal/vocab"
)

// This file is the package's vocabulary: its errors and its conventions.

// The package's sentinel errors. Every error a function returns wraps
// exactly one of them (match with errors.Is) and reads
//
//	<sentinel>: <function>: <argument> = <value>; want <expectation>
//
// naming the exported function called, the argument or field, the value
// found and the value expected (a length: "x has 5 elements; want
// Rows·In = 2·3 = 6").
var (
	// ErrShape: a size in Dims is out of range, or x or dy does not hold
	// Rows·In (Rows·Out) elements, or an argument of HiddenSize is out of
	// range.
	ErrShape = errors.New("ffn: invalid shape")

	// ErrWeightLen: a weight or bias slice has the wrong number of
	// elements for the sizes in Dims, or is missing, or is given where the
	// layer has no use for it.
	ErrWeightLen = errors.New("ffn: wrong weight length")

	// ErrHidden: a weight's length implies a hidden size other than
	// Dims.Hidden (for example the value projection of a gated unit is
	// In×6 while Dims.Hidden is 8).
	ErrHidden = errors.New("ffn: mismatched hidden size")

	// ErrBeta: the Swish β is NaN or ±Inf, or a β is given to an
	// activation that has none.
	ErrBeta = errors.New("ffn: invalid beta")

	// ErrOption: an Options field holds a value that is none of its type's
	// constants (an Act, Layout, Packing or Accumulation outside the
	// declared ones; the zero value of each is valid).
	ErrOption = errors.New("ffn: invalid option")
)

// Act names an activation function φ. The zero value is ActReLU, the
// activation of the two-layer FFN of Vaswani et al. 2017, Eq. (2).
type Act int

// The activations. Each is documented at its scalar function.
const (
	ActReLU        Act = iota // ReLU
	ActGELU                   // GELU, exact (erf) form
	ActGELUTanh               // GELUTanh, the tanh approximation
	ActGELUSigmoid            // GELUSigmoid, x·σ(1.702x)
	ActSigmoid                // Sigmoid (the GLU gated unit)
	ActSiLU                   // SiLU = Swish with β = 1
	ActSwish                  // Swish with Options.Beta
	ActIdentity               // φ(x) = x (the Bilinear gated unit)
)

var actWords = vocab.New("ffn", "activation", "the activation function φ", ErrOption,
	vocab.W(ActReLU, "relu", "max(x, 0)"),
	vocab.W(ActGELU, "gelu", "x·Φ(x), Φ the normal distribution function (exact, through erf)"),
	vocab.W(ActGELUTanh, "gelu-tanh", "the tanh approximation x/2·(1 + tanh(√(2/π)·(x + 0.044715x³)))"),
	vocab.W(ActGELUSigmoid, "gelu-sigmoid", "the sigmoid approximation x·σ(1.702x)"),
	vocab.W(ActSigmoid, "sigmoid", "σ(x) = 1/(1 + e^(−x))"),
	vocab.W(ActSiLU, "silu", "x·σ(x), Swish with β = 1"),
	vocab.W(ActSwish, "swish", "x·σ(βx) with the given β"),
	vocab.W(ActIdentity, "identity", "φ(x) = x"),
)

// String returns a's word ("relu").
func (a Act) String() string { return actWords.String(a) }

// MarshalText returns a's word; a value with none is an error wrapping
// ErrOption.
func (a Act) MarshalText() ([]byte, error) { return actWords.Marshal(a) }

// UnmarshalText sets a from its word; any other text is an error wrapping
// ErrOption that lists the words.
func (a *Act) UnmarshalText(b []byte) error { return actWords.Unmarshal(a, b) }

// Meaning returns one line saying what a means.
func (a Act) Meaning() string { return actWords.Meaning(a) }

// Values lists every Act, the zero value first.
func (Act) Values() []Act { return actWords.Values() }

// Check returns nil if a is one of the Act constants, or an error
// wrapping ErrOption that lists the words.
func (a Act) Check() error { return actWords.Check(a) }

// Layout says how a weight matrix of a projection from m inputs to n
// outputs is stored in its flat slice. Sources write the product both
// ways round, and the storage follows: the papers write xW with W of
// shape [in, out] (Vaswani et al. 2017, arXiv 1706.03762, Eq. (2);
// Shazeer 2020, arXiv 2002.05202, Eq. (1)–(6)), while a linear layer that
// keeps one row per output unit stores [out, in] and computes x·Wᵀ. The
// zero value is InByOut, the papers' xW.
type Layout int

const (
	// InByOut stores W as [in, out], row-major: element (i, j), input i to
	// output j, is w[i·out + j], and the projection is y = x·W. The zero
	// value.
	InByOut Layout = iota
	// OutByIn stores W as [out, in], row-major: element (i, j) is
	// w[j·in + i], one row per output unit, and the projection is y = x·Wᵀ.
	OutByIn
)

var layoutWords = vocab.New("ffn", "weight layout", "how a weight matrix is stored", ErrOption,
	vocab.W(InByOut, "in-by-out", "[in, out] row-major, y = x·W, as the papers write it"),
	vocab.W(OutByIn, "out-by-in", "[out, in] row-major, one row per output unit, y = x·Wᵀ"),
)

// String returns l's word ("in-by-out").
func (l Layout) String() string { return layoutWords.String(l) }

// MarshalText returns l's word; a value with none is an error wrapping
// ErrOption.
func (l Layout) MarshalText() ([]byte, error) { return layoutWords.Marshal(l) }

// UnmarshalText sets l from its word; any other text is an error wrapping
// ErrOption that lists the words.
func (l *Layout) UnmarshalText(b []byte) error { return layoutWords.Unmarshal(l, b) }

// Meaning returns one line saying what l means.
func (l Layout) Meaning() string { return layoutWords.Meaning(l) }

// Values lists every Layout, the zero value first.
func (Layout) Values() []Layout { return layoutWords.Values() }

// Check returns nil if l is one of the Layout constants, or an error
// wrapping ErrOption that lists the words.
func (l Layout) Check() error { return layoutWords.Check(l) }

// Packing says how one fused projection of width 2·Hidden holds the gate
// projection W and the value projection V of a gated unit. It speaks of
// output units, so it applies to either Layout: with OutByIn an output unit
// is a row of the stored matrix, with InByOut a column. The fused bias
// follows the same packing.
type Packing int

const (
	// GateUpStacked puts all gate units first, then all value units: gate
	// unit j is fused unit j, value unit j is fused unit Hidden + j. The
	// zero value.
	GateUpStacked Packing = iota
	// GateUpInterleaved alternates them: gate unit j is fused unit 2j,
	// value unit j is fused unit 2j + 1.
	GateUpInterleaved
)

var packingWords = vocab.New("ffn", "gate-up packing", "how one fused matrix holds the gate and value projections", ErrOption,
	vocab.W(GateUpStacked, "stacked", "all gate units, then all value units"),
	vocab.W(GateUpInterleaved, "interleaved", "gate and value units alternate: gate j is unit 2j, value j unit 2j + 1"),
)

// String returns p's word ("stacked").
func (p Packing) String() string { return packingWords.String(p) }

// MarshalText returns p's word; a value with none is an error wrapping
// ErrOption.
func (p Packing) MarshalText() ([]byte, error) { return packingWords.Marshal(p) }

// UnmarshalText sets p from its word; any other text is an error wrapping
// ErrOption that lists the words.
func (p *Packing) UnmarshalText(b []byte) error { return packingWords.Unmarshal(p, b) }

// Meaning returns one line saying what p means.
func (p Packing) Meaning() string { return packingWords.Meaning(p) }

// Values lists every Packing, the zero value first.
func (Packing) Values() []Packing { return packingWords.Values() }

// Check returns nil if p is one of the Packing constants, or an error
// wrapping ErrOption that lists the words.
func (p Packing) Check() error { return packingWords.Check(p) }

// Accumulation is the format in which a float32 port keeps the running
// sums of its matrix products: a precision idiom. Forward32 honours it
// (Options.Accumulation); the float64 functions ignore it, and so do
// Backward32 and the fast forms, which always sum in float32.
type Accumulation int

const (
	// AccumulateFloat32 keeps every sum in float32, as the straightforward
	// float32 implementation does. It is the zero value.
	AccumulateFloat32 Accumulation = iota
	// AccumulateBFloat16 rounds every running sum of a projection (each
	// product added, then the bias) to bfloat16 after each addition
	// [common practice on hardware whose accumulators are 16 bits wide]:
	// each addition costs up to 2⁻⁸ relative.
	AccumulateBFloat16
	// AccumulateBinary16 rounds every running sum to IEEE 754 binary16
	// after each addition: up to 2⁻¹¹ relative each, and a sum beyond
	// 65504 is ±Inf.
	AccumulateBinary16
)

var accumulationWords = vocab.New("ffn", "accumulation format", "the format a port keeps the running sums of its matrix products in (a precision idiom: the yardstick's float32 run follows it, the reference ignores it)", ErrOption,
	vocab.W(AccumulateFloat32, "float32", "every running sum in float32, as the straightforward float32 run"),
	vocab.W(AccumulateBFloat16, "bfloat16", "every running sum rounded to bfloat16 after each addition"),
	vocab.W(AccumulateBinary16, "binary16", "every running sum rounded to binary16 after each addition; beyond 65504 it is ±Inf"),
)

// String returns a's word ("float32").
func (a Accumulation) String() string { return accumulationWords.String(a) }

// MarshalText returns a's word; a value with none is an error wrapping
// ErrOption.
func (a Accumulation) MarshalText() ([]byte, error) { return accumulationWords.Marshal(a) }

// UnmarshalText sets a from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (a *Accumulation) UnmarshalText(b []byte) error { return accumulationWords.Unmarshal(a, b) }

// Meaning returns one line saying what a means.
func (a Accumulation) Meaning() string { return accumulationWords.Meaning(a) }

// Values lists every Accumulation, the zero value first.
func (Accumulation) Values() []Accumulation { return accumulationWords.Values() }

// Check returns nil if a is one of the Accumulation constants, or an error
// wrapping ErrOption that lists the words.
func (a Accumulation) Check() error { return accumulationWords.Check(a) }
