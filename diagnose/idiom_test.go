package diagnose

import (
	"encoding/json"
	"math"
	"strings"
	"testing"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/ops"
)

// The tests of the precision idioms in the search: a port that computes as
// an idiom does is named by the idiom, with its cost; a slipped port is
// named by its slip, never by an idiom; a port whose NaN no yardstick
// passes is said to compute as the idiom does, in a signature.

// entryNamed returns the catalogue entry of the family and name.
func entryNamed(t *testing.T, family, name string) entry {
	t.Helper()
	for _, e := range catalogue() {
		if e.family == family && e.name == name {
			return e
		}
	}
	t.Fatalf("no catalogue entry %s / %s", family, name)
	return entry{}
}

func runEntry(t *testing.T, e entry) *Result {
	t.Helper()
	res, err := Run(e.op, []byte(e.config), e.in, e.port(e.in), e.format, Options{})
	ensure.NoError(t, err)
	return res
}

func text(t *testing.T, res *Result) string {
	t.Helper()
	var b strings.Builder
	ensure.NoError(t, res.WriteText(&b))
	return b.String()
}

// TestIdiomCandidate: the rotary port that forms its angles in float32
// over 2048 positions is named `"angles": "float32-angles"`, as data an
// Edit with the key, the word, the note and Idiom set; the candidate
// carries what the idiom costs, at the first and the last position, in
// the text as one line under it and in JSON. The problem is cut to
// positions spread over the length, the first and the last included, so
// the cost, measured there, still shows both.
func TestIdiomCandidate(t *testing.T) {
	res := runEntry(t, entryNamed(t, "rotary and scaling", "float32 angles at 2048 positions"))
	ensure.False(t, res.Given.Pass)
	ensure.Equal(t, 2, res.Idioms, "float32-frequencies and float32-angles")
	c := res.Candidates[0]
	ensure.True(t, c.Pass && c.Measured)
	ensure.Equal(t, `"angles": "float32-angles"`, c.Change)
	ensure.Equal(t, []Edit{{Key: "angles", Value: json.RawMessage(`"float32-angles"`), Note: idiomNote, Idiom: true}}, c.Edits)
	ensure.JSONEq(t, `{"version":1,"angles":"float32-angles"}`, string(c.Config))
	ensure.Equal(t, c.Normwise, res.Given.Normwise, "an idiom keeps the reference: the port's error is the one as given")
	ensure.Greater(t, float64(c.Outputs[0].Tolerance), 10*float64(res.Given.Outputs[0].Tolerance), "the idiom widens the tolerance")

	ic := c.IdiomCost
	ensure.NotNil(t, ic)
	ensure.Equal(t, "angles = float32-angles", ic.Keys)
	ensure.True(t, ic.SubProblem, "65536 input values: cut to 512 positions spread over the length")
	ensure.Len(t, ic.Outputs, 1)
	o := ic.Outputs[0]
	ensure.Equal(t, "y", o.Output)
	ensure.Greater(t, float64(o.Ratio), 20.0, "the idiom costs many times the plain float32 run's error")
	ensure.InDelta(t, float64(o.Normwise)/float64(o.PlainNormwise), float64(o.Ratio), 1e-9*float64(o.Ratio))
	ensure.Len(t, o.Positions, 2)
	ensure.Equal(t, 0, o.Positions[0].Position)
	ensure.Equal(t, 2047, o.Positions[1].Position)
	ensure.Greater(t, float64(o.Positions[1].MaxAbs), 100*float64(o.Positions[1].PlainMaxAbs), "at the last position the idiom costs most")
	t.Log(ic)

	// One line under the candidate.
	lines := strings.Split(text(t, res), "\n")
	at := -1
	for i, l := range lines {
		if strings.HasPrefix(l, "  1. "+c.Change+": PASS") {
			at = i
		}
	}
	ensure.GreaterOrEqual(t, at, 0, "%s", strings.Join(lines, "\n"))
	ensure.Equal(t, "      "+ic.String(), lines[at+1])
	ensure.Contains(t, lines[at+1], "what the idiom costs (angles = float32-angles) against the plain float32 run on the sub-problem: y: normwise ")
	ensure.Contains(t, lines[at+1], "position 0: ")
	ensure.Contains(t, lines[at+1], "position 2047: ")

	// The same in JSON.
	js, err := res.MarshalIndent()
	ensure.NoError(t, err)
	ensure.Contains(t, string(js), `"idiom_cost": {`)
	ensure.Contains(t, string(js), `"idiom": true`)
	var back Result
	ensure.NoError(t, json.Unmarshal(js, &back))
	ensure.Equal(t, *ic, *back.Candidates[0].IdiomCost)
	ensure.Equal(t, c.Edits, back.Candidates[0].Edits)
	ensure.Equal(t, res.Idioms, back.Idioms)
}

