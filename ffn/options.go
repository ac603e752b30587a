package ffn

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/vocab"
)

// Act names an activation function φ. The zero value is ActReLU, the
// activation of the two-layer FFN of Vaswani et al. 2017, Eq. (2).
type Act int

// The activations. Each is documented at its scalar function.
const (
	ActReLU        Act = iota // ReLU
	ActGELU                   // GELU, exact (erf) form
	ActGELUTanh               // GELUTanh, the tanh approximation
	ActGELUSigmoid            // GELUSigmoid, x·σ(1.702x)
	ActSigmoid                // Sigmoid (the GLU gated unit)
	ActSiLU                   // SiLU = Swish with β = 1
	ActSwish                  // Swish with Options.Beta
	ActIdentity               // φ(x) = x (the Bilinear gated unit)
)

var actWords = vocab.New("ffn", "activation", "the activation function φ", ErrOption,
	vocab.W(ActReLU, "relu", "max(x, 0)"),
	vocab.W(ActGELU, "gelu", "x·Φ(x), Φ the normal distribution function (exact, through erf)"),
	vocab.W(ActGELUTanh, "gelu-tanh", "the tanh approximation x/2·(1 + tanh(√(2/π)·(x + 0.044715x³)))"),
	vocab.W(ActGELUSigmoid, "gelu-sigmoid", "the sigmoid approximation x·σ(1.702x)"),
	vocab.W(ActSigmoid, "sigmoid", "σ(x) = 1/(1 + e^(−x))"),
	vocab.W(ActSiLU, "silu", "x·σ(x), Swish with β = 1"),
	vocab.W(ActSwish, "swish", "x·σ(βx) with the given β"),
	vocab.W(ActIdentity, "identity", "φ(x) = x"),
)

// String returns a's word ("relu").
func (a Act) String() string { return actWords.String(a) }

// MarshalText returns a's word; a value with none is an error wrapping
// ErrOption.
func (a Act) MarshalText() ([]byte, error) { return actWords.Marshal(a) }

// UnmarshalText sets a from its word; any other text is an error wrapping
// ErrOption that lists the words.
func (a *Act) UnmarshalText(b []byte) error { return actWords.Unmarshal(a, b) }

// Meaning returns one line saying what a means.
func (a Act) Meaning() string { return actWords.Meaning(a) }

// Values lists every Act, the zero value first.
func (Act) Values() []Act { return actWords.Values() }

// Check returns nil if a is one of the Act constants, or an error
// wrapping ErrOption that lists the words.
func (a Act) Check() error { return actWords.Check(a) }

// Layout says how a weight matrix of a projection from m inputs to n
// outputs is stored in its flat slice. Sources write the product both
// ways round, and the storage follows: the papers write xW with W of
// shape [in, out] (Vaswani et al. 2017, arXiv 1706.03762, Eq. (2);
// Shazeer 2020, arXiv 2002.05202, Eq. (1)–(6)), while a linear layer that
// keeps one row per output unit stores [out, in] and computes x·Wᵀ. The
// zero value is InByOut, the papers' xW.
type Layout int

const (
	// InByOut stores W as [in, out], row-major: element (i, j), input i to
	// output j, is w[i·out + j], and the projection is y = x·W. The zero
	// value.
	InByOut Layout = iota
	// OutByIn stores W as [out, in], row-major: element (i, j) is
	// w[j·in + i], one row per output unit, and the projection is y = x·Wᵀ.
	OutByIn
)

var layoutWords = vocab.New("ffn", "weight layout", "how a weight matrix is stored", ErrOption,
	vocab.W(InByOut, "in-by-out", "[in, out] row-major, y = x·W, as the papers write it"),
	vocab.W(OutByIn, "out-by-in", "[out, in] row-major, one row per output unit, y = x·Wᵀ"),
)

// String returns l's word ("in-by-out").
func (l Layout) String() string { return layoutWords.String(l) }

// MarshalText returns l's word; a value with none is an error wrapping
// ErrOption.
func (l Layout) MarshalText() ([]byte, error) { return layoutWords.Marshal(l) }

// UnmarshalText sets l from its word; any other text is an error wrapping
// ErrOption that lists the words.
func (l *Layout) UnmarshalText(b []byte) error { return layoutWords.Unmarshal(l, b) }

// Meaning returns one line saying what l means.
func (l Layout) Meaning() string { return layoutWords.Meaning(l) }

// Values lists every Layout, the zero value first.
func (Layout) Values() []Layout { return layoutWords.Values() }

