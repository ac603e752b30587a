package ffn

import (
	"fmt"
	"math"
	"strconv"

	"github.com/plumbref/plumb/internal/num"
)

// Options chooses the layer. The zero value is the plain two-layer ReLU
// layer of Vaswani et al. 2017, Eq. (2), with [in, out] weights; Beta is
// read only for ActSwish, Packing only when Weights.Fused is used.
type Options struct {
	// Act is φ: for a plain layer it is applied to xW₁ + b₁, for a gated
	// unit to the gate xW + b. The zero value is ActReLU.
	Act Act
	// Beta is Swish's β (ActSwish only; any finite value, 0 gives x/2).
	// It must be 0 for every other activation.
	Beta float64
	// Gated selects the gated units of Shazeer 2020:
	// φ(xW + b) ⊗ (xV + c), then the down projection.
	Gated bool
	// Layout is the storage of every weight matrix of the layer; the zero
	// value is InByOut.
	Layout Layout
	// Packing is the arrangement of Weights.Fused and Weights.FusedBias;
	// the zero value is GateUpStacked.
	Packing Packing
	// Accumulation is the format a float32 port keeps its running sums in
	// (a port's precision idiom; the float64 reference ignores it):
	// Forward32 honours it, every other function sums in float64 or
	// float32 as it always does. The zero value is AccumulateFloat32.
	Accumulation Accumulation
}

// Dims holds a layer's sizes: Rows input vectors of In elements, a hidden
// width of Hidden units and Out outputs per row (In = Out in a transformer
// block, but they may differ).
type Dims struct {
	Rows, In, Hidden, Out int
}

// Weights holds a layer's parameters, each a flat row-major slice whose
// matrices are stored in Options.Layout. The names follow the papers: W₁,
// b₁, W₂, b₂ for the plain layer (Vaswani et al. 2017, Eq. (2)); W, b, V,
// c for the gate and value projections of a gated unit (Shazeer 2020,
// Eq. (4)–(6)), whose gate W is kept in W1 and b in B1.
//
// A nil bias is a zero bias. A gated unit takes either W1 and V (with
// biases B1 and C) or one fused matrix Fused of In × 2·Hidden (with bias
// FusedBias of 2·Hidden), packed as Options.Packing says, never both.
//
// Backward returns its gradients in a Weights of the same form: a
// gradient has the length, layout and packing of its parameter, and every
// bias gradient is returned, whether or not the bias was given.
type Weights[T ~float32 | ~float64] struct {
	W1 []T // plain: W₁, In × Hidden; gated: the gate W, In × Hidden
	B1 []T // plain: b₁; gated: the gate bias b; Hidden or nil
	V  []T // gated only: the value projection V, In × Hidden
	C  []T // gated only: the value bias c, Hidden or nil

	Fused     []T // gated only, instead of W1 and V: In × 2·Hidden
	FusedBias []T // gated only, with Fused: 2·Hidden or nil

	W2 []T // the down projection W₂, Hidden × Out
	B2 []T // b₂, Out or nil
}

// view reads a projection's matrix and bias as the logical In × units
// matrix of one projection, whatever the layout and packing: unit j is
// column off + stride·j of the stored matrix of cols columns (InByOut) or
// row off + stride·j of it (OutByIn).
type view struct {
	in, cols    int
	layout      Layout
	off, stride int
}

func (v view) at(i, j int) int {
	c := v.off + v.stride*j
	if v.layout == InByOut {
		return i*v.cols + c
	}
	return c*v.in + i
}

func (v view) bias(j int) int { return v.off + v.stride*j }

// plan is a validated layer: the views of its projections and its φ.
type plan struct {
	d          Dims
	o          Options
	gate, up   view // up is unused for a plain layer
	down       view
	fused      bool
	gateB, upB bool         // whether the gate (b₁, b) and value (c) biases are given
	acc        Accumulation // the sums' format: zero but for Forward32
}

func maxMul(a, b int) bool { return b != 0 && a > math.MaxInt/b }

func checkDims(fn string, d Dims) error {
	switch {
	case d.Rows < 0:
		return fmt.Errorf("%w: %s: Dims.Rows = %d; want ≥ 0", ErrShape, fn, d.Rows)
	case d.In < 1:
		return fmt.Errorf("%w: %s: Dims.In = %d; want ≥ 1", ErrShape, fn, d.In)
	case d.Hidden < 1:
		return fmt.Errorf("%w: %s: Dims.Hidden = %d; want ≥ 1", ErrShape, fn, d.Hidden)
	case d.Out < 1:
		return fmt.Errorf("%w: %s: Dims.Out = %d; want ≥ 1", ErrShape, fn, d.Out)
	case d.Hidden > math.MaxInt/2 || maxMul(d.Rows, d.In) || maxMul(d.Rows, d.Out) ||
		maxMul(d.In, 2*d.Hidden) || maxMul(d.Hidden, d.Out) || maxMul(d.Rows, 2*d.Hidden):
		return fmt.Errorf("%w: %s: Dims = %+v; want sizes whose element counts fit an int", ErrShape, fn, d)
	}
	return nil
}

