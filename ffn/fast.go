package ffn

import "github.com/plumbref/plumb/internal/num"

// gemm is C = op(A)·op(B) + beta·C through gonum's BLAS (num.Gemm: blas64
// for float64, blas32 for float32, so that the float32 instantiation stays
// a float32 computation, tiled so that the sums do not depend on
// GOMAXPROCS).
func gemm[T num.Float](tA, tB bool, m, n, k int, a []T, lda int, b []T, ldb int, beta T, c []T, ldc int) {
	num.Gemm(tA, tB, m, n, k, 1, a, lda, b, ldb, beta, c, ldc)
}

// The three products a projection needs, for an input X (n × k) and a
// weight of logical shape k × m stored in layout l:
//
//	apply:   C  = X·W             (n × m)
//	through: dX = dC·Wᵀ + beta·dX (n × k)
//	grad:    dW = Xᵀ·dC           (stored in layout l)

func apply[T num.Float](l Layout, n, k, m int, x, w, c []T) {
	gemm(false, l == OutByIn, n, m, k, x, k, w, ldw(l, k, m), 0, c, m)
}

func through[T num.Float](l Layout, n, k, m int, dc, w []T, beta T, dx []T) {
	gemm(false, l == InByOut, n, k, m, dc, m, w, ldw(l, k, m), beta, dx, k)
}

func grad[T num.Float](l Layout, n, k, m int, x, dc, dw []T) {
	if l == InByOut {
		gemm(true, false, k, m, n, x, k, dc, m, 0, dw, m)
		return
	}
	gemm(true, false, m, k, n, dc, m, x, k, 0, dw, k)
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
	switch {
	case p.fused:
		// scatter da, du into the fused units and treat the fused matrix as
		// one projection of width 2·Hidden
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
		through(l, n, d.In, 2*h, dp, w.Fused, 0, dx)
	default:
		g.W1, g.B1 = make([]T, len(w.W1)), make([]T, h)
		grad(l, n, d.In, h, x, da, g.W1)
		colSum(da, g.B1)
		through(l, n, d.In, h, da, w.W1, 0, dx)
		if o.Gated {
			g.V, g.C = make([]T, len(w.V)), make([]T, h)
			grad(l, n, d.In, h, x, du, g.V)
			colSum(du, g.C)
			through(l, n, d.In, h, du, w.V, 1, dx)
		}
	}
	return dx, g, nil
}

// ForwardFast computes the same layer as Forward, with the projections as
// matrix products through gonum's BLAS (blas64.Implementation's Dgemm,
// blocked and parallel over blocks of outputs). It is the form to use at
// realistic sizes; Forward is the definition it is tested against.
//
// The arithmetic differs from Forward's only in the order of each sum
// (gonum's blocked and vectorised order instead of ascending), so the
// results differ by rounding alone: each product term is the same, and
// each sum of k terms has error at most γ_k·Σ|terms| (γ_k = k·u/(1 − k·u),
// u = 2⁻⁵³) in either form. The tests check it against the same golden
// values as Forward, with the same bound, and against Forward on random
// layers of up to 256 inputs and hidden units. Results do not depend on
// GOMAXPROCS: gonum splits the work over blocks of the output, never along
// a sum.
//
// Arguments, errors and special cases are those of Forward.
func ForwardFast(x []float64, d Dims, w Weights[float64], o Options) ([]float64, error) {
	return forwardFast("ForwardFast", x, d, &w, o)
}

// ForwardFast32 is the float32 instantiation of the same body as
// ForwardFast (through blas32's Sgemm): the straightforward low-precision
// implementation the compare package uses as a yardstick; not a reference.
func ForwardFast32(x []float32, d Dims, w Weights[float32], o Options) ([]float32, error) {
	return forwardFast("ForwardFast32", x, d, &w, o)
}

// BackwardFast computes the same gradients as Backward with matrix
// products through gonum's BLAS, as ForwardFast does for Forward. For a
// fused weight, dx is one product with the whole fused matrix rather than
// Backward's gate sum plus value sum. Arguments, errors and special cases
// are those of Backward.
func BackwardFast(x, dy []float64, d Dims, w Weights[float64], o Options) (dx []float64, grad Weights[float64], err error) {
	return backwardFast("BackwardFast", x, dy, d, &w, o)
}

// BackwardFast32 is the float32 instantiation of the same body as
// BackwardFast: the straightforward low-precision implementation the
// compare package uses as a yardstick; not a reference.
func BackwardFast32(x, dy []float32, d Dims, w Weights[float32], o Options) (dx []float32, grad Weights[float32], err error) {
	return backwardFast("BackwardFast32", x, dy, d, &w, o)
}
