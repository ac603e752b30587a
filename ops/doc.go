// Package ops puts every kernel of plumb behind one interface: an operation
// has a name, a versioned JSON configuration, named float64 input tensors
// with shapes and named float64 output tensors. It is what the plumb command
// runs, and what a test harness in any language can drive through it.
//
// # Operations
//
//	attention-forward   attention.Forward            out, lse
//	attention-backward  attention.Backward           dq, dk, dv (dsinks, dbias)
//	rotary-apply        posenc.Rotary.Apply          y
//	rotary-tables       posenc.Rotary.Tables         cos, sin
//	sinusoidal-table    posenc.Sinusoidal.Table      table
//	alibi-slopes        posenc.ALiBiSlopes           slopes
//	alibi-bias          posenc.ALiBiBias             bias
//	layernorm-forward   norm.LayerNorm               y
//	layernorm-backward  norm.LayerNormBackward       dx, dbias (dweight)
//	rmsnorm-forward     norm.RMSNorm                 y
//	rmsnorm-backward    norm.RMSNormBackward         dx (dweight)
//	activation          ffn.Activate                 y
//	activation-grad     ffn.ActivateGrad             dx
//	ffn-forward         ffn.Forward (plain, GLU family via "gated")   y
//	ffn-backward        ffn.Backward                 dx and every parameter gradient
//	softmax             attention.Softmax            y
//	logsumexp           attention.LogSumExp          lse
//
// Each Op documents its keys (Op.Keys) and tensors (Op.Inputs, Op.Outputs);
// `plumb help OPERATION` prints them.
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
// implementation, not a reference. Yardstick builds on it: for each output,
// compare.MeasureYardstick rounds the inputs to the candidate's format, runs
// Run32, and returns the tolerance a candidate in that format must meet.
//
// Accuracy: Run adds no arithmetic; it returns the kernel's result bit for
// bit (TestRunMatchesKernels), so the accuracy is the kernel package's. On
// the small random problems of the tests (inputs uniform in [−1, 1)), the
// float32 yardsticks measure normwise errors from 0 (ALiBi bias) to 2.1e-7
// (the sink gradient) and the bfloat16 ones up to 5.1e-3 (a fused SwiGLU
// layer); each tolerance is twice that plus one rounding, and every test
// checks that the reference rounded to bfloat16 passes and an element 10%
// off fails (TestRunRun32Yardstick, for every operation).
//
// Every error wraps ErrUnknownOp, ErrConfig, ErrInput or the sentinel error
// of the kernel package that refused the call, and names the operation and
// the key or tensor at fault. No function panics on its arguments.
package ops
