// Package diagnose names what a failing port did. Given an operation of
// package ops, its JSON configuration, the inputs, the port's outputs and
// the port's number format, Run judges the port by the yardstick of the
// configuration as given (ops.Yardstick), and when it fails searches for
// the configurations, and the tensor mix-ups, under which it passes:
//
//   - every word of every convention key of the operation, read from
//     Op.Keys (never from a table of this package), one at a time;
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
// verdict under it. Candidates are ranked: those the port passes first,
// the fewest changes first among them, then by normwise error.
// Candidates that give the reference of the configuration as given are
// counted, not listed; candidates that give the same reference as an
// earlier one are listed under it (Candidate.Same).
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
// their first rows (every axis but the last counts rows). Outputs that sum
// over what was cut (dk and dv over query heads and queries, dweight over
// rows) are left out of the comparison. Mix-ups that move data across the
// cut axes (a tensor read in the other layout, ALiBi slopes reversed) are
// recognisable only on the whole problem: with ALiBi slopes the heads are
// not cut. Candidates are always described in the words of the whole
// problem's configuration. On the problems of the tests, batch of one
// included, a search costs a few times one check (reference, yardstick
// and comparison); TestCostWithinTenChecks and TestCostBatchOne measure
// it.
//
// Every failing output also gets error signatures, computed on the whole
// problem: the largest error along the positions (exact at position 0,
// linear growth, a step), along the heads (which heads, and the pattern
// h/g against h mod Hkv of the two group maps), along the dims (only one
// half, the pairs (2i, 2i+1) against (i, i+d/2)), a fitted factor
// got ≈ c·ref, and rows with NaN or Inf; each says in one line what it
// suggests.
//
// Result.WriteText prints the result for people; the Result encodes in
// JSON with the same data (non-finite errors as the strings "NaN", "+Inf"),
// each candidate's changes both in words and as Edit values (the key, its
// new value and the name of the alternative apart, "1/d" beside 0.125).
package diagnose