// TestSlipNotExplainedByIdiom: a rotary port with a real slip (base 500000
// for 10000, or the halves pairing for adjacent pairs) over 2048
// positions, where an angle idiom's tolerance is widest, is named by its
// slip, and no idiom makes it pass: the widest idiom's tolerance is still
// many orders of magnitude below the slip's error.
func TestSlipNotExplainedByIdiom(t *testing.T) {
	for _, c := range []struct{ name, want string }{
		{"base 500000 at 2048 positions", `"base": 500000`},
		{"halves at 2048 positions", `"pairing": "halves"`},
	} {
		e := entryNamed(t, "rotary and scaling", c.name)
		got := e.port(e.in)
		ref, err := ops.Run(e.op, []byte(e.config), e.in)
		ensure.NoError(t, err)
		ys, err := ops.YardstickOf(e.op, []byte(`{"version":1,"angles":"float32-angles"}`), e.in, ref, e.format, compare.DefaultK)
		ensure.NoError(t, err)
		slip := normwise(ref["y"].Data, got["y"].Data)
		tol := ys["y"].Tolerance.MaxNormwise
		t.Logf("%s: the slip's normwise error %.3g, the float32-angles tolerance %.3g (%.0f times smaller)", c.name, slip, tol, slip/tol)
		ensure.Less(t, 1e4*tol, slip, c.name)

		res := runEntry(t, e)
		ensure.True(t, res.Candidates[0].Pass && res.Candidates[0].Names(c.want), "%s:\n%s", c.name, text(t, res))
		for _, p := range res.Candidates {
			ensure.False(t, wantsIdiom(p), "%s: an idiom is listed:\n%s", c.name, text(t, res))
		}
	}
}

// layerNorm64 is LayerNorm over rows of d with weight and bias, computed
// in float64 with ε in the root and rounded once to float32.
func layerNorm64(in ops.Tensors, d int, eps float64) ops.Tensors {
	x, w, b := in["x"].Data, in["weight"].Data, in["bias"].Data
	y := make([]float64, len(x))
	for o := 0; o < len(x); o += d {
		var mu, v float64
		for _, e := range x[o : o+d] {
			mu += e
		}
		mu /= float64(d)
		for _, e := range x[o : o+d] {
			v += float64((e - mu) * (e - mu))
		}
		r := math.Sqrt(v/float64(d) + eps)
		for i := range d {
			y[o+i] = float64(float32(float64((x[o+i]-mu)/r*w[i]) + b[i]))
		}
	}
	return ops.Tensors{"y": {Data: y}}
}

// TestConventionBeforeIdiom: a LayerNorm port with ε 1e-6 for 1e-5, exact
// but for its float32 output, on rows of mean 10 passes both the
// convention change and the one-pass variance (whose tolerance there is
// wider than the slip); the convention, a reference the port reproduces,
// ranks first.
func TestConventionBeforeIdiom(t *testing.T) {
	e := offset(normEntry("norms forward", "", "layernorm-forward", `{"version":1,"epsilon":1e-5}`, normPort{d: 16, eps: 1e-5}), 10)
	res, err := Run(e.op, []byte(e.config), e.in, layerNorm64(e.in, 16, 1e-6), e.format, Options{})
	ensure.NoError(t, err)
	out := text(t, res)
	ensure.True(t, res.Candidates[0].Pass && res.Candidates[0].Names(`"epsilon": 0.000001`), out)
	idiom := -1
	for i, c := range res.Candidates {
		if wantsIdiom(c) {
			idiom = i
			break
		}
	}
	ensure.Greater(t, idiom, 0, "the one-pass variance is listed:\n%s", out)
	ensure.True(t, res.Candidates[idiom].Pass, out)
	ensure.Equal(t, `"variance": "one-pass"`, res.Candidates[idiom].Change)
	for _, c := range res.Candidates[:idiom] {
		ensure.True(t, c.Pass && !wantsIdiom(c), "every passing convention change ranks before the idiom:\n%s", out)
	}
}

