// Package posenctest is a conformance suite for rotary position encoding
// (RoPE) kernels: one call, Run(t, kernel), applies a kernel to every case
// that matters (pairings, partial rotation, bases, every context-scaling
// method, positions up to 10⁶, unordered positions) under every convention
// it declares, and judges the result against plumb's float64 reference,
// posenc.Rotary.Apply.
//
//	func TestRope(t *testing.T) {
//		posenctest.Run(t, posenctest.Kernel[float32]{
//			Apply:    myRope, // func(x []float32, p posenctest.Problem) ([]float32, error)
//			Supports: posenctest.Supports{Pairings: []posenc.Pairing{posenc.PairHalves}},
//		})
//	}
//
// Every case runs as a subtest for each declared pairing, named by the
// pairing's word (go test -run 'TestRope/small/halves'). Cases that need
// what the kernel does not declare (partial rotation, a scaling method, a
// magnitude) are skipped with a message naming it.
//
// # Cases
//
// Cases returns them, with the reason each is there; Run runs them in this order:
//
//	position_zero         position 0 rotates nothing
//	small                 head dimension 8, positions 0 … 7
//	head_dim_128          4 heads of 16 positions, head dimension 128
//	base_500000           another base
//	positions_to_4096     positions up to 4095: angles formed in float32 are off by up to 2.4e-4 rad
//	positions_near_1e6    positions near 10⁶: angles formed in float32 are off by up to 0.03 rad
//	unordered_positions   per-row positions in no order, as packed sequences give
//	partial_rotary        the first 32 of 128 dims rotated, frequencies over 32
//	interpolation_4       position interpolation by 4 (Chen et al. 2023)
//	ntk_aware_8           NTK-aware base change by 8 (Peng et al. 2023 Eq. 16)
//	yarn_ratio_16         YaRN by 16, the paper's ramp in ρ, with its magnitude
//	yarn_dims_16          YaRN by 16, the ramp in dimension index of the authors' code, with its magnitude
//	dynamic_ntk           dynamic NTK-aware scaling at current length 10000 of trained 4096
//	per_frequency         a divisor per frequency
//
// # What is judged, and how closely
//
// A float32 kernel is held to the yardstick of compare.MeasureYardstick:
// posenc.Rotary.Apply32, the float32 rotation with the reference's cos and
// sin tables rounded to float32, on the same inputs in the kernel's
// Format, times compare.DefaultK = 2 plus one rounding. Tables whose
// angles m·θ are formed in float32 are off by about m·2^−24 radians:
// measured, such a kernel misses the tolerance by a factor of 170 at
// positions near 4096 and 40000 near 10⁶, and even at positions below 16
// a few elements in 8192 exceed it. Those errors are real (see the posenc
// package documentation); form the angles in float64, or the product
// m·θ exactly, to pass. A float64 kernel is held to 1e-12 normwise and
// 1e-12·max|ref| per element. Inverse, when given, is judged the same way
// against posenc.Rotary.ApplyInverse (the backward pass).
//
// A failure names the case, the configuration with each convention by its
// key and word, and the positions (Problem.String), the output
// and its worst elements [row, dim], one line naming the convention the
// output matches instead when one does (package diagnose), then the file
// holding compare.Diff's
// whole report (PLUMB_REPORT_INLINE=1 in the environment prints it
// instead). Inputs are
// standard normal, drawn from a PCG generator seeded with the subtest's
// name and rounded to the kernel's Format.
package posenctest

import (
	"fmt"
	"math/rand/v2"
	"slices"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/conformance"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/ops"
	"github.com/plumbref/plumb/posenc"
)

// Problem is one call: Rows rows of Rotary.Dim values, row r at position
// Positions[r], to be rotated as Rotary says (posenc.Rotary documents
// every field; zero fields are the defaults).
type Problem struct {
	Rows      int
	Rotary    posenc.Rotary
	Positions []int
}

