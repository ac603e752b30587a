// Package stack is the reference of a small decoder stack built on
// package block: token ids, an embedding, an optional sinusoidal
// encoding, Layers blocks, a final norm and the logits, with greedy
// next-token steps through the key/value cache, and weights read from
// .npy files or an .npz archive named by a manifest of plumb's own.
//
// Package stack is its own package, above block (as block is above the
// kernel packages), so that block stays one layer and its golden family
// one layer's; the stack adds what a layer has no part in: token ids, the
// embedding and logits, the order of layers, the files.
//
// # The stack
//
// For token ids ids[0 … T−1] and each layer's past cache of Past tokens:
//
//	x₀[t] = E[ids[t]] (+ PE(Past + t))          E [Vocab, Width]; PE posenc.Sinusoidal (Config.Sinusoidal)
//	x_{l+1}, present_l = block(x_l, past_l)      l = 0 … Layers − 1 (package block, Config.Block)
//	h = N(x_L)  (Config.FinalNorm)  or  x_L      N is the blocks' norm, Globals.Norm, NormBias
//	logits = h·Eᵀ  (Config.Tied)  or  h·W_head   [T, Vocab]
//
// The sinusoidal encoding is that of Vaswani et al. 2017, "Attention Is
// All You Need", arXiv 1706.03762, §3.5 (added to the embeddings); tying
// the output projection to the embedding is §3.4 of the same paper ("we
// share the same weight matrix between the two embedding layers and the
// pre-softmax linear transformation"). The final norm of a pre-norm stack
// is Xiong et al. 2020, arXiv 2002.04745, Fig. 1(b). Each logit is the
// ascending sum of rounded products, as block's projections.
//
// # Greedy steps
//
// Greedy runs one Forward call on the prompt (the prefill), takes the
// argmax of the last row of logits, then repeatedly calls Forward on the
// one token chosen with the present caches of the call before. The
// argmax is the lowest id among the largest logits; a NaN logit is
// ErrLogits. Prefill then k steps gives the rows of one Forward call on
// the prompt and the chosen tokens, and a prefill in chunks of c tokens
// gives the whole prefill; the tests bound both by a normwise relative
// error of 1e-14 and measure 0 on the demo model (the same bits: each
// row's projections, rotations and cached keys are computed alike, and
// attention sums each query over the same keys in the same order).
//
// The key/value cache of a configuration holds, for every layer, keys
// and values of HeadsKV heads of HeadDim values per token:
//
//	bytes = 2 · Layers · HeadsKV · HeadDim · tokens · bytes per element
//
// (common practice); CacheBytes computes it. For 32 layers, 8 kv heads of
// dimension 128, 4096 tokens of 2 bytes: 536870912 bytes (512 MiB).
//
// # Memory: one layer's weights at a time
//
// Forward asks its Source for the globals (embedding, final norm, head),
// then for layer i's weights only after block i − 1 has returned, and
// keeps no reference to a layer's weights after its block: memory is
// bounded by the globals, one block's weights, the caches and one
// block's activations, never every layer's weights. Files reads one
// layer's arrays per call; a Source may as well generate them or reuse
// one layer's storage for the next. BenchmarkStreamedLayers shows it: two
// blocks of width 8192 (64 query heads on 8 kv heads of dimension 128, a
// gated FFN of 28672 units), 4 tokens, float32, weights drawn by gen
// layer by layer into one block's storage of 3264 MiB (the two blocks'
// weights are 6528 MiB). Measured on a 2-core machine: the peak live heap
// (runtime/metrics /gc/heap/live:bytes) was 3281 MiB; the peak heap in
// use 6561 MiB without a memory limit (the generator's garbage waits for
// the collector) and 3969 MiB with GOMEMLIMIT=4GiB, whose maximum
// resident set (/usr/bin/time -v) was 3981 MiB.
//
// # The manifest
//
// A manifest is JSON, decoded strictly: a key it does not define is
// ErrManifest. It holds every configuration number and switch, where the
// weights are (an .npz archive, numpy.savez's format, or a directory of
// NAME.npy files, relative to the manifest), and the array name of each
// weight: names for the weights outside the blocks (embed, final_norm,
// final_norm_bias, head), layer_names for a block's (norm1, norm1_bias,
// q, q_bias, k, k_bias, v, v_bias, o, o_bias, norm2, norm2_bias, ffn_w1,
// ffn_b1, ffn_v, ffn_c, ffn_w2, ffn_b2), where {layer} stands for the
// layer's index. A weight left out is none (a nil bias, a gain of 1);
// one the configuration needs (embed, q, k, v, o, ffn_w1, ffn_w2, ffn_v
// when gated, head when not tied) is ErrWeight. Each array must have the
// shape the configuration gives it, matrices as weight_order says
// (in-by-out: [in, out]), or ErrWeight names the weight, its layer, the
// shape found and the shape wanted. The words are those of the packages
// that own them (block.Form, block.NormKind, norm.EpsilonPlacement,
// norm.WeightForm, ffn.Layout, ffn.Act, attention.GroupMap,
// posenc.Pairing, posenc.Layout); the mask is causal. The demo model's
// manifest, testdata/demo/manifest.json, complete:
//
//	{
//	  "format": "plumb-stack/1",
//	  "weights": "demo.npz",
//	  "layers": 2,
//	  "vocab": 100,
//	  "width": 64,
//	  "heads": 4,
//	  "heads_kv": 2,
//	  "head_dim": 16,
//	  "hidden": 128,
//	  "form": "pre-norm",
//	  "norm_kind": "rms-norm",
//	  "epsilon": 0.00001,
//	  "epsilon_placement": "in-root",
//	  "weight_form": "as-is",
//	  "weight_order": "in-by-out",
//	  "activation": "silu",
//	  "gated": true,
//	  "group": "blocks",
//	  "rotary": {
//	    "base": 10000,
//	    "rotated": 0,
//	    "pairing": "halves"
//	  },
//	  "sinusoidal": null,
//	  "final_norm": true,
//	  "tied": true,
//	  "names": {
//	    "embed": "embed",
//	    "final_norm": "final_norm"
//	  },
//	  "layer_names": {
//	    "ffn_v": "layers.{layer}.ffn_v",
//	    "ffn_w1": "layers.{layer}.ffn_w1",
//	    "ffn_w2": "layers.{layer}.ffn_w2",
//	    "k": "layers.{layer}.k",
//	    "norm1": "layers.{layer}.norm1",
//	    "norm2": "layers.{layer}.norm2",
//	    "o": "layers.{layer}.o",
//	    "q": "layers.{layer}.q",
//	    "v": "layers.{layer}.v"
//	  }
//	}
//
// rotary, when not null, is {"base", "rotated" (0: head_dim), "pairing"};
// sinusoidal, when not null, is {"base" (0: 10000), "layout"}.
//
// The demo model's weights are invented: each array drawn by gen.Uniform
// from its own seed and rounded to the nearest multiple of 2⁻⁸, exact in float32 (the test file
// helpers_test.go writes them; TestDemoFiles checks that the shipped
// files are its output, and go test -run TestDemoFiles -update rewrites
// them).
//
// Token ids come from an integer array: IDs reads an npy.Array of int8 …
// int64 or uint8 … uint32 and refuses floats (ErrToken, naming the type);
// Forward refuses an id outside [0, Vocab), naming its position, its
// value and the vocabulary size.
//
// # Forms
//
// Forward and Greedy run block.Forward; ForwardFast and GreedyFast
// block.ForwardFast, which gives its bits. The float32 rule: Forward32,
// ForwardFast32, Greedy32 and GreedyFast32 are the float32 instantiations
// of the same body, the straightforward low-precision implementation;
// not references.
//
// # Errors
//
// Every error wraps one of ErrConfig, ErrWeight, ErrToken, ErrCache,
// ErrManifest, ErrLogits, or the sentinel of the package that refused its
// part (block.ErrWeight for a block's weight of the wrong length, with
// the layer named; norm, posenc, npy).
//
// Special cases are:
//
//	no ids                       Logits empty, Present the past caches
//	an id outside [0, Vocab)     ErrToken
//	ids of a float type          ErrToken (IDs)
//	a weight missing, unused or of the wrong shape  ErrWeight
//	an unknown manifest key      ErrManifest
//	NaN in a weight              propagates; a NaN logit stops Greedy (ErrLogits)
//
// # Accuracy
//
// The stack has no golden family of its own: Forward is checked bit for
// bit against its composition from block.Forward, norm.RMSNorm and the
// logits' loop (TestForwardIsTheComposition), and package block's golden
// cases check each block at 50 digits.
package stack
