package attention

import (
	"errors"

	"github.com/plumbref/plumb/internal/vocab"
)

// This file is the package's vocabulary: its errors and its conventions.

// Sentinel errors. Every error returned by this package wraps exactly one of
// them (and, for a mask that does not fit or an ALiBi form that is none of
// its words, the mask package's own error as well), so callers can match
// with errors.Is. The message reads
//
//	<sentinel>: <function>: <argument> = <value>; want <expectation>
//
// for instance "attention: invalid shape: Forward: Shape.HeadsQ = 6; want
// a multiple of HeadsKV = 4", or "… q has 95 elements; want
// Batch·HeadsQ·Lq·Dk = 2·4·3·4 = 96" for a length.
var (
	// ErrShape: a dimension out of range (Dk = 0, a negative length, …),
	// query heads that are not a multiple of the key/value heads, or a
	// tensor beyond MaxElements.
	ErrShape = errors.New("attention: invalid shape")
	// ErrLength: a slice whose length does not match the shape.
	ErrLength = errors.New("attention: length mismatch")
	// ErrOption: an option out of its domain (a scale or cap that is not
	// positive and finite, a layout, group map, policy, ALiBi form,
	// accumulation format or softmax shift that is none of its words, a NaN
	// slope or sink, a block size below one, a decoding position outside
	// the cache).
	ErrOption = errors.New("attention: invalid option")
	// ErrBias: an additive bias whose shape does not broadcast to
	// [Batch, HeadsQ, Lq, Lk].
	ErrBias = errors.New("attention: bias does not broadcast")
	// ErrMask: a mask that cannot be laid on the query and key lengths; the
	// error also wraps the mask package's error.
	ErrMask = errors.New("attention: mask does not fit")
	// ErrOverflow: a logit computed from finite inputs came out NaN or
	// ±Inf: the scale, bias or ALiBi slopes are too large for the inputs'
	// magnitudes (see Magnitudes at Options).
	ErrOverflow = errors.New("attention: logits overflow")
)

// MaxElements is the most elements one tensor of this package may hold,
// 2^28: each of Q, K, V and the output, [Batch, Heads, L, D], and the
// scratch of the fast forms. A Shape beyond it is refused with ErrShape
// before anything is allocated. The products are formed only after each
// factor has been checked (a zero dimension counted as 1, so that Batch
// = 0 or Lk = 0 does not hide a dimension that scratch space is sized
// by), so they cannot wrap around. 2^28 float64 values are 2 GiB, one
// allocation a test machine can make and fill; the output of a shape
// beyond it (a Dv of 2^40 with Lk = 0, which needs no V data) would
// otherwise end the program with an out-of-memory crash no caller can
// recover from. The fast forms hold up to 3·64·Lk values per worker, so
// they also refuse Lk > MaxElements/192 and run no more workers than fit
// MaxElements together (which changes no result: they are bit-identical
// for any number of workers). Every golden, benchmark and test shape of
// the package is far inside the limit (the largest, the decoding
// benchmark's K and V, are 2^26 elements each).
const MaxElements = 1 << 28

// Layout is the memory order of Q, K, V, the output and their gradients.
// The innermost dimension is always the head dimension, so every row of a
// head is contiguous in both layouts.
type Layout int

const (
	// HeadsMajor is [Batch, Heads, Seq, Dim]: each head's rows are
	// contiguous. The log-sum-exp is [Batch, HeadsQ, Lq]. The zero value.
	HeadsMajor Layout = iota
	// SeqMajor is [Batch, Seq, Heads, Dim]: the heads of one position are
	// contiguous, the order a projection produces before any transpose. The
	// log-sum-exp is [Batch, Lq, HeadsQ].
	SeqMajor
)

var layoutWords = vocab.New("attention", "layout", "the memory order of q, k, v, the output and the gradients", ErrOption,
	vocab.W(HeadsMajor, "heads-major", "[batch, heads, positions, dim]: each head's rows are contiguous"),
	vocab.W(SeqMajor, "seq-major", "[batch, positions, heads, dim]: the heads of one position are contiguous"),
)

// String returns l's word ("heads-major").
func (l Layout) String() string { return layoutWords.String(l) }

// MarshalText returns l's word; a value with none is an error wrapping
// ErrOption.
func (l Layout) MarshalText() ([]byte, error) { return layoutWords.Marshal(l) }

// UnmarshalText sets l from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (l *Layout) UnmarshalText(b []byte) error { return layoutWords.Unmarshal(l, b) }

// Meaning returns one line saying what l means.
func (l Layout) Meaning() string { return layoutWords.Meaning(l) }