// Check returns nil if l is one of the Layout constants, or an error
// wrapping ErrOption that lists the words.
func (l Layout) Check() error { return layoutWords.Check(l) }

// Packing says how one fused projection of width 2·Hidden holds the gate
// projection W and the value projection V of a gated unit. It speaks of
// output units, so it applies to either Layout: with OutByIn an output unit
// is a row of the stored matrix, with InByOut a column. The fused bias
// follows the same packing.
type Packing int

const (
	// GateUpStacked puts all gate units first, then all value units: gate
	// unit j is fused unit j, value unit j is fused unit Hidden + j. The
	// zero value.
	GateUpStacked Packing = iota
	// GateUpInterleaved alternates them: gate unit j is fused unit 2j,
	// value unit j is fused unit 2j + 1.
	GateUpInterleaved
)

var packingWords = vocab.New("ffn", "gate-up packing", "how one fused matrix holds the gate and value projections", ErrOption,
	vocab.W(GateUpStacked, "stacked", "all gate units, then all value units"),
	vocab.W(GateUpInterleaved, "interleaved", "gate and value units alternate: gate j is unit 2j, value j unit 2j + 1"),
)

// String returns p's word ("stacked").
func (p Packing) String() string { return packingWords.String(p) }

// MarshalText returns p's word; a value with none is an error wrapping
// ErrOption.
func (p Packing) MarshalText() ([]byte, error) { return packingWords.Marshal(p) }

// UnmarshalText sets p from its word; any other text is an error wrapping
// ErrOption that lists the words.
func (p *Packing) UnmarshalText(b []byte) error { return packingWords.Unmarshal(p, b) }

// Meaning returns one line saying what p means.
func (p Packing) Meaning() string { return packingWords.Meaning(p) }

// Values lists every Packing, the zero value first.
func (Packing) Values() []Packing { return packingWords.Values() }

// Check returns nil if p is one of the Packing constants, or an error
// wrapping ErrOption that lists the words.
func (p Packing) Check() error { return packingWords.Check(p) }

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
	gateB, upB bool // whether the gate (b₁, b) and value (c) biases are given
}

func maxMul(a, b int) bool { return b != 0 && a > math.MaxInt/b }

func checkDims(d Dims) error {
	switch {
	case d.Rows < 0:
		return fmt.Errorf("%w: Dims.Rows is %d, want ≥ 0", ErrShape, d.Rows)
	case d.In < 1:
		return fmt.Errorf("%w: Dims.In is %d, want ≥ 1", ErrShape, d.In)
	case d.Hidden < 1:
		return fmt.Errorf("%w: Dims.Hidden is %d, want ≥ 1", ErrShape, d.Hidden)
	case d.Out < 1:
		return fmt.Errorf("%w: Dims.Out is %d, want ≥ 1", ErrShape, d.Out)
	case d.Hidden > math.MaxInt/2 || maxMul(d.Rows, d.In) || maxMul(d.Rows, d.Out) ||
		maxMul(d.In, 2*d.Hidden) || maxMul(d.Hidden, d.Out) || maxMul(d.Rows, 2*d.Hidden):
		return fmt.Errorf("%w: Dims %+v: element counts overflow int", ErrShape, d)
	}
	return nil
}

func checkActBeta(a Act, beta float64) error {
	if err := a.Check(); err != nil {
		return err
	}
	if a == ActSwish {
		if math.IsNaN(beta) || math.IsInf(beta, 0) {
			return fmt.Errorf("%w: Swish β is %v, want a finite number", ErrBeta, beta)
		}
		return nil
	}
	if beta != 0 {
		return fmt.Errorf("%w: β is %v but activation %v has no β (only ActSwish takes one; leave it 0)", ErrBeta, beta, a)
	}
	return nil
}

// matrix checks that a matrix parameter holds in·units elements. A length
// that is a multiple of in but of another width names the width it implies
// (ErrHidden when that width is the hidden size).
func matrix(name string, n, in, units, hiddenPer int, isHidden bool) error {
	if n == in*units {
		return nil
	}
	if n == 0 {
		return fmt.Errorf("%w: %s is missing, want %d × %d = %d elements", ErrWeightLen, name, in, units, in*units)
	}
	if isHidden && n%in == 0 && (n/in)%hiddenPer == 0 {
		return fmt.Errorf("%w: %s has %d elements = %d × %d, implying hidden size %d; Dims.Hidden is %d",
			ErrHidden, name, n, in, n/in, n/in/hiddenPer, units/hiddenPer)
	}
	return fmt.Errorf("%w: %s has %d elements, want %d × %d = %d", ErrWeightLen, name, n, in, units, in*units)
}

