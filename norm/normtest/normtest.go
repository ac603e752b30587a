// Package normtest is a conformance suite for normalisation kernels
// (LayerNorm and RMSNorm, with or without the fused residual add, forward
// and backward): one call, Run(t, kernel), runs a kernel through every case
// that matters under every convention it declares and judges each output
// against plumb's float64 reference in package norm.
//
//	func TestRMSNorm(t *testing.T) {
//		normtest.Run(t, normtest.Kernel[float32]{
//			Forward:  myRMSNorm, // func(x, residual, weight, bias []float32, p normtest.Problem) (y, sum []float32, err error)
//			Supports: normtest.Supports{Layers: []normtest.Layer{normtest.RMSNorm}},
//		})
//	}
//
// Every case runs as a subtest for each declared layer, ε placement and
// weight form, named by their words, case/layer/placement[/weight form]
// (go test -run 'TestRMSNorm/offset_rows/rmsnorm' picks some).
// Cases that need what the kernel does not declare (the fused residual add,
// rows without a weight) are skipped with a message naming it.
//
// # Cases
//
// Cases returns them, with the reason each is there; Run runs them in this order:
//
//	one_element_rows   d = 1: LayerNorm gives the bias, RMSNorm x/√(x² + ε)
//	small_rows         rows of 7, no power of two
//	realistic          16 rows of 1024
//	wide_rows          2 rows of 4096
//	offset_rows        rows near 1000 with spread 1: a float32 mean or variance summed plainly loses digits
//	constant_rows      constant rows (zero rows for RMSNorm): the variance is 0 and only ε is left
//	epsilon_matters    values near 1e-3, so that s² ≈ ε = 1e-6 and the placement of ε shows
//	large_values       values near 1e4 with outliers of 1e5
//	no_weight          no weight and no bias: γ = 1
//	residual_add       the fused residual add of a pre-norm block: y and the new stream
//
// # What is judged, and how closely
//
// The reference is norm.LayerNorm or norm.RMSNorm (norm.AddLayerNorm,
// norm.AddRMSNorm for the fused form; the backward functions for
// Backward) in float64. A float32 kernel is held to the yardstick of
// compare.MeasureYardstick: the float32 instantiation of the same body
// (norm.LayerNorm32, norm.RMSNorm32 and their backward forms; for the
// fused form a float32 add and then the float32 norm) on the same inputs
// in the kernel's Format, with factor compare.DefaultK = 2 plus one
// rounding to the format. That body computes the statistics in two passes
// with a compensated mean; a kernel that takes the variance as
// mean(x²) − mean(x)² in float32 fails the rows with a large offset, as it
// should. A float64 kernel is held to 1e-12 normwise and 1e-12·max|ref|
// per element. A failure names the case, its conventions by key and word
// (Problem.String), the output and its worst elements [row, column], one
// line naming the convention the output matches instead when one does
// (package diagnose), then the file holding compare.Diff's whole report (PLUMB_REPORT_INLINE=1 in the
// environment prints it instead).
//
// Inputs are drawn from a PCG generator seeded with the subtest's name and
// rounded to the kernel's Format; the reference sees the rounded values.
//
// Run takes any conformance.TB; conformance.Recorder records instead of
// failing, to show the suite catching a slipped kernel (see ExampleRun).
package normtest

import (
	"fmt"
	"math/rand/v2"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/internal/vocab"
	"github.com/plumbref/plumb/norm"
	"github.com/plumbref/plumb/ops"
)

// Layer is the normalisation.
type Layer int

const (
	// LayerNorm: y = γ∘(x − μ)/r + b (Ba et al. 2016, arXiv 1607.06450).
	LayerNorm Layer = iota
	// RMSNorm: y = γ∘x/r (Zhang & Sennrich 2019, arXiv 1910.07467).
	RMSNorm
)

var layerWords = vocab.New("normtest", "layer", "the normalisation a suite case runs", nil,
	vocab.W(LayerNorm, "layernorm", "LayerNorm: γ∘(x − μ)/r + b"),
	vocab.W(RMSNorm, "rmsnorm", "RMSNorm: γ∘x/r"),
)

// String returns l's word ("layernorm").
func (l Layer) String() string { return layerWords.String(l) }

