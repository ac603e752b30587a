// Package ffntest is a conformance suite for feed-forward kernels of a
// transformer block (the two-layer network and the gated units GLU,
// Bilinear, ReGLU, GEGLU and SwiGLU, forward and backward): one call,
// Run(t, kernel), runs a kernel through every case that matters under every
// activation and storage convention it declares, and judges each output
// against plumb's float64 reference in package ffn.
//
//	func TestSwiGLU(t *testing.T) {
//		ffntest.Run(t, ffntest.Kernel[float32]{
//			Forward: mySwiGLU, // func(x []float32, w ffn.Weights[float32], p ffntest.Problem) ([]float32, error)
//			Supports: ffntest.Supports{
//				Acts:     []ffn.Act{ffn.ActSiLU},
//				Gated:    true,
//				Layouts:  []ffn.Layout{ffn.OutByIn},
//				Packings: []ffn.Packing{ffn.GateUpStacked},
//			},
//		})
//	}
//
// Every case runs as a subtest for each declared activation, unit (plain,
// gated), weight layout and, for gated units, weight form (separate W and
// V, or one fused matrix in each declared packing): go test -run
// 'TestSwiGLU/realistic/silu/gated/out-by-in' picks some. Cases that need
// what the kernel does not declare (biases, Out ≠ In) are skipped with a
// message naming it.
//
// # Cases
//
// Cases returns them, with the reason each is there; Run runs them in this order:
//
//	one_hidden_unit        a hidden width of 1 and one row
//	small                  3 rows, in 8, hidden 12: no power of two in the hidden width
//	biases                 every bias given
//	rectangular            out 5 ≠ in 16
//	large_preactivations   pre-activations of order 10: the tails of σ, GELU and Swish
//	realistic              8 rows, in 128, hidden 352 (the 2/3·4d rule rounded to 32)
//
// # What is judged, and how closely
//
// A float32 kernel is held to the yardstick of compare.MeasureYardstick,
// taken twice: with ffn.Forward32 and with ffn.ForwardFast32
// (ffn.Backward32 and ffn.BackwardFast32 for the gradients), the float32
// instantiations of the reference's direct and blocked bodies, on the same
// inputs and weights in the kernel's Format; the kernel may have twice the
// larger of their errors (compare.DefaultK) plus one rounding to the
// format. Two summation orders, because one order's largest error on a
// small tensor is a sample of a few values: measured, the blocked form
// exceeds twice the direct form's largest error at a single element of
// dx or dW1 in 5 of the suite's float32 subtests (by up to 2.5 times),
// while as accurate normwise. A float64 kernel is held to 1e-12 normwise and
// 1e-12·max|ref| per element. A failure names the case, its conventions,
// the output (y, dx, dW1, …) and its worst elements, one line naming the
// convention the output matches instead when one does (package diagnose),
// then the file holding
// compare.Diff's whole report (PLUMB_REPORT_INLINE=1 in the environment
// prints it instead).
//
// Inputs are standard normal and weights normal with standard deviation
// 1/√fan-in (so pre-activations are of order 1, and of order 10 in the
// case large_preactivations), drawn from a PCG generator seeded with the
// subtest's name and rounded to the kernel's Format.
//
// The suite uses Swish with β = 1.5 for ActSwish, to tell it from SiLU.
package ffntest

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/ffn"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/ops"
)

// Problem is one call: the sizes, the layer's options (activation, β,
// gated or plain, weight layout, packing of a fused gate/value matrix),
// and which weights are given.
type Problem struct {
	Dims    ffn.Dims
	Options ffn.Options
	// Fused: a gated unit's W and V come as one matrix Weights.Fused,
	// packed as Options.Packing says.
	Fused bool
	// Biased: every bias is given; otherwise all are nil.
	Biased bool
}

func (p Problem) String() string {
	d, o := p.Dims, p.Options
	unit := "plain"
	if o.Gated {
		unit = "gated"
	}
	s := fmt.Sprintf("%d rows, in %d, hidden %d, out %d, %v %s", d.Rows, d.In, d.Hidden, d.Out, o.Act, unit)
	if o.Act == ffn.ActSwish {
		s += fmt.Sprintf(" β %g", o.Beta)
	}
	s += ", " + o.Layout.String()
	if p.Fused {
		s += ", fused " + o.Packing.String()
	}
	if p.Biased {
		s += ", biases"
	} else {
		s += ", no biases"
	}
	return s
}

