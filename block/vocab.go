package block

import (
	"errors"

	"github.com/plumbref/plumb/internal/vocab"
)

// This file is the package's vocabulary: its errors and its conventions.

// Sentinel errors. Every error returned by this package wraps exactly one
// of them, or, for a call a kernel package refuses (an attention option, a
// norm epsilon, a rotary base, an activation), that package's own sentinel
// (the error is then the kernel's, unchanged), so callers can match with
// errors.Is. The message reads
//
//	<sentinel>: <function>: <argument> = <value>; want <expectation>
//
// for instance "block: invalid weight: Forward: Weights.K has 64 elements;
// want [width, heads_kv·head_dim] = [16, 8] = 128 (in-by-out)".
var (
	// ErrShape: a size out of range in Dims (a width, a head count, a head
	// dimension or a hidden size below one, query heads that are not a
	// multiple of the key/value heads, negative tokens or past length), an
	// input of the wrong length, or a tensor beyond MaxElements.
	ErrShape = errors.New("block: invalid shape")
	// ErrWeight: a weight the configuration needs that is missing, a
	// weight it does not use that is given, or a weight of the wrong
	// length; the message names the weight and the shape wanted.
	ErrWeight = errors.New("block: invalid weight")
	// ErrCache: past keys and values that disagree with each other or
	// with Dims (their length is not Past·HeadsKV·HeadDim).
	ErrCache = errors.New("block: invalid cache")
	// ErrOption: a convention value that is none of its words, an
	// attention option the block sets itself (Layout, Offset), a rotary
	// configuration whose Dim is not the head dimension, or a stage name
	// that is none of Stages.
	ErrOption = errors.New("block: invalid option")
)

// MaxElements is the most elements one tensor this package allocates may
// hold: attention.MaxElements, 2^28 (2 GiB of float64). Every size is
// checked against it, by division so that no product wraps around, before
// anything is allocated.
const MaxElements = 1 << 28

// Form is where the norms sit and how the two sublayers are joined.
type Form int

const (
	// PreNorm normalises each sublayer's input and adds the sublayer's
	// output to the unnormalised stream (Xiong et al. 2020, "On Layer
	// Normalization in the Transformer Architecture", arXiv 2002.04745,
	// Fig. 1(b)): h = x + Attn(N₁(x)), y = h + FFN(N₂(h)). The zero value.
	PreNorm Form = iota
	// PostNorm normalises after each residual addition (Vaswani et al.
	// 2017, "Attention Is All You Need", arXiv 1706.03762, §3.1, the
	// output LayerNorm(x + Sublayer(x))): h = N₁(x + Attn(x)),
	// y = N₂(h + FFN(h)).
	PostNorm
	// Parallel feeds one normalised input to both sublayers and adds both
	// outputs to one residual (common practice): h = N₁(x),
	// y = (x + Attn(h)) + FFN(h). It has no second norm.
	Parallel
)

var formWords = vocab.New("block", "form", "where the norms sit and how the attention and feed-forward sublayers are joined", ErrOption,
	vocab.W(PreNorm, "pre-norm", "each sublayer reads the normalised stream and adds to the raw one: h = x + Attn(N1(x)), y = h + FFN(N2(h))"),
	vocab.W(PostNorm, "post-norm", "a norm after each residual addition: h = N1(x + Attn(x)), y = N2(h + FFN(h))"),
	vocab.W(Parallel, "parallel", "both sublayers read N1(x) and add to one residual: y = (x + Attn(N1(x))) + FFN(N1(x))"),
)

// String returns f's word ("pre-norm").
func (f Form) String() string { return formWords.String(f) }

// MarshalText returns f's word; a value with none is an error wrapping
// ErrOption.
func (f Form) MarshalText() ([]byte, error) { return formWords.Marshal(f) }

// UnmarshalText sets f from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (f *Form) UnmarshalText(b []byte) error { return formWords.Unmarshal(f, b) }

// Meaning returns one line saying what f means.
func (f Form) Meaning() string { return formWords.Meaning(f) }

// Values lists every Form, the zero value first.
func (Form) Values() []Form { return formWords.Values() }

// Check returns nil if f is one of the Form constants, or an error
// wrapping ErrOption that lists the words.
func (f Form) Check() error { return formWords.Check(f) }

// NormKind is the norm of both norm positions.
type NormKind int

const (
	// LayerNorm is norm.LayerNorm (Ba, Kiros & Hinton 2016, arXiv
	// 1607.06450): mean and variance, gain and optional bias. The zero
	// value.
	LayerNorm NormKind = iota
	// RMSNorm is norm.RMSNorm (Zhang & Sennrich 2019, arXiv 1910.07467):
	// root mean square, gain, no bias.
	RMSNorm
)

var normWords = vocab.New("block", "norm kind", "which norm the block applies at its norm positions", ErrOption,
	vocab.W(LayerNorm, "layer-norm", "LayerNorm: subtract the mean, divide by the standard deviation, gain and optional bias"),
	vocab.W(RMSNorm, "rms-norm", "RMSNorm: divide by the root mean square, gain, no bias"),
)

// String returns k's word ("layer-norm").
func (k NormKind) String() string { return normWords.String(k) }

// MarshalText returns k's word; a value with none is an error wrapping
// ErrOption.
func (k NormKind) MarshalText() ([]byte, error) { return normWords.Marshal(k) }

// UnmarshalText sets k from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (k *NormKind) UnmarshalText(b []byte) error { return normWords.Unmarshal(k, b) }

// Meaning returns one line saying what k means.
func (k NormKind) Meaning() string { return normWords.Meaning(k) }

// Values lists every NormKind, the zero value first.
func (NormKind) Values() []NormKind { return normWords.Values() }

// Check returns nil if k is one of the NormKind constants, or an error
// wrapping ErrOption that lists the words.
func (k NormKind) Check() error { return normWords.Check(k) }
