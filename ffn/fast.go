package ffn

import "github.com/plumbref/plumb/internal/num"

// matProduct is C = op(A)·op(B) + beta·C through plumb's own matrix product
// (num.MatrixProduct: pure Go, parallel over blocks of C). It sums each element as
// the direct form's project does: from 0 (beta = 0) or from C (beta = 1),
// the products rounded, in ascending order of the summed index; the same
// bits on every architecture and for any GOMAXPROCS.
func matProduct[T num.Float](tA, tB bool, m, n, k int, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	num.MatrixProduct(tA, tB, m, n, k, 1, a, lda, b, ldb, beta, c, ldc)
}

// The three products a projection needs, for an input X (n × k) and a
// weight of logical shape k × m stored in layout l:
//
//	apply:   C  = X·W             (n × m)
//	through: dX = dC·Wᵀ + beta·dX (n × k)
//	grad:    dW = Xᵀ·dC           (stored in layout l)

func apply[T num.Float](l Layout, n, k, m int, x, w, c []T) {
	matProduct(false, l == OutByIn, n, m, k, x, k, w, ldw(l, k, m), 0, c, m)
}

func through[T num.Float](l Layout, n, k, m int, dc, w []T, beta T, dx []T) {
	matProduct(false, l == InByOut, n, k, m, dc, m, w, ldw(l, k, m), beta, dx, k)
}

func grad[T num.Float](l Layout, n, k, m int, x, dc, dw []T) {
	if l == InByOut {
		matProduct(true, false, k, m, n, x, k, dc, m, 0, dw, m)
		return
	}
	matProduct(true, false, m, k, n, dc, m, x, k, 0, dw, k)
}

// ldw is the row stride of a stored k × m weight.
func ldw(l Layout, k, m int) int {
	if l == InByOut {
		return m
	}
	return k
}

// fastHidden returns, for every row, the pre-activations a (n × h), the
// values u (n × h, gated only) and the hidden vectors (n × h), with the
// projections as matrix products.
func fastHidden[T num.Float](p *plan, w *Weights[T], phi func(T) T, x []T) (a, u, hv []T) {
	d, o := p.d, p.o
	n, h := d.Rows, d.Hidden
	a, u, hv = make([]T, n*h), make([]T, n*h), make([]T, n*h)
	if p.fused {
		pf := make([]T, n*2*h)
		apply(o.Layout, n, d.In, 2*h, x, w.Fused, pf)
		for r := range n {
			for j := range h {
				a[r*h+j] = pf[r*2*h+p.gate.bias(j)]
				u[r*h+j] = pf[r*2*h+p.up.bias(j)]
			}
		}
	} else {
		apply(o.Layout, n, d.In, h, x, w.W1, a)
		if o.Gated {
			apply(o.Layout, n, d.In, h, x, w.V, u)
		}
	}
	_, gb, _, ub := parts(p, w)
	for r := range n {
		for j := range h {
			i := r*h + j
			if p.gateB {
				a[i] += gb[p.gate.bias(j)]
			}
			hv[i] = phi(a[i])
			if o.Gated {
				if p.upB {
					u[i] += ub[p.up.bias(j)]
				}
				hv[i] *= u[i]
			}
		}
	}
	return a, u, hv
}

func forwardFast[T num.Float](fn string, x []T, d Dims, w *Weights[T], o Options) ([]T, error) {
	p, err := prepare(fn, x, d, w, o)
	if err != nil {
		return nil, err
	}
	phi, _ := activation(o.Act, T(o.Beta))
	_, _, hv := fastHidden(p, w, phi, x)
	y := make([]T, d.Rows*d.Out)
	apply(o.Layout, d.Rows, d.Hidden, d.Out, hv, w.W2, y)
	if len(w.B2) > 0 {
		for r := range d.Rows {
			for k := range d.Out {
				y[r*d.Out+k] += w.B2[k]
			}
		}
	}
	return y, nil
}