// Supports declares what a kernel implements. Acts, the units, Layouts and
// Packings multiply the cases.
type Supports struct {
	// Acts lists the activations; at least one is needed.
	Acts []ffn.Act
	// Plain and Gated say which units the kernel computes; neither set
	// means Plain.
	Plain, Gated bool
	// Layouts lists the weight layouts; empty means InByOut.
	Layouts []ffn.Layout
	// Separate: gated weights as separate W1 and V (assumed when Packings
	// is empty).
	Separate bool
	// Packings lists the packings of a fused gate/value matrix supported.
	Packings []ffn.Packing
	// Bias: the biases (b₁ or b, c, b₂).
	Bias bool
	// Rectangular: Out ≠ In.
	Rectangular bool
}

// Kernel is a feed-forward kernel under test. Forward is required,
// Backward optional.
type Kernel[E compare.Float] struct {
	Forward func(x []E, w ffn.Weights[E], p Problem) ([]E, error)
	// Backward returns dx and the gradients of the weights given, in the
	// form of w (see ffn.Backward).
	Backward func(x, dy []E, w ffn.Weights[E], p Problem) (dx []E, grad ffn.Weights[E], err error)
	// Format is the number format of inputs, weights and outputs: Float32
	// (the zero value's meaning for a float32 kernel), BFloat16, …;
	// Float64 for a float64 kernel.
	Format   compare.Format
	Supports Supports
}

// Case is one problem before its conventions are filled in.
type Case struct {
	Name    string
	Why     string
	Problem Problem
	// gain multiplies x: pre-activations of order gain.
	gain float64
}

// Cases returns the suite's cases, in the order Run runs them.
func Cases() []Case {
	p := func(rows, in, hidden, out int, biased bool) Problem {
		return Problem{Dims: ffn.Dims{Rows: rows, In: in, Hidden: hidden, Out: out}, Biased: biased}
	}
	return []Case{
		{"one_hidden_unit", "a hidden width of 1 and one row", p(1, 3, 1, 3, false), 1},
		{"small", "3 rows, in 8, hidden 12: no power of two in the hidden width", p(3, 8, 12, 8, false), 1},
		{"biases", "every bias given", p(4, 16, 24, 16, true), 1},
		{"rectangular", "out 5 ≠ in 16", p(4, 16, 24, 5, false), 1},
		{"large_preactivations", "pre-activations of order 10: the tails of σ, GELU and Swish", p(4, 16, 32, 16, false), 10},
		{"realistic", "8 rows, in 128, hidden 352 (the 2/3·4d rule rounded to 32)", p(8, 128, 352, 128, false), 1},
	}
}

func (s Supports) missing(p Problem) []string {
	var m []string
	if p.Biased && !s.Bias {
		m = append(m, "biases (Bias)")
	}
	if p.Dims.Out != p.Dims.In && !s.Rectangular {
		m = append(m, "Out ≠ In (Rectangular)")
	}
	return m
}

// variants poses a case under every declared activation, unit, layout
// and, for a gated unit, weight form, each named by their words
// ("silu/gated/out-by-in/stacked").
func (s Supports) variants(c Case) []suite.Variant[Problem] {
	layouts := s.Layouts
	if len(layouts) == 0 {
		layouts = []ffn.Layout{ffn.InByOut}
	}
	units := []bool{}
	if s.Plain || !s.Gated {
		units = append(units, false)
	}
	if s.Gated {
		units = append(units, true)
	}
	var vs []suite.Variant[Problem]
	for _, a := range s.Acts {
		for _, gated := range units {
			for _, l := range layouts {
				for _, form := range s.weightForms(gated) {
					p := c.Problem
					p.Options = ffn.Options{Act: a, Gated: gated, Layout: l}
					if a == ffn.ActSwish {
						p.Options.Beta = 1.5
					}
					name := a.String() + "/plain/" + l.String()
					if gated {
						name = a.String() + "/gated/" + l.String() + "/separate"
					}
					if form != nil {
						p.Fused, p.Options.Packing = true, *form
						name = a.String() + "/gated/" + l.String() + "/" + form.String()
					}
					vs = append(vs, suite.Variant[Problem]{Name: name, Problem: p, Missing: s.missing(p)})
				}
			}
		}
	}
	return vs
}

