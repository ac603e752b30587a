package diagnose

import (
	"bytes"
	"encoding/json"
	"errors"
	"math"
	"strings"
	"testing"
	"time"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/ops"
)

// check is what one judgement of a port costs: the reference, the
// yardstick and the comparison of every output.
func check(t *testing.T, op string, cfg []byte, in, got ops.Tensors, f compare.Format) bool {
	ref, err := ops.Run(op, cfg, in)
	ensure.NoError(t, err)
	ys, err := ops.Yardstick(op, cfg, in, f, compare.DefaultK)
	ensure.NoError(t, err)
	pass := true
	for n, g := range got {
		r, err := compare.Diff(ref[n].Data, g.Data, ref[n].Shape, ys[n].Options())
		ensure.NoError(t, err)
		pass = pass && r.Verdict.Pass
	}
	return pass
}

// TestCostWithinTenChecks measures, side by side in one run, one check of
// a slipped port on a problem of 16 batch entries and the whole diagnosis,
// and requires the diagnosis to cost at most 10 checks (the bound this
// package promises), on a sub-problem that it reports.
func TestCostWithinTenChecks(t *testing.T) {
	if testing.Short() {
		t.Skip("timing")
	}
	in := attnInputs(16, 8, 2, 64, 64, 32, 5)
	a := attnBase(16, 8, 2, 64, 64, 32)
	a.kv = func(h int) int { return h % 2 }
	out, lse := a.forward(t32(in, "q"), t32(in, "k"), t32(in, "v"))
	got := ops.Tensors{"out": {Data: to64(out)}, "lse": {Data: to64(lse)}}
	cfg := []byte(`{"version":1,"mask":[{"kind":"causal"}]}`)

	best := func(f func()) time.Duration {
		d := time.Duration(math.MaxInt64)
		for range 3 {
			s := time.Now()
			f()
			d = min(d, time.Since(s))
		}
		return d
	}
	var res *Result
	one := best(func() { ensure.False(t, check(t, "attention-forward", cfg, in, got, compare.Float32)) })
	all := best(func() {
		var err error
		res, err = Run("attention-forward", cfg, in, got, compare.Float32, Options{})
		ensure.NoError(t, err)
	})
	ratio := float64(all) / float64(one)
	t.Logf("one check %v, diagnosis %v: %.2f checks; %s; %d candidates run, %d left out", one, all, ratio, res.SubProblem, res.Run, res.LeftOut)
	ensure.NotEmpty(t, res.SubProblem, "a problem of 16 batch entries is cut")
	ensure.True(t, res.Candidates[0].Pass && res.Candidates[0].Names(`"group": "cycle"`), "%+v", res.Candidates[0])
	ensure.LessOrEqual(t, ratio, 10.0)
}

func TestPassingPortHasNothingToDiagnose(t *testing.T) {
	in := attnInputs(1, 4, 2, 6, 6, 8, 1)
	cfg := []byte(`{"version":1,"mask":[{"kind":"causal"}]}`)
	ref, err := ops.Run("attention-forward", cfg, in)
	ensure.NoError(t, err)
	res, err := Run("attention-forward", cfg, in, ops.Tensors{"out": ref["out"]}, compare.Float32, Options{})
	ensure.NoError(t, err)
	ensure.True(t, res.Given.Pass)
	ensure.Empty(t, res.Candidates)
	var b strings.Builder
	ensure.NoError(t, res.WriteText(&b))
	ensure.Contains(t, b.String(), "nothing to diagnose")
}

