package main

import (
	"flag"
	"fmt"
	"io"
	"math"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/compare"
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
				theta := float32(math.Pow(demoBase, -2*float64(i)/float64(d)))
				angle := float32(m) * theta
				c, s := float32(math.Cos(float64(angle))), float32(math.Sin(float64(angle)))
				a, b := 2*i, 2*i+1
				if halves {
					a, b = i, i+d/2
				}
				xa, xb := row[a], row[b]
				row[a] = xa*c - xb*s
				row[b] = xa*s + xb*c
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
					s += qi[t] * kj[t]
				}
				p[j] = s * scale
				maxLogit = max(maxLogit, p[j])
			}
			var sum float32
			for j := 0; j <= i; j++ {
				p[j] = float32(math.Exp(float64(p[j] - maxLogit)))
				sum += p[j]
			}
			o := out[(h*demoLen+i)*d:][:d]
			for j := 0; j <= i; j++ {
				vj := v[(g*demoLen+j)*d:][:d]
				w := p[j] / sum
				for t := range o {
					o[t] += w * vj[t]
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
	buggy, fixed                 *compare.Report
	rotaryAdjacent, rotaryHalves *compare.Report // the port's rotated q against each pairing
	perPosition                  []float64       // the buggy port's max abs error at each query position
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
	if err := d.narrowDown(); err != nil {
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
	gen := func(seed uint64, n int) []float64 {
		x, _ := generate(n, "normal", seed, 0, 1, 0, 1)
		return compare.Float32.RoundSlice(x) // the port stores float32
	}
	return &demo{w: w,
		shapeQ: []int{1, demoHeadsQ, demoLen, demoDim}, shapeKV: []int{1, demoHeadsKV, demoLen, demoDim},
		q: gen(1, demoHeadsQ*demoLen*demoDim), k: gen(2, demoHeadsKV*demoLen*demoDim), v: gen(3, demoHeadsKV*demoLen*demoDim),
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

// narrowDown compares the port's rotary step on q with plumb's under each
// pairing.
func (d *demo) narrowDown() error {
	worst := d.res.buggy.Worst[0].Index
	fmt.Fprintf(d.w, `
The worst element is head %d, position %d, dim %d. Position 0 is exact only
because a causal query 0 sees key 0 alone (its output is v₀ whatever the
logits); from position 1 on the errors are far beyond rounding, so the
logits are wrong. Narrow it down: the port's rotary step, on q, against
plumb's (ops "rotary-apply", float32 yardstick):
`, worst[1], worst[2], worst[3])
	qPort := num.Convert[float32](d.q)
	portRotary(qPort, demoHeadsQ, true)
	rotated := compare.Widen(qPort)
	for _, p := range []struct {
		word, pairs string
		report      **compare.Report
	}{
		{"adjacent", "(2i, 2i+1)", &d.res.rotaryAdjacent},
		{"halves", "(i, i + d/2)", &d.res.rotaryHalves},
	} {
		cfg := []byte(`{"version": 1, "base": 10000, "pairing": "` + p.word + `"}`)
		in := ops.Tensors{"x": {Shape: d.shapeQ, Data: d.q}}
		want, err := ops.Run("rotary-apply", cfg, in)
		if err != nil {
			return err
		}
		ys, err := ops.Yardstick("rotary-apply", cfg, in, compare.Float32, compare.DefaultK)
		if err != nil {
			return err
		}
		r, err := compare.Diff(want["y"].Data, rotated, d.shapeQ, ys["y"].Options())
		if err != nil {
			return err
		}
		*p.report = r
		first, rest := maxByPosition(want["y"].Data, rotated)
		fmt.Fprintf(d.w, "  %-10s pairs %-13s normwise error %-9.3g %s  (max error at position 0: %.3g; at 1 … %d: %.3g)\n",
			`"`+p.word+`"`, p.pairs, r.Normwise, passWord(r), first, demoLen-1, rest)
	}
	return nil
}

// checkFix is step 2: the port with the pairing the model was trained with.
func (d *demo) checkFix() error {
	fmt.Fprintf(d.w, `The port pairs dims (i, i + d/2) where the model was trained with
(2i, 2i+1). The fix is one line of the port's rotary loop.

2. The corrected port

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
it against the float64 reference under the float32 yardstick, shows where
the error is worst, identifies the convention, and checks the corrected
port. Every number is computed when it runs. Exit status 0 when the bug is
caught and the fix passes, 1 otherwise.
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
			if passWord(res.buggy) == "FAIL" && passWord(res.fixed) == "PASS" {
				return exitPass, nil
			}
			return exitFail, nil
		},
	})
}

// maxByPosition returns the max |got − ref| of a [1, heads, length, dim]
// tensor at position 0 and over the other positions.
func maxByPosition(ref, got []float64) (first, rest float64) {
	for i := range ref {
		e := math.Abs(got[i] - ref[i])
		if i/demoDim%demoLen == 0 {
			first = math.Max(first, e)
		} else {
			rest = math.Max(rest, e)
		}
	}
	return first, rest
}
