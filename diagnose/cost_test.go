package diagnose

import (
	"slices"
	"testing"
	"time"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/ops"
)

// costRatio runs one check and one diagnosis of the port's outputs got
// alternately, three times each, and returns the median diagnosis time
// over the median check time, with the last diagnosis.
func costRatio(t *testing.T, op string, cfg []byte, in, got ops.Tensors) (float64, *Result) {
	t.Helper()
	var checks, diags []time.Duration
	var res *Result
	for range 3 {
		s := time.Now()
		ensure.False(t, check(t, op, cfg, in, got, compare.Float32), "the slipped port fails its check")
		checks = append(checks, time.Since(s))
		s = time.Now()
		var err error
		res, err = Run(op, cfg, in, got, compare.Float32, Options{})
		ensure.NoError(t, err)
		diags = append(diags, time.Since(s))
	}
	slices.Sort(checks)
	slices.Sort(diags)
	ratio := float64(diags[1]) / float64(checks[1])
	t.Logf("%s: one check %v, diagnosis %v (medians of 3): %.2f checks; cuts %v: %s; %d candidates run, %d left out",
		op, checks[1], diags[1], ratio, res.Cuts, res.SubProblem, res.Run, res.LeftOut)
	return ratio, res
}

// TestCostBatchOne: a batch of one entry cannot be cut along its leading
// axis; the diagnosis cuts heads and queries (or positions) instead and
// still costs at most 10 checks and names the slip first. Grouped-query
// attention with 8 query heads on 2 kv heads, 128 queries and keys, head
// dimension 64, the port reading kv head h mod 2 instead of h/4 (a
// "cycle" group map).
func TestCostBatchOne(t *testing.T) {
	if testing.Short() {
		t.Skip("timing")
	}
	t.Run("attention-forward", func(t *testing.T) {
		in := attnInputs(1, 8, 2, 128, 128, 64, 5)
		a := attnBase(1, 8, 2, 128, 128, 64)
		a.kv = func(h int) int { return h % 2 }
		out, lse := a.forward(t32(in, "q"), t32(in, "k"), t32(in, "v"))
		got := ops.Tensors{"out": {Data: to64(out)}, "lse": {Data: to64(lse)}}
		ratio, res := costRatio(t, "attention-forward", []byte(`{"version":1,"mask":[{"kind":"causal"}]}`), in, got)
		ensure.Contains(t, res.Cuts, "heads")
		ensure.Contains(t, res.Cuts, "queries")

		ensure.True(t, res.Candidates[0].Pass && res.Candidates[0].Names(`"group": "cycle"`), "%+v", res.Candidates[0])
		ensure.LessOrEqual(t, ratio, 10.0)
	})
	t.Run("attention-forward decode", func(t *testing.T) {
		// One decoding step: one query of 32 heads on a cache of 4096
		// keys of 8 kv heads, head dimension 128, the port reading kv head
		// h mod 8 instead of h/4. Queries cannot be cut (there is one);
		// heads are.
		in := attnInputs(1, 32, 8, 1, 4096, 128, 7)
		a := attnBase(1, 32, 8, 1, 4096, 128)
		a.kv = func(h int) int { return h % 8 }
		a.see = nil
		out, lse := a.forward(t32(in, "q"), t32(in, "k"), t32(in, "v"))
		got := ops.Tensors{"out": {Data: to64(out)}, "lse": {Data: to64(lse)}}
		ratio, res := costRatio(t, "attention-forward", []byte(`{"version":1}`), in, got)
		ensure.Contains(t, res.Cuts, "heads")
		ensure.True(t, res.Candidates[0].Pass && res.Candidates[0].Names(`"group": "cycle"`), "%+v", res.Candidates[0])
		ensure.LessOrEqual(t, ratio, 10.0)
	})
	// Rotary on one sequence of 8 heads of 2048 positions of 64 dims,
	// whose one leading entry cannot be cut: the heads are cut, then the
	// positions, to 256 spread over the length (the first and the last
	// included) at their own positions. A base slip (500000 for 10000),
	// and the angles formed in float32, whose error grows with the
	// position.
	for _, c := range []struct {
		name, want string
		port       rotPort
	}{
		{"rotary-apply base", `"base": 500000`, rotPort{L: 2048, D: 64, rotated: 64, base: 500000, divide: 1, sign: 1}},
		{"rotary-apply float32 angles", `"angles": "float32-angles"`, rotPort{L: 2048, D: 64, rotated: 64, base: 10000, divide: 1, sign: 1, angles32: true}},
	} {
		t.Run(c.name, func(t *testing.T) {
			in := ops.Tensors{"x": tensor([]int{1, 8, 2048, 64}, 9)}
			got := ops.Tensors{"y": {Data: to64(c.port.apply(t32(in, "x")))}}
			ratio, res := costRatio(t, "rotary-apply", []byte(`{"version":1}`), in, got)
			ensure.Equal(t, []string{"heads", "positions"}, res.Cuts)
			ensure.True(t, res.Candidates[0].Pass && res.Candidates[0].Names(c.want), "%+v", res.Candidates[0])
			ensure.LessOrEqual(t, ratio, 10.0)
		})
	}
	t.Run("layernorm-forward", func(t *testing.T) {
		// A batch of one sequence of 1024 rows of 512: ε placed outside
		// the root.
		const rows, d = 1024, 512
		in := ops.Tensors{"x": tensor([]int{1, rows, d}, 11), "weight": {Shape: []int{d}, Data: uniform(12, d, 0.5, 1.5)}, "bias": tensor([]int{d}, 13)}
		n := normPort{d: d, eps: 1e-5, addRoot: true}
		got := ops.Tensors{"y": {Data: to64(n.forward(t32(in, "x"), t32(in, "weight"), t32(in, "bias")))}}
		ratio, res := costRatio(t, "layernorm-forward", []byte(`{"version":1,"epsilon":1e-5}`), in, got)

		ensure.Equal(t, []string{"rows"}, res.Cuts)
		ensure.True(t, res.Candidates[0].Pass && res.Candidates[0].Names(`"epsilon_placement": "added-to-root"`), "%+v", res.Candidates[0])
		ensure.LessOrEqual(t, ratio, 10.0)
	})
}

