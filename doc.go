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
//	block      one decoder block composed of the kernels' functions:
//	           pre-norm, post-norm and parallel forms, LayerNorm or RMSNorm,
//	           rotary, every attention option, a key/value cache, every
//	           intermediate a named stage
//	stack      a decoder stack on block: embedding, the blocks one layer's
//	           weights at a time, final norm, logits; greedy steps through
//	           the cache; weights from a manifest and .npz or .npy files
//	kvcache    serving-time layouts of the key/value cache on attention: pages
//	           of a pool with a page table per sequence, decoding split over
//	           ranges of the cache and merged, a ring buffer for a sliding
//	           window, packed sequences, one-pass scoring of draft tokens,
//	           and the size of a cache
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
//	quant      quantised tensors: integer quantisation and dequantisation
//	           under explicit conventions (symmetry, granularity, width,
//	           range, rounding, scale format, scale rule), int4 packing,
//	           FP8 tensors with scales, the OCP MX block formats, int8 and
//	           weight-only products, SQNR
//	gen        the pseudo-random inputs plumb gen writes, value for value:
//	           seeded normal and uniform values
//	npy        read and write NumPy .npy files, the exchange format with a
//	           port under test
//	ops        every kernel as a named operation with a JSON configuration,
//	           float64 and float32 runs, and the yardstick of each output
//	cmd/plumb  the command line: plumb gen, run, diff, check, demo
//
// Beside each kernel package a conformance suite (attention/attentiontest,
// posenc/posenctest, norm/normtest, ffn/ffntest, quant/quanttest) judges a user's kernel
// against the reference in every case and convention it declares, with one
// call: Run(t, kernel). Package conformance holds what they run on: the
// part of *testing.T they use, and a Recorder that stands in for it to
// watch a suite fail. examples/fastattn shows one in use.
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
// plumb makes each one an explicit, named option: a Go type whose values
// are the choices, each with one word used in configurations, golden files,
// help and messages alike (ops.Conventions lists them; so does
// plumb help conventions). Generated from the types:
//
//	convention and its words (the first is the default)   meaning
//	attention.Accumulation: the format a port keeps its running sums in (the logits' dot products, the softmax sum, the weighted sum of values; a precision idiom: the yardstick's float32 run follows it, the reference ignores it)
//	  float32         every running sum in float32, as the straightforward float32 run
//	  bfloat16        every running sum rounded to bfloat16 after each addition
//	  binary16        every running sum rounded to binary16 after each addition; beyond 65504 it is +Inf
//	attention.EmptyRow: what a query row that sees no key produces
//	  zero            output 0 and log-sum-exp −Inf, as a tiled online softmax gives
//	  nan             output NaN, as a naive softmax over logits that are all −Inf gives
//	attention.GroupMap: which key/value head each query head reads
//	  blocks          consecutive query heads share a kv head: kv(h) = h / (heads_q / heads_kv)
//	  cycle           query head h reads kv head h mod heads_kv
//	attention.Layout: the memory order of q, k, v, the output and the gradients
//	  heads-major     [batch, heads, positions, dim]: each head's rows are contiguous
//	  seq-major       [batch, positions, heads, dim]: the heads of one position are contiguous
//	attention.SoftmaxShift: what a port subtracts from the logits before exponentiating them (a precision idiom: the yardstick's float32 run follows it, the reference ignores it)
//	  max             the row maximum: every exponent ≤ 0, none overflows
//	  none            nothing: e^s of the raw logits, which overflows float32 beyond s ≈ 88.7
//	block.Form: where the norms sit and how the attention and feed-forward sublayers are joined
//	  pre-norm        each sublayer reads the normalised stream and adds to the raw one: h = x + Attn(N1(x)), y = h + FFN(N2(h))
//	  post-norm       a norm after each residual addition: h = N1(x + Attn(x)), y = N2(h + FFN(h))
//	  parallel        both sublayers read N1(x) and add to one residual: y = (x + Attn(N1(x))) + FFN(N1(x))
//	block.NormKind: which norm the block applies at its norm positions
//	  layer-norm      LayerNorm: subtract the mean, divide by the standard deviation, gain and optional bias
//	  rms-norm        RMSNorm: divide by the root mean square, gain, no bias
//	compare.Format: the binary floating-point format a candidate is stored in
//	  float64         IEEE 754 binary64: 53 significand bits
//	  float32         IEEE 754 binary32: 24 significand bits
//	  binary16        IEEE 754 binary16 (half): 11 significand bits, 5 exponent bits
//	  bfloat16        binary32 with the low 16 fraction bits dropped: 8 significand bits
//	  e4m3            OCP 8-bit E4M3: 4 significand bits, no infinities, max 448
//	  e5m2            OCP 8-bit E5M2: 3 significand bits, IEEE-style infinities, max 57344
//	ffn.Accumulation: the format a port keeps the running sums of its matrix products in (a precision idiom: the yardstick's float32 run follows it, the reference ignores it)
//	  float32         every running sum in float32, as the straightforward float32 run
//	  bfloat16        every running sum rounded to bfloat16 after each addition
//	  binary16        every running sum rounded to binary16 after each addition; beyond 65504 it is ±Inf
//	ffn.Act: the activation function φ
//	  relu            max(x, 0)
//	  gelu            x·Φ(x), Φ the normal distribution function (exact, through erf)
//	  gelu-tanh       the tanh approximation x/2·(1 + tanh(√(2/π)·(x + 0.044715x³)))
//	  gelu-sigmoid    the sigmoid approximation x·σ(1.702x)
//	  sigmoid         σ(x) = 1/(1 + e^(−x))
//	  silu            x·σ(x), Swish with β = 1
//	  swish           x·σ(βx) with the given β
//	  identity        φ(x) = x
//	ffn.Layout: how a weight matrix is stored
//	  in-by-out       [in, out] row-major, y = x·W, as the papers write it
//	  out-by-in       [out, in] row-major, one row per output unit, y = x·Wᵀ
//	ffn.Packing: how one fused matrix holds the gate and value projections
//	  stacked         all gate units, then all value units
//	  interleaved     gate and value units alternate: gate j is unit 2j, value j unit 2j + 1
//	kvcache.PoolLayout: the memory order of a pool of key or value pages
//	  pages-first     [pages, page size, heads, dim]: the heads of one position are contiguous
//	  heads-first     [pages, heads, page size, dim]: each head's rows of a page are contiguous
//	mask.ALiBiForm: which key distance ALiBi penalises
//	  causal          −m·(p − j) for every key, the paper's formula; keys after the query get a positive bias
//	  symmetric       −m·|p − j|: distance penalised both ways
//	  past-only       −m·(p − j) for keys up to the query, 0 for keys after it
//	mask.Align: where query i sits among the keys when there are fewer queries than keys
//	  end             the last query sits at the last key: position Lk − Lq + i (+ offset)
//	  start           query i sits at key position i (+ offset)
//	mask.Block: what a query sees inside its own packed sequence
//	  causal          keys of the query's own sequence up to the query
//	  full            every key of the query's own sequence
//	mask.Kind: which keys each query may see
//	  full            every key
//	  causal          keys up to the query's own position
//	  band            keys j with −before ≤ j − p ≤ after, either side possibly unbounded
//	  window          the size keys ending at the query, the query included
//	  prefix          keys below length to every query, causal from length on
//	  key-padding     the first valid[b] keys of batch entry b
//	  packed          keys of the query's own sequence between offsets, causal or full inside it as block says
//	norm.EpsilonPlacement: where epsilon enters the denominator
//	  in-root         divide by √(s² + ε)
//	  added-to-root   divide by √s² + ε
//	norm.Variance: how a float32 port computes LayerNorm's variance (a precision idiom: the yardstick's float32 run follows it, the reference ignores it)
//	  two-pass        the mean first, then the mean square of the deviations from it
//	  one-pass        σ² = mean(x²) − mean(x)², both means in one pass, clamped at 0
//	norm.WeightForm: how the stored weight w becomes the gain γ
//	  as-is           γ = w: a weight of ones is the identity
//	  one-plus        γ = 1 + w: a weight of zeros is the identity
//	npy.Bits: which number format the bit patterns of a uint16 or uint8 array hold
//	  integer         the unsigned integers the patterns are
//	  bfloat16        uint16 patterns of bfloat16
//	  e4m3            uint8 patterns of OCP 8-bit E4M3
//	  e5m2            uint8 patterns of OCP 8-bit E5M2
//	npy.ByteOrder: the order of the bytes of one element in a .npy file
//	  little-endian   least significant byte first, descriptor prefix <
//	  big-endian      most significant byte first, descriptor prefix >
//	npy.DType: the element type of a .npy array
//	  float64         IEEE 754 binary64, descriptor <f8
//	  float32         IEEE 754 binary32, descriptor <f4
//	  float16         IEEE 754 binary16, descriptor <f2
//	  int64           64-bit signed integers, descriptor <i8
//	  int32           32-bit signed integers, descriptor <i4
//	  int16           16-bit signed integers, descriptor <i2
//	  int8            8-bit signed integers, descriptor |i1
//	  uint32          32-bit unsigned integers, descriptor <u4
//	  uint16          16-bit unsigned integers (or bfloat16 bit patterns), descriptor <u2
//	  uint8           8-bit unsigned integers (or FP8 bit patterns), descriptor |u1
//	  bool            booleans, one byte each (0 false, 1 true), descriptor |b1
//	posenc.AngleArithmetic: how a float32 port forms the rotary angles m·θ (a precision idiom: the yardstick's float32 run follows it, the reference ignores it)
//	  float64         the angles and tables formed as the reference forms them, each entry rounded to float32 once
//	  float32-frequencies the frequencies θ rounded to float32, the angles m·θ then formed exactly, the tables rounded once
//	  float32-angles  θ and m in float32, the angle the float32 product m·θ, its cos and sin rounded to float32
//	posenc.Layout: the order of the sine and cosine columns of a sinusoidal table
//	  interleaved     sin and cos of each frequency side by side: sin, cos, sin, cos, …
//	  concatenated    all sines first, then all cosines
//	posenc.Method: how rotary frequencies change for a context longer than the trained one
//	  none            the frequencies as they are
//	  interpolation   position interpolation: every frequency divided by s
//	  ntk-aware       the base raised to b·s^(r/(r−2)): the lowest frequency divided by s, the highest kept
//	  yarn            NTK-by-parts: low frequencies divided by s, high ones kept, a ramp between
//	  per-frequency   frequency i divided by a factor f_i the caller gives
//	posenc.Pairing: which two dims of a head one rotary frequency rotates
//	  adjacent        frequency i rotates dims (2i, 2i+1), as in the paper
//	  halves          frequency i rotates dims (i, i + r/2): the rotated dims split in two halves
//	posenc.Ramp: how YaRN goes from keeping to interpolating across the frequencies
//	  ratio           linear in the ratio of the trained length to the wavelength, as the paper defines it
//	  dims            linear in the dimension index between rounded bounds, as the authors’ published code computes it
//	quant.CacheCode: how a quantised key/value cache stores its elements
//	  int8            symmetric int8 codes, value q·s, new codes chosen in −127..127
//	  e4m3            OFP8 E4M3 codes, value v·s, new scales amax/448
//	  e5m2            OFP8 E5M2 codes, value v·s, new scales amax/57344
//	quant.CacheScaling: which elements of a quantised key/value cache share one scale
//	  per-tensor      one scale for the whole cache
//	  per-head        one scale per batch entry and head
//	  per-token       one scale per batch entry, head and token (one key or value row)
//	quant.Channel: which index of a [rows, cols] tensor the scales follow
//	  rows            scales follow the row index: per row, or groups cut along each row
//	  columns         scales follow the column index: per column, or groups cut down each column
//	quant.Element: the format of the 32 elements of an MX block
//	  e4m3            FP8 E4M3 elements (MXFP8), max 448
//	  e5m2            FP8 E5M2 elements (MXFP8), max 57344
//	  e3m2            FP6 E3M2 elements (MXFP6), max 28
//	  e2m3            FP6 E2M3 elements (MXFP6), max 7.5
//	  e2m1            FP4 E2M1 elements (MXFP4), max 6
//	  int8            8-bit two's complement elements times 2^−6 (MXINT8), max 1.984375
//	quant.FP8Element: which 8-bit float format an element is
//	  e4m3            OFP8 E4M3: max 448, NaN but no infinity
//	  e5m2            OFP8 E5M2: max 57344, with infinities
//	quant.Granularity: which elements share one scale
//	  per-tensor      one scale for the whole tensor
//	  per-channel     one scale per row or per column, as Scheme.Channel says
//	  per-group       one scale per Scheme.Group consecutive elements of a row or of a column
//	quant.NibbleCode: how an int4 code is written in four bits
//	  twos-complement q mod 16: −1 is 0xF, −8 is 0x8
//	  offset-binary   q + 8: −8 is 0x0, 0 is 0x8, 7 is 0xF
//	quant.NibbleOrder: which half of a byte holds the first of two int4 codes
//	  low-first       code 2i in bits 0–3 of byte i, code 2i+1 in bits 4–7
//	  high-first      code 2i in bits 4–7 of byte i, code 2i+1 in bits 0–3
//	quant.Overflow: what an element beyond the format's largest magnitude becomes
//	  nan-or-inf      non-saturating: NaN in E4M3, ±Inf in E5M2
//	  saturate        saturating: ±448 in E4M3, ±57344 in E5M2
//	quant.ProbCode: whether the softmax weights are quantised before their product with V
//	  none            the weights are not quantised
//	  e4m3            the unnormalised weights exp(x − max x) as E4M3 codes of round(448·e), scale 1/448
//	  e5m2            the unnormalised weights exp(x − max x) as E5M2 codes of round(57344·e), scale 1/57344
//	quant.Range: whether the most negative code is used
//	  full            every code of the width: −128..127, −8..7
//	  symmetric-clipped the most negative code left out: −127..127, −7..7
//	quant.Rounding: how x/s is rounded to an integer at a tie
//	  half-even       ties to the even integer (IEEE 754-2019 §4.3.1 roundTiesToEven)
//	  half-away       ties away from zero (IEEE 754-2019 §4.3.1 roundTiesToAway)
//	quant.ScaleFormat: which number format a scale is stored in
//	  float32         IEEE 754 binary32 scales
//	  binary16        IEEE 754 binary16 scales
//	  bfloat16        bfloat16 scales: 8 significand bits
//	  pow2            powers of two from 2^−127 to 2^127, the values of E8M0
//	quant.ScaleRule: which magnitude of a block its scale is chosen from
//	  absmax          the largest magnitude: no element is clipped
//	  percentile      the p-th percentile of |x| (nearest rank): larger elements are clipped
//	quant.Symmetry: whether a block's codes carry a zero point
//	  symmetric       x̂ = q·s: zero point 0, the range centred on zero
//	  asymmetric      x̂ = (q − z)·s with an integer zero point z; the range [min(x, 0), max(x, 0)]
//	  asymmetric-float x̂ = (q − z)·s with a zero point z in the scale format; the range [min x, max x]
//	quant.Width: how many bits a code has
//	  int8            8-bit codes, −128..127 (or −127..127 clipped)
//	  int4            4-bit codes, −8..7 (or −7..7 clipped)
//
// Numbers are options too: the logit scale, the query position offset,
// band edges and window sizes, the rotary base and rotated dims, the norm
// epsilon, and the fill of an additive mask (−Inf in mask.Bias, a finite
// value in mask.BiasFill).
//
// # Accuracy
//
// Each kernel's documentation states the worst normwise relative error
// ‖got − want‖₂ / ‖want‖₂ measured against the 50-digit golden values; the
// target is 1e-14 or better. The golden files and the program that makes
// them are in testdata/ (see testdata/README.md).
//
// Worst normwise relative error over the golden cases, each package's worst first:
//
//	attention  4.3e-15  Backward, d_q
//	attention  1.0e-13  Backward (logits near ±1000), d_q
//	kvcache    2.6e-16  AttendSplit, out
//	posenc     1.3e-16  Rotary.Apply, y
//	norm       8.1e-16  RMSNormBackward, dx
//	ffn        5.6e-16  Backward, dweights
//	block      5.5e-16  Forward, out
//
// Each package's documentation has the table by function and output.
// Masks, ALiBi slopes, rotary frequencies and conversions between number
// formats are exact.
package plumb
