// Package plumb is a correctness oracle for transformer kernels: float64
// reference implementations of the layer math, each checked against golden
// vectors computed independently at 50 significant digits, against
// published worked values, and against mathematical properties.
//
// Engineers who write fast kernels — SIMD CPU code, GPU kernels, quantised
// paths, or a port of a model to a new runtime — import plumb's packages in
// their tests as the answer to compare with, and read their documentation
// while implementing a layer. It needs no GPU.
//
// # Packages
//
//	mask       which keys each query may see: full, causal, band, sliding
//	           window, prefix-bidirectional, key padding, packed sequences,
//	           intersections; boolean and additive forms
//	attention  scaled dot-product attention forward and backward: multi-head,
//	           grouped and multi-query; masks, bias, ALiBi slopes, soft-capping,
//	           sink logits; the tiled online-softmax form and the merge of
//	           partial results; decode against a cache
//	posenc     position encodings: sinusoidal, rotary (both pairings, partial
//	           rotation, tables, inverse), context scaling (interpolation,
//	           NTK-aware, dynamic, YaRN with both ramps, per-frequency), ALiBi
//	norm       LayerNorm and RMSNorm (ε in the root or added to it; gain w or
//	           1 + w), the fused residual add + norm, forward and backward
//	ffn        activations (ReLU, GELU exact/tanh/sigmoid, sigmoid, Swish,
//	           SiLU) with derivatives; the two-layer feed-forward network and
//	           the gated units (GLU, Bilinear, ReGLU, GEGLU, SwiGLU), forward
//	           and backward; the hidden-size rule
//	compare    number formats (float32, binary16, bfloat16, OCP FP8 E4M3 and
//	           E5M2) with exact rounding, ULP distances, diff reports,
//	           tolerances and the low-precision yardstick; helpers for
//	           testing.TB and go-cmp
//	npy        read and write NumPy .npy files, the exchange format with a
//	           port under test
//	ops        every kernel as a named operation with a JSON configuration,
//	           float64 and float32 runs, and the yardstick of each output
//	cmd/plumb  the command line: plumb gen, run, diff, check, demo
//
// Beside each kernel package a conformance suite (attention/attentiontest,
// posenc/posenctest, norm/normtest, ffn/ffntest) judges a user's kernel
// against the reference in every case and convention it declares, with one
// call: Run(t, kernel). examples/fastattn shows one in use.
//
// Every package takes plain []float64 slices, row-major, with an explicit
// shape and layout, validates its inputs, and returns errors that name the
// argument and the expected and actual values, matchable with errors.Is
// against the package's exported sentinel errors. Nothing panics on user
// input. Results are deterministic: the same inputs give bit-identical
// outputs for any GOMAXPROCS.
//
// # Conventions
//
// The bugs that cost kernel engineers the most are convention mismatches.
// plumb makes each one an explicit, named option:
//
//	question                                     options
//	tensor layout                                HeadsMajor (batch, heads, seq, dim);
//	                                             SeqMajor (batch, seq, heads, dim)
//	which kv head a query head uses              GroupBlocks: kv = h / (Hq/Hkv);
//	                                             GroupCycle: kv = h mod Hkv
//	causal alignment when Lq ≠ Lk                AlignEnd: the last query sees the last key;
//	                                             AlignStart: query i is key position i;
//	                                             plus an explicit query position offset
//	band and sliding window                      Band(before, after): −before ≤ j − p ≤ after;
//	                                             Window(n): the n keys ending at the query,
//	                                             p − n < j ≤ p
//	a row that sees no key                       EmptyRowZero (output 0, log-sum-exp −Inf);
//	                                             EmptyRowNaN (what a naive softmax gives)
//	rotary pairing                               PairAdjacent: dims (2i, 2i+1);
//	                                             PairHalves: dims (i, i + r/2), r rotated dims
//	rotary context scaling                       Interpolation; NTKAware; YaRN (RampRatio or
//	                                             RampDims); PerFrequency; dynamic via CurrentLength
//	ALiBi bias                                   ALiBiCausal; ALiBiSymmetric
//	sinusoidal layout                            Interleaved; Concatenated
//	norm epsilon                                 EpsilonInRoot: √(s² + ε); EpsilonAddedToRoot: √s² + ε
//	norm weight                                  WeightAsIs: w; WeightOnePlus: 1 + w
//	GELU                                         ActGELU (erf); ActGELUTanh; ActGELUSigmoid
//	weight matrix layout                         InByOut: [in, out], y = x·W;
//	                                             OutByIn: [out, in], y = x·Wᵀ
//	fused gate and value weight                  GateUpStacked: all gate units, then all value
//	                                             units; GateUpInterleaved: alternating
//	mask fill                                    −Inf (Bias), or a finite value (BiasFill)
//
// # Accuracy
//
// Each kernel's documentation states the worst normwise relative error
// ‖got − want‖₂ / ‖want‖₂ measured against the 50-digit golden values; the
// target is 1e-14 or better. The golden files and the program that makes
// them are in testdata/ (see testdata/README.md). Measured worst cases: norm
// 4.7e-16; ffn 5.6e-16, and activations within 5e-16 relative per element
// in the tails up to |x| = 30; posenc 1.5e-16 at positions up to 2³¹ − 1
// (angles are formed in double-double arithmetic); masks, ALiBi slopes and
// format conversions exact.
package plumb