// MarshalText returns l's word; a value with none is an error.
func (l Layer) MarshalText() ([]byte, error) { return layerWords.Marshal(l) }

// UnmarshalText sets l from its word; any other text is an error that lists the words.
func (l *Layer) UnmarshalText(b []byte) error { return layerWords.Unmarshal(l, b) }

// Meaning returns one line saying what l means.
func (l Layer) Meaning() string { return layerWords.Meaning(l) }

// Values lists every Layer, the zero value first.
func (Layer) Values() []Layer { return layerWords.Values() }

// Check returns nil if l is one of the Layer constants, or an error
// that lists the words.
func (l Layer) Check() error { return layerWords.Check(l) }

// Problem is one call as the suite poses it: Rows rows of Dim elements,
// the layer and its conventions (see package norm), and which of the
// optional inputs are given.
type Problem struct {
	Rows, Dim int
	Layer     Layer
	Epsilon   float64
	Placement norm.EpsilonPlacement
	Weight    norm.WeightForm
	// Weighted: a weight of Dim elements is given (else nil: γ = 1).
	Weighted bool
	// Biased: a bias of Dim elements is given (LayerNorm only).
	Biased bool
	// Residual: the fused form, sum = x + residual, y = Norm(sum); the
	// kernel returns y and sum.
	Residual bool
}

// Options returns the norm.Options of p.
func (p Problem) Options() norm.Options {
	return norm.Options{Epsilon: p.Epsilon, Placement: p.Placement, Weight: p.Weight}
}

// String lists the problem's size and then each convention by its key and
// word, as failure messages print them: "8 rows of 256, layer layernorm,
// epsilon 1e-05, epsilon_placement in-root, weight_form as-is, bias" (the
// weight_form is "no weight" without a weight; the fused form ends with
// "fused residual add").
func (p Problem) String() string {
	s := fmt.Sprintf("%d rows of %d, layer %v, epsilon %g, epsilon_placement %v", p.Rows, p.Dim, p.Layer, p.Epsilon, p.Placement)
	if p.Weighted {
		s += ", weight_form " + p.Weight.String()
	} else {
		s += ", no weight"
	}
	if p.Biased {
		s += ", bias"
	}
	if p.Residual {
		s += ", fused residual add"
	}
	return s
}

// Supports declares what a kernel implements. Layers, Placements and
// Weights multiply the cases (each case runs under every combination);
// an empty list means the zero value alone (LayerNorm, EpsilonInRoot,
// WeightAsIs).
type Supports struct {
	Layers     []Layer
	Placements []norm.EpsilonPlacement
	Weights    []norm.WeightForm
	// Bias: LayerNorm cases are posed with a bias (without one
	// otherwise; RMSNorm never has one).
	Bias bool
	// Unweighted: a nil weight (γ = 1).
	Unweighted bool
	// Residual: the fused residual add.
	Residual bool
}

// Kernel is a normalisation kernel under test, with float32 or float64
// slices. Forward is required; Backward is optional and checked when set.
type Kernel[E compare.Float] struct {
	// Forward returns y and, when p.Residual, sum = x + residual
	// (residual is nil otherwise). weight and bias are nil when not given.
	Forward func(x, residual, weight, bias []E, p Problem) (y, sum []E, err error)
	// Backward returns ∂L/∂x, ∂L/∂w (nil without a weight) and ∂L/∂b
	// (LayerNorm with a bias; nil otherwise) given dy = ∂L/∂y. It is
	// posed the cases without the residual add.
	Backward func(x, weight, dy []E, p Problem) (dx, dw, db []E, err error)
	// Format is the number format of the inputs and outputs: Float32
	// (the zero value's meaning for a float32 kernel), BFloat16, Binary16,
	// …; Float64 for a float64 kernel.
	Format   compare.Format
	Supports Supports
}

// Case is one problem of the suite before its conventions are filled in.
type Case struct {
	Name    string
	Why     string
	Problem Problem
	// scale and offset of the inputs x (and residual): x = offset + scale·N(0,1)
	scale, offset float64
	// constant: every row constant (zero rows for RMSNorm's case).
	constant bool
}

