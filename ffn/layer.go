package ffn

import "github.com/plumbref/plumb/internal/num"

// activation returns φ and φ′ of the activation a; beta is read only by
// Swish. The identity's derivative is 1 (NaN at NaN).
func activation[T num.Float](a Act, beta T) (phi, deriv func(T) T) {
	switch a {
	case ActReLU:
		return relu[T], reluDeriv[T]
	case ActGELU:
		return gelu[T], geluDeriv[T]
	case ActGELUTanh:
		return geluTanh[T], geluTanhDeriv[T]
	case ActGELUSigmoid:
		return geluSigmoid[T], geluSigmoidDeriv[T]
	case ActSigmoid:
		return sigmoid[T], sigmoidDeriv[T]
	case ActSiLU:
		beta = 1
		fallthrough
	case ActSwish:
		return func(x T) T { return swish(x, beta) }, func(x T) T { return swishDeriv(x, beta) }
	}
	return identity[T], identityDeriv[T]
}

func identity[T num.Float](x T) T { return x }

func identityDeriv[T num.Float](x T) T {
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

// projectWith is project with the running sum kept as the plan's
// accumulation format says: project itself for AccumulateFloat32, and
// otherwise the same loop with every addition (each product, then the
// bias) rounded once to bfloat16 or binary16.
func projectWith[T num.Float](p *plan, x, w, b []T, v view, j int, hasBias bool) T {
	if p.acc == AccumulateFloat32 {
		return project(x, w, b, v, j, hasBias)
	}
	f := num.BFloat16
	if p.acc == AccumulateBinary16 {
		f = num.Binary16
	}
	var s T
	for i, xi := range x {
		s = T(f.Add(float64(T(xi*w[v.at(i, j)])), float64(s)))
	}
	if hasBias {
		s = T(f.Add(float64(s), float64(b[v.bias(j)])))
	}
	return s
}

// hiddenRow fills, for one input row x, the pre-activations a (plain: xW₁ +
// b₁; gated: the gate xW + b), the values u (gated only: xV + c) and the
// hidden vector h = φ(a) or φ(a)·u.
func hiddenRow[T num.Float](p *plan, w *Weights[T], phi func(T) T, x, a, u, h []T) {
	gw, gb, uw, ub := parts(p, w)
	for j := range h {
		a[j] = projectWith(p, x, gw, gb, p.gate, j, p.gateB)
		h[j] = phi(a[j])
		if p.o.Gated {
			u[j] = projectWith(p, x, uw, ub, p.up, j, p.upB)
			h[j] *= u[j]
		}
	}
}

// throughAct returns the gradient da with respect to the pre-activation a
// and, for a gated unit, du with respect to the value u, given dh with
// respect to the hidden value φ(a) (or φ(a)·u):
//
//	plain:  da = dh·φ′(a)
//	gated:  da = (dh·u)·φ′(a),  du = dh·φ(a)
func throughAct[T num.Float](phi, deriv func(T) T, gated bool, dh, u, a T) (da, du T) {
	if gated {
		return T(dh*u) * deriv(a), dh * phi(a)
	}
	return dh * deriv(a), 0
}

func forward[T num.Float](fn string, x []T, d Dims, w *Weights[T], o Options) ([]T, error) {
	p, err := prepare(fn, x, d, w, o)
	if err != nil {
		return nil, err
	}
	if _, single := any(x).([]float32); single {
		p.acc = o.Accumulation // Forward32 honours the idiom; the reference ignores it
	}
	phi, _ := activation(o.Act, T(o.Beta))
	y := make([]T, d.Rows*d.Out)
	a, u, h := make([]T, d.Hidden), make([]T, d.Hidden), make([]T, d.Hidden)
	for r := range d.Rows {
		hiddenRow(p, w, phi, x[r*d.In:(r+1)*d.In], a, u, h)
		yr := y[r*d.Out : (r+1)*d.Out]
		for k := range yr {
			yr[k] = projectWith(p, h, w.W2, w.B2, p.down, k, len(w.B2) > 0)
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
func backward[T num.Float](fn string, x, dy []T, d Dims, w *Weights[T], o Options) ([]T, Weights[T], error) {
	var g Weights[T]
	p, err := prepareBackward(fn, x, dy, d, w, o)
	if err != nil {
		return nil, g, err
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
	phi, deriv := activation(o.Act, T(o.Beta))
	dx := make([]T, d.Rows*d.In)
	a, u, hv := make([]T, h), make([]T, h), make([]T, h)
	da, du := make([]T, h), make([]T, h)
	for r := range d.Rows {
		xr := x[r*d.In : (r+1)*d.In]
		dyr := dy[r*d.Out : (r+1)*d.Out]
		hiddenRow(p, w, phi, xr, a, u, hv)
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
			da[j], du[j] = throughAct(phi, deriv, o.Gated, dh, u[j], a[j])
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
