package mask

import (
	"errors"

	"github.com/plumbref/plumb/internal/vocab"
)

// This file is the package's vocabulary: its errors and its conventions.

// Sentinel errors. Every error returned by this package wraps exactly one of
// them, so callers can match with errors.Is. The message reads
//
//	<sentinel>: <function>: <argument> = <value>; want <expectation>
//
// naming the function or method called ("Mask.Visible"), the argument or
// field, its value and what was expected.
var (
	// ErrSize: a negative batch, query or key length, sizes whose product
	// does not fit an int, or a mask written out beyond MaxElements.
	ErrSize = errors.New("mask: invalid size")
	// ErrOffset: a query position offset that puts a query outside the keys.
	ErrOffset = errors.New("mask: query position out of range")
	// ErrAlign: an alignment value that is not AlignEnd or AlignStart.
	ErrAlign = errors.New("mask: invalid alignment")
	// ErrBand: a band extent below zero that is not Unbounded.
	ErrBand = errors.New("mask: invalid band")
	// ErrWindow: a sliding window of fewer than one key.
	ErrWindow = errors.New("mask: invalid window")
	// ErrPrefix: a negative prefix length, or one longer than the keys.
	ErrPrefix = errors.New("mask: invalid prefix")
	// ErrValidLength: key-padding lengths that are negative, longer than the
	// keys, or not one per batch entry.
	ErrValidLength = errors.New("mask: invalid valid length")
	// ErrSegments: packed-sequence offsets that do not start at 0, do not
	// increase strictly, or do not end at the key length.
	ErrSegments = errors.New("mask: invalid sequence offsets")
	// ErrBlock: a packed-sequence block kind that is not BlockCausal or
	// BlockFull.
	ErrBlock = errors.New("mask: invalid block kind")
	// ErrKind: a mask kind that is not one of the Kind constants.
	ErrKind = errors.New("mask: invalid mask kind")
	// ErrALiBi: an ALiBi form that is not one of the ALiBiForm constants.
	ErrALiBi = errors.New("mask: invalid ALiBi form")
	// ErrSpec: a Spec in JSON that is not an object, lacks its kind or a
	// key its kind needs, holds a key of another kind, or a null value or
	// one of the wrong JSON type.
	ErrSpec = errors.New("mask: invalid mask description")
	// ErrFill: a NaN or +Inf bias fill.
	ErrFill = errors.New("mask: invalid fill")
	// ErrEmpty: an intersection of no masks, or a zero Mask value.
	ErrEmpty = errors.New("mask: no mask")
	// ErrIndex: an element index outside the geometry.
	ErrIndex = errors.New("mask: index out of range")
)

// MaxElements is the most elements one result of this package may hold,
// 2^28: the Batch·Lq·Lk entries of Visible, Bias and BiasFill, the
// Batch·Lq rows EmptyRows can list, and the Lk flags of the row Rows
// lends. Larger requests are refused with ErrSize before anything is
// allocated; the sizes are compared by division, so that their product
// cannot wrap around. 2^28 float64 values are 2 GiB, one allocation a test
// machine can make and fill; a mask of 2^20 × 2^20 keys written out whole
// would otherwise end the program with an out-of-memory crash no caller
// can recover from. Check and Sees write nothing out and take any sizes
// whose product fits an int; Rows walks masks of any Batch and Lq. Every
// golden and test case of the package is far inside the limit.
const MaxElements = 1 << 28

// Align says where query row i sits among the key positions when the query
// length Lq differs from the key length Lk.
type Align int

const (
	// AlignEnd puts the last query at the last key: query i is at key
	// position Lk − Lq + i (+ Offset). This is the decode and chunked-prefill
	// convention: the new tokens are the last Lq of the Lk keys. It is the
	// zero value.
	AlignEnd Align = iota
	// AlignStart puts query i at key position i (+ Offset).
	AlignStart
)