func TestErrors(t *testing.T) {
	in := attnInputs(1, 2, 2, 3, 3, 4, 1)
	cfg := []byte(`{"version":1}`)
	ref, err := ops.Run("attention-forward", cfg, in)
	ensure.NoError(t, err)
	for _, c := range []struct {
		name, op string
		cfg      []byte
		got      ops.Tensors
		opt      Options
		want     error
		text     string
	}{
		{"unknown operation", "attention", cfg, ref, Options{}, ops.ErrUnknownOp, "ops: unknown operation: Lookup: name = \"attention\""},
		{"bad configuration", "attention-forward", []byte(`{"version":1,"group":"rows"}`), ref, Options{}, ops.ErrConfig, "group"},
		{"no output", "attention-forward", cfg, ops.Tensors{}, Options{}, ErrOutputs, "diagnose: invalid outputs: Run: got has no output; want at least one of out, lse"},
		{"not an output", "attention-forward", cfg, ops.Tensors{"y": ref["out"]}, Options{}, ErrOutputs, `Run: got["y"] is not an output of attention-forward here; want one of lse, out`},
		{"wrong length", "attention-forward", cfg, ops.Tensors{"out": {Data: []float64{1}}}, Options{}, ErrOutputs, `Run: got["out"] has 1 elements; want 24`},
		{"negative limit", "attention-forward", cfg, ref, Options{MaxCandidates: -1}, ErrOptions, "diagnose: invalid options: Run: Options.MaxCandidates = -1; want ≥ 0 (0: the default)"},
		{"small K", "attention-forward", cfg, ref, Options{K: 0.5}, ErrOptions, "Options.K = 0.5; want 0 (the default) or a finite value ≥ 1"},
	} {
		_, err := Run(c.op, c.cfg, in, c.got, compare.Float32, c.opt)
		ensure.Error(t, err, c.name)
		ensure.True(t, errors.Is(err, c.want), "%s: %v", c.name, err)
		ensure.Contains(t, err.Error(), c.text, c.name)
	}
	_, err = Run("attention-forward", cfg, in, ref, compare.Float64, Options{})
	ensure.True(t, errors.Is(err, compare.ErrFormat), "a float64 port has no yardstick: %v", err)
}

// TestReportAndJSON checks that the text report and the JSON encoding
// carry the same diagnosis, and that non-finite errors encode.
func TestReportAndJSON(t *testing.T) {
	in := attnInputs(1, 4, 2, 6, 6, 8, 1)
	a := attnBase(1, 4, 2, 6, 6, 8)
	a.kv = func(h int) int { return h % 2 }
	out, lse := a.forward(t32(in, "q"), t32(in, "k"), t32(in, "v"))
	out[3] = float32(math.NaN())
	got := ops.Tensors{"out": {Data: to64(out)}, "lse": {Data: to64(lse)}}
	res, err := Run("attention-forward", []byte(`{"version":1,"mask":[{"kind":"causal"}]}`), in, got, compare.Float32, Options{})
	ensure.NoError(t, err)
	var b strings.Builder
	ensure.NoError(t, res.WriteText(&b))
	text := b.String()
	ensure.Contains(t, text, "as given: FAIL")
	ensure.Contains(t, text, "non-finite: NaN or Inf in 1 of 24 rows (first row 0)")
	js, err := res.MarshalIndent()
	ensure.NoError(t, err)
	var back Result
	ensure.NoError(t, json.Unmarshal(js, &back))
	ensure.Equal(t, res.Candidates[0].Change, back.Candidates[0].Change)
	ensure.True(t, math.IsInf(float64(back.Given.Normwise), 1), "a NaN mismatch is an infinite normwise error")
	ensure.True(t, bytes.Contains(js, []byte(`"normwise_error": "+Inf"`)))
	ensure.Contains(t, text, res.Candidates[0].Change)
	ensure.Equal(t, len(res.Signatures), len(back.Signatures))
}

func TestNumberJSON(t *testing.T) {
	for _, v := range []float64{0, 1.5e-7, math.Inf(1), math.Inf(-1)} {
		b, err := json.Marshal(Number(v))
		ensure.NoError(t, err)
		var n Number
		ensure.NoError(t, json.Unmarshal(b, &n))
		ensure.Equal(t, v, float64(n))
	}
	b, _ := json.Marshal(Number(math.NaN()))
	var n Number
	ensure.NoError(t, json.Unmarshal(b, &n))
	ensure.True(t, math.IsNaN(float64(n)))
	ensure.True(t, errors.Is(n.UnmarshalJSON([]byte(`"x"`)), ErrOutputs))
}