// weightForms lists the forms of a unit's weights: nil for separate
// matrices (or a plain unit), then each declared packing of a fused one.
func (s Supports) weightForms(gated bool) []*ffn.Packing {
	if !gated {
		return []*ffn.Packing{nil}
	}
	var forms []*ffn.Packing
	if len(s.Packings) == 0 || s.Separate {
		forms = append(forms, nil)
	}
	for i := range s.Packings {
		forms = append(forms, &s.Packings[i])
	}
	return forms
}

// weights lists a Weights' slices in a fixed order, and back.
func list[E compare.Float](w ffn.Weights[E]) [][]E {
	return [][]E{w.W1, w.B1, w.V, w.C, w.Fused, w.FusedBias, w.W2, w.B2}
}

var weightNames = []string{"dW1", "dB1", "dV", "dC", "dFused", "dFusedBias", "dW2", "dB2"}

// gradShape returns the shape of the i-th gradient of list in p's layout,
// and the names of its dimensions.
func gradShape(i int, p Problem) ([]int, string) {
	d := p.Dims
	matrix := func(in, out int, inName, outName string) ([]int, string) {
		if p.Options.Layout == ffn.OutByIn {
			return []int{out, in}, "[" + outName + ", " + inName + "]"
		}
		return []int{in, out}, "[" + inName + ", " + outName + "]"
	}
	switch i {
	case 0, 2:
		return matrix(d.In, d.Hidden, "input", "hidden")
	case 4:
		return matrix(d.In, 2*d.Hidden, "input", "fused unit")
	case 6:
		return matrix(d.Hidden, d.Out, "hidden", "output")
	case 1, 3:
		return []int{d.Hidden}, "[hidden]"
	case 5:
		return []int{2 * d.Hidden}, "[fused unit]"
	}
	return []int{d.Out}, "[output]"
}

func unlist[E compare.Float](l [][]E) ffn.Weights[E] {
	n := func(x []E) []E {
		if len(x) == 0 {
			return nil
		}
		return x
	}
	return ffn.Weights[E]{W1: n(l[0]), B1: n(l[1]), V: n(l[2]), C: n(l[3]), Fused: n(l[4]), FusedBias: n(l[5]), W2: n(l[6]), B2: n(l[7])}
}

// draw returns x, the weights and dy.
func (c Case) draw(r *rand.Rand, p Problem) (x []float64, w ffn.Weights[float64], dy []float64) {
	d := p.Dims
	x = suite.Normal(r, d.Rows*d.In, c.gain)
	in := 1 / math.Sqrt(float64(d.In))
	bias := func(n int) []float64 {
		if !p.Biased {
			return nil
		}
		return suite.Normal(r, n, 0.1)
	}
	switch {
	case p.Options.Gated && p.Fused:
		w.Fused, w.FusedBias = suite.Normal(r, d.In*2*d.Hidden, in), bias(2*d.Hidden)
	case p.Options.Gated:
		w.W1, w.B1, w.V, w.C = suite.Normal(r, d.In*d.Hidden, in), bias(d.Hidden), suite.Normal(r, d.In*d.Hidden, in), bias(d.Hidden)
	default:
		w.W1, w.B1 = suite.Normal(r, d.In*d.Hidden, in), bias(d.Hidden)
	}
	w.W2, w.B2 = suite.Normal(r, d.Hidden*d.Out, 1/math.Sqrt(float64(d.Hidden))), bias(d.Out)
	return x, w, suite.Normal(r, d.Rows*d.Out, 1)
}

// Run runs every case of Cases against the kernel, as subtests named
// case/activation/unit/layout[/form]; see the package documentation.
//
// Special cases are:
//
//	Forward nil or no Supports.Acts       the test fails at once, saying so
//	an invalid Format                     the test fails at once, saying so
//	a case needing an undeclared option   its subtest is skipped, with a message naming the option
//	the kernel returns an error           that subtest fails, quoting the error
//	an output of the wrong length         that subtest fails, naming both lengths
//	NaN or ±Inf in the reference          the kernel must give the same (NaN for NaN, the same infinity)
func Run[T conformance.TB[T], E compare.Float](t T, k Kernel[E]) {
	t.Helper()
	suite.Run[T, E](t, "ffntest", k.Forward != nil && len(k.Supports.Acts) > 0, "Kernel.Forward is nil or Supports.Acts empty", k.Format,
		Cases(), func(c Case) string { return c.Name }, k.Supports.variants,
		func(t T, f compare.Format, c Case, p Problem, r *rand.Rand) { runCase(t, k, f, c, p, r) })
}

