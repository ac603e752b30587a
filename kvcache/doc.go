// Package kvcache is the reference for the conventions of serving-time
// attention: keys and values kept in pages of a pool, decoding split over
// ranges of the cache, a ring buffer for a sliding window, packed
// sequences of different lengths, the scoring of draft tokens, and the
// size of a cache. Each function is built on the attention package and is
// provably the plain attention reference: it rearranges the keys and
// values (a copy, exact) and calls attention.Decode or attention.Forward
// with the caller's attention.Options, or folds attention.Merge; the tests
// check each identity.
//
// For query head h and query row i at key position p(i), with the logits
// s_j built as attention.Options says, every function here computes
//
//	lse_i = log(e^{σ_h} + Σ_{j visible} e^{s_j})
//	O_i   = Σ_{j visible} e^{s_j − lse_i} V_j
//
// over the keys of one sequence; what differs is where those keys are
// stored and which of them one call sees.
//
// Sources: pages of a pool and a page table per sequence, Kwon et al.
// 2023, "Efficient Memory Management for Large Language Model Serving with
// PagedAttention", arXiv 2309.06180, §4; the merge of partial results over
// disjoint key sets, Milakov & Gimelshein 2018, "Online normalizer
// calculation for softmax", arXiv 1805.02867, §3.1; sliding windows,
// Beltagy et al. 2020, "Longformer: The Long-Document Transformer", arXiv
// 2004.05150, §3.1; scoring drafted tokens in one pass, Leviathan et al.
// 2023, "Fast Inference from Transformers via Speculative Decoding", arXiv
// 2211.17192. Splitting one decoding step over ranges of the cache, the
// ring buffer, packing sequences by running totals and the cache-size
// formula are common practice.
//
// # Conventions, and their alternatives
//
//   - Pool layout: PagesFirst [Pages, PageSize, HeadsKV, D] (the zero
//     value: a page is attention.SeqMajor for its positions) or HeadsFirst
//     [Pages, HeadsKV, PageSize, D] (a page is attention.HeadsMajor). Keys
//     and values have pools of the same shape but for D (Dk, Dv).
//   - Page table: logical page i of a sequence is physical page table[i],
//     so position t is slot t mod PageSize of page table[⌊t/PageSize⌋].
//     The last page may be partly filled; a table may list more pages than
//     its length uses (they are not read); a page may be listed by several
//     sequences (a shared prefix).
//   - Queries of a paged call sit at the last Lq positions of their
//     sequence (their own keys and values already written): pos = length
//     − Lq, as attention.Decode.
//   - Splits: a split is a key range [start, end) of the whole cache; its
//     queries keep their true positions, so causal masks, windows and
//     ALiBi see the positions of the whole decode. A split's rows that see
//     no key are lse −Inf and output 0 (a no-op of the merge) whatever the
//     empty-row policy; MergeSplits applies the policy. A sink belongs to
//     exactly one split.
//   - Ring: W slots; the token at position p goes to slot p mod W; after n
//     tokens slot r holds position n − 1 − ((n − 1 − r) mod W), or −1
//     (RingPositions). Decoding against it is attention with mask.Window(W),
//     which shows the W keys p − W < j ≤ p, the query itself included (a
//     window of W keys, not W keys before the query: the mask package
//     documents that the sources disagree).
//   - Packed sequences: token-major [tokens, heads, D], sequence b owning
//     tokens offsets[b] … offsets[b+1]−1, with separate offsets for queries
//     and keys (keys ≥ queries per sequence: the excess is the cached
//     prefix), aligned at the end (mask.AlignEnd) and causal within each
//     sequence.
//   - Sizes: 2 (a key and a value) · layers · kvHeads · headDim · tokens ·
//     bytes per element; pages ⌈tokens/pageSize⌉.
//
// # Forms
//
// Every function is a rearrangement followed by one attention call per
// sequence, or a fold of attention.Merge: AttendPages, AttendRing,
// AttendPacked and VerifyDraft give attention.Decode's (or Forward's) bits
// for the same keys in contiguous form, because they make that very call
// on those numbers (the tests compare bit for bit). AttendSplit is
// attention.Decode with the keys outside the split hidden by a −Inf bias;
// the merge of the splits of a partition is the whole decode within
// rounding (1e-14 relative, normwise, measured: at most 9.2e-16 in
// TestSplitsMergeToDecode).
//
// Every exported function that takes or returns tensors has a float32
// twin named with the suffix 32 (Gather32, AttendPages32, …) that runs the
// same generic body instantiated at float32, calling attention's float32
// twins: the straightforward low-precision implementation a yardstick is
// measured on, never a reference. RingSlot, RingPositions and CacheSize
// take no tensors and have no twin; Pool and the options stay the same in
// the twins.
//
// Errors: every error wraps exactly one of the package's sentinels
// (ErrPageIndex, ErrLength, …) or, for a call the attention package
// refuses, is attention's own error. No function panics on its arguments;
// every tensor is checked against MaxElements before it is allocated.
//
// # Special cases
//
// Special cases are:
//
//	a length of 0                      an empty gathered cache; a decode needs its queries' own keys (ErrLength)
//	a page index < 0 or ≥ Pool.Pages   ErrPageIndex
//	a length beyond its table's pages  ErrLength
//	a pool of the wrong length         ErrPoolSize
//	a page size < 1                    ErrPageSize
//	an empty split                     lse −Inf, output 0; a no-op of MergeSplits
//	a ring before W tokens             every written position is seen (plain causal decoding)
//	a sequence of no queries (packed)  no rows
//	a tensor beyond MaxElements        ErrShape, before anything is allocated
//	a size beyond the largest int      ErrSize
//
// # Accuracy
//
// Against the 50-digit golden cases of testdata/golden/kvcache (written by
// testdata/gen/fam_kvcache.py, which lays the keys out by the definitions
// above and computes attention over the logical keys in mpmath, sharing no
// code with this package):
//
// Worst normwise relative error ‖got − want‖₂ / ‖want‖₂ over the golden cases, by function and output:
//
//	                out       lse
//	AttendPages     2.4e-16   1.6e-16
//	AttendSplit     2.6e-16   1.7e-16
//	MergeSplits     1.9e-16   1.4e-16
//	AttendRing      1.5e-16   1.3e-16
//	AttendPacked    1.2e-16   1.6e-16
//	VerifyDraft     1.9e-16   1.1e-16
//	AttendPages32   1.1e-07   6.9e-08
//	AttendSplit32   1.2e-07   7.3e-08
//	MergeSplits32   1.0e-07   7.1e-08
//	AttendRing32    9.9e-08   7.4e-08
//	AttendPacked32  5.3e-08   5.0e-08
//	VerifyDraft32   9.7e-08   4.9e-08
//
// The golden tests of this package measure the table and fail when it is out of date.
//
// AttendSplit is each split's partial result (an empty split's is checked
// to be exactly 0 and −Inf); MergeSplits is the merge of a case's splits
// against the golden whole decoding step. The rows with the suffix 32 are
// the float32 twins on the inputs rounded to float32, against the same
// float64 values: the size of plain float32 arithmetic, not an error.
//
// # Speed
//
// BenchmarkDecodePaged and BenchmarkDecodeContiguous time one decoding
// step of 32 query heads on 8 kv heads of dimension 128 against 65536
// cached positions, in pages of 16 in a random order, or contiguous
// (attention.Decode). The ratio of
// their times is in BENCHMARKS.md at the repository root (measured and
// rendered by internal/benchdoc). Gathering is one pass over K and V,
// split over the kv heads between goroutines, into a buffer kept for the
// next call: a fresh buffer for every call made the paged step several
// times slower, the first touch of 1 GiB of new memory costing far more
// than copying into memory already touched. The first paged call of a
// process still pays that once, and the benchmarks make one call before
// they start the clock.
package kvcache