// TestCostIdioms: a port named by a precision idiom also costs at most 10
// checks, though the idiom is judged on the whole problem and its cost
// measured: a rotary port that forms its angles in float32, 8 sequences of
// 2048 positions of 64 dims (cut to the first sequence, then to 256 of its
// positions spread over the length), and a one-pass
// LayerNorm on 1024 rows of 512 of mean 10 (cut to its first rows).
func TestCostIdioms(t *testing.T) {
	if testing.Short() {
		t.Skip("timing")
	}
	t.Run("rotary-apply float32 angles", func(t *testing.T) {
		in := ops.Tensors{"x": tensor([]int{8, 2048, 64}, 9)}
		r := rotPort{L: 2048, D: 64, rotated: 64, base: 10000, divide: 1, sign: 1, angles32: true}
		got := ops.Tensors{"y": {Data: to64(r.apply(t32(in, "x")))}}
		ratio, res := costRatio(t, "rotary-apply", []byte(`{"version":1}`), in, got)
		ensure.Equal(t, []string{"leading axis", "positions"}, res.Cuts)
		ensure.True(t, res.Candidates[0].Pass && res.Candidates[0].Names(`"angles": "float32-angles"`), "%+v", res.Candidates[0])
		ensure.LessOrEqual(t, ratio, 10.0)
	})
	t.Run("layernorm-forward one-pass", func(t *testing.T) {
		const rows, d = 1024, 512
		in := ops.Tensors{"x": tensor([]int{1, rows, d}, 11), "weight": {Shape: []int{d}, Data: uniform(12, d, 0.5, 1.5)}, "bias": tensor([]int{d}, 13)}
		x := in["x"].Data
		for i, v := range x {
			x[i] = float64(float32(10 + v))
		}
		n := normPort{d: d, eps: 1e-5, onePass: true}
		got := ops.Tensors{"y": {Data: to64(n.forward(t32(in, "x"), t32(in, "weight"), t32(in, "bias")))}}
		ratio, res := costRatio(t, "layernorm-forward", []byte(`{"version":1,"epsilon":1e-5}`), in, got)
		ensure.Equal(t, []string{"rows"}, res.Cuts)
		ensure.True(t, res.Candidates[0].Pass && res.Candidates[0].Names(`"variance": "one-pass"`), "%+v", res.Candidates[0])
		ensure.LessOrEqual(t, ratio, 10.0)
	})
}
