// Package attentiontest is a conformance suite for attention kernels: one
// call, Run(t, kernel), runs a kernel through every case that matters and
// judges each output against plumb's float64 reference, as testing/fstest
// does for file systems.
//
// A kernel is a function of q, k, v and a Problem (shape, layout, group
// map, mask, query alignment and offset, scale, soft cap, rotary
// encoding) with a declaration of what it supports:
//
//	func TestAttention(t *testing.T) {
//		attentiontest.Run(t, attentiontest.Kernel[float32]{
//			Forward: myKernel,
//			Supports: attentiontest.Supports{
//				Layouts:  []attention.Layout{attention.HeadsMajor, attention.SeqMajor},
//				Groups:   []attention.GroupMap{attention.GroupBlocks},
//				Pairings: []posenc.Pairing{posenc.PairHalves},
//				Masks:    []attentiontest.Masking{attentiontest.Causal},
//				UnequalLengths: true,
//				LSE:      true,
//			},
//		})
//	}
//
// Each case of Cases runs as a subtest under every declared convention
// (go test -run 'TestAttention/causal_grouped/SeqMajor' picks one); a case
// that needs what the kernel does not declare is skipped with a message
// that says what is missing, never silently.
//
// # What is judged, and how closely
//
// The reference is posenc.Rotary.Apply on q (at the query positions) and k
// (at the key positions), then attention.Forward, in float64. A float32
// kernel is held to the yardstick (compare.MeasureYardstick): the same
// computation in float32 arithmetic (posenc.Rotary.Apply32, then
// attention.Forward32 and, separately, attention.ForwardFast32, which sums
// in another order) on the same inputs, rounded to the kernel's Format, is
// measured against the reference on each case, and the kernel may be twice
// as far (compare.DefaultK) as the larger of the two, plus one rounding to
// the format. Two summation orders, because one order's largest error on a
// small tensor is a sample of a few values that another, equally accurate
// order can exceed twice at one element. The
// log-sum-exp, when the kernel returns it, is judged the same way in
// float32. A float64 kernel is held to an explicit 1e-12 normwise and
// 1e-12·max|reference| per element: a few thousand roundings, room for
// any summation order, and eleven orders of magnitude below what a
// convention slip does.
//
// A failure message names the case, the problem with every convention,
// the output (output or log-sum-exp) and its worst element with its index,
// then compare.Diff's whole report.
//
// # Inputs
//
// Standard normal unless a case says otherwise, drawn from a PCG generator
// seeded with the subtest's name (the same inputs on every run and
// machine), rounded once to the kernel's Format; the reference sees the
// rounded values.
//
// # Watching the suite fail
//
// Run takes any TB, of which *testing.T is one. Recorder is another: it
// records failures and skips instead of failing the calling test, which
// is how a test shows that the suite catches a kernel with a deliberate
// slip (see the example under examples/fastattn).
//
// Not covered: additive bias, ALiBi slopes, sink logits, packed sequences,
// prefix masks and the backward pass; the attention package's own tests
// check those against its golden files.
package attentiontest
