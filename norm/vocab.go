package norm

import (
	"errors"

	"github.com/plumbref/plumb/internal/vocab"
)

// This file is the package's vocabulary: its errors and its conventions.

// Errors. Every error the package returns wraps exactly one of these
// (match with errors.Is) and reads
//
//	<sentinel>: <function>: <argument> = <value>; want <expectation>
//
// for instance "norm: invalid epsilon: LayerNorm: Options.Epsilon = -1;
// want a finite number > 0 (…)", or "norm: shape mismatch: RMSNorm: weight
// has 2 elements; want d = 3, or nil for none" for a length.
var (
	// ErrShape: a row length d below 1, an input whose length is not a
	// multiple of d, or a weight, bias, residual or gradient whose length
	// does not match.
	ErrShape = errors.New("norm: shape mismatch")
	// ErrEpsilon: an epsilon that is 0, negative, NaN or +Inf.
	ErrEpsilon = errors.New("norm: invalid epsilon")
	// ErrOption: an EpsilonPlacement, WeightForm or Variance value that is
	// not one of the named constants.
	ErrOption = errors.New("norm: invalid option")
)

// EpsilonPlacement says where epsilon enters the denominator.
type EpsilonPlacement int

const (
	// EpsilonInRoot (the zero value) divides by √(s² + ε), where s² is the
	// row's mean square (RMSNorm) or variance (LayerNorm).
	EpsilonInRoot EpsilonPlacement = iota
	// EpsilonAddedToRoot divides by √s² + ε.
	EpsilonAddedToRoot
)

var placementWords = vocab.New("norm", "epsilon placement", "where epsilon enters the denominator", ErrOption,
	vocab.W(EpsilonInRoot, "in-root", "divide by √(s² + ε)"),
	vocab.W(EpsilonAddedToRoot, "added-to-root", "divide by √s² + ε"),
)

// String returns p's word ("in-root").
func (p EpsilonPlacement) String() string { return placementWords.String(p) }

// MarshalText returns p's word; a value with none is an error wrapping
// ErrOption.
func (p EpsilonPlacement) MarshalText() ([]byte, error) { return placementWords.Marshal(p) }

// UnmarshalText sets p from its word; any other text is an error wrapping
// ErrOption that lists the words.
func (p *EpsilonPlacement) UnmarshalText(b []byte) error { return placementWords.Unmarshal(p, b) }

// Meaning returns one line saying what p means.
func (p EpsilonPlacement) Meaning() string { return placementWords.Meaning(p) }

// Values lists every EpsilonPlacement, the zero value first.
func (EpsilonPlacement) Values() []EpsilonPlacement { return placementWords.Values() }

// Check returns nil if p is one of the EpsilonPlacement constants, or an error
// wrapping ErrOption that lists the words.
func (p EpsilonPlacement) Check() error { return placementWords.Check(p) }

// WeightForm says how the stored weight w becomes the gain γ.
type WeightForm int

const (
	// WeightAsIs (the zero value) uses γ = w; a weight initialised to ones
	// is the identity.
	WeightAsIs WeightForm = iota
	// WeightOnePlus uses γ = 1 + w, computed in float64 (one rounding); a
	// weight initialised to zeros is the identity.
	WeightOnePlus
)

var weightWords = vocab.New("norm", "weight form", "how the stored weight w becomes the gain γ", ErrOption,
	vocab.W(WeightAsIs, "as-is", "γ = w: a weight of ones is the identity"),
	vocab.W(WeightOnePlus, "one-plus", "γ = 1 + w: a weight of zeros is the identity"),
)

// String returns f's word ("as-is").
func (f WeightForm) String() string { return weightWords.String(f) }

// MarshalText returns f's word; a value with none is an error wrapping
// ErrOption.
func (f WeightForm) MarshalText() ([]byte, error) { return weightWords.Marshal(f) }

// UnmarshalText sets f from its word; any other text is an error wrapping
// ErrOption that lists the words.
func (f *WeightForm) UnmarshalText(b []byte) error { return weightWords.Unmarshal(f, b) }

// Meaning returns one line saying what f means.
func (f WeightForm) Meaning() string { return weightWords.Meaning(f) }

// Values lists every WeightForm, the zero value first.
func (WeightForm) Values() []WeightForm { return weightWords.Values() }

// Check returns nil if f is one of the WeightForm constants, or an error
// wrapping ErrOption that lists the words.
func (f WeightForm) Check() error { return weightWords.Check(f) }

// Variance says how the float32 instantiations of LayerNorm compute the
// row's variance: a port's precision idiom. The float64 reference ignores
// it and always takes two passes with a compensated mean (see the package
// documentation); RMSNorm has no mean, and ignores it too.
type Variance int

const (
	// VarianceTwoPass takes the mean first, then the mean square of the
	// deviations from it: the straightforward implementation's two passes.
	// It is the zero value.
	VarianceTwoPass Variance = iota
	// VarianceOnePass accumulates Σx and Σx² in one pass, in the
	// instantiation's type, and takes σ² = mean(x²) − mean(x)², clamped at
	// 0 [common practice: the textbook one-pass formula, whose cancellation
	// Chan, Golub & LeVeque 1983, The American Statistician 37(3), analyse].
	// Its error is about (μ²/σ²)·u relative in σ², u the unit roundoff: on
	// a float32 row of mean 1e4 and standard deviation 1 the variance has
	// no correct digit.
	VarianceOnePass
)

var varianceWords = vocab.New("norm", "variance form", "how a float32 port computes LayerNorm's variance (a precision idiom: the yardstick's float32 run follows it, the reference ignores it)", ErrOption,
	vocab.W(VarianceTwoPass, "two-pass", "the mean first, then the mean square of the deviations from it"),
	vocab.W(VarianceOnePass, "one-pass", "σ² = mean(x²) − mean(x)², both means in one pass, clamped at 0"),
)

// String returns v's word ("two-pass").
func (v Variance) String() string { return varianceWords.String(v) }

// MarshalText returns v's word; a value with none is an error wrapping
// ErrOption.
func (v Variance) MarshalText() ([]byte, error) { return varianceWords.Marshal(v) }

// UnmarshalText sets v from its word; any other text is an error wrapping
// ErrOption that lists the words.
func (v *Variance) UnmarshalText(b []byte) error { return varianceWords.Unmarshal(v, b) }

// Meaning returns one line saying what v means.
func (v Variance) Meaning() string { return varianceWords.Meaning(v) }

// Values lists every Variance, the zero value first.
func (Variance) Values() []Variance { return varianceWords.Values() }

// Check returns nil if v is one of the Variance constants, or an error
// wrapping ErrOption that lists the words.
func (v Variance) Check() error { return varianceWords.Check(v) }