// Values lists every Layout, the zero value first.
func (Layout) Values() []Layout { return layoutWords.Values() }

// Check returns nil if l is one of the Layout constants, or an error
// wrapping ErrOption that lists the words.
func (l Layout) Check() error { return layoutWords.Check(l) }

// GroupMap says which key/value head query head h reads when HeadsQ is a
// multiple of HeadsKV (grouped-query attention, Ainslie et al.
// 2023, arXiv 2305.13245, §2.2; multi-query attention is HeadsKV = 1,
// Shazeer 2019, arXiv 1911.02150, §3; multi-head is HeadsKV = HeadsQ).
type GroupMap int

const (
	// GroupBlocks: consecutive query heads share a kv head,
	// kv(h) = ⌊h / (HeadsQ/HeadsKV)⌋, the contiguous grouping drawn in the
	// overview figure of Ainslie et al. 2023. For 8 query heads on 2 kv
	// heads, heads 0–3 read kv head 0 and heads 4–7 kv head 1. The zero
	// value.
	GroupBlocks GroupMap = iota
	// GroupCycle: kv(h) = h mod HeadsKV; for 8 query heads on 2 kv heads the
	// even heads read kv head 0 and the odd heads kv head 1.
	GroupCycle
)

var groupWords = vocab.New("attention", "group map", "which key/value head each query head reads", ErrOption,
	vocab.W(GroupBlocks, "blocks", "consecutive query heads share a kv head: kv(h) = h / (heads_q / heads_kv)"),
	vocab.W(GroupCycle, "cycle", "query head h reads kv head h mod heads_kv"),
)

// String returns g's word ("blocks").
func (g GroupMap) String() string { return groupWords.String(g) }

// MarshalText returns g's word; a value with none is an error wrapping
// ErrOption.
func (g GroupMap) MarshalText() ([]byte, error) { return groupWords.Marshal(g) }

// UnmarshalText sets g from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (g *GroupMap) UnmarshalText(b []byte) error { return groupWords.Unmarshal(g, b) }

// Meaning returns one line saying what g means.
func (g GroupMap) Meaning() string { return groupWords.Meaning(g) }

// Values lists every GroupMap, the zero value first.
func (GroupMap) Values() []GroupMap { return groupWords.Values() }

// Check returns nil if g is one of the GroupMap constants, or an error
// wrapping ErrOption that lists the words.
func (g GroupMap) Check() error { return groupWords.Check(g) }

// EmptyRow is what a query row that sees no key at all produces.
type EmptyRow int

const (
	// EmptyRowZero: the output row is 0 and its log-sum-exp is −Inf, which
	// is what a tiled online-softmax kernel gives (its running sum stays 0)
	// and what makes Merge with an empty part exact. The row contributes
	// nothing to any gradient. The zero value.
	EmptyRowZero EmptyRow = iota
	// EmptyRowNaN: the output row is NaN, which is what a naive softmax over
	// logits that are all −Inf gives (e^{−Inf − (−Inf)} = NaN); its
	// log-sum-exp is −Inf. In Backward the row's probabilities are NaN for
	// every key, so the row's dQ and the dK and dV of its kv head are NaN.
	EmptyRowNaN
)

var emptyRowWords = vocab.New("attention", "empty-row policy", "what a query row that sees no key produces", ErrOption,
	vocab.W(EmptyRowZero, "zero", "output 0 and log-sum-exp −Inf, as a tiled online softmax gives"),
	vocab.W(EmptyRowNaN, "nan", "output NaN, as a naive softmax over logits that are all −Inf gives"),
)

// String returns e's word ("zero").
func (e EmptyRow) String() string { return emptyRowWords.String(e) }

// MarshalText returns e's word; a value with none is an error wrapping
// ErrOption.
func (e EmptyRow) MarshalText() ([]byte, error) { return emptyRowWords.Marshal(e) }

// UnmarshalText sets e from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (e *EmptyRow) UnmarshalText(b []byte) error { return emptyRowWords.Unmarshal(e, b) }

// Meaning returns one line saying what e means.
func (e EmptyRow) Meaning() string { return emptyRowWords.Meaning(e) }

// Values lists every EmptyRow, the zero value first.
func (EmptyRow) Values() []EmptyRow { return emptyRowWords.Values() }

// Check returns nil if e is one of the EmptyRow constants, or an error
// wrapping ErrOption that lists the words.
func (e EmptyRow) Check() error { return emptyRowWords.Check(e) }

