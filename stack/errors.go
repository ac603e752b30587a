package stack

import "errors"

// Sentinel errors. Every error returned by this package wraps exactly one
// of them, or the sentinel of the package that refused its part (block,
// norm, posenc, npy), unchanged, so callers can match with errors.Is. The
// message reads
//
//	<sentinel>: <function>: <argument> = <value>; want <expectation>
var (
	// ErrConfig: a size of Config out of range (layers, vocabulary, a
	// width or head count below one), a sinusoidal encoding whose Dim is
	// not the width, or a convention value that is none of its words.
	ErrConfig = errors.New("stack: invalid configuration")
	// ErrWeight: a weight the configuration needs that is missing, one it
	// does not use that is given, or one of the wrong shape; the message
	// names the weight, its layer and the shapes found and wanted.
	ErrWeight = errors.New("stack: invalid weight")
	// ErrToken: a token id outside [0, Vocab), or ids of a type that is not
	// an integer; the message names the position, the value and the
	// vocabulary size, or the type found.
	ErrToken = errors.New("stack: invalid token")
	// ErrCache: past caches that are not one per layer, or layers whose
	// caches hold different numbers of tokens.
	ErrCache = errors.New("stack: invalid cache")
	// ErrManifest: a manifest that is not plumb's stack manifest: a key
	// it does not define, a format it is not, a weight location missing.
	ErrManifest = errors.New("stack: invalid manifest")
	// ErrLogits: a NaN among the logits a greedy step takes the argmax
	// of, where no token is the largest.
	ErrLogits = errors.New("stack: invalid logits")
)

// MaxElements is the most elements one tensor this package allocates may
// hold: block.MaxElements, 2^28. Every size is checked against it, by
// division so that no product wraps around, before anything is allocated.
const MaxElements = 1 << 28
