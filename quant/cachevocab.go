package quant

import "github.com/plumbref/plumb/internal/vocab"

// This file holds the conventions of quantised key/value caches and of
// quantised attention probabilities (see CacheTensor and Attend).

// CacheCode is the code format of a quantised key/value cache.
type CacheCode int

const (
	// CacheInt8: symmetric int8 codes, two's complement bytes, value q·s (no zero point). The zero value.
	CacheInt8 CacheCode = iota
	// CacheE4M3: OFP8 E4M3 codes (OFP8 rev 1.0), value v·s.
	CacheE4M3
	// CacheE5M2: OFP8 E5M2 codes (OFP8 rev 1.0), value v·s.
	CacheE5M2
)

var cacheCodeWords = vocab.New("quant", "cache code", "how a quantised key/value cache stores its elements", ErrOption,
	vocab.W(CacheInt8, "int8", "symmetric int8 codes, value q·s, new codes chosen in −127..127"),
	vocab.W(CacheE4M3, "e4m3", "OFP8 E4M3 codes, value v·s, new scales amax/448"),
	vocab.W(CacheE5M2, "e5m2", "OFP8 E5M2 codes, value v·s, new scales amax/57344"),
)

// String returns c's word ("int8").
func (c CacheCode) String() string { return cacheCodeWords.String(c) }

// MarshalText returns c's word; a value with none is an error wrapping
// ErrOption.
func (c CacheCode) MarshalText() ([]byte, error) { return cacheCodeWords.Marshal(c) }

// UnmarshalText sets c from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (c *CacheCode) UnmarshalText(b []byte) error { return cacheCodeWords.Unmarshal(c, b) }

// Meaning returns one line saying what c means.
func (c CacheCode) Meaning() string { return cacheCodeWords.Meaning(c) }

// Values lists every CacheCode, the zero value first.
func (CacheCode) Values() []CacheCode { return cacheCodeWords.Values() }

// Check returns nil if c is one of the CacheCode constants, or an error
// wrapping ErrOption that lists the words.
func (c CacheCode) Check() error { return cacheCodeWords.Check(c) }

// CacheScaling says which elements of a [Batch, Heads, Len, Dim] cache
// share one scale.
type CacheScaling int

const (
	// CachePerTensor: one scale for the whole cache. The zero value.
	CachePerTensor CacheScaling = iota
	// CachePerHead: one scale per (batch entry, head), Batch·Heads scales.
	CachePerHead
	// CachePerToken: one scale per (batch entry, head, token), the Dim elements of one key or value row; Batch·Heads·Len scales.
	CachePerToken
)

var cacheScalingWords = vocab.New("quant", "cache scaling", "which elements of a quantised key/value cache share one scale", ErrOption,
	vocab.W(CachePerTensor, "per-tensor", "one scale for the whole cache"),
	vocab.W(CachePerHead, "per-head", "one scale per batch entry and head"),
	vocab.W(CachePerToken, "per-token", "one scale per batch entry, head and token (one key or value row)"),
)

// String returns s's word ("per-token").
func (s CacheScaling) String() string { return cacheScalingWords.String(s) }

// MarshalText returns s's word; a value with none is an error wrapping
// ErrOption.
func (s CacheScaling) MarshalText() ([]byte, error) { return cacheScalingWords.Marshal(s) }

// UnmarshalText sets s from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (s *CacheScaling) UnmarshalText(b []byte) error { return cacheScalingWords.Unmarshal(s, b) }

// Meaning returns one line saying what s means.
func (s CacheScaling) Meaning() string { return cacheScalingWords.Meaning(s) }

// Values lists every CacheScaling, the zero value first.
func (CacheScaling) Values() []CacheScaling { return cacheScalingWords.Values() }

// Check returns nil if s is one of the CacheScaling constants, or an error
// wrapping ErrOption that lists the words.
func (s CacheScaling) Check() error { return cacheScalingWords.Check(s) }

// ProbCode says whether and how Attend quantises the softmax weights
// before their product with V.
type ProbCode int

const (
	// ProbExact: the weights are not quantised. The zero value.
	ProbExact ProbCode = iota
	// ProbE4M3: the unnormalised weights e = exp(x − max x) ∈ (0, 1] are held as E4M3 codes with the fixed scale 1/448.
	ProbE4M3
	// ProbE5M2: the same with E5M2 codes and the fixed scale 1/57344.
	ProbE5M2
)

var probCodeWords = vocab.New("quant", "probability code", "whether the softmax weights are quantised before their product with V", ErrOption,
	vocab.W(ProbExact, "none", "the weights are not quantised"),
	vocab.W(ProbE4M3, "e4m3", "the unnormalised weights exp(x − max x) as E4M3 codes of round(448·e), scale 1/448"),
	vocab.W(ProbE5M2, "e5m2", "the unnormalised weights exp(x − max x) as E5M2 codes of round(57344·e), scale 1/57344"),
)

// String returns p's word ("e4m3").
func (p ProbCode) String() string { return probCodeWords.String(p) }

// MarshalText returns p's word; a value with none is an error wrapping
// ErrOption.
func (p ProbCode) MarshalText() ([]byte, error) { return probCodeWords.Marshal(p) }

// UnmarshalText sets p from its word; any other text is an error wrapping
// ErrOption that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (p *ProbCode) UnmarshalText(b []byte) error { return probCodeWords.Unmarshal(p, b) }

// Meaning returns one line saying what p means.
func (p ProbCode) Meaning() string { return probCodeWords.Meaning(p) }

// Values lists every ProbCode, the zero value first.
func (ProbCode) Values() []ProbCode { return probCodeWords.Values() }

// Check returns nil if p is one of the ProbCode constants, or an error
// wrapping ErrOption that lists the words.
func (p ProbCode) Check() error { return probCodeWords.Check(p) }
