// Package block is the reference of one transformer decoder block: the
// composition of the kernel packages' own functions (norm, posenc,
// attention, ffn) into the layer a decoder stacks, with a key/value cache
// and every intermediate tensor named, so that a port's block can be
// checked stage by stage.
//
// Package block sits above the kernel packages: it imports attention,
// norm, posenc, ffn and mask, and none of them imports it (nor each other,
// but attention and posenc mask).
//
// # The block
//
// For hidden states x of Tokens rows of Width values, and the past
// cache of Past tokens:
//
//	PreNorm:   a = N₁(x);  h = x + Attn(a);        y = h + FFN(N₂(h))
//	PostNorm:  a = x;      h = N₁(x + Attn(a));    y = N₂(h + FFN(h))
//	Parallel:  a = N₁(x);  h = x + Attn(a);        y = h + FFN(a)
//
// Sources: the post-norm block is that of Vaswani et al. 2017, "Attention
// Is All You Need", arXiv 1706.03762, §3.1 (each sublayer's output is
// LayerNorm(x + Sublayer(x))); the pre-norm block is that of Xiong et al.
// 2020, "On Layer Normalization in the Transformer Architecture", arXiv
// 2002.04745, Fig. 1(b) (x + Sublayer(LayerNorm(x)); the final norm of a
// pre-norm stack is the stack's, not the block's); the parallel form,
// both sublayers from one normalised input added to one residual, is
// common practice. Parallel adds (x + Attn(a)) first, then FFN(a).
//
// N is norm.LayerNorm (Ba, Kiros & Hinton 2016, arXiv 1607.06450) or
// norm.RMSNorm (Zhang & Sennrich 2019, arXiv 1910.07467), with package
// norm's conventions (epsilon inside or added to the root, weight as is
// or 1 + w; Options.Norm). N₁ and N₂ have weights of their own; RMSNorm
// takes no bias; Parallel has no N₂.
//
// The attention sublayer, Attn(a), for H query heads on G key/value heads
// of D values:
//
//	q = a·W_Q + b_Q   [Tokens, H, D]
//	k = a·W_K + b_K   [Tokens, G, D]
//	v = a·W_V + b_V   [Tokens, G, D]
//	q, k ← RoPE at positions Past + t           (posenc.Rotary.Apply, when Options.Rotary is set)
//	K = [past K; k],  V = [past V; v]           [Past + Tokens, G, D], the present cache
//	o = attention(q, K, V)                      (attention.Forward, seq-major, batch 1)
//	Attn(a) = o·W_O + b_O
//
// Rotary encoding is that of Su et al. 2021, "RoFormer", arXiv
// 2104.09864, with every configuration of posenc.Rotary (partial
// rotation, both pairings, context scaling, magnitude). The cache holds
// keys after rotation, so that a decoding step rotates only its own
// keys (common practice). Attention takes every option of package
// attention (mask, scale, soft-cap, bias, ALiBi slopes, sinks, both GQA
// head maps (Ainslie et al. 2023, arXiv 2305.13245), empty-row policy);
// query t sits at key position Past + t.
//
// FFN is ffn.Forward: the plain layer of Vaswani et al. 2017, §3.3 Eq.
// (2), or a gated unit of Shazeer 2020, "GLU Variants Improve
// Transformer", arXiv 2002.05202, with any activation of package ffn.
//
// # Conventions
//
//   - Form: PreNorm (the zero value), PostNorm, Parallel.
//   - NormKind: LayerNorm (the zero value), RMSNorm.
//   - Options.WeightOrder, an ffn.Layout: every weight matrix stored
//     [in, out] (InByOut, the zero value, x·W) or [out, in] (OutByIn,
//     x·Wᵀ).
//   - Tensors are row-major; the heads of one token are contiguous
//     ([Tokens, H, D], the seq-major layout of package attention).
//   - Each projection is the ascending sum of rounded products, then the
//     bias: package ffn's summation.
//
// # Stages
//
// Every intermediate is a Stage, in pipeline order (T Tokens, W Width,
// H Heads, G HeadsKV, D HeadDim, P Past):
//
//	input      [T, W]       x
//	attn_in    [T, W]       what attention reads: N₁(x), or x (PostNorm)
//	q, k, v    [T, H|G, D]  the projections, biases added
//	q_rot      [T, H, D]    q after RoPE (q without rotary)
//	k_rot      [T, G, D]    k after RoPE
//	present_k  [P + T, G, D]
//	present_v  [P + T, G, D]
//	attn       [T, H, D]    the attention output
//	attn_out   [T, W]       o·W_O + b_O
//	resid1     [T, W]       x + attn_out
//	ffn_in     [T, W]       N₂(resid1), N₁(resid1) (PostNorm), attn_in (Parallel)
//	ffn_out    [T, W]
//	resid2     [T, W]       h + ffn_out
//	output     [T, W]       y: resid2, or N₂(resid2) (PostNorm)
//
// Options.Keep names the stages a call returns in Result.Stages; by
// default none is kept, and the block holds O(Tokens·Width +
// Tokens·Hidden + (Past + Tokens)·G·D) values at a time.
//
// # Forms
//
// Forward calls the kernels' reference forms (attention.Forward,
// ffn.Forward); ForwardFast their fast forms (attention.ForwardFast,
// ffn.ForwardFast), which give the same bits, and no Tokens × keys tensor
// for all heads. Both compute each projection with one matrix product
// (internal/num's MatrixProduct, the same bits as the loop). The float32
// rule: Forward32 and ForwardFast32 are the float32 instantiations of
// the same body on the kernels' float32 twins, the straightforward
// low-precision implementation a yardstick is measured on; not
// references.
//
// # Errors
//
// Every error wraps one of ErrShape, ErrWeight, ErrCache, ErrOption, or
// the sentinel of the kernel package that refused its part (for example
// norm.ErrEpsilon, attention.ErrShape, posenc.ErrBase, ffn.ErrOption).
//
// Special cases are:
//
//	Tokens = 0                          Out empty, Present = the past cache
//	NaN or ±Inf in x or a weight        propagate as the kernels say
//	a weight missing or of the wrong length  ErrWeight, naming it and the shape wanted
//	a norm bias with RMSNorm, N₂ with Parallel  ErrWeight
//	past K or V not Past·G·D long        ErrCache
//	a convention value not declared      ErrOption
//	a tensor beyond MaxElements          ErrShape, before anything is allocated
//
// # Accuracy
//
// Against the 50-digit golden cases of testdata/golden/block (written by
// testdata/gen/fam_block.py, which composes the block from the
// generator's own per-layer formulas of fam_norm, fam_posenc,
// fam_attention and fam_ffn, every intermediate kept at 50 digits):
//
// Worst normwise relative error ‖got − want‖₂ / ‖want‖₂ over the golden cases, by function and output:
//
//	               out       present_k present_v
//	Forward        5.5e-16   2.3e-16   2.5e-16
//	ForwardFast    5.5e-16   2.3e-16   2.5e-16
//	Forward32      3.0e-07   1.2e-07   1.1e-07
//	ForwardFast32  3.0e-07   1.2e-07   1.1e-07
//
// The golden tests of this package measure the table and fail when it is out of date.
//
// The rows with the suffix 32 are the float32 twins on the inputs
// rounded to float32, against the same float64 values.
//
// # Speed
//
// BenchmarkForwardFast times one block of width 4096, 32 query heads on 8
// kv heads of dimension 128, a gated FFN of 14336 units and 512 tokens.
package block