// Accumulation is the format in which a float32 port keeps its running
// sums: a precision idiom (see Idiom). Products, exponentials and the
// stored probabilities stay float32; only the sums are narrower.
type Accumulation int

const (
	// AccumulateFloat32 keeps every running sum in float32, as the
	// straightforward float32 implementation does. It is the zero value.
	AccumulateFloat32 Accumulation = iota
	// AccumulateBFloat16 rounds every running sum to bfloat16 (8
	// significand bits) after each addition [common practice on hardware
	// whose accumulators are 16 bits wide]: each addition costs up to
	// 2⁻⁸ relative.
	AccumulateBFloat16
	// AccumulateBinary16 rounds every running sum to IEEE 754 binary16 (11
	// significand bits, largest finite value 65504) after each addition:
	// each addition costs up to 2⁻¹¹ relative, and a sum beyond 65504 is
	// +Inf.
	AccumulateBinary16
)

var accumulationWords = vocab.New("attention", "accumulation format", "the format a port keeps its running sums in (the logits' dot products, the softmax sum, the weighted sum of values; a precision idiom: the yardstick's float32 run follows it, the reference ignores it)", ErrOption,
	vocab.W(AccumulateFloat32, "float32", "every running sum in float32, as the straightforward float32 run"),
	vocab.W(AccumulateBFloat16, "bfloat16", "every running sum rounded to bfloat16 after each addition"),
	vocab.W(AccumulateBinary16, "binary16", "every running sum rounded to binary16 after each addition; beyond 65504 it is +Inf"),
)

// String returns a's word ("float32").
func (a Accumulation) String() string { return accumulationWords.String(a) }

// MarshalText returns a's word; a value with none is an error wrapping
// ErrOption.
func (a Accumulation) MarshalText() ([]byte, error) { return accumulationWords.Marshal(a) }

// UnmarshalText sets a from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (a *Accumulation) UnmarshalText(b []byte) error { return accumulationWords.Unmarshal(a, b) }

// Meaning returns one line saying what a means.
func (a Accumulation) Meaning() string { return accumulationWords.Meaning(a) }

// Values lists every Accumulation, the zero value first.
func (Accumulation) Values() []Accumulation { return accumulationWords.Values() }

// Check returns nil if a is one of the Accumulation constants, or an error
// wrapping ErrOption that lists the words.
func (a Accumulation) Check() error { return accumulationWords.Check(a) }

// SoftmaxShift is what a float32 port subtracts from the logits before it
// exponentiates them: a precision idiom (see Idiom).
type SoftmaxShift int

const (
	// ShiftMax subtracts the row maximum (with the sink), so that every
	// exponent is ≤ 0 and none overflows: the "safe softmax" of Milakov &
	// Gimelshein 2018, arXiv 1805.02867, Algorithm 2. It is the zero value.
	ShiftMax SoftmaxShift = iota
	// ShiftNone exponentiates the raw logits, as a port without the shift
	// does (the naive softmax, their Algorithm 1): e^s overflows float32 beyond s ≈ 88.72 (ln of the largest
	// float32), and a binary16 sum (AccumulateBinary16) beyond s ≈ 11.09
	// (ln 65504); the row is then NaN or 0 and its log-sum-exp +Inf.
	ShiftNone
)

var shiftWords = vocab.New("attention", "softmax shift", "what a port subtracts from the logits before exponentiating them (a precision idiom: the yardstick's float32 run follows it, the reference ignores it)", ErrOption,
	vocab.W(ShiftMax, "max", "the row maximum: every exponent ≤ 0, none overflows"),
	vocab.W(ShiftNone, "none", "nothing: e^s of the raw logits, which overflows float32 beyond s ≈ 88.7"),
)

// String returns s's word ("max").
func (s SoftmaxShift) String() string { return shiftWords.String(s) }

// MarshalText returns s's word; a value with none is an error wrapping
// ErrOption.
func (s SoftmaxShift) MarshalText() ([]byte, error) { return shiftWords.Marshal(s) }

// UnmarshalText sets s from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (s *SoftmaxShift) UnmarshalText(b []byte) error { return shiftWords.Unmarshal(s, b) }

// Meaning returns one line saying what s means.
func (s SoftmaxShift) Meaning() string { return shiftWords.Meaning(s) }

// Values lists every SoftmaxShift, the zero value first.
func (SoftmaxShift) Values() []SoftmaxShift { return shiftWords.Values() }

// Check returns nil if s is one of the SoftmaxShift constants, or an error
// wrapping ErrOption that lists the words.
func (s SoftmaxShift) Check() error { return shiftWords.Check(s) }