// Cases returns the suite's cases, in the order Run runs them.
func Cases() []Case {
	p := func(rows, dim int) Problem {
		return Problem{Rows: rows, Dim: dim, Epsilon: 1e-5, Weighted: true}
	}
	with := func(pr Problem, f func(*Problem)) Problem { f(&pr); return pr }
	return []Case{
		{Name: "one_element_rows", Why: "d = 1: LayerNorm gives the bias, RMSNorm x/√(x² + ε)", Problem: p(5, 1), scale: 1},
		{Name: "small_rows", Why: "rows of 7, no power of two", Problem: p(3, 7), scale: 1},
		{Name: "realistic", Why: "16 rows of 1024", Problem: p(16, 1024), scale: 1},
		{Name: "wide_rows", Why: "2 rows of 4096", Problem: p(2, 4096), scale: 1},
		{Name: "offset_rows", Why: "rows near 1000 with spread 1: a float32 mean or variance summed plainly loses digits",
			Problem: p(8, 256), scale: 1, offset: 1000},
		{Name: "constant_rows", Why: "constant rows (zero rows for RMSNorm): the variance is 0 and only ε is left",
			Problem: p(4, 64), constant: true, scale: 1},
		{Name: "epsilon_matters", Why: "values near 1e-3, so that s² ≈ ε = 1e-6 and the placement of ε shows",
			Problem: with(p(8, 128), func(q *Problem) { q.Epsilon = 1e-6 }), scale: 1e-3},
		{Name: "large_values", Why: "values near 1e4 with outliers of 1e5",
			Problem: p(4, 512), scale: 1e4},
		{Name: "no_weight", Why: "no weight and no bias: γ = 1",
			Problem: with(p(4, 64), func(q *Problem) { q.Weighted = false }), scale: 1},
		{Name: "residual_add", Why: "the fused residual add of a pre-norm block: y and the new stream",
			Problem: with(p(8, 256), func(q *Problem) { q.Residual = true }), scale: 1},
	}
}

// missing lists what p needs that s does not declare.
func (s Supports) missing(p Problem) []string {
	var m []string
	if !p.Weighted && !s.Unweighted {
		m = append(m, "a nil weight (Unweighted)")
	}
	if p.Residual && !s.Residual {
		m = append(m, "the fused residual add (Residual)")
	}
	return m
}

// variants poses a case under every declared layer, placement and weight
// form (a case without a weight under WeightAsIs alone), each named by
// their words.
func (s Supports) variants(c Case) []suite.Variant[Problem] {
	layers, places, weights := s.Layers, s.Placements, s.Weights
	if len(layers) == 0 {
		layers = []Layer{LayerNorm}
	}
	if len(places) == 0 {
		places = []norm.EpsilonPlacement{norm.EpsilonInRoot}
	}
	if len(weights) == 0 || !c.Problem.Weighted {
		weights = []norm.WeightForm{norm.WeightAsIs}
	}
	var vs []suite.Variant[Problem]
	for _, l := range layers {
		for _, pl := range places {
			for _, w := range weights {
				p := c.Problem
				p.Layer, p.Placement, p.Weight = l, pl, w
				p.Biased = l == LayerNorm && s.Bias && p.Weighted
				name := l.String() + "/" + pl.String()
				if p.Weighted {
					name += "/" + w.String()
				}
				vs = append(vs, suite.Variant[Problem]{Name: name, Problem: p, Missing: s.missing(p)})
			}
		}
	}
	return vs
}

// draw returns x, the residual (nil unless p.Residual), the weight, the
// bias and dy.
func (c Case) draw(r *rand.Rand, p Problem) (x, res, w, b, dy []float64) {
	n := p.Rows * p.Dim
	x = suite.Normal(r, n, c.scale)
	for i := range x {
		if c.constant {
			x[i] = c.scale * float64(i/p.Dim) // row i holds i (row 0 is zero)
			if p.Layer == RMSNorm {
				x[i] = 0
			}
		}
		x[i] += c.offset
		if c.Name == "large_values" && i%97 == 0 {
			x[i] *= 10
		}
	}
	if p.Residual {
		res = suite.Normal(r, n, c.scale)
	}
	if p.Weighted {
		w = suite.Normal(r, p.Dim, 0.1)
		if p.Weight == norm.WeightAsIs {
			for i := range w {
				w[i]++
			}
		}
	}
	if p.Biased {
		b = suite.Normal(r, p.Dim, 0.1)
	}
	return x, res, w, b, suite.Normal(r, n, 1)
}

