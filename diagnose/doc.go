// Package diagnose names what a failing port did. Given an operation of
// package ops, its JSON configuration, the inputs, the port's outputs and
// the port's number format, Run judges the port by the yardstick of the
// configuration as given (ops.Yardstick), and when it fails searches for
// the configurations, and the tensor mix-ups, under which it passes:
//
//   - every word of every convention key of the operation, read from
//     Op.Keys (never from a table of this package), one at a time; the
//     precision idioms (Key.Idiom) are not among them, see below;
//   - the common alternatives of the numeric keys: the logit scale (1/√d,
//     1/d, 1), ε in decades from 1e-3 to 1e-12, the rotary and sinusoidal
//     base (1e4, 1e5, 5e5, 1e6, 5e6, 1e7), a context scaling factor s as
//     1/s, s², √s or no scaling, every query offset the query and key
//     counts allow (described under both alignments), mask window sizes
//     and band edges ±1 and ±2, the rotated dims, a position offset ±1 and
//     ±2, a soft cap left out, a magnitude of 1, Swish's β of 1 or 1.702;
//   - tensor mix-ups: k and v swapped, w1 and v (gate and value) swapped,
//     weight and bias swapped, x and dy swapped, a weight matrix read
//     transposed, an attention tensor read or an output written in the
//     other layout, ALiBi slopes in reverse head order, a softmax over the
//     other axis or over rows of the other length;
//   - pairs of the best single changes of the most promising keys (two
//     slips at once).
//
// Each candidate is described in the configuration's own words
// (`"group": "cycle"`, `"offset": 2`, `k and v swapped`) with its normwise
// error against the port's outputs; the best few by that error
// (Options.Confirm) have their own yardstick measured, and the port's
// verdict under it, against the candidate's reference already run.
// Candidates are ranked: those the port passes first, the fewest changes
// first among them, then by normwise error (the precision idioms take
// their own places, below).
// Candidates that give the reference of the configuration as given are
// counted, not listed; candidates that give the same reference as an
// earlier one are listed under it (Candidate.Same).
//
// # Precision idioms
//
// The idiom keys of an operation ("angles", "variance", "accumulation",
// "softmax_shift": Key.Idiom, see package ops) say how a port computes in
// float32, not what: they change the yardstick and never the reference,
// so they are not searched as convention changes. Instead, when the port
// fails, Run judges it by the yardstick of the configuration with each
// idiom alternative, each word of each idiom key other than its default
// and the configuration's own, one at a time, measured with
// ops.YardstickOf against the reference already run (Result.Idioms counts
// them). When the problem was cut, an idiom is judged on the sub-problem
// first, and on the whole problem, whose verdict counts, only when it
// passes there. When no convention change and no idiom alone passes, each
// idiom is also tried with the best convention change (if that one lowers
// the error), on the sub-problem, against that change's reference. A port
// that passes gets a candidate in the configuration's words
// (`"angles": "float32-angles"`, or `"base": 500000; "angles":
// "float32-angles"`) whose Edit has Idiom set and a note that the port
// may declare the idiom: it changes the tolerance, not the reference. The
// candidate carries what the idiom costs (Candidate.IdiomCost, from
// ops.IdiomCostOf on the problem the candidates ran on): the normwise and
// max abs errors of the idiom's float32 run beside those of the plain
// float32 run, and for the rotary operations the errors at the first and
// the last position. WriteText prints it as one line under the candidate:
//
//	the port passes under: "angles": "float32-angles"
//	  1. "angles": "float32-angles": PASS, normwise error 5.61e-06 (y 5.61e-06 ≤ 1.13e-05)
//	      what the idiom costs (angles = float32-angles) against the plain float32 run: y: normwise 5.61e-06 (plain 4.7e-08, ×119), max abs 7.69e-05 (plain 1.48e-07); position 0: 2.92e-08 (plain 2.92e-08), position 2047: 1.14e-05 (plain 5.43e-08)
//
// An idiom explains a port only if the port computes about as it does:
//
//   - a passing convention change ranks before a passing idiom (a
//     different reference explains the error); among passing idioms the
//     one whose own float32 error is nearest the port's comes first (a
//     port with binary16 sums may pass the wider bfloat16 yardstick too);
//   - an idiom is not listed when the port's error, on an output that
//     fails without it, is more than 4 times smaller than the error of
//     the idiom's own run: the port fails for another reason, which the
//     idiom's wider tolerance would only hide;
//   - an idiom whose yardstick admits normwise errors above 0.1 (an
//     unshifted softmax whose sums overflow gives rows of 0) passes the
//     port only if the port also reproduces the idiom's own run, within
//     the plain yardstick's normwise tolerance;
//   - an idiom the port fails is not a finding: it is listed only when
//     nothing passes, no convention change lowers the error, and the
//     port's error is within 10 times the idiom's tolerance;
//   - when a convention change passes and the port's error as given is
//     above 0.1, the idioms are not judged: only a vacuous yardstick could
//     pass them.
//
// A port with a real slip is not explained by an idiom: over 2048
// positions, where an angle idiom's tolerance is widest, that of
// float32-angles is still about 10⁵ times below the error of a wrong base
// or pairing (TestSlipNotExplainedByIdiom). A port that gives NaN or Inf
// where the reference is finite (an unshifted softmax with a logit above
// about 88.7) fails every yardstick, the idiom's included, so no idiom is
// named; when its non-finite elements are exactly those of an idiom's
// float32 run, a signature of the output says so (TestUnshiftedSoftmaxNaN).
//
// The cost is bounded by Options: the number of candidates, and the size
// of the problem the candidates run on. A larger problem is cut where the
// operation's outputs allow it (Result.Cuts names the axes, and
// Result.SubProblem what was kept): attention to its first batch entries,
// then to four query heads with the two kv heads they read, chosen so that
// both group maps of the sub-problem are those of the whole problem on
// them, then to its first queries with the keys they see (two more for an
// edge one or two keys late), the configuration rewritten so that they sit
// at their positions in the whole problem; the row-wise operations to
// their first rows (every axis but the last counts rows); rotary-apply,
// whose rows are independent given their positions, to the first entries
// of its leading axes (the heads last), then to positions spread evenly
// over the length, the first and the last included, each row kept at its
// position in the whole problem ("positions" given explicitly), so that
// an error that grows with the position (a base slip, an angle idiom)
// shows there as on the whole. Outputs that sum
// over what was cut (dk and dv over query heads and queries, dweight over
// rows) are left out of the comparison. Mix-ups that move data across the
// cut axes (a tensor read in the other layout, ALiBi slopes reversed) are
// recognisable only on the whole problem: with ALiBi slopes the heads are
// not cut. Candidates are always described in the words of the whole
// problem's configuration. On the problems of the tests, batch of one
// included, a search costs a few times one check (reference, yardstick
// and comparison), and so does one that names a precision idiom, whose
// yardstick is measured once more on the whole problem (a float32 run and
// a comparison, without the reference); TestCostWithinTenChecks,
// TestCostBatchOne (rotary included) and TestCostIdioms measure it.
//
// Every failing output also gets error signatures, computed on the whole
// problem: the largest error along the positions (exact at position 0,
// linear growth, a step), along the heads (which heads, and the pattern
// h/g against h mod Hkv of the two group maps), along the dims (only one
// half, the pairs (2i, 2i+1) against (i, i+d/2)), a fitted factor
// got ≈ c·ref, rows with NaN or Inf, and NaN or Inf exactly where the
// float32 run of a precision idiom has them; each says in one line what
// it suggests.
//
// Result.WriteText prints the result for people; the Result encodes in
// JSON with the same data (non-finite errors as the strings "NaN", "+Inf"),
// each candidate's changes both in words and as Edit values (the key, its
// new value and the name of the alternative apart, "1/d" beside 0.125; a
// precision idiom marked Idiom, with its note), and an idiom's cost as
// Candidate.IdiomCost.
package diagnose
