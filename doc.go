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
//	band and sliding window                      Band{Before, After}: −Before ≤ j − i ≤ After;
//	                                             Window(n): n keys ending at the query
//	a row that sees no key                       EmptyRowZero (output 0, log-sum-exp −Inf);
//	                                             EmptyRowNaN (what a naive softmax gives)
//	rotary pairing                               PairAdjacent: dims (2i, 2i+1);
//	                                             PairHalves: dims (i, i + d/2)
//	sinusoidal layout                            Interleaved; Concatenated
//	RMSNorm epsilon                              inside the square root, or added to the root
//	norm weight                                  w, or (1 + w)
//	GELU                                         exact (erf); tanh approximation; sigmoid approximation
//	mask fill                                    −Inf, or a finite value the caller chooses
//
// # Accuracy
//
// Each kernel's documentation states the worst normwise relative error
// ‖got − want‖₂ / ‖want‖₂ measured against the 50-digit golden values; the
// target is 1e-14 or better. The golden files and the program that makes
// them are in testdata/ (see testdata/README.md).
package plumb