func runCase[T conformance.TB[T], E compare.Float](t T, k Kernel[E], f compare.Format, c Case, p Problem, r *rand.Rand) {
	t.Helper()
	tr := newTrial(t, k, f, c, p, r)
	if tr.forward() && k.Backward != nil {
		tr.backward()
	}
}

// trial is one subtest: the kernel, the problem and its inputs, drawn and
// rounded to the kernel's format once.
type trial[T conformance.TB[T], E compare.Float] struct {
	t    T
	k    Kernel[E]
	f    compare.Format
	c    Case
	p    Problem
	conv string // the problem's conventions, for messages
	// pose gives the problem of the pass being judged as an operation of
	// package ops, for the diagnosis of a failing output.
	pose func() *suite.Pose

	x, dy []float64
	w     ffn.Weights[float64]
	wl    [][]float64 // list(w)
}

// newTrial draws the inputs, the weights and dy, and rounds them to f.
func newTrial[T conformance.TB[T], E compare.Float](t T, k Kernel[E], f compare.Format, c Case, p Problem, r *rand.Rand) *trial[T, E] {
	x, w, dy := c.draw(r, p)
	tr := &trial[T, E]{t: t, k: k, f: f, c: c, p: p, conv: p.String(), x: f.RoundSlice(x), dy: f.RoundSlice(dy), wl: list(w)}
	for i, s := range tr.wl {
		if s != nil {
			tr.wl[i] = f.RoundSlice(s)
		}
	}
	tr.w = unlist(tr.wl)
	return tr
}

// kernelWeights returns the weights in the kernel's element type.
func (tr *trial[T, E]) kernelWeights() ffn.Weights[E] {
	out := make([][]E, len(tr.wl))
	for i, s := range tr.wl {
		if s != nil {
			out[i] = num.Convert[E](s)
		}
	}
	return unlist(out)
}

// judge checks one output of the kernel against the reference, with the
// yardstick of each run.
func (tr *trial[T, E]) judge(out string, shape []int, dims string, ref, got []float64, inputs [][]float64, runs ...func([][]float32) ([]float32, error)) {
	tr.t.Helper()
	suite.Check[T, E](tr.t, tr.f, tr.c.Name, tr.conv, suite.Output{Name: out, Dims: dims, Shape: shape, Ref: ref, Got: got, Pose: tr.pose}, inputs, runs...)
}

// opNames are the names package ops gives the tensors of list (the inputs
// of ffn-forward), then their gradients (the outputs of ffn-backward).
var opNames = []string{"w1", "b1", "v", "c", "fused", "fused_bias", "w2", "b2",
	"dw1", "db1", "dv", "dc", "dfused", "dfused_bias", "dw2", "db2"}

// posed returns the trial's problem as the operation op of package ops
// (ffn-forward, or ffn-backward with dy), its conventions by their keys,
// the inputs and weights the kernel was given, and the kernel's outputs
// got, for the diagnosis of a failing kernel.
func (tr *trial[T, E]) posed(op string, dy []float64, got ops.Tensors) *suite.Pose {
	d, o := tr.p.Dims, tr.p.Options
	cfg := map[string]any{"activation": o.Act.String(), "gated": o.Gated, "layout": o.Layout.String()}
	if o.Act == ffn.ActSwish {
		cfg["beta"] = o.Beta
	}
	if tr.p.Fused {
		cfg["packing"] = o.Packing.String()
	}
	in := ops.Tensors{"x": suite.Tensor(tr.x, d.Rows, d.In)}
	if dy != nil {
		in["dy"] = suite.Tensor(dy, d.Rows, d.Out)
	}
	for i, w := range tr.wl {
		if w != nil {
			shape, _ := gradShape(i, tr.p)
			in[opNames[i]] = suite.Tensor(w, shape...)
		}
	}
	words := map[string]string{"activation": "Options.Act, Supports.Acts", "beta": "Options.Beta", "gated": "Options.Gated, Supports.Plain and Gated",
		"layout": "Options.Layout, Supports.Layouts", "packing": "Options.Packing, Supports.Packings"}
	return suite.NewPose(op, cfg, in, got, words)
}

