// Command plumb checks a port of transformer layer math, in any language,
// against plumb's float64 references: it generates inputs, runs a reference
// on them, and judges the port's outputs.
//
// Usage:
//
//	plumb gen   [flags] FILE.npy | - | FILE.npz:NAME     deterministic inputs
//	plumb run   [flags] OPERATION NAME=FILE ...          reference outputs as .npy
//	plumb diff  [flags] REFERENCE CANDIDATE              report and verdict
//	plumb check [flags] OPERATION NAME=FILE ... -got OUTPUT=FILE
//	plumb demo                                           a worked example, no files
//	plumb version                                        module version, revision, Go version
//	plumb help [COMMAND | ops | conventions | files | OPERATION]
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
// Tensors are files of package github.com/plumbref/plumb/npy, named on the
// command line in one of the forms plumb help files lists: FILE, a .npy
// file (or an .npz archive of one array); FILE.npz:NAME, the array NAME of
// an .npz archive (numpy.savez, stored, or numpy.savez_compressed,
// deflated); FILE:TYPE:DIMS, raw little-endian binary of that element type
// and shape (x.bin:float32:1,8,128,64; a file of another size is refused
// with both sizes stated); and - for standard input (one file a command).
// A name that is a file as it stands is that file, colons and all. Inputs
// and candidates may be float64, float32 or float16, integers (int64,
// int32, int16, int8, uint32: their exact values) or, for a candidate,
// bool; a candidate may be bfloat16, E4M3 or E5M2 bit patterns (uint16,
// uint8 .npy files) with -format, or raw binary that names its format. A
// bool input is refused (a mask belongs in the configuration). The names
// of the formats are the same everywhere (-format, gen -dtype, TYPE):
// float64 (fp64, double), float32 (fp32, single), float16 (fp16, half,
// binary16), bfloat16 (bf16), e4m3, e5m2. An .npz archive given alone as
// the inputs of run or check supplies each array as the input of its
// name, and as check's -got, each as the output of its name. Outputs are
// float64: run -out writes a directory of NAME.npy files (the default),
// one archive (-out FILE.npz), its one output to standard output (-out -;
// an error naming the outputs when there are several) or the outputs
// named (-out NAME=FILE, FILE possibly -); gen writes FILE.npy, - or
// FILE.npz:NAME (added to the archive, the other arrays kept). A -config
// file ("-": standard input) is one JSON object of at most
// ops.MaxConfigBytes (1 MiB); an empty or larger file is an error.
//
// Data and reports go to standard output; every status line ("wrote …")
// and progress goes to standard error, so that plumb gen … - > x.npy and
// plumb run -out out=- … | plumb diff ref.npy - carry clean streams; -quiet
// silences the status lines and progress of every command.
//
// The errors say what to do: a candidate whose shape is the reference's
// with its axes in another order (a seq-major [1, 128, 8, 64] against a
// heads-major [1, 8, 128, 64]) is refused with the permutation, the
// transpose that undoes it, and, for an operation with a "layout" key, the
// key, its words and its value; a shape with a squeezed or an extra axis
// of length 1 is recognised as such; an unknown operation or command is
// named with the nearest names; a bad flag prints the one-line usage and
// plumb help COMMAND.
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
// two dimensions) that holds the largest absolute error, as a PNG made with
// the standard library: a linear or logarithmic colour scale with the
// tolerance marked on it, the largest error boxed, the axes labelled.
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
// kv heads, leading queries, rows, or rotary heads and positions spread
// over the length, and the section says so), judges float64 candidates by the float32 yardstick, and never changes
// the exit status; -no-diagnosis leaves it out. When the configuration
// declares a precision idiom ("angles": "float32-angles"), the report says
// under "What the declared precision idiom costs" what it costs on the
// check's inputs against the plain float32 run: the normwise and max abs
// errors of both, their ratio, and for rotary those at the first and the
// last position. check -json writes one object: "outputs", the reports,
// "idiom_cost", the idiom's cost, and "diagnosis", the search as data.
//
// plumb gen's generator is PCG-DXSM (128-bit state hi = seed, lo = 0) with
// uniform values (x >> 11)·2⁻⁵³ and normal values by the Box–Muller
// transform; plumb help gen states it exactly, with the first values for
// seed 1, and cmd/plumb/testdata/gen_check.py reproduces it in Python.
//
// Runs longer than a second show progress on stderr when stderr is a
// terminal; -quiet silences it, and the status lines.
//
// Row samples: run and check take -rows N (N rows drawn with -rows-seed,
// plumb's generator, besides the edge rows: the first and last rows and
// the rows at every mask edge), or -rows-list LIST, for attention-forward
// and the row-wise operations (package ops, RunRows), and then compute and
// judge those rows alone, the same bits as the full reference's rows, with
// the yardstick measured on the same rows. Files are then .npy, float64 or
// float32, C order, little-endian, read by rows at their offsets (the
// header gives the data offset; other files are refused with their type
// and order named); heads-major attention reads k and v one kv head at a
// time. The report says how many rows of how many were judged and, for a
// drawn sample, the probability C(R' − ⌈f·R⌉, n) / C(R', n) ≈ (1 − f)^n that
// a slip confined to a fraction f of the rows (none an edge row) is missed
// by the n rows drawn from the R' rows that are not edges: the number of
// n-subsets that avoid the slip over all n-subsets (elementary
// combinatorics), for f = 10%, 1%, 0.1%.
//
// Measured (one query head, 1,048,576 positions, head dimension 128,
// float32 files, causal mask, 256 drawn rows and 4 edge rows, 2 cores of
// a shared machine): check took 198 s wall and 6.6 GB peak resident memory
// (/usr/bin/time -v), the float64 reference and the float32 yardstick run
// on 260 rows of one head against its 1,048,576 keys (run -rows, the
// reference alone: 111 s, 4.2 GB). The memory is that of one head, k and v
// in float64 and float32, O(keys × dim); the time grows with heads × rows
// × keys, so 32 heads take about 32 × 198 s ≈ 1.8 h on this machine
// (extrapolated, not measured: 32 heads are 16 GiB a file, beyond plumb
// gen's 2^28 elements), far from a minute: each row is the direct form's
// scalar loop over all the keys it sees. To reproduce:
//
//	plumb gen -shape 1,1,1048576,128 -dtype float32 -seed 1 q.npy   # k.npy seed 2, v.npy seed 3
//	plumb gen -shape 1,1,1048576,128 -dtype float32 -seed 4 out.npy  # a stand-in candidate: the timing does not depend on its values
//	echo '{"version": 1, "mask": [{"kind": "causal"}]}' > c.json
//	/usr/bin/time -v plumb check -config c.json -rows 256 -rows-seed 7 attention-forward q=q.npy k=k.npy v=v.npy -got out=out.npy
//
// Exit status: 0 success (for diff and check: within tolerance), 1 outside
// the tolerance (for demo: the demonstration did not go as described), 2 a
// usage or input error, with a message naming the file, key or problem.
package main
