// Package attention is the reference for scaled dot-product attention,
// forward and backward, with every convention an explicit option.
//
// For query head h of batch entry b and query row i, with kv head
// g = kv(h), the logit of key j is built in this order
//
//	t  = Scale · (Q[b,h,i] · K[b,g,j])           Scale = 1/√Dk unless set
//	t  = c · tanh(t / c)                          soft-cap, when SoftCap = c > 0
//	t += Bias[b,h,i,j]                            broadcast over batch and/or heads
//	t −= Slopes[h] · (p(i) − j)                   ALiBi (or |p(i) − j|, symmetric)
//	t  = −Inf unless the mask shows key j to query i
//
// and then
//
//	lse = log(e^{σ_h} + Σ_j e^{t_j})              σ_h: sink logit, −Inf without sinks
//	O   = Σ_j e^{t_j − lse} V[b,g,j]
//
// Sources: scaled dot-product and multi-head attention, Vaswani et al. 2017,
// "Attention Is All You Need", arXiv 1706.03762, §3.2.1 Eq. (1), §3.2.2,
// masking §3.2.3; multi-query attention, Shazeer 2019, "Fast Transformer
// Decoding: One Write-Head is All You Need", arXiv 1911.02150, §3;
// grouped-query attention, Ainslie et al. 2023, "GQA", arXiv 2305.13245,
// §2.2; ALiBi, Press et al. 2022, "Train Short, Test Long", arXiv
// 2108.12409, §3; online softmax and the merge of partial results, Milakov
// & Gimelshein 2018, "Online normalizer calculation for softmax", arXiv
// 1805.02867, Algorithm 3 and §3.1; logit capping c·tanh(s/c), Bello et al.
// 2016, "Neural Combinatorial Optimization with Reinforcement Learning",
// arXiv 1611.09940; sink logits (a logit in the denominator that carries
// no value) relate to the attention sinks of Xiao et al. 2023, arXiv
// 2309.17453, in a learned per-head form that is common practice.
//
// # Conventions, and their alternatives
//
//   - Layout: HeadsMajor [B, H, L, D] (the zero value) or SeqMajor
//     [B, L, H, D], for Q, K, V, the output and the gradients alike; the
//     log-sum-exp is [B, Hq, Lq] or [B, Lq, Hq] so that its order follows
//     the output rows. Bias is always [BiasBatch, BiasHeads, Lq, Lk].
//   - Grouped heads: GroupBlocks, kv(h) = ⌊h/(Hq/Hkv)⌋ (the zero value,
//     contiguous groups as drawn by Ainslie et al.), or GroupCycle,
//     kv(h) = h mod Hkv. Hkv = Hq is multi-head, Hkv = 1 multi-query.
//   - Query positions p(i) = a + Offset + i with a = Lk − Lq (mask.AlignEnd,
//     the zero value: the last query sees the last key, as in decode) or
//     a = 0 (mask.AlignStart). The mask and ALiBi both use p(i).
//   - Order of application: scale, cap, bias, ALiBi, mask. The cap first
//     so that a large bias (or a finite mask fill such as −1e9 written as a
//     bias) is not squashed into (−c, c); this is also the order in common
//     use [common practice]. Other orders are not offered.
//   - ALiBi: the caller gives one slope per query head (e.g. 2^{−8k/H},
//     Press et al. §3); ALiBiCausal adds −m·(p(i) − j), the paper's
//     m·[−(i−1), …, −1, 0], and ALiBiSymmetric −m·|p(i) − j|.
//   - Sinks: e^{σ_h} joins every denominator of head h, so the key weights
//     sum to 1 − e^{σ_h − lse}; the log-sum-exp includes it.
//   - Rows that see no key: EmptyRowZero (output 0, lse −Inf; the zero
//     value, what a tiled kernel gives) or EmptyRowNaN (output NaN, lse
//     −Inf; what a naive softmax gives). A row with a finite sink is never
//     empty: its output is 0 and its lse σ_h.
//   - The zero mask.Mask in Options means mask.Full().
//
// # Forms
//
// Forward and Backward are the direct form, the reference: one query row at
// a time, each formula as written, maximum subtracted before exp.
// ForwardTiled is the same forward walked over key blocks with a running
// maximum and sum, as tiled kernels compute it, and Merge combines partial
// results over disjoint key sets. Decode is Forward for new queries at
// positions pos … pos+Lq−1 against a cache. ForwardFast and BackwardFast are
// blocked (64 query rows), compute every product with plumb's own
// register-blocked matrix product (internal/num's MatrixProduct, pure Go), run in
// parallel over independent outputs and hold at most a few 64 × Lk blocks
// per worker; each of their sums has the direct form's terms in the direct
// form's order, so they give Forward's and Backward's results bit for bit
// (TestFastIsDirect), faster.
//
// Every exported function that takes or returns tensors has a float32 twin
// named with the suffix 32 (Forward32, BackwardFast32, Merge32, …) that
// runs the same generic body instantiated at float32: the straightforward
// low-precision implementation a yardstick is measured on, never a
// reference. Scalar functions and functions of parameters or tables are
// float64 only; Options, and so the bias, slopes and sinks, stay float64 in
// the twins.
//
// A port that computes less accurately on purpose, by a common idiom,
// declares it with an Idiom (Options.Idiom, or the methods
// Idiom.Softmax32 and Idiom.LogSumExp32): running sums rounded to
// bfloat16 or binary16 after each addition (Accumulation), or a softmax
// without the maximum subtracted (SoftmaxShift). Forward32, Decode32 and
// those methods then compute as such a port does, the yardstick it is
// judged by; the float64 reference ignores the idiom, and Backward32 and
// the fast and tiled forms compute in plain float32 whatever it says.
// Measured (TestAccumulationCostsItsFormat): a softmax sum of two or
// three terms kept in bfloat16 errs by up to 2⁻⁷·¹ relative (binary16
// 2⁻¹⁰·¹), and a row of 256 by 0.03 normwise (binary16 0.004); the
// unshifted softmax overflows at logits above 88.72 (11.09 with binary16
// sums).
//
// Determinism: every form gives bit-identical results for any GOMAXPROCS
// and on every architecture (amd64 with any GOAMD64, arm64, ppc64le,
// s390x): every product is rounded before it is added (no fused
// multiply-add), the matrix products of the fast forms are plumb's own,
// whose sums do not depend on the blocking or the machine, and exp, log,
// tanh and cosh are plumb's correctly rounded ones (internal/elem). The
// float32 twins, the fast ones included, are as deterministic.
//
// The backward pass uses D_i − c = Σ_j P_ij (dP_ij − c) − c·P_sink, with c
// the dP of the row's most probable entry, instead of D_i = dO_i · O_i:
// the same value, without the cancellation of dP_ij − D_i when one key
// holds nearly all the weight (a case where the usual formula loses half
// the digits of dQ; see TestGoldenBackward, case logits_spread_700).
//
// # Special cases
//
// Special cases are:
//
//	a row that sees no key, no sink     O = 0 (EmptyRowZero) or NaN (EmptyRowNaN), lse = −Inf
//	Lk = 0                              every row sees no key
//	logits near ±1000                   exact: only differences t_j − max are exponentiated
//	NaN in Q, K, V or a visible logit   NaN in the rows it reaches, nowhere else
//	+Inf logit (e.g. a +Inf bias)       NaN row
//	−Inf bias, or a −Inf logit from     hides the key, like the mask
//	  infinite q or k
//	Inf or NaN in a V row of weight 0   ignored
//	a logit of finite inputs that       an error wrapping ErrOverflow (see
//	  overflows                         Options): Scale 1e308 on inputs near 1
//	a tensor beyond MaxElements         ErrShape, before anything is allocated
//	Batch = 0 or Lq = 0                 empty outputs
//	invalid input                       an error wrapping ErrShape, ErrLength,
//	                                    ErrOption, ErrBias, ErrMask or
//	                                    ErrOverflow; never a panic
//
// # Accuracy
//
// Measured against the 50-digit golden values (testdata/golden/attention,
// written by testdata/gen/fam_attention.py and testdata/gen/fam_softmax.py),
// over every case; the float32 twins run on the inputs rounded to float32,
// which is most of their error.
//
// Worst normwise relative error ‖got − want‖₂ / ‖want‖₂ over the golden cases, by function and output:
//
//	                                  out       lse       d_q       d_k       d_v       d_sinks   d_bias
//	Forward                           9.7e-16   2.7e-16
//	ForwardTiled                      9.2e-16   2.7e-16
//	ForwardFast                       9.7e-16   2.7e-16
//	Decode                            1.6e-16   1.3e-16
//	Backward                                              4.3e-15   2.2e-15   1.5e-15   1.8e-16   2.5e-16
//	BackwardFast                                          4.3e-15   2.2e-15   1.5e-15   1.8e-16   2.5e-16
//	Merge                             2.2e-16   7.4e-17
//	Softmax                           9.6e-16
//	LogSumExp                                   2.2e-16
//	Backward (logits near ±1000)                          1.0e-13   9.2e-14
//	BackwardFast (logits near ±1000)                      1.0e-13   9.2e-14
//	Forward32                         3.9e-07   6.1e-08
//	ForwardTiled32                    4.0e-07   7.5e-08
//	ForwardFast32                     3.9e-07   6.1e-08
//	Decode32                          7.1e-08   6.0e-08
//	Backward32                                            9.1e-07   9.1e-07   4.2e-07   9.7e-08   1.5e-07
//	BackwardFast32                                        9.1e-07   9.1e-07   4.2e-07   9.7e-08   1.5e-07
//	Merge32                           8.6e-08   4.7e-08
//	Softmax32                         7.9e-06
//	LogSumExp32                                 9.3e-08
//
// The golden tests of this package measure the table and fail when it is out of date.
//
// The rows "(logits near ±1000)" are dQ and dK of the two cases whose
// logits are near ±1000. There any float64 evaluation rounds each logit
// with an absolute error near 1000·2⁻⁵³ ≈ 1e-13, and dQ = Σ_j dS_ij K_j
// cancels; rounding only the logits and computing the rest at 50 digits
// gives the same 1.0e-13, so that error is the problem's conditioning. The
// float32 twins skip those cases (float32 inputs change such logits by
// about 1e-4). The fast forms measure as the direct forms do: they are the
// same bits.
//
// # Speed
//
// BenchmarkForwardFastCausal, BenchmarkBackwardFastCausal and
// BenchmarkDecodeFast time batch 1, 16 heads, head dimension 128: a causal
// prefill of 2048 positions, and one query against 32768 cached keys;
// BenchmarkForwardFastFull is the prefill without a mask. Their times and
// GFLOP/s, beside numpy float64 over OpenBLAS on the same computations and
// beside plumb run attention-forward (fast and -direct) on the causal
// prefill, are in BENCHMARKS.md at the repository root, measured and
// rendered by internal/benchdoc (go run ./internal/benchdoc), with the
// date, the CPU and the BLAS kernels named.
//
// The products are plumb's own (internal/num's MatrixProduct), pure Go,
// against OpenBLAS's vector kernels in numpy (compare the unmasked row with
// the dgemm row); the causal prefill closes part of the gap because the
// fast form computes only the key blocks a row block can see, about half
// of the products, where whole-matrix numpy code computes them all and
// then masks. The causal forward also evaluates 16·2048·2049/2, about 34
// million, correctly rounded exponentials (internal/elem). Decoding is
// bound by reading the 1 GiB cache. The direct form runs on one core.
package attention