// forward is the reference (float64 functions) or the yardstick (float32).
func forward[E float32 | float64](p Problem, x, res, w, b []E,
	ln func([]E, int, []E, []E, norm.Options) ([]E, error), rms func([]E, int, []E, norm.Options) ([]E, error)) (y, sum []E, err error) {
	if p.Residual {
		sum = make([]E, len(x))
		for i := range x {
			sum[i] = x[i] + res[i]
		}
		x = sum
	}
	if p.Layer == RMSNorm {
		y, err = rms(x, p.Dim, w, p.Options())
	} else {
		y, err = ln(x, p.Dim, w, b, p.Options())
	}
	return y, sum, err
}

// backward is the reference or yardstick of Backward: dx, dw, db, from the
// backward functions of package norm (float64 or float32), whose gradients
// grads takes apart.
func backward[E float32 | float64, G any](p Problem, x, w, dy []E,
	ln, rms func([]E, int, []E, []E, norm.Options) (G, error), grads func(G) (dx, dw, db []E)) (dx, dw, db []E, err error) {
	f := ln
	if p.Layer == RMSNorm {
		f = rms
	}
	g, err := f(x, p.Dim, w, dy, p.Options())
	dx, dw, db = grads(g)
	if p.Layer == LayerNorm && !p.Biased {
		db = nil
	}
	return dx, dw, db, err
}

func grads(g norm.Grads) (dx, dw, db []float64) { return g.X, g.Weight, g.Bias }

func grads32(g norm.Grads32) (dx, dw, db []float32) { return g.X, g.Weight, g.Bias }

// Run runs every case of Cases against the kernel, as subtests named
// case/layer/placement[/weight form] (their words); see the package documentation for
// what is judged and how closely.
//
// Special cases are:
//
//	Kernel.Forward nil                    the test fails at once, saying so
//	an invalid Format                     the test fails at once, saying so
//	a case needing an undeclared option   its subtest is skipped, with a message naming the option
//	the kernel returns an error           that subtest fails, quoting the error
//	an output of the wrong length         that subtest fails, naming both lengths
//	NaN or ±Inf in the reference          the kernel must give the same (NaN for NaN, the same infinity)
func Run[T conformance.TB[T], E compare.Float](t T, k Kernel[E]) {
	t.Helper()
	suite.Run[T, E](t, "normtest", k.Forward != nil, "Kernel.Forward is nil", k.Format,
		Cases(), func(c Case) string { return c.Name }, k.Supports.variants,
		func(t T, f compare.Format, c Case, p Problem, r *rand.Rand) { runCase(t, k, f, c, p, r) })
}