// String lists the problem's size and then each setting of the encoding by
// its key and word, as failure messages print them: "8 rows of 8, pairing
// halves, rotated 8 of 8 dims, base 10000, positions 0 … 7", with the
// scaling (method, factor, trained_length, current_length, ramp, factors)
// and a magnitude other than 1 before the positions when set.
func (p Problem) String() string {
	r := p.Rotary
	rotated := r.Rotated
	if rotated == 0 {
		rotated = r.Dim
	}
	s := fmt.Sprintf("%d rows of %d, pairing %v, rotated %d of %d dims, base %g", p.Rows, r.Dim, r.Pairing, rotated, r.Dim, r.Base)
	if sc := r.Scaling; sc.Method != posenc.NoScaling {
		s += ", method " + sc.Method.String()
		if sc.Factor != 0 {
			s += fmt.Sprintf(", factor %g", sc.Factor)
		}
		if sc.TrainedLength > 0 {
			s += fmt.Sprintf(", trained_length %d", sc.TrainedLength)
		}
		if sc.CurrentLength > 0 {
			s += fmt.Sprintf(", current_length %d", sc.CurrentLength)
		}
		if sc.Method == posenc.YaRN {
			s += ", ramp " + sc.Ramp.String()
		}
		if sc.Factors != nil {
			s += fmt.Sprintf(", factors %v", sc.Factors)
		}
	}
	if r.Magnitude != 0 && r.Magnitude != 1 {
		s += fmt.Sprintf(", magnitude %.6g", r.Magnitude)
	}
	if n := len(p.Positions); n > 0 {
		s += fmt.Sprintf(", positions %d … %d", slices.Min(p.Positions), slices.Max(p.Positions))
	}
	return s
}

// Supports declares what a kernel implements. Pairings multiplies the
// cases (empty: PairAdjacent alone).
type Supports struct {
	Pairings []posenc.Pairing
	// PartialRotary: Rotated < Dim.
	PartialRotary bool
	// Methods lists the scaling methods supported besides NoScaling.
	Methods []posenc.Method
	// Ramps lists YaRN's ramps supported (with YaRN in Methods).
	Ramps []posenc.Ramp
	// Dynamic: dynamic scaling (Scaling.CurrentLength).
	Dynamic bool
	// Magnitude: Rotary.Magnitude other than 1.
	Magnitude bool
	// Unordered: positions in any order (packed sequences, per-row
	// positions), not only 0, 1, 2, … repeating.
	Unordered bool
}

// Kernel is a rotary kernel under test. Apply is required, Inverse
// (the transposed rotation: the backward pass) optional.
type Kernel[E compare.Float] struct {
	Apply   func(x []E, p Problem) ([]E, error)
	Inverse func(x []E, p Problem) ([]E, error)
	// Format is the number format of x and of the result: Float32 (the
	// zero value's meaning for a float32 kernel), BFloat16, …; Float64 for
	// a float64 kernel.
	Format   compare.Format
	Supports Supports
}

// Case is one problem before the pairing is filled in.
type Case struct {
	Name    string
	Why     string
	Problem Problem
}

// seq returns rows positions start, start+1, … repeating every period.
func seq(rows, start, period int) []int {
	p := make([]int, rows)
	for i := range p {
		p[i] = start + i%period
	}
	return p
}