// TestUnshiftedSoftmaxNaN: an unshifted float32 softmax on rows with a
// logit above 88.7 has NaN there (e^x is +Inf), which no yardstick passes;
// the diagnosis names no candidate, lists no idiom, and says in a
// signature that the port's NaN are exactly those of the float32 run of
// `"softmax_shift": "none"`.
func TestUnshiftedSoftmaxNaN(t *testing.T) {
	x := overflowing()
	for i := 64; i < 128; i++ {
		x.Data[i] += 4 // row 1 in [88, 92): e^x overflows float32
	}
	in := ops.Tensors{"x": x}
	got := ops.Tensors{"y": {Data: to64(softmaxIdiomPort(t32(in, "x"), 4, 64, 1, 256, nil, false))}}
	res, err := Run("softmax", []byte(`{"version":1}`), in, got, compare.Float32, Options{})
	ensure.NoError(t, err)
	out := text(t, res)
	ensure.True(t, math.IsInf(float64(res.Given.Normwise), 1), out)
	ensure.Empty(t, res.Passing(), out)
	for _, c := range res.Candidates {
		ensure.False(t, wantsIdiom(c), "an idiom is listed:\n%s", out)
	}
	found := false
	for _, s := range res.Signatures {
		if s.Along == "non-finite" && strings.Contains(s.Finding, `"softmax_shift": "none"`) {
			found = true
			ensure.Contains(t, s.Suggests, "no yardstick passes a NaN")
		}
	}
	ensure.True(t, found, out)
	t.Log(out)
}

// TestVacuousIdiomYardstick: on rows whose unshifted sums overflow, the
// idiom softmax_shift = none has a yardstick that would pass almost
// anything (its own run gives rows of 0). A shifted port with a slip of a
// few percent (the last logit of every row left out) passes that
// yardstick's tolerance but does not reproduce the idiom's run, and is not
// named by it; the unshifted port is (the catalogue entry "unshifted
// softmax, sums overflowing").
func TestVacuousIdiomYardstick(t *testing.T) {
	in := ops.Tensors{"x": overflowing()}
	x := t32(in, "x")
	y := make([]float32, len(x))
	for r := 0; r < len(x); r += 64 {
		copy(y[r:r+63], softmaxPort(x[r:r+63], 1, 63, 1, 63))
	}
	got := ops.Tensors{"y": {Data: to64(y)}}
	ref, err := ops.Run("softmax", []byte(`{"version":1}`), in)
	ensure.NoError(t, err)
	ys, err := ops.YardstickOf("softmax", []byte(`{"version":1,"softmax_shift":"none"}`), in, ref, compare.Float32, compare.DefaultK)
	ensure.NoError(t, err)
	nw := normwise(ref["y"].Data, got["y"].Data)
	ensure.Greater(t, ys["y"].Tolerance.MaxNormwise, vacuous)
	ensure.Less(t, nw, ys["y"].Tolerance.MaxNormwise, "the slip is within the idiom's tolerance")

	res, err := Run("softmax", []byte(`{"version":1}`), in, got, compare.Float32, Options{})
	ensure.NoError(t, err)
	out := text(t, res)
	ensure.False(t, res.Given.Pass, out)
	for _, c := range res.Passing() {
		ensure.False(t, wantsIdiom(c), "the vacuous idiom names the slipped port:\n%s", out)
	}
}