// fail reports an error of the reference or the kernel.
func (tr *trial[T, E]) fail(who string, err error) {
	tr.t.Helper()
	tr.t.Errorf("case %s (%s): %s: %v", tr.c.Name, tr.conv, who, err)
}

// forward judges the kernel's Forward; it reports whether the subtest can
// go on to the backward pass.
func (tr *trial[T, E]) forward() bool {
	tr.t.Helper()
	d, o := tr.p.Dims, tr.p.Options
	want, err := ffn.Forward(tr.x, d, tr.w, o)
	if err != nil {
		tr.fail("the reference refused the problem", err)
		return false
	}
	got, err := tr.k.Forward(num.Convert[E](tr.x), tr.kernelWeights(), tr.p)
	if err != nil {
		tr.fail("the kernel's Forward returned an error", err)
		return false
	}
	inputs := append([][]float64{tr.x}, tr.wl...)
	wide := compare.Widen(got)
	tr.pose = func() *suite.Pose {
		return tr.posed("ffn-forward", nil, ops.Tensors{"y": suite.Tensor(wide, d.Rows, d.Out)})
	}
	tr.judge("y", []int{d.Rows, d.Out}, "[row, output]", want, wide, inputs, func(in [][]float32) ([]float32, error) {
		return ffn.Forward32(in[0], d, unlist(in[1:]), o)
	}, func(in [][]float32) ([]float32, error) {
		return ffn.ForwardFast32(in[0], d, unlist(in[1:]), o)
	})
	return true
}

// backward judges the kernel's Backward: dx and the gradient of every
// weight given.
func (tr *trial[T, E]) backward() {
	tr.t.Helper()
	d, o := tr.p.Dims, tr.p.Options
	dx, grad, err := ffn.Backward(tr.x, tr.dy, d, tr.w, o)
	if err != nil {
		tr.fail("the reference backward refused the problem", err)
		return
	}
	gdx, ggrad, err := tr.k.Backward(num.Convert[E](tr.x), num.Convert[E](tr.dy), tr.kernelWeights(), tr.p)
	if err != nil {
		tr.fail("the kernel's Backward returned an error", err)
		return
	}
	inputs := append([][]float64{tr.x, tr.dy}, tr.wl...)
	back := yardsticks(d, o)
	wdx, gl, refs := compare.Widen(gdx), list(ggrad), list(grad)
	tr.pose = suite.Once(func() *suite.Pose {
		got := ops.Tensors{"dx": suite.Tensor(wdx, d.Rows, d.In)}
		for i, ref := range refs {
			if ref != nil && tr.wl[i] != nil {
				shape, _ := gradShape(i, tr.p)
				got[opNames[i+8]] = suite.Tensor(compare.Widen(gl[i]), shape...)
			}
		}
		return tr.posed("ffn-backward", tr.dy, got)
	})
	tr.judge("dx", []int{d.Rows, d.In}, "[row, input]", dx, wdx, inputs, back(-1, 0), back(-1, 1))
	for i, ref := range refs {
		if ref == nil || tr.wl[i] == nil {
			continue // a gradient of a weight not given
		}
		shape, dims := gradShape(i, tr.p)
		tr.judge(weightNames[i], shape, dims, ref, compare.Widen(gl[i]), inputs, back(i, 0), back(i, 1))
	}
}

// yardsticks returns, for an output (-1 for dx, or the index of a
// gradient in list) and a form (0 direct, 1 fast), the yardstick run of
// the float32 backward pass. Each form runs once per subtest: every
// output's yardstick is measured on the same inputs, so the gradients are
// computed once and each output picks its own.
func yardsticks(d ffn.Dims, o ffn.Options) func(pick, form int) func(in [][]float32) ([]float32, error) {
	type result struct {
		dx  []float32
		g   ffn.Weights[float32]
		err error
	}
	memo := map[int]*result{}
	forms := []func([]float32, []float32, ffn.Dims, ffn.Weights[float32], ffn.Options) ([]float32, ffn.Weights[float32], error){ffn.Backward32, ffn.BackwardFast32}
	return func(pick, form int) func(in [][]float32) ([]float32, error) {
		return func(in [][]float32) ([]float32, error) {
			r := memo[form]
			if r == nil {
				r = &result{}
				r.dx, r.g, r.err = forms[form](in[0], in[1], d, unlist(in[2:]), o)
				memo[form] = r
			}
			if pick < 0 {
				return r.dx, r.err
			}
			return list(r.g)[pick], r.err
		}
	}
}
