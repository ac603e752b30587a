// Package mask says which keys each query may see in attention: the
// visibility pattern, as booleans or as an additive bias.
//
// A Mask is a rule; a Geometry is the shape it is laid on (Batch entries of
// Lq queries by Lk keys) and where the queries sit among the keys. Query i
// has key position
//
//	p(i) = a + Offset + i,  a = Lk − Lq (AlignEnd) or 0 (AlignStart),
//
// and in batch entry b query i may see key j iff
//
//	Full          always
//	Causal        j ≤ p(i)
//	Band(B, A)    −B ≤ j − p(i) ≤ A          (Unbounded lifts a side)
//	Window(n)     p(i) − n < j ≤ p(i)        (= Band(n−1, 0))
//	Prefix(P)     j < P  or  j ≤ p(i)
//	KeyPadding(v) j < v[b]
//	Packed(o, k)  seg(j) = seg(p(i)), and j ≤ p(i) when k = BlockCausal,
//	              where seg(x) = s for o[s] ≤ x < o[s+1]
//	Intersect(…)  every part sees it
//
// Sources: masking before the softmax and the causal mask, Vaswani et al.
// 2017, "Attention Is All You Need", arXiv 1706.03762, §3.2.3; sliding
// windows, Beltagy et al. 2020, arXiv 2004.05150, §3.1, and Jiang et al.
// 2023, arXiv 2310.06825, §2 (which disagree on whether the window counts
// the query: see Window). Prefix-bidirectional masks, key padding and
// packed sequences are common practice.
//
// Conventions, and their alternatives:
//
//   - AlignEnd (the zero value) puts the last query at the last key, as in
//     decode and chunked prefill; AlignStart puts query i at key i. Offset
//     shifts every query by the same amount; with AlignStart it is the
//     position of the first query.
//   - Window(n) counts the query itself: n = 3 at p = 5 sees keys 3, 4, 5.
//   - The additive form holds 0 where visible and the fill elsewhere; the
//     fill is −Inf (Bias) or a value the caller chooses (BiasFill).
//
// Special cases are:
//
//	Lk = 0                 every row sees no key
//	a row that sees no key listed by EmptyRows; its softmax is empty
//	negative sizes         ErrSize
//	more than MaxElements  ErrSize, from the methods that write the mask out
//	query outside the keys ErrOffset, for every mask that uses positions
//	                       (Causal, Band, Window, Prefix, Packed; see
//	                       Mask.UsesPositions)
//	NaN or +Inf fill       ErrFill
//
// Every error wraps exactly one of the package's sentinel errors (ErrSize,
// ErrOffset, …) and names the function called, the argument, its value and
// what was wanted ("mask: invalid window: Window: n = 0; want ≥ 1: …"). No
// function panics on its arguments, nil receivers included.
//
// Masks are checked against golden files made by an independent generator
// (testdata/gen/fam_mask.py) from the rules above.
package mask
