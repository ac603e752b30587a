package kvcache

import (
	"errors"

	"github.com/plumbref/plumb/internal/vocab"
)

// This file is the package's vocabulary: its errors and its conventions.

// Sentinel errors. Every error returned by this package wraps exactly one
// of them, or, for a call the attention package refuses, one of the
// attention package's (the error is then attention's, unchanged), so
// callers can match with errors.Is. The message reads
//
//	<sentinel>: <function>: <argument> = <value>; want <expectation>
//
// for instance "kvcache: invalid page index: Gather: table[2] = 9; want
// 0 ≤ page < Pool.Pages = 8".
var (
	// ErrShape: a dimension out of range (heads, Dk or Dv below one, a
	// negative page count, query heads that are not a multiple of the
	// key/value heads), or a tensor beyond MaxElements.
	ErrShape = errors.New("kvcache: invalid shape")
	// ErrPageSize: a page size below one.
	ErrPageSize = errors.New("kvcache: invalid page size")
	// ErrPoolSize: a key or value pool whose length is not
	// Pages·PageSize·HeadsKV·D.
	ErrPoolSize = errors.New("kvcache: invalid pool size")
	// ErrPageIndex: a page table entry, among those a length uses, that is
	// negative or not below Pool.Pages.
	ErrPageIndex = errors.New("kvcache: invalid page index")
	// ErrLength: a negative sequence length, one beyond the pages of its
	// page table, one shorter than the queries that sit in it, or a slice
	// whose length does not match the shape.
	ErrLength = errors.New("kvcache: invalid length")
	// ErrSplit: a key range [start, end) that is not 0 ≤ start ≤ end ≤ Lk,
	// or partial results that do not agree in number or length.
	ErrSplit = errors.New("kvcache: invalid split")
	// ErrOffsets: query or key offsets of packed sequences that do not
	// start at 0, decrease, do not end at the total, do not agree in
	// number, or give a sequence fewer keys than queries.
	ErrOffsets = errors.New("kvcache: invalid sequence offsets")
	// ErrOption: an option this package does not take with a function (a
	// mask with a ring, whose window is the mask, or a bias with packed
	// sequences), or a convention value that is none of its words.
	ErrOption = errors.New("kvcache: invalid option")
	// ErrSize: a negative input to CacheSize, or a size that overflows an
	// int.
	ErrSize = errors.New("kvcache: invalid size")
)

// MaxElements is the most elements one tensor this package allocates may
// hold: attention.MaxElements, 2^28 (2 GiB of float64). The size of every
// result (a gathered cache, an output) is checked against it, by division
// so that no product wraps around, before anything is allocated, so that a
// huge length or head count is an error and not an out-of-memory crash.
const MaxElements = 1 << 28

// PoolLayout is the memory order of a pool of pages. Within a page the
// head dimension is always innermost.
type PoolLayout int

const (
	// PagesFirst is [Pages, PageSize, HeadsKV, D]: the heads of one
	// position are contiguous, as a projection writes a new token. The
	// zero value.
	PagesFirst PoolLayout = iota
	// HeadsFirst is [Pages, HeadsKV, PageSize, D]: each head's rows of one
	// page are contiguous.
	HeadsFirst
)

var poolLayoutWords = vocab.New("kvcache", "pool layout", "the memory order of a pool of key or value pages", ErrOption,
	vocab.W(PagesFirst, "pages-first", "[pages, page size, heads, dim]: the heads of one position are contiguous"),
	vocab.W(HeadsFirst, "heads-first", "[pages, heads, page size, dim]: each head's rows of a page are contiguous"),
)

// String returns l's word ("pages-first").
func (l PoolLayout) String() string { return poolLayoutWords.String(l) }

// MarshalText returns l's word; a value with none is an error wrapping
// ErrOption.
func (l PoolLayout) MarshalText() ([]byte, error) { return poolLayoutWords.Marshal(l) }

// UnmarshalText sets l from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (l *PoolLayout) UnmarshalText(b []byte) error { return poolLayoutWords.Unmarshal(l, b) }

// Meaning returns one line saying what l means.
func (l PoolLayout) Meaning() string { return poolLayoutWords.Meaning(l) }

// Values lists every PoolLayout, the zero value first.
func (PoolLayout) Values() []PoolLayout { return poolLayoutWords.Values() }

// Check returns nil if l is one of the PoolLayout constants, or an error
// wrapping ErrOption that lists the words.
func (l PoolLayout) Check() error { return poolLayoutWords.Check(l) }