func backwardFast[T num.Float](fn string, x, dy []T, d Dims, w *Weights[T], o Options) ([]T, Weights[T], error) {
	var g Weights[T]
	p, err := prepareBackward(fn, x, dy, d, w, o)
	if err != nil {
		return nil, g, err
	}
	n, h, l := d.Rows, d.Hidden, o.Layout
	phi, deriv := activation(o.Act, T(o.Beta))
	a, u, hv := fastHidden(p, w, phi, x)
	g.W2, g.B2 = make([]T, len(w.W2)), make([]T, d.Out)
	grad(l, n, h, d.Out, hv, dy, g.W2)
	for r := range n {
		for k := range d.Out {
			g.B2[k] += dy[r*d.Out+k]
		}
	}
	dh := make([]T, n*h)
	through(l, n, h, d.Out, dy, w.W2, 0, dh)
	da, du := make([]T, n*h), make([]T, n*h)
	for i := range dh {
		da[i], du[i] = throughAct(phi, deriv, o.Gated, dh[i], u[i], a[i])
	}
	colSum := func(m []T, dst []T) {
		for r := range n {
			for j := range h {
				dst[j] += m[r*h+j]
			}
		}
	}
	dx := make([]T, n*d.In)
	// dx = da·Wᵀ + du·Vᵀ, the two sums apart and then added, as Backward
	// adds them.
	addValuePart := func(du, v []T, l Layout) {
		t := make([]T, n*d.In)
		through(l, n, d.In, h, du, v, 0, t)
		for i := range dx {
			dx[i] += t[i]
		}
	}
	switch {
	case p.fused:
		// scatter da, du into the fused units and treat the fused matrix as
		// one projection of width 2·Hidden for the gradients of the weights
		dp := make([]T, n*2*h)
		for r := range n {
			for j := range h {
				dp[r*2*h+p.gate.bias(j)] = da[r*h+j]
				dp[r*2*h+p.up.bias(j)] = du[r*h+j]
			}
		}
		g.Fused, g.FusedBias = make([]T, len(w.Fused)), make([]T, 2*h)
		grad(l, n, d.In, 2*h, x, dp, g.Fused)
		for r := range n {
			for j := range 2 * h {
				g.FusedBias[j] += dp[r*2*h+j]
			}
		}
		through(InByOut, n, d.In, h, da, gather(p.gate, d.In, h, w.Fused), 0, dx)
		addValuePart(du, gather(p.up, d.In, h, w.Fused), InByOut)
	default:
		g.W1, g.B1 = make([]T, len(w.W1)), make([]T, h)
		grad(l, n, d.In, h, x, da, g.W1)
		colSum(da, g.B1)
		through(l, n, d.In, h, da, w.W1, 0, dx)
		if o.Gated {
			g.V, g.C = make([]T, len(w.V)), make([]T, h)
			grad(l, n, d.In, h, x, du, g.V)
			colSum(du, g.C)
			addValuePart(du, w.V, l)
		}
	}
	return dx, g, nil
}

// gather copies the in × h matrix that the view v reads out of a fused
// matrix into a matrix of its own, stored InByOut.
func gather[T num.Float](v view, in, h int, fused []T) []T {
	out := make([]T, in*h)
	for i := range in {
		for j := range h {
			out[i*h+j] = fused[v.at(i, j)]
		}
	}
	return out
}

// ForwardFast computes the same layer as Forward, with the projections as
// matrix products through plumb's own blocked matrix product (internal/num's
// MatrixProduct: pure Go, register-blocked, parallel over blocks of outputs). It is
// the form to use at realistic sizes; Forward is the definition it is
// tested against.
//
// It is Forward bit for bit: each sum has Forward's terms in Forward's
// order (ascending over the input index, from 0, every product rounded,
// the bias added last), in every storage form, on every architecture and
// for any GOMAXPROCS (TestFastIsDirect; the golden tests check it with
// Forward's bound too).
//
// Arguments, errors and special cases are those of Forward.
func ForwardFast(x []float64, d Dims, w Weights[float64], o Options) ([]float64, error) {
	return forwardFast("ForwardFast", x, d, &w, o)
}

// ForwardFast32 is the float32 instantiation of the same body as
// ForwardFast: the straightforward low-precision implementation the
// compare package uses as a yardstick; not a reference. It is Forward32
// bit for bit, except that it computes in plain float32 whatever
// o.Accumulation says (Forward32 honours it).
func ForwardFast32(x []float32, d Dims, w Weights[float32], o Options) ([]float32, error) {
	return forwardFast("ForwardFast32", x, d, &w, o)
}

// BackwardFast computes the same gradients as Backward with matrix
// products, as ForwardFast does for Forward, and is Backward bit for bit:
// the gradients of the weights sum over the rows in ascending order, dx
// sums the gate part and the value part of a gated layer apart and then
// adds them, as Backward does. Arguments, errors and special cases are
// those of Backward.
func BackwardFast(x, dy []float64, d Dims, w Weights[float64], o Options) (dx []float64, grad Weights[float64], err error) {
	return backwardFast("BackwardFast", x, dy, d, &w, o)
}

// BackwardFast32 is the float32 instantiation of the same body as
// BackwardFast: the straightforward low-precision implementation the
// compare package uses as a yardstick; not a reference. It is Backward32
// bit for bit.
func BackwardFast32(x, dy []float32, d Dims, w Weights[float32], o Options) (dx []float32, grad Weights[float32], err error) {
	return backwardFast("BackwardFast32", x, dy, d, &w, o)
}