var alignWords = vocab.New("mask", "alignment", "where query i sits among the keys when there are fewer queries than keys", ErrAlign,
	vocab.W(AlignEnd, "end", "the last query sits at the last key: position Lk − Lq + i (+ offset)"),
	vocab.W(AlignStart, "start", "query i sits at key position i (+ offset)"),
)

// String returns a's word, "end" or "start".
func (a Align) String() string { return alignWords.String(a) }

// MarshalText returns a's word; a value with none is an error wrapping
// ErrAlign.
func (a Align) MarshalText() ([]byte, error) { return alignWords.Marshal(a) }

// UnmarshalText sets a from its word; any other text is an error wrapping
// ErrAlign that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (a *Align) UnmarshalText(b []byte) error { return alignWords.Unmarshal(a, b) }

// Meaning returns one line saying what a means.
func (a Align) Meaning() string { return alignWords.Meaning(a) }

// Values lists every Align, the zero value first.
func (Align) Values() []Align { return alignWords.Values() }

// Check returns nil if a is one of the Align constants, or an error
// wrapping ErrAlign that lists the words.
func (a Align) Check() error { return alignWords.Check(a) }

// Block is the visibility inside one packed sequence.
type Block int

const (
	// BlockCausal: within a sequence, key j is visible to query position p
	// iff j ≤ p. The zero value.
	BlockCausal Block = iota
	// BlockFull: within a sequence, every key is visible.
	BlockFull
)

var blockWords = vocab.New("mask", "block kind", "what a query sees inside its own packed sequence", ErrBlock,
	vocab.W(BlockCausal, "causal", "keys of the query's own sequence up to the query"),
	vocab.W(BlockFull, "full", "every key of the query's own sequence"),
)

// String returns b's word, "causal" or "full".
func (b Block) String() string { return blockWords.String(b) }

// MarshalText returns b's word; a value with none is an error wrapping
// ErrBlock.
func (b Block) MarshalText() ([]byte, error) { return blockWords.Marshal(b) }

// UnmarshalText sets b from its word; any other text is an error wrapping
// ErrBlock that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (b *Block) UnmarshalText(t []byte) error { return blockWords.Unmarshal(b, t) }

// Meaning returns one line saying what b means.
func (b Block) Meaning() string { return blockWords.Meaning(b) }

// Values lists every Block, the zero value first.
func (Block) Values() []Block { return blockWords.Values() }

// Check returns nil if b is one of the Block constants, or an error
// wrapping ErrBlock that lists the words.
func (b Block) Check() error { return blockWords.Check(b) }

// Kind names the kinds of mask, one per constructor, for configurations
// that build a mask from words (an intersection is a list of them). The
// zero value is KindFull, the mask a caller gets when it sets none.
type Kind int

// The kinds, in the order of their constructors.
const (
	KindFull       Kind = iota // Full
	KindCausal                 // Causal
	KindBand                   // Band(before, after)
	KindWindow                 // Window(n)
	KindPrefix                 // Prefix(p)
	KindKeyPadding             // KeyPadding(valid)
	KindPacked                 // Packed(offsets, block)
)

var kindWords = vocab.New("mask", "mask kind", "which keys each query may see", ErrKind,
	vocab.W(KindFull, "full", "every key"),
	vocab.W(KindCausal, "causal", "keys up to the query's own position"),
	vocab.W(KindBand, "band", "keys j with −before ≤ j − p ≤ after, either side possibly unbounded"),
	vocab.W(KindWindow, "window", "the size keys ending at the query, the query included"),
	vocab.W(KindPrefix, "prefix", "keys below length to every query, causal from length on"),
	vocab.W(KindKeyPadding, "key-padding", "the first valid[b] keys of batch entry b"),
	vocab.W(KindPacked, "packed", "keys of the query's own sequence between offsets, causal or full inside it as block says"),
)

