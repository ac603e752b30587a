package ffn

import (
	"fmt"

	"github.com/plumbref/plumb/internal/num"
)

// phi and phiDeriv dispatch on the activation; beta is read only by Swish.
func phi[T num.Float](a Act, beta, x T) T {
	switch a {
	case ActReLU:
		return relu(x)
	case ActGELU:
		return gelu(x)
	case ActGELUTanh:
		return geluTanh(x)
	case ActGELUSigmoid:
		return geluSigmoid(x)
	case ActSigmoid:
		return sigmoid(x)
	case ActSiLU:
		return swish(x, 1)
	case ActSwish:
		return swish(x, beta)
	}
	return x
}

func phiDeriv[T num.Float](a Act, beta, x T) T {
	switch a {
	case ActReLU:
		return reluDeriv(x)
	case ActGELU:
		return geluDeriv(x)
	case ActGELUTanh:
		return geluTanhDeriv(x)
	case ActGELUSigmoid:
		return geluSigmoidDeriv(x)
	case ActSigmoid:
		return sigmoidDeriv(x)
	case ActSiLU:
		return swishDeriv(x, 1)
	case ActSwish:
		return swishDeriv(x, beta)
	}
	if x != x {
		return x
	}
	return 1
}

// project returns unit j of the projection of the row x through the matrix
// w read by v, plus the bias when given:
//
//	s := 0
//	for i := range x {
//		s = float64(x[i]*W[i][j]) + s
//	}
//	s += b[j]
//
// The sum runs over i ascending, one rounding per product and per sum.
func project[T num.Float](x, w, b []T, v view, j int, hasBias bool) T {
	var s T
	for i, xi := range x {
		s = T(xi*w[v.at(i, j)]) + s
	}
	if hasBias {
		s += b[v.bias(j)]
	}
	return s
}

// hiddenRow fills, for one input row x, the pre-activations a (plain: xW₁ +
// b₁; gated: the gate xW + b), the values u (gated only: xV + c) and the
// hidden vector h = φ(a) or φ(a)·u.
func hiddenRow[T num.Float](p *plan, w *Weights[T], x, a, u, h []T) {
	gw, gb, uw, ub := parts(p, w)
	beta := T(p.o.Beta)
	for j := range h {
		a[j] = project(x, gw, gb, p.gate, j, p.gateB)
		h[j] = phi(p.o.Act, beta, a[j])
		if p.o.Gated {
			u[j] = project(x, uw, ub, p.up, j, p.upB)
			h[j] *= u[j]
		}
	}
}

func forward[T num.Float](x []T, d Dims, w *Weights[T], o Options) ([]T, error) {
	p, err := newPlan(d, w, o)
	if err != nil {
		return nil, err
	}
	if len(x) != d.Rows*d.In {
		return nil, fmt.Errorf("%w: x has %d elements, want Rows × In = %d × %d = %d", ErrShape, len(x), d.Rows, d.In, d.Rows*d.In)
	}
	y := make([]T, d.Rows*d.Out)
	a, u, h := make([]T, d.Hidden), make([]T, d.Hidden), make([]T, d.Hidden)
	for r := range d.Rows {
		hiddenRow(p, w, x[r*d.In:(r+1)*d.In], a, u, h)
		yr := y[r*d.Out : (r+1)*d.Out]
		for k := range yr {
			yr[k] = project(h, w.W2, w.B2, p.down, k, len(w.B2) > 0)
		}
	}
	return y, nil
}

// backward returns dx and the gradients of every parameter for the upstream
// gradient dy. Per row r, with the hidden vector h and pre-activations a:
//
//	dW₂[j][k] += h[j]·dy[k]          db₂[k] += dy[k]
//	dh[j]      = Σ_k W₂[j][k]·dy[k]
//	plain:  da = dh ⊙ φ′(a)
//	gated:  da = dh ⊙ u ⊙ φ′(a),     du = dh ⊙ φ(a)
//	dW[i][j]  += x[i]·da[j]          db[j] += da[j]   (and V, c with du)
//	dx[i]      = Σ_j W[i][j]·da[j] + Σ_j V[i][j]·du[j]
//
// Sums over a row run in ascending index order; gradients of parameters
// accumulate over rows in ascending row order.
func backward[T num.Float](x, dy []T, d Dims, w *Weights[T], o Options) ([]T, Weights[T], error) {
	var g Weights[T]
	p, err := newPlan(d, w, o)
	if err != nil {
		return nil, g, err
	}
	if len(x) != d.Rows*d.In {
		return nil, g, fmt.Errorf("%w: x has %d elements, want Rows × In = %d × %d = %d", ErrShape, len(x), d.Rows, d.In, d.Rows*d.In)
	}
	if len(dy) != d.Rows*d.Out {
		return nil, g, fmt.Errorf("%w: dy has %d elements, want Rows × Out = %d × %d = %d", ErrShape, len(dy), d.Rows, d.Out, d.Rows*d.Out)
	}
	h := d.Hidden
	g.W2, g.B2 = make([]T, len(w.W2)), make([]T, d.Out)
	switch {
	case p.fused:
		g.Fused, g.FusedBias = make([]T, len(w.Fused)), make([]T, 2*h)
	case o.Gated:
		g.W1, g.B1, g.V, g.C = make([]T, len(w.W1)), make([]T, h), make([]T, len(w.V)), make([]T, h)
	default:
		g.W1, g.B1 = make([]T, len(w.W1)), make([]T, h)
	}
	gw, _, uw, _ := parts(p, w)
	dgw, dgb, duw, dub := parts(p, &g)
	beta := T(o.Beta)
	dx := make([]T, d.Rows*d.In)
	a, u, hv := make([]T, h), make([]T, h), make([]T, h)
	da, du := make([]T, h), make([]T, h)
	for r := range d.Rows {
		xr := x[r*d.In : (r+1)*d.In]
		dyr := dy[r*d.Out : (r+1)*d.Out]
		hiddenRow(p, w, xr, a, u, hv)
		for k, dk := range dyr {
			g.B2[k] += dk
		}
		for j := range h {
			var dh T
			for k, dk := range dyr {
				at := p.down.at(j, k)
				g.W2[at] += T(hv[j] * dk)
				dh = T(w.W2[at]*dk) + dh
			}
			if o.Gated {
				da[j] = T(dh*u[j]) * phiDeriv(o.Act, beta, a[j])
				du[j] = dh * phi(o.Act, beta, a[j])
			} else {
				da[j] = dh * phiDeriv(o.Act, beta, a[j])
			}
			dgb[p.gate.bias(j)] += da[j]
			if o.Gated {
				dub[p.up.bias(j)] += du[j]
			}
		}
		dxr := dx[r*d.In : (r+1)*d.In]
		for i, xi := range xr {
			var s T
			for j := range h {
				at := p.gate.at(i, j)
				dgw[at] += T(xi * da[j])
				s = T(gw[at]*da[j]) + s
			}
			if o.Gated {
				var t T
				for j := range h {
					at := p.up.at(i, j)
					duw[at] += T(xi * du[j])
					t = T(uw[at]*du[j]) + t
				}
				s += t
			}
			dxr[i] = s
		}
	}
	return dx, g, nil
}
