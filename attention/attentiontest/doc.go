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
// Each case of Cases runs as a subtest under every declared convention,
// named by the conventions' words, case/layout[/group][/pairing] (go test
// -run 'TestAttention/causal_grouped/seq-major/cycle' picks one); a case
// that needs what the kernel does not declare is skipped with a message
// that says what is missing, never silently.
//
// # Cases
//
// Cases returns them, with the reason each is there; Run runs them in this order:
//
//	one_query_one_key        length 1: the softmax of one logit is 1, whatever its value
//	full_square              plain multi-head attention over every key, lengths that are no power of two
//	cross_fewer_queries      Lq < Lk without a mask (cross attention)
//	cross_more_queries       Lq > Lk without a mask
//	causal_square            the causal prefill
//	causal_grouped           8 query heads on 2 kv heads: GroupBlocks and GroupCycle read different kv heads
//	causal_multi_query       4 query heads on one kv head
//	decode_step              one query at the last key position (mask.AlignEnd), grouped heads
//	chunked_prefill          16 queries at the last 16 of 50 key positions (mask.AlignEnd)
//	align_start              query i at key position i (mask.AlignStart): the first rows see few keys
//	align_start_offset       queries at key positions 9 … 20 of 40 (mask.AlignStart, offset 9)
//	align_end_offset         a chunk that is not the last: 8 queries at positions 30 … 37 of 48 (mask.AlignEnd, offset −10)
//	window_edges             a window of 7 keys: the first rows are cut by the start of the sequence
//	window_one               a window of 1: each query sees only itself
//	window_wider_than_keys   a window of 64 over 20 keys: the causal mask
//	window_decode            3 queries at the end of 40 keys, a window of 8
//	no_keys                  Lk = 0: every row sees no key (the declared EmptyRow; lse −Inf)
//	padded_keys_empty_rows   key lengths 10, 3 and 0: the last batch entry's rows see no key
//	logits_near_1000         logits near +1000 and −1000: a kernel that does not subtract the running maximum overflows
//	value_dim_differs        Dk 32, Dv 8
//	partial_rotary           the first 16 of 32 dims rotated, frequencies over 16
//	rotary_base_500000       another base, and positions up to 299
//	custom_scale             a logit scale other than 1/√Dk
//	soft_cap                 logits capped at 20·tanh(s/20), with logits of tens
//	realistic_prefill        8 query heads on 2 kv heads, 128 positions, head dimension 64: several tiles of keys
//	realistic_decode         one query against 512 cached keys, head dimension 64
//
// # Paged caches
//
// RunPaged(t, PagedKernel{…}) runs a kernel that reads its keys and values
// from pages of a pool through page tables (PagedProblem; the reference is
// kvcache.AttendPages) through PagedCases, each as a subtest named
// case/pool_layout/layout[/group], in this order:
//
//	pages_in_order      one sequence of 12 in pages 0, 1, 2 of 4 positions: the plain layout
//	pages_shuffled      pages 6, 1, 7, 0, 3, 2 of a pool of 8: a kernel that reads page ⌊t/P⌋ instead of the table's entry reads pages 4 and 5
//	last_page_partial   10 positions in pages of 4: the last page's slots 2 and 3 hold values that must not be read
//	shared_prefix       two sequences share their first two pages (a common prefix) and differ after
//	padded_table        table entries past the pages the length uses are −1: a kernel that reads them fails
//	page_size_one       pages of one position in reverse order
//	ragged_batch        four sequences of lengths 1, 16, 17 and 40 in pages of 16: one page exactly full, one with a single position
//	one_position        a sequence of one position: the query sees only its own key
//	chunk_of_queries    4 new queries at positions 16 … 19 of a sequence of 20: causal among themselves
//	realistic_decode    8 query heads on 2 kv heads, head dimension 64, 512 positions in 32 of the 48 pages of 16, shuffled
//
// PagedSupports declares the pool layouts, layouts and group maps the
// kernel implements, whether it takes several queries per sequence
// (Chunks) and whether it returns the log-sum-exp; judging is as below,
// the yardstick being kvcache.AttendPages32.
//
// # Rings, splits and packed sequences
//
// RunRing, RunSplit and RunPacked judge the other serving layouts of
// package kvcache the same way, each against its kvcache reference, with
// ServingSupports declaring the layouts, group maps and log-sum-exp. A
// ring kernel (RingProblem) decodes the newest token against a ring of W
// slots written at position mod W; its cases:
//
//	ring_filling                    3 tokens in a ring of 8: five slots hold values never written, which must not be read
//	ring_full                       8 tokens in a ring of 8: every slot, none overwritten
//	ring_wrapped                    9 tokens in a ring of 8: slot 0 holds position 8, the oldest position 0 is gone
//	ring_far_past_wrap              100 tokens in a ring of 8: the window is positions 92 … 99
//	ring_of_one                     a ring of one slot: the query sees only itself
//	ring_realistic                  8 query heads on 2 kv heads, head dimension 64, 1000 tokens in a ring of 256
//
// A split kernel (SplitProblem) returns the partial output and
// log-sum-exp of one range of keys for queries at their true positions;
// the log-sum-exp is always judged, a range the queries cannot see being
// output 0 and log-sum-exp −Inf:
//
//	split_first_half                keys 0 … 15 of 32 for the query at position 31
//	split_second_half               keys 16 … 31 of 32: the range ends at the query's own key
//	split_empty                     an empty range: output 0, log-sum-exp −Inf
//	split_after_queries             keys 16 … 31 for the query at position 10: all hidden, output 0, log-sum-exp −Inf
//	split_across_queries            4 queries at positions 12 … 15, keys 10 … 19: each sees a different part of the range
//	split_one_key                   a range of one key
//	split_realistic                 8 query heads on 2 kv heads, head dimension 64, keys 256 … 767 of 1024
//
// A packed kernel (PackedProblem) attends sequences packed token after
// token, with separate running offsets for queries and keys:
//
//	packed_no_prefix                three sequences of 5, 1 and 7 tokens, keys the queries' own: a query that sees another sequence's keys fails
//	packed_cached_prefixes          queries 2, 4 and 1 after cached prefixes of 7, 0 and 6 keys: a kernel that aligns the queries at the start fails
//	packed_sequence_without_queries a sequence with keys but no queries between two others
//	packed_single_tokens            four sequences of one token: each query sees only itself
//	packed_realistic                8 query heads on 2 kv heads, head dimension 64, four sequences of 100, 37, 64 and 1 queries after prefixes of 0, 90, 16 and 200 keys
//
// A kernel that verifies drafted tokens in one pass is an attention
// kernel with Lq drafts at the end of the cache, aligned at the end and
// causal: Run's decode_step, chunked_prefill and window_decode are its
// cases (kvcache.VerifyDraft is that call).
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
// A failure message names the case, the problem with every convention by
// its key and word (Problem.String: "layout seq-major, group cycle, mask
// causal, align end, …"), the output (output or log-sum-exp) and its worst
// element with its index, then the three worst elements, one line naming
// the convention the output matches instead when one does (package
// diagnose, run on attention-forward posed with the case's conventions:
// `it matches "group": "cycle" …`), and the file holding compare.Diff's
// whole report (PLUMB_REPORT_INLINE=1 in the
// environment prints it instead): one short block per failing output.
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
// Run takes any conformance.TB, of which *testing.T is one.
// conformance.Recorder is another: it records failures and skips instead
// of failing the calling test, which is how a test shows that the suite
// catches a kernel with a deliberate slip (see ExampleRun and
// examples/fastattn).
//
// Not covered: additive bias, ALiBi slopes, sink logits, the
// packed-sequence mask in Run (RunPacked judges packed layouts), prefix
// masks and the backward pass; the attention package's own tests
// check those against its golden files.
package attentiontest
