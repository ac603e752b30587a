package posenc

import "errors"

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
	// alignment) that is not one of its named values.
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
