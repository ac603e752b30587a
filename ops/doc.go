// Package ops puts every kernel of plumb behind one interface: an operation
// has a name, a versioned JSON configuration, named float64 input tensors
// with shapes and named float64 output tensors. It is what the plumb command
// runs, and what a test harness in any language can drive through it.
//
// # Operations
//
// The operations, in the order plumb help ops lists them, with the
// function each calls (its summary names the float32 form too) and its
// outputs:
//
//	operation           calls                               outputs (the optional ones in parentheses)
//	activation          ffn.Activate                        y
//	activation-grad     ffn.ActivateGrad                    dx
//	alibi-bias          posenc.ALiBiBias                    bias
//	alibi-slopes        posenc.ALiBiSlopes                  slopes
//	attention-backward  attention.Backward                  dq, dk, dv (dsinks, dbias)
//	attention-forward   attention.Forward                   out, lse
//	block-forward       block.ForwardFast                   out, present_k, present_v (stage_input, stage_attn_in, stage_q, stage_k, stage_v, stage_q_rot, stage_k_rot, stage_present_k, stage_present_v, stage_attn, stage_attn_out, stage_resid1, stage_ffn_in, stage_ffn_out, stage_resid2, stage_output)
//	draft-attention     kvcache.VerifyDraft                 out, lse
//	ffn-backward        ffn.Backward                        dx (dw1, db1, dv, dc, dfused, dfused_bias, dw2, db2)
//	ffn-forward         ffn.Forward                         y
//	layernorm-backward  norm.LayerNormBackward              dx, dbias (dweight)
//	layernorm-forward   norm.LayerNorm                      y
//	logsumexp           attention.LogSumExp                 lse
//	merge-splits        kvcache.MergeSplits                 out, lse
//	packed-attention    kvcache.AttendPacked                out, lse
//	paged-attention     kvcache.AttendPages                 out, lse
//	ring-attention      kvcache.AttendRing                  out, lse
//	rmsnorm-backward    norm.RMSNormBackward                dx (dweight)
//	rmsnorm-forward     norm.RMSNorm                        y
//	rotary-apply        posenc.Rotary.Apply / ApplyInverse  y
//	rotary-tables       posenc.Rotary.Tables                cos, sin
//	sinusoidal-table    posenc.Sinusoidal.Table             table
//	softmax             attention.Softmax                   y
//	split-attention     kvcache.AttendSplit                 out, lse
//
// Each Op documents its keys (Op.Keys) and tensors (Op.Inputs, Op.Outputs);
// `plumb help OPERATION` prints them.
//
// The attention and feed-forward operations compute their function with
// its fast form (attention.ForwardFast, attention.BackwardFast,
// ffn.ForwardFast, ffn.BackwardFast and the float32 twins: blocked matrix
// products in parallel), which gives the function's results bit for bit;
// UseDirectForms(true), or plumb's -direct flag, runs the direct forms
// named above themselves, the same outputs more slowly
// (TestFastFormsAreDirect).
//
// The kvcache operations (draft-attention, merge-splits, packed-attention,
// paged-attention, ring-attention, split-attention) take the integers that
// say where the keys are as configuration keys, not tensors, as the
// positions of rotary do: a port dumps its page tables ("page_tables", one
// list of page indices per sequence), lengths, split range ("start",
// "end"), query position ("position"), ring fill ("tokens") and packed
// offsets ("query_offsets", "key_offsets") into its configuration, and
// only the float tensors as .npy files, so that the yardstick's rounding
// never touches an index. Their help note gives the size of a key/value
// cache (kvcache.CacheSize).
//
// # Configuration
//
// A configuration is one JSON object. It must hold "version": 1
// (ConfigVersion); an empty configuration means {"version": 1}. Every key is
// one of the operation's documented keys, each our own word; an unknown
// key is an error that names it (the decoder refuses unknown fields, also
// inside nested objects such as a mask or a scaling). Enumerated values are
// words ("heads-major", "halves", "in-root"); a value outside the list is an
// error that lists the words. A key left out takes the documented default;
// where the kernel has no safe default (norm epsilon, ffn layout and
// activation) the key is required. Version 1 is the first schema; a later
// schema that changes the meaning of a key will have a new version number,
// and this package refuses versions it does not know.
//
// # Precision
//
// Op.Run is the float64 reference. Op.Run32 runs the float32 instantiation
// of the same kernel body (attention.Forward32, norm.LayerNorm32, …) on the
// inputs rounded to float32: the straightforward low-precision
// implementation, not a reference (or, with an idiom key, that of the
// idiom: see Precision idioms). Yardstick builds on it: for each output,
// compare.MeasureYardstick rounds the inputs to the candidate's format, runs
// Run32, and returns the tolerance a candidate in that format must meet.
//
// Accuracy: Run adds no arithmetic; it returns the kernel's result bit for
// bit (TestRunMatchesKernels; TestKeysReachKernels for every key and every
// word of every operation), so the accuracy is the kernel package's: the
// golden families of the kernel packages, run through Run, meet those
// packages' bounds (TestGoldenThroughOps). On
// the small random problems of the tests (inputs uniform in [−1, 1)), the
// float32 yardsticks measure normwise errors from 0 (ALiBi bias) to 2.1e-7
// (the sink gradient) and the bfloat16 ones up to 5.1e-3 (a fused SwiGLU
// layer); each tolerance is twice that plus one rounding, and every test
// checks that the reference rounded to bfloat16 passes and an element 10%
// off fails (TestRunRun32Yardstick, for every operation).
//
// # Precision idioms
//
// A port often computes less accurately than the straightforward float32
// implementation on purpose, by a common idiom; the plain yardstick then
// fails it, rightly, without saying why. Such a port declares its idiom
// with a key of its operation (Key.Idiom), which changes Run32, and so the
// yardstick, and never Run:
//
//	key            operations                              words (the first is the default)
//	angles         rotary-apply, rotary-tables             float64, float32-frequencies, float32-angles
//	variance       layernorm-forward, layernorm-backward   two-pass, one-pass
//	accumulation   attention-forward, softmax, logsumexp,  float32, bfloat16, binary16
//	               ffn-forward
//	softmax_shift  attention-forward, softmax, logsumexp   max, none
//
// (posenc.AngleArithmetic, norm.Variance, attention.Accumulation and
// ffn.Accumulation, attention.SoftmaxShift; each word's meaning is in the
// conventions table). With a key set, Yardstick measures the idiom's own
// float32 run, and each yardstick's Basis names it ("float32 arithmetic
// with the idiom angles = float32-angles"), so that a port which states its
// idiom is judged against what that idiom can do, and a port with a real
// slip still fails. The backward operations have no idiom keys: their
// yardsticks are plain float32.
//
// IdiomCost (IdiomCostOf, given the reference) shows what the idiom costs:
// for every output a Cost holding the plain yardstick (the configuration
// without its idiom keys) and the idiom's, on the same inputs, in the same
// format; Ratio is the quotient of their normwise errors, and for the
// rotary operations Positions gives both errors at every position, where
// an angle idiom's error grows linearly; Cost.String says it in one line.
// A configuration without an idiom gives nil. Measured (TestRotaryAnglesPort,
// head dimension 64, base 10000, two rows per position): the normwise error
// of the float32 run is 3.9e-8 at 64 positions and 4.1e-8 at 2048; that of
// float32-angles 2.3e-7 (×5.9) and 7.0e-6 (×170). A float32 port that forms
// its angles the framework way fails the plain float32 yardstick at 2048
// positions and passes that of float32-angles; with base 10500 for 10000 it
// fails both.
//
// # Row samples
//
// Every row of the outputs of attention-forward (one query position of
// every batch entry and head: out[b, h, i, :] and lse[b, h, i] depend on
// query row i and all keys and values) and of the row-wise operations
// (softmax, logsumexp, rmsnorm-forward, layernorm-forward, activation,
// ffn-forward: row i of the last dimension depends on row i of x alone)
// is a function of its own row, so the reference of a few rows costs a
// fraction of the whole. RunRows runs an operation on a row sample (Rows)
// and returns those rows alone, the same bits as the full Run's rows
// (TestRunRowsSameBits, every mask kind, both alignments and layouts);
// RunRows32 does so for Run32, and YardstickRows measures the yardstick on
// the same rows. Attention runs each sampled query row alone at its true
// key position (align start, offset p(i)), so that causal, band, window,
// prefix and packed masks, ALiBi and the alignment are evaluated where the
// row sits; the row-indexed inputs (q and bias; x) may be given cut to the
// sample (RowInputs), k and v whole. RowOperations lists the operations.
//
// A sample is given (RowsOf: each row once, in range, not empty) or drawn
// (DrawRows) with plumb's generator: gen.Uniform(seed, n, 0, 1), and
// Floyd's algorithm over the rows that are not edges (for j = m − n … m −
// 1: t = ⌊u·(j + 1)⌋, take t, or j when t is taken), plus every edge row
// RowCount names: the first and last rows and, for attention, the rows at
// and beside key positions 0 and Lk − 1 (the causal diagonal's ends), a
// band's ends, a window's first full row (position size − 1), a prefix's
// end and every packed sequence start, at the rows' true positions.
//
// The chance that a drawn sample misses a slip: for n rows drawn uniformly
// without replacement from R, a slip on b of the R rows goes unseen with
// probability
//
//	P(miss) = C(R − b, n) / C(R, n) = ∏_{j=0}^{n−1} (R − b − j)/(R − j) ≈ (1 − b/R)^n
//
// (elementary combinatorics: the n-subsets that avoid the b rows over all
// n-subsets; MissProbability sums the logarithms of the factors, and
// TestMissProbabilityEnumeration checks it against counting subsets for
// R ≤ 12 and against exact binomials at R = 2^20). Rows.SlipMiss applies
// it to the drawn rows, R the rows that are not edges, b = ⌈f·Total⌉; with
// 256 rows drawn from 2^20, a slip on 1% of the rows is missed with
// probability 0.076, on 0.1% with 0.77, on 10% with 1.9e-12. A slip at an
// edge row is always caught.
//
// # Worked values
//
// Two small cases are checked by the tests and examples against values
// computed with mpmath at 50 significant digits from the definitions
// ([mpmath]), shown here to 17 significant digits: TestRunMatchesKernels
// within 2 units in the last place, ExampleRun to every digit it prints:
//
//	softmax of the row (1, 3, 2), p_i = e^{x_i} / (e¹ + e³ + e²):
//	  0.090030573170380458, 0.66524095577482189, 0.24472847105479765
//	logsumexp of the row (1, 3, 2), ln(e¹ + e³ + e²): 3.4076059644443803
//	rotary-apply of x = (1, 2, 3, 4) at position 1, base 10000, pairs
//	  (2i, 2i+1), so θ = (10000^0, 10000^(−2/4)) = (1, 0.01) (Su et al. 2021,
//	  arXiv 2104.09864, Eq. (34)): (x₀ cos θ₀ − x₁ sin θ₀, x₀ sin θ₀ + x₁ cos θ₀,
//	  x₂ cos θ₁ − x₃ sin θ₁, x₂ sin θ₁ + x₃ cos θ₁) =
//	  −1.1426396637476533, 1.9220755965441759, 2.9598506679133292, 4.0297995016691611
//
// # Sizes
//
// No operation allocates an output of more than MaxElements = 2^28 values.
// The sizes an output takes from the configuration (heads, queries, keys,
// dims, lengths, positions) or from the inputs are checked against it
// first, before anything is allocated or a kernel is called; a larger
// output is refused with ErrConfig, or ErrInput when the inputs give its
// size, naming every size that enters it:
//
//	ops: invalid configuration: alibi-slopes: key "heads" = 1000000000000; want at most MaxElements = 268435456, the most values output "slopes" may hold
//
// # Errors
//
// Every error wraps ErrUnknownOp, ErrConfig, ErrInput, ErrRows (a row
// sample that does not fit: a row out of range, listed twice, an empty
// list, an operation without rows) or the sentinel error
// of the kernel package that refused the call, and reads
//
//	<sentinel>: <operation>: <what> = <value>; want <expectation>
//
// naming the operation (or, for an operation that does not exist, the
// function called) and the key or tensor at fault:
//
//	ops: invalid configuration: attention-forward: key "layout" = "rows"; want one of heads-major, seq-major
//	ops: invalid input: activation: input "x" has 8 elements; want 9 for its shape [3 3]
//
// A kernel's error keeps its own sentinel and wording, the operation put
// after the sentinel's text ("norm: invalid epsilon: layernorm-forward:
// LayerNorm: …"). A word or a mask description in a configuration that its
// package refuses gives an error that wraps ErrConfig and that package's
// sentinel (mask.ErrWindow, …), worded once, under ErrConfig. No function
// panics on its arguments.
package ops
