package ffn

import "errors"

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
	// constants (an Act, Layout or Packing outside the declared ones; the
	// zero value of each is valid).
	ErrOption = errors.New("ffn: invalid option")
)