func runCase[T conformance.TB[T], E compare.Float](t T, k Kernel[E], f compare.Format, c Case, p Problem, r *rand.Rand) {
	t.Helper()
	x, res, w, b, dy := c.draw(r, p)
	x, res, w, b, dy = f.RoundSlice(x), roundOrNil(f, res), roundOrNil(f, w), roundOrNil(f, b), f.RoundSlice(dy)
	conv := p.String()
	rowShape := []int{p.Rows, p.Dim}
	judge := func(name string, shape []int, ref, got []float64, pose func() *suite.Pose, inputs [][]float64, run func([][]float32) ([]float32, error)) {
		t.Helper()
		dims := "[row, column]"
		if len(shape) == 1 {
			dims = "[column]"
		}
		suite.Check[T, E](t, f, c.Name, conv, suite.Output{Name: name, Dims: dims, Shape: shape, Ref: ref, Got: got, Pose: pose}, inputs, run)
	}

	y, sum, err := forward(p, x, res, w, b, norm.LayerNorm, norm.RMSNorm)
	if err != nil {
		t.Errorf("case %s (%s): the reference refused the problem: %v", c.Name, conv, err)
		return
	}
	gy, gsum, err := k.Forward(num.Convert[E](x), num.Convert[E](res), num.Convert[E](w), num.Convert[E](b), p)
	if err != nil {
		t.Errorf("case %s (%s): the kernel's Forward returned an error: %v", c.Name, conv, err)
		return
	}
	inputs := [][]float64{x, res, w, b}
	run := func(pick int) func(in [][]float32) ([]float32, error) {
		return func(in [][]float32) ([]float32, error) {
			y, s, err := forward(p, in[0], nilIfEmpty(in[1]), nilIfEmpty(in[2]), nilIfEmpty(in[3]), norm.LayerNorm32, norm.RMSNorm32)
			return [][]float32{y, s}[pick], err
		}
	}
	normed := x // what the norm normalises: the reference's sum in the fused form
	if p.Residual {
		normed = sum
	}
	wide := compare.Widen(gy)
	judge("y", rowShape, y, wide, func() *suite.Pose {
		return p.pose("forward", ops.Tensors{"x": suite.Tensor(normed, rowShape...)}, w, b, ops.Tensors{"y": suite.Tensor(wide, rowShape...)})
	}, inputs, run(0))
	if p.Residual {
		// The sum of the fused form is no operation of package ops: no diagnosis.
		judge("sum", rowShape, sum, compare.Widen(gsum), nil, inputs, run(1))
	}
	if k.Backward == nil || p.Residual {
		return
	}
	dx, dw, db, err := backward(p, x, w, dy, norm.LayerNormBackward, norm.RMSNormBackward, grads)
	if err != nil {
		t.Errorf("case %s (%s): the reference backward refused the problem: %v", c.Name, conv, err)
		return
	}
	gdx, gdw, gdb, err := k.Backward(num.Convert[E](x), num.Convert[E](w), num.Convert[E](dy), p)
	if err != nil {
		t.Errorf("case %s (%s): the kernel's Backward returned an error: %v", c.Name, conv, err)
		return
	}
	binputs := [][]float64{x, w, dy}
	brun := func(pick int) func(in [][]float32) ([]float32, error) {
		return func(in [][]float32) ([]float32, error) {
			dx, dw, db, err := backward(p, in[0], nilIfEmpty(in[1]), in[2], norm.LayerNormBackward32, norm.RMSNormBackward32, grads32)
			return [][]float32{dx, dw, db}[pick], err
		}
	}
	wdx, wdw, wdb := compare.Widen(gdx), compare.Widen(gdw), compare.Widen(gdb)
	bpose := suite.Once(func() *suite.Pose {
		got := ops.Tensors{"dx": suite.Tensor(wdx, rowShape...)}
		if dw != nil {
			got["dweight"] = suite.Tensor(wdw, p.Dim)
		}
		if db != nil {
			got["dbias"] = suite.Tensor(wdb, p.Dim)
		}
		return p.pose("backward", ops.Tensors{"x": suite.Tensor(x, rowShape...), "dy": suite.Tensor(dy, rowShape...)}, w, nil, got)
	})
	judge("dx", rowShape, dx, wdx, bpose, binputs, brun(0))
	if dw != nil {
		judge("dweight", []int{p.Dim}, dw, wdw, bpose, binputs, brun(1))
	}
	if db != nil {
		judge("dbias", []int{p.Dim}, db, wdb, bpose, binputs, brun(2))
	}
}

// pose returns p as the operation layernorm-<pass> or rmsnorm-<pass> of
// package ops (pass "forward" or "backward"), its conventions by their
// keys, with the inputs in plus weight w and bias b when given, and the
// kernel's outputs got, for the diagnosis of a failing kernel.
func (p Problem) pose(pass string, in ops.Tensors, w, b []float64, got ops.Tensors) *suite.Pose {
	cfg := map[string]any{"epsilon": p.Epsilon, "epsilon_placement": p.Placement.String(), "weight_form": p.Weight.String()}
	if w != nil {
		in["weight"] = suite.Tensor(w, p.Dim)
	}
	if b != nil {
		in["bias"] = suite.Tensor(b, p.Dim)
	}
	words := map[string]string{"epsilon": "Problem.Epsilon", "epsilon_placement": "Problem.Placement, Supports.Placements",
		"weight_form": "Problem.Weight, Supports.Weights"}
	return suite.NewPose(p.Layer.String()+"-"+pass, cfg, in, got, words)
}

func roundOrNil(f compare.Format, x []float64) []float64 {
	if x == nil {
		return nil
	}
	return f.RoundSlice(x)
}

func nilIfEmpty[E any](x []E) []E {
	if len(x) == 0 {
		return nil
	}
	return x
}
