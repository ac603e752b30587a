package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"math"
	"strings"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/diagnose"
	"github.com/plumbref/plumb/gen"
	"github.com/plumbref/plumb/internal/elem"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
	"github.com/plumbref/plumb/ops"
	"github.com/plumbref/plumb/posenc"
)

// The demo's block: a decoder self-attention step after the projections.
const (
	demoHeadsQ  = 8
	demoHeadsKV = 2
	demoLen     = 12
	demoDim     = 16
	demoBase    = 10000
)

// portRotary is the port's rotary encoding, as its author wrote it, in
// float32: angles m·θ_i formed in float32, θ_i = base^(−2i/d). halves
// chooses which dims form pair i: (i, i + d/2) when true, (2i, 2i+1) when
// false. x is [heads, length, dim] and is rotated in place.
func portRotary(x []float32, heads int, halves bool) {
	d := demoDim
	for h := 0; h < heads; h++ {
		for m := 0; m < demoLen; m++ {
			row := x[(h*demoLen+m)*d : (h*demoLen+m+1)*d]
			for i := 0; i < d/2; i++ {
				theta := float32(elem.Pow(demoBase, -2*float64(i)/float64(d)))
				angle := float32(m) * theta
				c, s := float32(elem.Cos(float64(angle))), float32(elem.Sin(float64(angle)))
				a, b := 2*i, 2*i+1
				if halves {
					a, b = i, i+d/2
				}
				xa, xb := row[a], row[b]
				row[a] = float32(xa*c) - float32(xb*s) // each product rounded: never fused
				row[b] = float32(xa*s) + float32(xb*c)
			}
		}
	}
}

// portAttention is the port's causal grouped attention in float32: query
// head h reads kv head h / (heads_q / heads_kv); q is [heads_q, length,
// dim], k and v [heads_kv, length, dim]; the output is [heads_q, length,
// dim].
func portAttention(q, k, v []float32) []float32 {
	d := demoDim
	out := make([]float32, len(q))
	scale := float32(1 / math.Sqrt(float64(d)))
	p := make([]float32, demoLen)
	for h := 0; h < demoHeadsQ; h++ {
		g := h / (demoHeadsQ / demoHeadsKV)
		for i := 0; i < demoLen; i++ {
			qi := q[(h*demoLen+i)*d:][:d]
			maxLogit := float32(math.Inf(-1))
			for j := 0; j <= i; j++ { // causal: keys up to the query
				kj := k[(g*demoLen+j)*d:][:d]
				var s float32
				for t := range qi {
					s += float32(qi[t] * kj[t])
				}
				p[j] = s * scale
				maxLogit = max(maxLogit, p[j])
			}
			var sum float32
			for j := 0; j <= i; j++ {
				p[j] = float32(elem.Exp(float64(p[j] - maxLogit)))
				sum += p[j]
			}
			o := out[(h*demoLen+i)*d:][:d]
			for j := 0; j <= i; j++ {
				vj := v[(g*demoLen+j)*d:][:d]
				w := p[j] / sum
				for t := range o {
					o[t] += float32(w * vj[t])
				}
			}
		}
	}
	return out
}

// port runs the whole port on float32 inputs.
func port(q, k, v []float32, halves bool) []float32 {
	q = append([]float32(nil), q...)
	k = append([]float32(nil), k...)
	portRotary(q, demoHeadsQ, halves)
	portRotary(k, demoHeadsKV, halves)
	return portAttention(q, k, v)
}