// checkActBeta checks the activation a and Swish's β, which the caller of
// fn passed as act and beta ("Options.Act" and "Options.Beta").
func checkActBeta(fn, act, beta string, a Act, b float64) error {
	if err := actWords.CheckAt(fn+": "+act, a); err != nil {
		return err
	}
	if a == ActSwish {
		if math.IsNaN(b) || math.IsInf(b, 0) {
			return fmt.Errorf("%w: %s: %s = %v; want a finite number (the Swish β)", ErrBeta, fn, beta, b)
		}
		return nil
	}
	if b != 0 {
		return fmt.Errorf("%w: %s: %s = %v; want 0: activation %v has no β (only swish takes one)", ErrBeta, fn, beta, b, a)
	}
	return nil
}

// lengths are the lengths of a Weights' slices: all newPlan needs of them.
type lengths struct {
	W1, B1, V, C, Fused, FusedBias, W2, B2 int
}

func lengthsOf[T num.Float](w *Weights[T]) lengths {
	return lengths{len(w.W1), len(w.B1), len(w.V), len(w.C), len(w.Fused), len(w.FusedBias), len(w.W2), len(w.B2)}
}

// hiddenMatrix is a weight matrix one side of which is per·Hidden units and
// the other fixed units: In (W1, V, Fused) or Out (W2, hiddenFirst).
type hiddenMatrix struct {
	name        string // the Weights field, as messages name it: "W1"
	fixed       int    // the size of the other side
	fixedName   string // its name in Dims: "In" or "Out"
	per         int    // units per hidden unit: 2 for a fused gate and value
	hiddenFirst bool   // stored Hidden × Out, as W2
}

// want is the element count for hidden size h, as a formula with its
// values: "In·2·Hidden = 3·2·4 = 24".
func (m hiddenMatrix) want(h int) string {
	hidden, factors := "Hidden", []int{h}
	if m.per != 1 {
		hidden, factors = strconv.Itoa(m.per)+"·Hidden", []int{m.per, h}
	}
	if m.hiddenFirst {
		return num.Product(hidden+"·"+m.fixedName, append(factors, m.fixed)...)
	}
	return num.Product(m.fixedName+"·"+hidden, append([]int{m.fixed}, factors...)...)
}

// check checks that the matrix holds n elements for hidden size h. A
// length that fits the fixed side but another hidden size names the hidden
// size it implies (ErrHidden).
func (m hiddenMatrix) check(fn string, n, h int) error {
	unit := m.fixed * m.per
	if n == unit*h {
		return nil
	}
	if n > 0 && n%unit == 0 {
		return fmt.Errorf("%w: %s: Weights.%s has %d elements, implying hidden size %d; want Dims.Hidden = %d, %s elements",
			ErrHidden, fn, m.name, n, n/unit, h, m.want(h))
	}
	return fmt.Errorf("%w: %s: Weights.%s has %d elements; want %s", ErrWeightLen, fn, m.name, n, m.want(h))
}

// checkBias checks a bias of n elements that must hold want (formula and
// value, "Hidden = 4") or none; sentinel is the error of another length.
func checkBias(fn, name string, n, want int, formula string, sentinel error) error {
	if n == 0 || n == want {
		return nil
	}
	return fmt.Errorf("%w: %s: Weights.%s has %d elements; want %s, or 0 for no bias", sentinel, fn, name, n, formula)
}

// unused checks that the named slices are not given: why says why not.
func unused(fn, why string, names []string, ns ...int) error {
	for i, n := range ns {
		if n != 0 {
			return fmt.Errorf("%w: %s: Weights.%s has %d elements; want 0: %s", ErrWeightLen, fn, names[i], n, why)
		}
	}
	return nil
}

// newPlan validates everything of a call to fn except the input lengths.
func newPlan[T num.Float](fn string, d Dims, w *Weights[T], o Options) (*plan, error) {
	if err := checkDims(fn, d); err != nil {
		return nil, err
	}
	if err := checkActBeta(fn, "Options.Act", "Options.Beta", o.Act, o.Beta); err != nil {
		return nil, err
	}
	if err := layoutWords.CheckAt(fn+": Options.Layout", o.Layout); err != nil {
		return nil, err
	}
	if err := accumulationWords.CheckAt(fn+": Options.Accumulation", o.Accumulation); err != nil {
		return nil, err
	}
	n := lengthsOf(w)
	if err := checkDown(fn, d, n); err != nil {
		return nil, err
	}
	p := &plan{d: d, o: o, down: view{in: d.Hidden, cols: d.Out, layout: o.Layout, stride: 1}}
	var err error
	switch {
	case !o.Gated:
		err = p.plain(fn, n)
	case n.Fused > 0 || n.FusedBias > 0:
		err = p.fusedGate(fn, n)
	default:
		err = p.separateGate(fn, n)
	}
	if err != nil {
		return nil, err
	}
	return p, nil
}

