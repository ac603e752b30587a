package attentiontest_test

import (
	"fmt"
	"github.com/plumbref/plumb/conformance"
	"strings"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/attention/attentiontest"
	"github.com/plumbref/plumb/compare"
)

// A kernel's test is one call, attentiontest.Run(t, kernel), with t the
// test's *testing.T. Here a Recorder stands in for t, to show what the
// suite does with a kernel that reads kv head h mod Hkv (cycle) while
// declaring the default blocks: it fails exactly the cases with
// grouped heads, and skips, with a message, the cases that need what the
// kernel does not declare.
func ExampleRun() {
	slipped := attentiontest.Kernel[float64]{
		Format: compare.Float64,
		Forward: func(q, k, v []float64, p attentiontest.Problem) ([]float64, []float64, error) {
			o, err := p.Options()
			if err != nil {
				return nil, nil, err
			}
			o.Group = attention.GroupCycle // the slip
			return attention.Forward(q, k, v, p.Shape, o)
		},
		Supports: attentiontest.Supports{
			Masks:          []attentiontest.Masking{attentiontest.NoMask, attentiontest.Causal, attentiontest.SlidingWindow},
			UnequalLengths: true,
			LSE:            true,
		},
	}
	rec := &conformance.Recorder{}
	attentiontest.Run(rec, slipped)

	var passed, skipped int
	rec.Walk(func(r *conformance.Recorder) {
		switch {
		case len(r.Children) > 0:
		case r.Failed:
			// The message goes on with the conventions, the worst element and
			// the whole report.
			fmt.Printf("FAIL %s: %s\n", r.Name, r.Messages[0][:strings.Index(r.Messages[0], " (")])
		case r.Skipped:
			skipped++
		default:
			passed++
		}
	})
	fmt.Println(passed, "passed,", skipped, "skipped")
	fmt.Println(rec.Find("soft_cap/heads-major").Messages[0])
	// Output:
	// FAIL causal_grouped/heads-major/blocks: case causal_grouped
	// FAIL decode_step/heads-major/blocks: case decode_step
	// FAIL window_decode/heads-major/blocks: case window_decode
	// FAIL realistic_prefill/heads-major/blocks: case realistic_prefill
	// FAIL realistic_decode/heads-major/blocks: case realistic_decode
	// 13 passed, 8 skipped
	// case soft_cap/heads-major skipped: it needs soft-capping (SoftCap), which the kernel does not declare in its Supports
}

// The cases, and what each is there to catch.
func ExampleCases() {
	for _, c := range attentiontest.Cases()[:4] {
		fmt.Printf("%-20s %s\n", c.Name, c.Why)
	}
	// Output:
	// one_query_one_key    length 1: the softmax of one logit is 1, whatever its value
	// full_square          plain multi-head attention over every key, lengths that are no power of two
	// cross_fewer_queries  Lq < Lk without a mask (cross attention)
	// cross_more_queries   Lq > Lk without a mask
}