// reference is the block in plumb: posenc rotary on q and k, then
// attention with a causal mask, in float64 (T = float64) or as the float32
// instantiation of the same bodies (T = float32), which is the yardstick.
func reference[T float32 | float64](q, k, v []T, pairing posenc.Pairing) ([]T, error) {
	r := posenc.Rotary{Dim: demoDim, Base: demoBase, Pairing: pairing}
	s := attention.Shape{Batch: 1, HeadsQ: demoHeadsQ, HeadsKV: demoHeadsKV, Lq: demoLen, Lk: demoLen, Dk: demoDim, Dv: demoDim}
	o := attention.Options{Mask: mask.Causal()}
	var rotate func(x []T, length int, pos posenc.Positions) ([]T, error)
	var attend func(q, k, v []T, s attention.Shape, o attention.Options) ([]T, []T, error)
	if _, wide := any(q).([]float64); wide {
		rotate, attend = any(r.Apply).(func([]T, int, posenc.Positions) ([]T, error)), any(attention.Forward).(func(q, k, v []T, s attention.Shape, o attention.Options) ([]T, []T, error))
	} else {
		rotate, attend = any(r.Apply32).(func([]T, int, posenc.Positions) ([]T, error)), any(attention.Forward32).(func(q, k, v []T, s attention.Shape, o attention.Options) ([]T, []T, error))
	}
	qr, err := rotate(q, demoLen, posenc.Positions{})
	if err != nil {
		return nil, err
	}
	kr, err := rotate(k, demoLen, posenc.Positions{})
	if err != nil {
		return nil, err
	}
	out, _, err := attend(qr, kr, v, s, o)
	return out, err
}

// demoResult is what the demo found, for its test.
type demoResult struct {
	buggy, fixed *compare.Report
	perPosition  []float64 // the buggy port's max abs error at each query position
	// The searches of step 2: the port's rotary step on q and on k, and
	// its attention step on its own rotated q and k; named is the first
	// change of the rotary step on q under which the port passes (nil:
	// none).
	rotaryQ, rotaryK, attention *diagnosis
	named                       *diagnose.Candidate
}

// slip is the change the demo's port makes, in the words of the search:
// its rotary step pairs the dims (i, i + d/2).
var slip = fmt.Sprintf("%q: %q", "pairing", posenc.PairHalves.String())

// caught reports whether the demonstration went as described: the port
// fails, the search names its slip first on both rotary steps and finds
// nothing wrong with its attention step, and the corrected port passes.
func (r *demoResult) caught() bool {
	first := func(d *diagnosis) bool { c := firstPassing(d); return c != nil && c.Change == slip }
	return passWord(r.buggy) == "FAIL" && first(r.rotaryQ) && first(r.rotaryK) && r.named != nil &&
		r.attention.Result != nil && r.attention.Result.Given.Pass && passWord(r.fixed) == "PASS"
}

// demo is one run of the demonstration: its inputs (float32 values, held
// as float64), the reference and its yardstick, and what it found.
type demo struct {
	w               io.Writer
	shapeQ, shapeKV []int
	q, k, v         []float64
	ref             []float64
	yardstick       *compare.Yardstick
	opts            compare.Options // the yardstick's, listing the 3 worst elements
	res             demoResult
}

func runDemo(w io.Writer, quiet bool, e *env) (*demoResult, error) {
	d := newDemo(w)
	d.intro()
	if err := d.measure(e, quiet); err != nil {
		return nil, err
	}
	buggy, err := d.checkPort()
	if err != nil {
		return nil, err
	}
	d.wherePositions(buggy)
	if err := d.engine(); err != nil {
		return nil, err
	}
	if err := d.checkFix(); err != nil {
		return nil, err
	}
	return &d.res, nil
}

// newDemo draws the inputs: plumb gen -dist normal, seeds 1, 2 and 3,
// rounded to float32 as the port stores them.
func newDemo(w io.Writer) *demo {
	normal := func(seed uint64, n int) []float64 {
		x, _ := gen.Normal(seed, n, 0, 1)
		return compare.Float32.RoundSlice(x) // the port stores float32
	}
	return &demo{w: w,
		shapeQ: []int{1, demoHeadsQ, demoLen, demoDim}, shapeKV: []int{1, demoHeadsKV, demoLen, demoDim},
		q: normal(1, demoHeadsQ*demoLen*demoDim), k: normal(2, demoHeadsKV*demoLen*demoDim), v: normal(3, demoHeadsKV*demoLen*demoDim),
	}
}