// checkDown checks the down projection W₂ (Hidden × Out) and its bias b₂.
func checkDown(fn string, d Dims, n lengths) error {
	w2 := hiddenMatrix{name: "W2", fixed: d.Out, fixedName: "Out", per: 1, hiddenFirst: true}
	if err := w2.check(fn, n.W2, d.Hidden); err != nil {
		return err
	}
	return checkBias(fn, "B2", n.B2, d.Out, num.Product("Out", d.Out), ErrWeightLen)
}

// plain plans a layer that is not gated: W₁ and b₁, and nothing of a gated
// unit.
func (p *plan) plain(fn string, n lengths) error {
	d, h := p.d, p.d.Hidden
	if err := unused(fn, "the layer is not gated (Options.Gated is false)",
		[]string{"V", "C", "Fused", "FusedBias"}, n.V, n.C, n.Fused, n.FusedBias); err != nil {
		return err
	}
	if err := (hiddenMatrix{name: "W1", fixed: d.In, fixedName: "In", per: 1}).check(fn, n.W1, h); err != nil {
		return err
	}
	if err := checkBias(fn, "B1", n.B1, h, num.Product("Hidden", h), ErrHidden); err != nil {
		return err
	}
	p.gate = view{in: d.In, cols: h, layout: p.o.Layout, stride: 1}
	p.gateB = n.B1 > 0
	return nil
}

// fusedGate plans a gated unit whose gate and value projections are one
// matrix Fused of 2·Hidden units, packed as Options.Packing says.
func (p *plan) fusedGate(fn string, n lengths) error {
	d, h := p.d, p.d.Hidden
	if err := unused(fn, "Weights.Fused is given; use either W1, B1, V, C or Fused, FusedBias",
		[]string{"W1", "B1", "V", "C"}, n.W1, n.B1, n.V, n.C); err != nil {
		return err
	}
	if err := (hiddenMatrix{name: "Fused", fixed: d.In, fixedName: "In", per: 2}).check(fn, n.Fused, h); err != nil {
		return err
	}
	if err := checkBias(fn, "FusedBias", n.FusedBias, 2*h, num.Product("2·Hidden", 2, h), ErrHidden); err != nil {
		return err
	}
	p.fused = true
	p.gateB = n.FusedBias > 0
	p.upB = p.gateB
	if err := packingWords.CheckAt(fn+": Options.Packing", p.o.Packing); err != nil {
		return err
	}
	fv := view{in: d.In, cols: 2 * h, layout: p.o.Layout}
	p.gate, p.up = fv, fv
	if p.o.Packing == GateUpStacked {
		p.gate.stride, p.up.stride, p.up.off = 1, 1, h
	} else {
		p.gate.stride, p.up.stride, p.up.off = 2, 2, 1
	}
	return nil
}

// separateGate plans a gated unit with separate gate (W1, B1) and value
// (V, C) projections.
func (p *plan) separateGate(fn string, n lengths) error {
	d, h := p.d, p.d.Hidden
	for _, m := range []struct {
		name string
		n    int
	}{{"W1 (gate)", n.W1}, {"V", n.V}} {
		if err := (hiddenMatrix{name: m.name, fixed: d.In, fixedName: "In", per: 1}).check(fn, m.n, h); err != nil {
			return err
		}
	}
	for _, b := range []struct {
		name string
		n    int
	}{{"B1 (gate bias)", n.B1}, {"C", n.C}} {
		if err := checkBias(fn, b.name, b.n, h, num.Product("Hidden", h), ErrHidden); err != nil {
			return err
		}
	}
	p.gate = view{in: d.In, cols: h, layout: p.o.Layout, stride: 1}
	p.up = p.gate
	p.gateB, p.upB = n.B1 > 0, n.C > 0
	return nil
}

// prepare validates a call to fn: the plan, then the length of x.
func prepare[T num.Float](fn string, x []T, d Dims, w *Weights[T], o Options) (*plan, error) {
	p, err := newPlan(fn, d, w, o)
	if err != nil {
		return nil, err
	}
	if len(x) != d.Rows*d.In {
		return nil, fmt.Errorf("%w: %s: x has %d elements; want %s", ErrShape, fn, len(x), num.Product("Rows·In", d.Rows, d.In))
	}
	return p, nil
}

// prepareBackward is prepare for a backward pass, which also checks the
// length of dy.
func prepareBackward[T num.Float](fn string, x, dy []T, d Dims, w *Weights[T], o Options) (*plan, error) {
	p, err := prepare(fn, x, d, w, o)
	if err != nil {
		return nil, err
	}
	if len(dy) != d.Rows*d.Out {
		return nil, fmt.Errorf("%w: %s: dy has %d elements; want %s", ErrShape, fn, len(dy), num.Product("Rows·Out", d.Rows, d.Out))
	}
	return p, nil
}

// parts returns the gate (or first) matrix and bias, and the value matrix
// and bias, of w as the plan reads them.
func parts[T num.Float](p *plan, w *Weights[T]) (gw, gb, uw, ub []T) {
	if p.fused {
		return w.Fused, w.FusedBias, w.Fused, w.FusedBias
	}
	return w.W1, w.B1, w.V, w.C
}
