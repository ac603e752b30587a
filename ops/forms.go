package ops

import "sync/atomic"

// direct is whether the attention and feed-forward operations run the
// direct forms of their kernels (UseDirectForms).
var direct atomic.Bool

// UseDirectForms chooses the form of the kernels that attention-forward,
// attention-backward, ffn-forward and ffn-backward run, for every call
// that follows in the process (Run, Run32, Yardstick and the functions
// built on them), and returns the previous choice.
//
// By default (false) they run the fast forms: attention.ForwardFast,
// attention.BackwardFast, ffn.ForwardFast and ffn.BackwardFast, and their
// float32 twins for Run32, blocked matrix products in parallel. With true
// they run the direct forms (attention.Forward, …), the definitions that
// the golden values verify. The choice changes the time and memory a run
// takes and never a result: each fast form gives its direct form's results
// bit for bit (TestFastFormsAreDirect here, TestFastIsDirect in the kernel
// packages). A float32 run with a precision idiom ("accumulation",
// "softmax_shift") always takes the direct form, which models the idiom.
func UseDirectForms(on bool) (was bool) { return direct.Swap(on) }
