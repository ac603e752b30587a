package ops

import (
	"fmt"
	"math/big"
	"strings"
)

// MaxElements is the largest output an operation allocates: 2^28 values,
// 2 GiB of float64. Every operation checks the sizes its outputs take from
// the configuration (heads, queries and keys, positions, dims, lengths) or
// from its inputs against it before it allocates anything or calls the
// kernel, and refuses a larger output with an error that names the keys or
// inputs that give its size:
//
//	operation          size checked                                   error
//	alibi-slopes       heads                                          ErrConfig
//	alibi-bias         heads (input "slopes") · queries · keys        ErrConfig
//	sinusoidal-table   length · dim                                   ErrConfig
//	rotary-tables      length (or the count of positions) · dim       ErrConfig
//	attention-forward  batch · heads_q · queries (input "q") · dim_v  ErrInput
//	ffn-forward        rows (input "x") · out (input "w2")            ErrInput
//	paged-attention,   batch · heads_q · queries (input "q") · dim_v  ErrInput
//	split-attention,
//	ring-attention,
//	draft-attention
//	packed-attention   tokens_q · heads_q (input "q") · dim_v         ErrInput
//
// and each of those keys by itself is at most MaxElements, so that a key
// multiplied by a 0 cannot allocate its own size either (the positions of
// rotary-tables). rotary-tables bounds length · dim, which is at least the
// length · rotated values its two tables hold together. The outputs of
// every other operation, and of the backward operations, are no larger
// than one of their inputs (a gradient has the shape of what it is the
// gradient of, and every input shape is checked against the others), so
// they need no limit of their own.
//
// The limit is the package's own, independent of the limits of the kernel
// packages: a size within it may still be refused by the kernel
// (posenc.MaxDim bounds a dimension, posenc.MaxPosition a position), with
// the kernel's error.
const MaxElements = 1 << 28

// size is one dimension of an output: what gives it (a key, `key "dim"`,
// or an input, `heads_q (input "q")`) and its value.
type size struct {
	what string
	n    int
}

// nonNegative refuses a size below 0 under ErrConfig: a size key of a
// table.
func nonNegative(dims ...size) error {
	for _, d := range dims {
		if d.n < 0 {
			return fmt.Errorf("%w: %s = %d; want ≥ 0", ErrConfig, d.what, d.n)
		}
	}
	return nil
}

// fits refuses, under sentinel (ErrConfig for sizes the configuration
// gives, ErrInput for those of the inputs), a product of the dimensions
// above MaxElements, and a dimension above MaxElements even where another
// is 0, before anything of that size is allocated. holder names what the
// product counts the values of (`output "table"`). Negative dimensions are
// left to the caller's own checks (nonNegative, or the kernel's).
func fits(sentinel error, holder string, dims ...size) error {
	p := big.NewInt(1)
	what := make([]string, len(dims))
	vals := make([]string, len(dims))
	for i, d := range dims {
		p.Mul(p, big.NewInt(int64(d.n)))
		what[i], vals[i] = d.what, fmt.Sprint(d.n)
	}
	if p.Cmp(big.NewInt(MaxElements)) > 0 {
		value := fmt.Sprint(p)
		if len(dims) > 1 {
			value = strings.Join(vals, " · ") + " = " + value
		}
		return fmt.Errorf("%w: %s = %s; want at most MaxElements = %d, the most values %s may hold",
			sentinel, strings.Join(what, " · "), value, MaxElements, holder)
	}
	for _, d := range dims {
		if d.n > MaxElements {
			return fmt.Errorf("%w: %s = %d; want at most MaxElements = %d, as a size of %s",
				sentinel, d.what, d.n, MaxElements, holder)
		}
	}
	return nil
}
