package posenc

import (
	"errors"
	"math"
)

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

// maxElements bounds the size of a result this package allocates from
// sizes alone (not from the length of an input slice), so that a typo
// cannot overflow int: 2^40 float64 values (less where int is 32 bits).
const maxElements = min(1<<40, math.MaxInt)