func vector(name string, n, want int, isHidden bool) error {
	if n == 0 || n == want {
		return nil
	}
	if isHidden {
		return fmt.Errorf("%w: %s has %d elements, Dims.Hidden is %d", ErrHidden, name, n, want)
	}
	return fmt.Errorf("%w: %s has %d elements, want %d", ErrWeightLen, name, n, want)
}

func unused(name string, n int, why string) error {
	if n == 0 {
		return nil
	}
	return fmt.Errorf("%w: %s is set (%d elements) but %s", ErrWeightLen, name, n, why)
}

// newPlan validates everything except the input lengths.
func newPlan[T num.Float](d Dims, w *Weights[T], o Options) (*plan, error) {
	if err := checkDims(d); err != nil {
		return nil, err
	}
	if err := checkActBeta(o.Act, o.Beta); err != nil {
		return nil, err
	}
	if err := o.Layout.Check(); err != nil {
		return nil, err
	}
	p := &plan{d: d, o: o}
	p.down = view{in: d.Hidden, cols: d.Out, layout: o.Layout, stride: 1}
	// W2 is Hidden × Out: its "in" side is the hidden size.
	if len(w.W2) != d.Hidden*d.Out {
		if len(w.W2) > 0 && len(w.W2)%d.Out == 0 {
			return nil, fmt.Errorf("%w: W2 has %d elements = %d × %d, implying hidden size %d; Dims.Hidden is %d",
				ErrHidden, len(w.W2), len(w.W2)/d.Out, d.Out, len(w.W2)/d.Out, d.Hidden)
		}
		if err := matrix("W2", len(w.W2), d.Hidden, d.Out, 1, false); err != nil {
			return nil, err
		}
	}
	if err := vector("B2", len(w.B2), d.Out, false); err != nil {
		return nil, err
	}
	h := d.Hidden
	if !o.Gated {
		for _, u := range []struct {
			name string
			n    int
		}{{"V", len(w.V)}, {"C", len(w.C)}, {"Fused", len(w.Fused)}, {"FusedBias", len(w.FusedBias)}} {
			if err := unused(u.name, u.n, "the layer is not gated (Options.Gated is false)"); err != nil {
				return nil, err
			}
		}
		if err := matrix("W1", len(w.W1), d.In, h, 1, true); err != nil {
			return nil, err
		}
		if err := vector("B1", len(w.B1), h, true); err != nil {
			return nil, err
		}
		p.gate = view{in: d.In, cols: h, layout: o.Layout, stride: 1}
		p.gateB = len(w.B1) > 0
		return p, nil
	}
	if len(w.Fused) > 0 || len(w.FusedBias) > 0 {
		for _, u := range []struct {
			name string
			n    int
		}{{"W1", len(w.W1)}, {"B1", len(w.B1)}, {"V", len(w.V)}, {"C", len(w.C)}} {
			if err := unused(u.name, u.n, "the fused weight is given; use either W1, B1, V, C or Fused, FusedBias"); err != nil {
				return nil, err
			}
		}
		if err := matrix("Fused", len(w.Fused), d.In, 2*h, 2, true); err != nil {
			return nil, err
		}
		if len(w.FusedBias) != 0 && len(w.FusedBias) != 2*h {
			return nil, fmt.Errorf("%w: FusedBias has %d elements, want 2 × Dims.Hidden = %d", ErrHidden, len(w.FusedBias), 2*h)
		}
		p.fused = true
		p.gateB = len(w.FusedBias) > 0
		p.upB = p.gateB
		if err := o.Packing.Check(); err != nil {
			return nil, err
		}
		fv := view{in: d.In, cols: 2 * h, layout: o.Layout}
		p.gate, p.up = fv, fv
		if o.Packing == GateUpStacked {
			p.gate.stride, p.up.stride, p.up.off = 1, 1, h
		} else {
			p.gate.stride, p.up.stride, p.up.off = 2, 2, 1
		}
		return p, nil
	}
	if err := matrix("W1 (gate)", len(w.W1), d.In, h, 1, true); err != nil {
		return nil, err
	}
	if err := matrix("V", len(w.V), d.In, h, 1, true); err != nil {
		return nil, err
	}
	if err := vector("B1 (gate bias)", len(w.B1), h, true); err != nil {
		return nil, err
	}
	if err := vector("C", len(w.C), h, true); err != nil {
		return nil, err
	}
	p.gate = view{in: d.In, cols: h, layout: o.Layout, stride: 1}
	p.up = p.gate
	p.gateB, p.upB = len(w.B1) > 0, len(w.C) > 0
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