// intro says what the demonstration checks.
func (d *demo) intro() {
	fmt.Fprintf(d.w, `plumb demo: checking a float32 port of a decoder attention block

The block: %d query heads on %d key/value heads (grouped, consecutive query
heads share one), %d positions, head dimension %d; rotary encoding (base %d)
on q and k, then causal attention. The port is plain float32 code written
from a description of the layer. Inputs q %v, k and v %v: plumb gen
-dist normal -seed 1, 2 and 3, rounded to float32 as the port stores them.
The reference is plumb's float64 posenc.Rotary.Apply and attention.Forward,
rotary pairs (2i, 2i+1) as in the paper.

`, demoHeadsQ, demoHeadsKV, demoLen, demoDim, demoBase, d.shapeQ, d.shapeKV)
}

// measure computes the reference and its float32 yardstick.
func (d *demo) measure(e *env, quiet bool) error {
	done := progress(e, quiet, "computing the reference and the yardstick")
	defer done()
	var err error
	if d.ref, err = reference(d.q, d.k, d.v, posenc.PairAdjacent); err != nil {
		return err
	}
	d.yardstick, err = compare.MeasureYardstick(compare.Float32, [][]float64{d.q, d.k, d.v}, d.ref, d.shapeQ, compare.DefaultK,
		func(in [][]float32) ([]float32, error) { return reference(in[0], in[1], in[2], posenc.PairAdjacent) })
	if err != nil {
		return err
	}
	d.opts = d.yardstick.Options()
	d.opts.Worst = 3
	return nil
}

// port runs the port on the demo's inputs, its rotary pairs (i, i + d/2)
// when halves.
func (d *demo) port(halves bool) []float64 {
	return compare.Widen(port(num.Convert[float32](d.q), num.Convert[float32](d.k), num.Convert[float32](d.v), halves))
}

// checkPort is step 1: the port as written, against the reference. It
// returns the port's output.
func (d *demo) checkPort() ([]float64, error) {
	fmt.Fprintf(d.w, "Tolerance, from the yardstick (the same layers run as plumb's float32\ninstantiation): %s\n\n", d.yardstick.Tolerance.Basis)
	buggy := d.port(true)
	var err error
	if d.res.buggy, err = compare.Diff(d.ref, buggy, d.shapeQ, d.opts); err != nil {
		return nil, err
	}
	fmt.Fprintf(d.w, "1. The port as written\n\n")
	return buggy, d.res.buggy.WriteText(d.w)
}

// wherePositions shows the buggy port's largest error at each query
// position.
func (d *demo) wherePositions(buggy []float64) {
	d.res.perPosition = make([]float64, demoLen)
	for i := range d.ref {
		pos := i / demoDim % demoLen
		d.res.perPosition[pos] = math.Max(d.res.perPosition[pos], math.Abs(buggy[i]-d.ref[i]))
	}
	fmt.Fprintf(d.w, "\nWhere it is worst: max |error| by query position, over heads and dims\n")
	for pos, e := range d.res.perPosition {
		fmt.Fprintf(d.w, "  position %2d  %-9.3g %s\n", pos, e, bar(e, d.res.buggy.MaxAbs, 40))
	}
}

// The configurations of the block's two steps, as ops reads them.
const (
	demoRotaryConfig    = `{"version": 1, "base": 10000}`
	demoAttentionConfig = `{"version": 1, "mask": [{"kind": "causal"}]}`
)

