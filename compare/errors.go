package compare

import "errors"

// The sentinel errors. Every error this package returns wraps exactly one of
// them (match with errors.Is) and reads
//
//	<sentinel>: <function>: <argument> = <value>; want <expectation>
//
// naming the function called, the argument or field, its value and what
// was expected.
var (
	// ErrFormat: an invalid Format value or an unknown format name, or a
	// format wider than the arithmetic a yardstick runs in.
	ErrFormat = errors.New("compare: invalid number format")
	// ErrBits: a bit pattern wider than its format.
	ErrBits = errors.New("compare: bit pattern out of range")
	// ErrShape: lengths that disagree with each other or with a shape, or a
	// negative dimension.
	ErrShape = errors.New("compare: shape mismatch")
	// ErrTolerance: a negative or NaN tolerance, relative-error floor or
	// yardstick factor.
	ErrTolerance = errors.New("compare: invalid tolerance")
	// ErrYardstick: the low-precision function of a yardstick failed or
	// returned the wrong number of elements.
	ErrYardstick = errors.New("compare: yardstick failed")
	// ErrReport: a nil *Report, or JSON that is not a Report's.
	ErrReport = errors.New("compare: invalid report")
)
