package diagnose

import "errors"

// Sentinel errors. Every error Run returns wraps one of them, or the error
// of package ops or compare that refused the operation, its configuration
// or its inputs (ops.ErrUnknownOp, ops.ErrConfig, ops.ErrInput,
// compare.ErrFormat, …).
var (
	// ErrOutputs: the port's outputs are missing, not outputs of the
	// operation, or of the wrong length.
	ErrOutputs = errors.New("diagnose: invalid outputs")
	// ErrOptions: an Options field out of its range.
	ErrOptions = errors.New("diagnose: invalid options")
)