// engine is step 2: each step of the port checked against the
// configuration the block uses, and searched where it fails, as plumb
// check does (package diagnose).
func (d *demo) engine() error {
	worst := d.res.buggy.Worst[0].Index
	fmt.Fprintf(d.w, `
2. What the port did

The worst element is head %d, position %d, dim %d. Position 0 is exact only
because a causal query 0 sees key 0 alone (its output is v₀ whatever the
logits); from position 1 on the errors are far beyond rounding, so the
logits are wrong. The block is two of plumb's operations, rotary-apply and
attention-forward. Each step of the port is checked against the
configuration the block uses, as plumb check does, and where it fails
plumb searches the alternatives of that configuration and of the tensors'
reading (package diagnose) for those under which the port passes.

The port's rotary step on q, against rotary-apply %s;
the section plumb check prints after a failing report:

`, worst[1], worst[2], worst[3], demoRotaryConfig)
	q32, k32 := num.Convert[float32](d.q), num.Convert[float32](d.k)
	portRotary(q32, demoHeadsQ, true)
	portRotary(k32, demoHeadsKV, true)
	qPort, kPort := compare.Widen(q32), compare.Widen(k32)
	r := &d.res
	r.rotaryQ, r.rotaryK, r.attention = &diagnosis{}, &diagnosis{}, &diagnosis{}
	search(r.rotaryQ, "rotary-apply", []byte(demoRotaryConfig), ops.Tensors{"x": {Shape: d.shapeQ, Data: d.q}},
		ops.Tensors{"y": {Shape: d.shapeQ, Data: qPort}}, compare.Float32, compare.DefaultK)
	search(r.rotaryK, "rotary-apply", []byte(demoRotaryConfig), ops.Tensors{"x": {Shape: d.shapeKV, Data: d.k}},
		ops.Tensors{"y": {Shape: d.shapeKV, Data: kPort}}, compare.Float32, compare.DefaultK)
	in := ops.Tensors{"q": {Shape: d.shapeQ, Data: qPort}, "k": {Shape: d.shapeKV, Data: kPort}, "v": {Shape: d.shapeKV, Data: d.v}}
	out := compare.Widen(portAttention(q32, k32, num.Convert[float32](d.v)))
	search(r.attention, "attention-forward", []byte(demoAttentionConfig), in,
		ops.Tensors{"out": {Shape: d.shapeQ, Data: out}}, compare.Float32, compare.DefaultK)
	if err := writeDiagnosis(d.w, r.rotaryQ); err != nil {
		return err
	}
	fmt.Fprintf(d.w, "\nThe port's rotary step on k, searched the same way:\n%s", summary(r.rotaryK))
	fmt.Fprintf(d.w, "Its attention step, on its own rotated q and k, against attention-forward\n%s:\n%s\n", demoAttentionConfig, summary(r.attention))

	r.named = firstPassing(r.rotaryQ)
	if r.named == nil {
		fmt.Fprintf(d.w, "plumb names no change of the rotary step under which the port passes.\n")
		return nil
	}
	rot, err := ops.Lookup("rotary-apply")
	if err != nil {
		return err
	}
	lead := "The attention step is right: the slip is in the rotary step, and plumb names it."
	if r.attention.Result == nil || !r.attention.Result.Given.Pass {
		lead = "The rotary step's slip, as plumb names it:"
	}
	fmt.Fprintf(d.w, "%s\n%s", lead, wordChanges(rot, []byte(demoRotaryConfig), r.named.Config))
	return nil
}

// firstPassing returns the first candidate of d that the port passes, or
// nil.
func firstPassing(d *diagnosis) *diagnose.Candidate {
	if d.Result == nil {
		return nil
	}
	if p := d.Result.Passing(); len(p) > 0 {
		return &p[0]
	}
	return nil
}

// summary is one search in indented lines: the verdict as configured and,
// when it fails, the first candidate.
func summary(d *diagnosis) string {
	if d.Result == nil {
		return "  the search could not run: " + d.Error + "\n"
	}
	g := d.Result.Given
	given := "  as configured: " + diagnose.VerdictText(g.Pass, true, g.Normwise, g.Outputs)
	switch {
	case g.Pass:
		return given + ": nothing to diagnose\n"
	case len(d.Result.Candidates) == 0:
		return given + "\n  no alternative found\n"
	}
	c := d.Result.Candidates[0]
	return fmt.Sprintf("%s\n  the first candidate: %s: %s\n", given, c.Change, diagnose.VerdictText(c.Pass, c.Measured, c.Normwise, c.Outputs))
}