// String returns k's word ("key-padding").
func (k Kind) String() string { return kindWords.String(k) }

// MarshalText returns k's word; a value with none is an error wrapping
// ErrKind.
func (k Kind) MarshalText() ([]byte, error) { return kindWords.Marshal(k) }

// UnmarshalText sets k from its word; any other text is an error wrapping
// ErrKind that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (k *Kind) UnmarshalText(b []byte) error { return kindWords.Unmarshal(k, b) }

// Meaning returns one line saying what k means.
func (k Kind) Meaning() string { return kindWords.Meaning(k) }

// Values lists every Kind, the zero value first.
func (Kind) Values() []Kind { return kindWords.Values() }

// Check returns nil if k is one of the Kind constants, or an error
// wrapping ErrKind that lists the words.
func (k Kind) Check() error { return kindWords.Check(k) }

// ALiBiForm is the key distance that ALiBi penalises (Press et al. 2022,
// "Train Short, Test Long: Attention with Linear Biases Enables Input
// Length Extrapolation", arXiv 2108.12409, §3). The bias of head h for the
// query at key position p and key j is −m_h·d(p, j), with d given by the
// form (see Distance). It lives in this package because it is a fact of
// positions, shared by the attention package (which adds the bias to the
// logits) and the posenc package (which writes it out as a tensor), so that
// both mean the same thing by each form.
//
// The paper defines the bias for the keys a causal model sees, j ≤ p:
// softmax(q_i Kᵀ + m·[−(i−1), …, −2, −1, 0]), that is −m·(p − j). The
// forms differ only in what they give keys after the query, which a causal
// mask hides; under a causal mask all three give the same logits.
type ALiBiForm int

const (
	// ALiBiCausal is the paper's formula for every key: d = p − j. Keys
	// after the query (j > p), which the paper's causal model never shows,
	// get a positive bias m·(j − p) when a mask lets them through. It is the
	// zero value, and what a kernel gets that builds the bias as m·(j − p)
	// or, equivalently after the softmax, as m·j.
	ALiBiCausal ALiBiForm = iota
	// ALiBiSymmetric penalises distance both ways, d = |p − j|, a form used
	// for attention without a causal mask [common practice].
	ALiBiSymmetric
	// ALiBiPastOnly is the paper's bias for keys up to the query and none
	// after it: d = max(p − j, 0), what a kernel gets that clamps the
	// distance at 0 or builds only the lower triangle of the bias.
	ALiBiPastOnly
)

var alibiWords = vocab.New("mask", "ALiBi form", "which key distance ALiBi penalises", ErrALiBi,
	vocab.W(ALiBiCausal, "causal", "−m·(p − j) for every key, the paper's formula; keys after the query get a positive bias"),
	vocab.W(ALiBiSymmetric, "symmetric", "−m·|p − j|: distance penalised both ways"),
	vocab.W(ALiBiPastOnly, "past-only", "−m·(p − j) for keys up to the query, 0 for keys after it"),
)

// String returns f's word ("past-only").
func (f ALiBiForm) String() string { return alibiWords.String(f) }

// MarshalText returns f's word; a value with none is an error wrapping
// ErrALiBi.
func (f ALiBiForm) MarshalText() ([]byte, error) { return alibiWords.Marshal(f) }

// UnmarshalText sets f from its word; any other text is an error wrapping
// ErrALiBi that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (f *ALiBiForm) UnmarshalText(b []byte) error { return alibiWords.Unmarshal(f, b) }

// Meaning returns one line saying what f means.
func (f ALiBiForm) Meaning() string { return alibiWords.Meaning(f) }

// Values lists every ALiBiForm, the zero value first.
func (ALiBiForm) Values() []ALiBiForm { return alibiWords.Values() }

// Check returns nil if f is one of the ALiBiForm constants, or an error
// wrapping ErrALiBi that lists the words.
func (f ALiBiForm) Check() error { return alibiWords.Check(f) }