// Cases returns the suite's cases, in the order Run runs them.
func Cases() []Case {
	rope := func(d int) posenc.Rotary { return posenc.Rotary{Dim: d, Rotated: d, Base: 10000} }
	p := func(rows int, r posenc.Rotary, pos []int) Problem {
		return Problem{Rows: rows, Rotary: r, Positions: pos}
	}
	with := func(r posenc.Rotary, f func(*posenc.Rotary)) posenc.Rotary { f(&r); return r }
	yarn := func(ramp posenc.Ramp) posenc.Rotary {
		return with(rope(128), func(r *posenc.Rotary) {
			r.Scaling = posenc.Scaling{Method: posenc.YaRN, Factor: 16, TrainedLength: 4096, Ramp: ramp}
			r.Magnitude, _ = posenc.YaRNMagnitude(16)
		})
	}
	unordered := make([]int, 48)
	for i := range unordered {
		unordered[i] = (i * 37) % 61 // 0, 37, 13, 50, …: packed sequences give such lists
	}
	return []Case{
		{"position_zero", "position 0 rotates nothing", p(4, rope(8), []int{0, 0, 0, 0})},
		{"small", "head dimension 8, positions 0 … 7", p(8, rope(8), seq(8, 0, 8))},
		{"head_dim_128", "4 heads of 16 positions, head dimension 128", p(64, rope(128), seq(64, 0, 16))},
		{"base_500000", "another base", p(32, with(rope(64), func(r *posenc.Rotary) { r.Base = 500000 }), seq(32, 0, 32))},
		{"positions_to_4096", "positions up to 4095: angles formed in float32 are off by up to 2.4e-4 rad", p(64, rope(64), seq(64, 4032, 64))},
		{"positions_near_1e6", "positions near 10⁶: angles formed in float32 are off by up to 0.03 rad", p(16, rope(64), seq(16, 999990, 16))},
		{"unordered_positions", "per-row positions in no order, as packed sequences give", p(48, rope(32), unordered)},
		{"partial_rotary", "the first 32 of 128 dims rotated, frequencies over 32", p(32, with(rope(128), func(r *posenc.Rotary) { r.Rotated = 32 }), seq(32, 0, 32))},
		{"interpolation_4", "position interpolation by 4 (Chen et al. 2023)", p(32, with(rope(64), func(r *posenc.Rotary) {
			r.Scaling = posenc.Scaling{Method: posenc.Interpolation, Factor: 4}
		}), seq(32, 8000, 32))},
		{"ntk_aware_8", "NTK-aware base change by 8 (Peng et al. 2023 Eq. 16)", p(32, with(rope(128), func(r *posenc.Rotary) {
			r.Scaling = posenc.Scaling{Method: posenc.NTKAware, Factor: 8}
		}), seq(32, 16000, 32))},
		{"yarn_ratio_16", "YaRN by 16, the paper's ramp in ρ, with its magnitude", p(32, yarn(posenc.RampRatio), seq(32, 60000, 32))},
		{"yarn_dims_16", "YaRN by 16, the ramp in dimension index of the authors' code, with its magnitude", p(32, yarn(posenc.RampDims), seq(32, 60000, 32))},
		{"dynamic_ntk", "dynamic NTK-aware scaling at current length 10000 of trained 4096", p(32, with(rope(64), func(r *posenc.Rotary) {
			r.Scaling = posenc.Scaling{Method: posenc.NTKAware, TrainedLength: 4096, CurrentLength: 10000}
		}), seq(32, 9968, 32))},
		{"per_frequency", "a divisor per frequency", p(16, with(rope(16), func(r *posenc.Rotary) {
			r.Scaling = posenc.Scaling{Method: posenc.PerFrequency, Factors: []float64{1, 1, 1.5, 2, 4, 8, 16, 32}}
		}), seq(16, 100, 16))},
	}
}

func (s Supports) missing(p Problem) []string {
	var m []string
	r := p.Rotary
	need := func(ok bool, what string) {
		if !ok {
			m = append(m, what)
		}
	}
	need(r.Rotated == 0 || r.Rotated == r.Dim || s.PartialRotary, "partial rotation (PartialRotary)")
	if meth := r.Scaling.Method; meth != posenc.NoScaling {
		need(slices.Contains(s.Methods, meth), fmt.Sprintf("scaling method %v (Methods)", meth))
		need(meth != posenc.YaRN || slices.Contains(s.Ramps, r.Scaling.Ramp), fmt.Sprintf("YaRN ramp %v (Ramps)", r.Scaling.Ramp))
	}
	need(r.Scaling.CurrentLength == 0 || s.Dynamic, "dynamic scaling (Dynamic)")
	need(r.Magnitude == 0 || r.Magnitude == 1 || s.Magnitude, "a magnitude other than 1 (Magnitude)")
	ordered := true
	for i, q := range p.Positions {
		if i > 0 && q != p.Positions[i-1]+1 && q != p.Positions[0] {
			ordered = false
		}
	}
	need(ordered || s.Unordered, "positions in no order (Unordered)")
	return m
}

// Run runs every case of Cases against the kernel, as subtests named
// case/pairing (the pairing's word); see the package documentation for
// what is judged and how closely.
//
// Special cases are:
//
//	Kernel.Apply nil                      the test fails at once, saying so
//	an invalid Format                     the test fails at once, saying so
//	a case needing an undeclared option   its subtest is skipped, with a message naming the option
//	the kernel returns an error           that subtest fails, quoting the error
//	an output of the wrong length         that subtest fails, naming both lengths
//	NaN or ±Inf in the reference          the kernel must give the same (NaN for NaN, the same infinity)
func Run[T conformance.TB[T], E compare.Float](t T, k Kernel[E]) {
	t.Helper()
	suite.Run[T, E](t, "posenctest", k.Apply != nil, "Kernel.Apply is nil", k.Format,
		Cases(), func(c Case) string { return c.Name }, k.Supports.variants,
		func(t T, f compare.Format, c Case, p Problem, r *rand.Rand) { runCase(t, k, f, c.Name, p, r) })
}

// variants poses a case once per declared pairing (PairAdjacent alone
// when none is), each named by the pairing's word.
func (s Supports) variants(c Case) []suite.Variant[Problem] {
	pairings := s.Pairings
	if len(pairings) == 0 {
		pairings = []posenc.Pairing{posenc.PairAdjacent}
	}
	vs := make([]suite.Variant[Problem], len(pairings))
	for i, pr := range pairings {
		p := c.Problem
		p.Rotary.Pairing = pr
		vs[i] = suite.Variant[Problem]{Name: pr.String(), Problem: p, Missing: s.missing(p)}
	}
	return vs
}

