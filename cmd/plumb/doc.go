// Command plumb checks a port of transformer layer math, in any language,
// against plumb's float64 references: it generates inputs, runs a reference
// on them, and judges the port's outputs.
//
// Usage:
//
//	plumb gen   [flags] FILE.npy                        deterministic inputs
//	plumb run   [flags] OPERATION NAME=FILE.npy ...      reference outputs as .npy
//	plumb diff  [flags] REFERENCE.npy CANDIDATE.npy      report and verdict
//	plumb check [flags] OPERATION NAME=FILE.npy ... -got OUTPUT=FILE.npy
//	plumb demo                                           a worked example, no files
//	plumb help [COMMAND | ops | OPERATION]
//
// A typical check of an attention kernel:
//
//	plumb gen -shape 1,8,128,64 -seed 1 q.npy       # and k.npy, v.npy
//	(the port reads q, k, v and writes port_out.npy)
//	echo '{"version": 1, "mask": [{"kind": "causal"}]}' > attn.json
//	plumb check attention-forward -config attn.json q=q.npy k=k.npy v=v.npy -got out=port_out.npy
//
// The operations and their JSON configurations are those of package
// github.com/plumbref/plumb/ops: a configuration is one JSON object with
// "version": 1 and keys of the operation (plumb help OPERATION lists them);
// an unknown key is an error that names it.
//
// Tensors are .npy files (package github.com/plumbref/plumb/npy): inputs
// and candidates may be float64, float32 or float16, and a candidate may be
// bfloat16, E4M3 or E5M2 bit patterns (uint16, uint8) with -format. Outputs
// are float64. A -config file is one JSON object of at most
// ops.MaxConfigBytes (1 MiB); an empty or larger file is an error.
//
// Non-finite inputs: NaN, +Inf or −Inf in an input of run or check is an
// error that names the file, the element's index and its value, unless
// -allow-nonfinite, which passes them to the reference, where the special
// cases its function documents apply (+Inf in a softmax row gives NaN in
// the row). Candidates and the files of diff are never refused for them:
// a NaN against a NaN, or an infinity against the same infinity, is a
// match, and any other pairing with NaN or ±Inf is a mismatch that fails.
//
// Every file plumb writes (gen's file, run's outputs, diff's heatmap) is
// written to a temporary file beside it, synced and renamed into place; run
// renames its outputs only once all of them are written, so a failed
// command leaves the previous files as they were and no temporary behind.
//
// diff and check judge a candidate under a tolerance: explicit (-abs, -rel,
// -ulps, -normwise); for check with a candidate narrower than float64, the
// yardstick of the same kernel run in the candidate's format (package
// compare, MeasureYardstick); otherwise a default of relative and absolute
// (times max|ref|) error r, r = 1e-10 for float64 candidates (values 1e-2
// apart fail) and √u for a narrower format of unit roundoff u.
// diff -heatmap draws |candidate − reference| over the 2-D slice (the last
// two dimensions) that holds the worst element, with labelled axes and
// colour scale.
//
// When an output of check fails, check also searches for what the port may
// have done (package github.com/plumbref/plumb/diagnose) and prints it after
// the reports under "What the port may have done": the changes of the
// configuration, in its own words ("group": "cycle", "pairing":
// "halves"), and the tensor mix-ups (k and v swapped, a tensor read in
// the other layout) under which the port passes its yardstick, simplest
// first, with their normwise errors, and the error signatures of the
// failing outputs along the positions, heads and dims. The search is bounded
// (at most 96 configurations, each on at most 16384 input values: a larger
// problem is cut to a sub-problem of batch entries, query heads with their
// kv heads, leading queries or rows, and the section says so), judges float64 candidates by the float32 yardstick, and never changes
// the exit status; -no-diagnosis leaves it out. check -json writes one
// object: "outputs", the reports, and "diagnosis", the search as data.
//
// plumb gen's generator is PCG-DXSM (128-bit state hi = seed, lo = 0) with
// uniform values (x >> 11)·2⁻⁵³ and normal values by the Box–Muller
// transform; plumb help gen states it exactly, with the first values for
// seed 1, and cmd/plumb/testdata/gen_check.py reproduces it in Python.
//
// Runs longer than a second show progress on stderr when stderr is a
// terminal; -quiet silences it.
//
// Exit status: 0 success (for diff and check: within tolerance), 1 outside
// the tolerance (for demo: the demonstration did not go as described), 2 a
// usage or input error, with a message naming the file, key or problem.
package main