// wordChanges lists the word keys of the operation o whose values differ
// between the configurations given and cand, two lines each: the port's
// word and the block's, with their meanings (from o's keys).
func wordChanges(o ops.Op, given, cand []byte) string {
	var g, c map[string]any
	if json.Unmarshal(given, &g) != nil || json.Unmarshal(cand, &c) != nil {
		return ""
	}
	var b strings.Builder
	for _, k := range o.Keys() {
		if k.Type != "word" || len(k.Words) == 0 || strings.ContainsAny(k.Name, ".[") {
			continue
		}
		word := func(m map[string]any) string {
			if w, ok := m[k.Name].(string); ok {
				return w
			}
			return k.Words[0].Text // the default
		}
		from, to := word(g), word(c)
		if from == to {
			continue
		}
		meaning := func(w string) string {
			for _, x := range k.Words {
				if x.Text == w {
					return x.Meaning
				}
			}
			return ""
		}
		a, z := fmt.Sprintf("%q: %q", k.Name, to), fmt.Sprintf("%q: %q", k.Name, from)
		width := max(len(a), len(z))
		fmt.Fprintf(&b, "  the port:  %-*s  %s\n  the block: %-*s  %s\n", width, a, meaning(to), width, z, meaning(from))
	}
	return b.String()
}

// checkFix is step 3: the port with the pairing the model was trained with.
func (d *demo) checkFix() error {
	fmt.Fprintf(d.w, `The fix is one line of the port's rotary loop.

3. The corrected port

`)
	var err error
	if d.res.fixed, err = compare.Diff(d.ref, d.port(false), d.shapeQ, d.opts); err != nil {
		return err
	}
	if err := d.res.fixed.WriteText(d.w); err != nil {
		return err
	}
	fmt.Fprintf(d.w, "\nThe corrected port: %s (normwise error %.3g; the yardstick's own is %.3g).\n",
		passWord(d.res.fixed), d.res.fixed.Normwise, d.yardstick.Report.Normwise)
	return nil
}

func passWord(r *compare.Report) string {
	if r.Verdict != nil && r.Verdict.Pass {
		return "PASS"
	}
	return "FAIL"
}

// bar is a bar of up to width '#' for e out of top.
func bar(e, top float64, width int) string {
	if top <= 0 || e <= 0 {
		return ""
	}
	n := int(math.Round(e / top * float64(width)))
	b := make([]byte, max(n, 1))
	for i := range b {
		b[i] = '#'
	}
	return string(b)
}

type demoOptions struct{ quiet bool }

func init() {
	commands = append(commands, &command{
		name:    "demo",
		usage:   "demo [flags]",
		summary: "a worked example with no files: plumb catches a rotary convention bug in a float32 port",
		about: `
Runs a scenario embedded in plumb, with no files: a small float32 port of a
decoder attention block (rotary encoding on q and k, then causal grouped
attention) whose author paired the rotary dims the other way. plumb checks
it against the float64 reference under the float32 yardstick and shows
where the error is worst; then it checks each step of the port (the rotary
step on q and on k, the attention step) against its operation and, where a
step fails, searches the alternatives of its configuration as plumb check
does on a failing port, which names the convention the port followed;
last it checks the corrected port. Every number is computed when it runs.
Exit status 0 when the slip is caught and named and the fix passes, 1
otherwise.
`,
		flags: func(fs *flag.FlagSet) any {
			o := &demoOptions{}
			fs.BoolVar(&o.quiet, "quiet", false, "no progress on stderr")
			return o
		},
		nargs: 0,
		args:  "none",
		run: func(e *env, opts any, args []string) (int, error) {
			res, err := runDemo(e.stdout, opts.(*demoOptions).quiet, e)
			if err != nil {
				return exitUsage, err
			}
			if res.caught() {
				return exitPass, nil
			}
			return exitFail, nil
		},
	})
}