func runCase[T conformance.TB[T], E compare.Float](t T, k Kernel[E], f compare.Format, caseName string, p Problem, r *rand.Rand) {
	t.Helper()
	x := f.RoundSlice(suite.Normal(r, p.Rows*p.Rotary.Dim, 1))
	shape := []int{p.Rows, p.Rotary.Dim}
	conv := p.String()
	pos := posenc.Positions{List: p.Positions}
	for _, fn := range []struct {
		name   string
		kernel func([]E, Problem) ([]E, error)
		ref    func(posenc.Rotary, []float64, int, posenc.Positions) ([]float64, error)
		low    func(posenc.Rotary, []float32, int, posenc.Positions) ([]float32, error)
	}{
		{"rotated x", k.Apply, posenc.Rotary.Apply, posenc.Rotary.Apply32},
		{"inverse-rotated x", k.Inverse, posenc.Rotary.ApplyInverse, posenc.Rotary.ApplyInverse32},
	} {
		if fn.kernel == nil {
			continue
		}
		want, err := fn.ref(p.Rotary, x, 1, pos)
		if err != nil {
			t.Errorf("case %s (%s): the reference refused the problem: %v", caseName, conv, err)
			return
		}
		got, err := fn.kernel(num.Convert[E](x), p)
		if err != nil {
			t.Errorf("case %s (%s): the kernel returned an error: %v", caseName, conv, err)
			continue
		}
		inverse, gotWide := fn.name != "rotated x", compare.Widen(got)
		pose := func() *suite.Pose { return p.pose(x, gotWide, inverse) }
		suite.Check[T, E](t, f, caseName, conv, suite.Output{Name: fn.name, Dims: "[row, dim]", Shape: shape, Ref: want, Got: gotWide, Pose: pose},
			[][]float64{x}, func(in [][]float32) ([]float32, error) { return fn.low(p.Rotary, in[0], 1, pos) })
	}
}

// pose returns p as the operation rotary-apply of package ops (with
// "inverse" for the inverse rotation), every setting of the encoding by
// its key, for the diagnosis of a failing kernel: x the input, got the
// kernel's output.
func (p Problem) pose(x, got []float64, inverse bool) *suite.Pose {
	r := p.Rotary
	cfg := map[string]any{"rotated": r.Rotated, "base": r.Base, "pairing": r.Pairing.String(), "positions": p.Positions, "inverse": inverse}
	if r.Rotated == 0 {
		cfg["rotated"] = r.Dim
	}
	if r.Magnitude != 0 {
		cfg["magnitude"] = r.Magnitude
	}
	if sc := r.Scaling; sc.Method != posenc.NoScaling {
		m := map[string]any{"method": sc.Method.String()}
		if sc.Factor != 0 {
			m["factor"] = sc.Factor
		}
		if sc.TrainedLength > 0 {
			m["trained_length"] = sc.TrainedLength
		}
		if sc.CurrentLength > 0 {
			m["current_length"] = sc.CurrentLength
		}
		if sc.Alpha != 0 || sc.Beta != 0 {
			m["alpha"], m["beta"] = sc.Alpha, sc.Beta
		}
		if sc.Method == posenc.YaRN {
			m["ramp"] = sc.Ramp.String()
		}
		if sc.Factors != nil {
			m["factors"] = sc.Factors
		}
		cfg["scaling"] = m
	}
	words := map[string]string{
		"pairing": "Rotary.Pairing, Supports.Pairings", "rotated": "Rotary.Rotated, Supports.PartialRotary",
		"base": "Rotary.Base", "magnitude": "Rotary.Magnitude, Supports.Magnitude", "positions": "Problem.Positions",
		"scaling.method": "Scaling.Method, Supports.Methods", "scaling.factor": "Scaling.Factor",
		"scaling.ramp": "Scaling.Ramp, Supports.Ramps", "scaling.current_length": "Scaling.CurrentLength, Supports.Dynamic",
		"inverse": "Kernel.Apply and Kernel.Inverse",
	}
	shape := []int{p.Rows, r.Dim}
	return suite.NewPose("rotary-apply", cfg, ops.Tensors{"x": suite.Tensor(x, shape...)}, ops.Tensors{"y": suite.Tensor(got, shape...)}, words)
}
