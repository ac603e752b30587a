package diagnose

// Small float32 ports written for the catalogue, from the formulas of the
// operations' documentation (the sources are cited in the kernel packages:
// Vaswani et al. 2017, arXiv 1706.03762 §3.2.1 for attention; Su et al.
// 2021, arXiv 2104.09864 Eq. (34) for rotary; Press et al. 2022, arXiv
// 2108.12409 §3 for ALiBi; Ba et al. 2016, arXiv 1607.06450 Eq. (4) and
// Zhang & Sennrich 2019, arXiv 1910.07467 Eq. (4) for the norms; Shazeer
// 2020, arXiv 2002.05202 Eq. (5)–(6) for the gated layers). Each port has
// knobs in its own terms; a catalogue entry sets one or two of them wrong.
// The correct settings are checked by TestCorrectPortsPass: every port
// with its knobs right passes the yardstick of its configuration.

import (
	"math"
	"math/rand"
)

func uniform(seed int64, n int, lo, hi float64) []float64 {
	r := rand.New(rand.NewSource(seed))
	x := make([]float64, n)
	for i := range x {
		x[i] = lo + float64((hi-lo)*r.Float64())
	}
	return x
}

func to32(x []float64) []float32 {
	y := make([]float32, len(x))
	for i, v := range x {
		y[i] = float32(v)
	}
	return y
}

func to64(x []float32) []float64 {
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = float64(v)
	}
	return y
}

func exp32(x float32) float32 { return float32(math.Exp(float64(x))) }
func log32(x float32) float32 { return float32(math.Log(float64(x))) }

// attnPort is scaled dot-product attention with its own knobs.
type attnPort struct {
	B, H, Hkv, Lq, Lk, D int
	seqMajorIn           [3]bool // q, k, v indexed [b, l, h, d] instead of [b, h, l, d]
	seqMajorOut          bool
	kv                   func(h int) int     // the kv head query head h reads
	scale                float32             // multiplies q·k
	pos                  func(i int) int     // the position of query i among the keys
	see                  func(p, j int) bool // key j visible to the query at position p; nil: every key
	softCap              float32             // 0: none
	slopes               []float32           // ALiBi; nil: none
	dist                 func(p, j int) float32
	swapKV               bool
}

func (a attnPort) at(seq bool, b, h, l, d, H, L int) int {
	if seq {
		return ((b*L+l)*H+h)*a.D + d
	}
	return ((b*H+h)*L+l)*a.D + d
}

// logits returns the scaled, capped, biased logits of row (b, h, i) and
// which keys are visible.
func (a attnPort) logits(q, k []float32, b, h, i int) ([]float32, []bool) {
	s := make([]float32, a.Lk)
	vis := make([]bool, a.Lk)
	p := a.pos(i)
	for j := range a.Lk {
		vis[j] = a.see == nil || a.see(p, j)
		var dot float32
		for d := range a.D {
			dot += float32(q[a.at(a.seqMajorIn[0], b, h, i, d, a.H, a.Lq)] * k[a.at(a.seqMajorIn[1], b, a.kv(h), j, d, a.Hkv, a.Lk)])
		}
		t := dot * a.scale
		if a.softCap > 0 {
			t = a.softCap * float32(math.Tanh(float64(t/a.softCap)))
		}
		if a.slopes != nil {
			t -= float32(a.slopes[h] * a.dist(p, j))
		}
		s[j] = t
	}
	return s, vis
}

func (a attnPort) probs(q, k []float32, b, h, i int) ([]float32, float32) {
	s, vis := a.logits(q, k, b, h, i)
	m := float32(math.Inf(-1))
	for j, v := range s {
		if vis[j] && v > m {
			m = v
		}
	}
	var sum float32
	p := make([]float32, a.Lk)
	for j, v := range s {
		if vis[j] {
			p[j] = exp32(v - m)
			sum += p[j]
		}
	}
	for j := range p {
		p[j] /= sum
	}
	return p, m + log32(sum)
}

func (a attnPort) kvOf(q, k, v []float32) ([]float32, []float32) {
	if a.swapKV {
		return v, k
	}
	return k, v
}

func (a attnPort) forward(q, k, v []float32) (out, lse []float32) {
	k, v = a.kvOf(q, k, v)
	out = make([]float32, a.B*a.H*a.Lq*a.D)
	lse = make([]float32, a.B*a.H*a.Lq)
	for b := range a.B {
		for h := range a.H {
			for i := range a.Lq {
				p, l := a.probs(q, k, b, h, i)
				li := (b*a.H+h)*a.Lq + i
				if a.seqMajorOut {
					li = (b*a.Lq+i)*a.H + h
				}
				lse[li] = l
				for d := range a.D {
					var acc float32
					for j := range a.Lk {
						acc += float32(p[j] * v[a.at(a.seqMajorIn[2], b, a.kv(h), j, d, a.Hkv, a.Lk)])
					}
					out[a.at(a.seqMajorOut, b, h, i, d, a.H, a.Lq)] = acc
				}
			}
		}
	}
	return out, lse
}

// backward returns dq, dk, dv for the gradient dout of the output (dlse 0):
// dP = dout·vᵀ, dS = P ⊙ (dP − rowsum(dout ⊙ out)), dq = scale·dS·k,
// dk = scale·dSᵀ·q, dv = Pᵀ·dout. Heads-major throughout, no cap, no bias.
func (a attnPort) backward(q, k, v, dout []float32) (dq, dk, dv []float32) {
	k, v = a.kvOf(q, k, v)
	dq = make([]float32, len(q))
	dk = make([]float32, len(k))
	dv = make([]float32, len(v))
	for b := range a.B {
		for h := range a.H {
			g := a.kv(h)
			for i := range a.Lq {
				p, _ := a.probs(q, k, b, h, i)
				qi := ((b*a.H+h)*a.Lq + i) * a.D
				var delta float32
				for d := range a.D {
					var o float32
					for j := range a.Lk {
						o += float32(p[j] * v[((b*a.Hkv+g)*a.Lk+j)*a.D+d])
					}
					delta += float32(dout[qi+d] * o)
				}
				for j := range a.Lk {
					kj := ((b*a.Hkv+g)*a.Lk + j) * a.D
					var dp float32
					for d := range a.D {
						dp += float32(dout[qi+d] * v[kj+d])
						dv[kj+d] += float32(p[j] * dout[qi+d])
					}
					ds := p[j] * (dp - delta) * a.scale
					for d := range a.D {
						dq[qi+d] += float32(ds * k[kj+d])
						dk[kj+d] += float32(ds * q[qi+d])
					}
				}
			}
		}
	}
	if a.swapKV {
		dk, dv = dv, dk
	}
	return dq, dk, dv
}

// rotPort rotates rows of D values at their positions.
type rotPort struct {
	L, D, rotated int
	base          float64
	halves        bool    // pairs (i, i + r/2) instead of (2i, 2i + 1)
	first         int     // position of the first token
	divide        float64 // positions' angles divided by it (position interpolation)
	sign          float32 // +1: R(m); −1: R(−m)
	// angles32 forms the angles as a float32 framework port does [common
	// practice]: θ_i and the position as float32, the angle their float32
	// product, cos and sin of it rounded to float32.
	angles32 bool
}

func (r rotPort) apply(x []float32) []float32 {
	y := append([]float32(nil), x...)
	for row := 0; row < len(x)/r.D; row++ {
		m := float64(r.first + row%r.L)
		for i := 0; i < r.rotated/2; i++ {
			theta := math.Pow(r.base, -2*float64(i)/float64(r.rotated)) / r.divide
			c, s := float32(math.Cos(m*theta)), r.sign*float32(math.Sin(m*theta))
			if r.angles32 {
				a := float32(m) * float32(theta)
				c, s = float32(math.Cos(float64(a))), r.sign*float32(math.Sin(float64(a)))
			}
			a, b := 2*i, 2*i+1
			if r.halves {
				a, b = i, i+r.rotated/2
			}
			x0, x1 := x[row*r.D+a], x[row*r.D+b]
			y[row*r.D+a] = float32(x0*c) - float32(x1*s)
			y[row*r.D+b] = float32(x0*s) + float32(x1*c)
		}
	}
	return y
}

// sinPort is a sinusoidal table: PE(p, 2i) = sin(p/base^(2i/d)), PE(p,
// 2i+1) = cos(…) (Vaswani et al. 2017, arXiv 1706.03762 §3.5).
func sinPort(length, dim, first int, base float64, concatenated bool) []float32 {
	t := make([]float32, length*dim)
	for p := range length {
		for i := 0; i < dim/2; i++ {
			w := float64(p+first) / math.Pow(base, 2*float64(i)/float64(dim))
			s, c := 2*i, 2*i+1
			if concatenated {
				s, c = i, i+dim/2
			}
			t[p*dim+s] = float32(math.Sin(w))
			t[p*dim+c] = float32(math.Cos(w))
		}
	}
	return t
}

// rotTablesPort is cos(m·θ_i), sin(m·θ_i) for m = 0 … length−1.
func rotTablesPort(length, dim int, base float64) (cos, sin []float32) {
	for m := range length {
		for i := 0; i < dim/2; i++ {
			a := float64(m) * math.Pow(base, -2*float64(i)/float64(dim))
			cos = append(cos, float32(math.Cos(a)))
			sin = append(sin, float32(math.Sin(a)))
		}
	}
	return cos, sin
}

// alibiPort is the bias −m_h·dist(p_i, j), p_i = start + i.
func alibiPort(slopes []float32, lq, lk, start int, dist func(p, j int) float32) []float32 {
	var b []float32
	for _, m := range slopes {
		for i := range lq {
			for j := range lk {
				b = append(b, -m*dist(start+i, j))
			}
		}
	}
	return b
}

func causalDist(p, j int) float32    { return float32(p - j) }
func symmetricDist(p, j int) float32 { return float32(math.Abs(float64(p - j))) }
func pastOnlyDist(p, j int) float32 {
	if j > p {
		return 0
	}
	return float32(p - j)
}

// normPort is LayerNorm (rms = false) or RMSNorm over rows of d.
type normPort struct {
	d        int
	rms      bool
	eps      float32
	addRoot  bool // divide by √s² + ε instead of √(s² + ε)
	onePlus  bool // gain 1 + w
	swapWB   bool // reads the bias as the weight and the weight as the bias
	reversed bool // sums each row from its end
	onePass  bool // LayerNorm's σ² = Σx²/d − μ², Σx and Σx² in one pass [common practice]
}

func (n normPort) gain(w []float32, i int) float32 {
	if n.onePlus {
		return 1 + w[i]
	}
	return w[i]
}

// stats returns the mean (0 for RMSNorm), the denominator r and
// dr/d(s²)·2r, the factor the backward pass needs (r for ε in the root,
// √s² for ε added to it).
func (n normPort) stats(row []float32) (mu, r, s float32) {
	order := func(f func(v float32)) {
		for i := range row {
			if n.reversed {
				f(row[len(row)-1-i])
			} else {
				f(row[i])
			}
		}
	}
	var ss float32
	switch {
	case n.onePass && !n.rms:
		order(func(v float32) { mu += v; ss += float32(v * v) })
		mu /= float32(n.d)
		ss = max(ss/float32(n.d)-float32(mu*mu), 0)
	default:
		if !n.rms {
			order(func(v float32) { mu += v })
			mu /= float32(n.d)
		}
		order(func(v float32) { ss += float32((v - mu) * (v - mu)) })
		ss /= float32(n.d)
	}
	if n.addRoot {
		s = float32(math.Sqrt(float64(ss)))
		return mu, s + n.eps, s
	}
	r = float32(math.Sqrt(float64(ss + n.eps)))
	return mu, r, r
}

func (n normPort) forward(x, w, b []float32) []float32 {
	if n.swapWB {
		w, b = b, w
	}
	y := make([]float32, len(x))
	for o := 0; o < len(x); o += n.d {
		mu, r, _ := n.stats(x[o : o+n.d])
		for i := range n.d {
			v := (x[o+i] - mu) / r * n.gain(w, i)
			if b != nil {
				v += b[i]
			}
			y[o+i] = v
		}
	}
	return y
}

// backward: with c = x − μ, x̂ = c/r and g = γ ⊙ dy,
// dx_j = (g_j − [LayerNorm] mean g)/r − (Σ g_i c_i)·c_j/(d·r²·s),
// dγ = Σ dy ⊙ x̂ (times 1 for either weight form), dβ = Σ dy.
func (n normPort) backward(x, w, dy []float32) (dx, dw, db []float32) {
	dx = make([]float32, len(x))
	dw = make([]float32, n.d)
	db = make([]float32, n.d)
	for o := 0; o < len(x); o += n.d {
		mu, r, s := n.stats(x[o : o+n.d])
		var mg, gc float32
		for i := range n.d {
			g := float32(n.gain(w, i) * dy[o+i])
			mg += g
			gc += float32(g * (x[o+i] - mu))
			dw[i] += dy[o+i] * (x[o+i] - mu) / r
			db[i] += dy[o+i]
		}
		mg /= float32(n.d)
		if n.rms {
			mg = 0
		}
		for i := range n.d {
			g := float32(n.gain(w, i) * dy[o+i])
			dx[o+i] = (g-mg)/r - gc*(x[o+i]-mu)/(float32(n.d)*r*r*s)
		}
	}
	return dx, dw, db
}

// Activations and their derivatives.
func sigmoid32(x float32) float32 { return 1 / (1 + exp32(-x)) }

func geluErf(x float32) float32 {
	return x * float32(0.5*(1+math.Erf(float64(x)/math.Sqrt2)))
}

func geluErfGrad(x float32) float32 {
	xf := float64(x)
	return float32(0.5*(1+math.Erf(xf/math.Sqrt2)) + xf*math.Exp(-xf*xf/2)/math.Sqrt(2*math.Pi))
}

// geluTanh is x/2·(1 + tanh(√(2/π)(x + 0.044715x³))) (Hendrycks & Gimpel
// 2016, arXiv 1606.08415 §2).
func geluTanh(x float32) float32 {
	u := float32(math.Sqrt(2/math.Pi)) * (x + float32(0.044715*x*x*x))
	return x / 2 * (1 + float32(math.Tanh(float64(u))))
}

func geluTanhGrad(x float32) float32 {
	k := float32(math.Sqrt(2 / math.Pi))
	u := k * (x + float32(0.044715*x*x*x))
	t := float32(math.Tanh(float64(u)))
	return (1+t)/2 + float32(x/2*(1-float32(t*t))*k*(1+float32(3*0.044715*x*x)))
}

func swish(beta float32) func(float32) float32 {
	return func(x float32) float32 { return x * sigmoid32(beta*x) }
}

func swishGrad(beta float32) func(float32) float32 {
	return func(x float32) float32 {
		s := sigmoid32(beta * x)
		return s + float32(beta*x*s*(1-s))
	}
}

func mapf(x []float32, f func(float32) float32) []float32 {
	y := make([]float32, len(x))
	for i, v := range x {
		y[i] = f(v)
	}
	return y
}

// ffnPort is y = (φ(x·W1) [⊙ x·V])·W2, no biases.
type ffnPort struct {
	rows, in, hidden, out int
	gated                 bool
	act, grad             func(float32) float32
	outByIn               [3]bool // W1, V, W2 read as [out, in]
	swapGate              bool
	interleavedFused      bool // fused [in, 2·hidden] holds gate j at 2j and value j at 2j+1
}

// matmul returns the m×n product a·b, each element a float32 sum over
// the k terms in ascending order; with ta, a is read as the transpose of
// the k×m matrix it holds, with tb, b as that of the n×k one it holds (a
// weight stored out-by-in).
func matmul(a, b []float32, m, k, n int, ta, tb bool) []float32 {
	c := make([]float32, m*n)
	for i := range m {
		for j := range n {
			var acc float32
			for p := range k {
				x, y := a[i*k+p], b[p*n+j]
				if ta {
					x = a[p*m+i]
				}
				if tb {
					y = b[j*k+p]
				}
				acc += float32(x * y)
			}
			c[i*n+j] = acc
		}
	}
	return c
}

// unfuse splits a stacked fused [in, 2·hidden] matrix into W1 and V; with
// interleaved the port reads the units alternating.
func (f ffnPort) unfuse(fused []float32) (w1, v []float32) {
	for i := range f.in {
		for j := range f.hidden {
			g, u := j, f.hidden+j
			if f.interleavedFused {
				g, u = 2*j, 2*j+1
			}
			w1 = append(w1, fused[i*2*f.hidden+g])
			v = append(v, fused[i*2*f.hidden+u])
		}
	}
	return w1, v
}

func (f ffnPort) forward(x, w1, v, w2 []float32) []float32 {
	if f.swapGate {
		w1, v = v, w1
	}
	h := matmul(x, w1, f.rows, f.in, f.hidden, false, f.outByIn[0])
	z := mapf(h, f.act)
	if f.gated {
		u := matmul(x, v, f.rows, f.in, f.hidden, false, f.outByIn[1])
		for i := range z {
			z[i] *= u[i]
		}
	}
	return matmul(z, w2, f.rows, f.hidden, f.out, false, f.outByIn[2])
}

// backward returns dx, dW1, dV, dW2 (in-by-out storage, no transposed
// reads): dz = dy·W2ᵀ, dW2 = zᵀ·dy, dh = dz ⊙ u ⊙ φ′(h), du = dz ⊙ φ(h),
// dW1 = xᵀ·dh, dV = xᵀ·du, dx = dh·W1ᵀ + du·Vᵀ.
func (f ffnPort) backward(x, w1, v, w2, dy []float32) (dx, dw1, dv, dw2 []float32) {
	if f.swapGate {
		w1, v = v, w1
	}
	h := matmul(x, w1, f.rows, f.in, f.hidden, false, false)
	u := make([]float32, len(h))
	for i := range u {
		u[i] = 1
	}
	if f.gated {
		u = matmul(x, v, f.rows, f.in, f.hidden, false, false)
	}
	z := make([]float32, len(h))
	for i := range h {
		z[i] = f.act(h[i]) * u[i]
	}
	dz := matmul(dy, w2, f.rows, f.out, f.hidden, false, true)
	dw2 = matmul(z, dy, f.hidden, f.rows, f.out, true, false)
	dh := make([]float32, len(h))
	du := make([]float32, len(h))
	for i := range h {
		dh[i] = dz[i] * u[i] * f.grad(h[i])
		du[i] = dz[i] * f.act(h[i])
	}
	dw1 = matmul(x, dh, f.in, f.rows, f.hidden, true, false)
	dv = matmul(x, du, f.in, f.rows, f.hidden, true, false)
	dx = make([]float32, len(x))
	for r := range f.rows {
		for i := range f.in {
			for j := range f.hidden {
				dx[r*f.in+i] += float32(dh[r*f.hidden+j] * w1[i*f.hidden+j])
				if f.gated {
					dx[r*f.in+i] += float32(du[r*f.hidden+j] * v[i*f.hidden+j])
				}
			}
		}
	}
	if f.swapGate {
		dw1, dv = dv, dw1
	}
	return dx, dw1, dv, dw2
}

// groups calls f on every group of n values spaced stride apart of an x
// of size values, count groups in each block of block values: rows
// (stride 1) or columns (stride = row length). at(i) is the index in x of
// the group's i-th value; m is the group's largest value.
func groups(x []float32, count, n, stride, block int, f func(at func(i int) int, m float32)) {
	for b := 0; b < len(x); b += block {
		for g := range count {
			at := func(i int) int {
				if stride == 1 {
					return b + g*n + i
				}
				return b + g + i*stride
			}
			m := float32(math.Inf(-1))
			for i := range n {
				m = max(m, x[at(i)])
			}
			f(at, m)
		}
	}
}

// softmaxPort is a softmax over groups of n values spaced stride apart
// (see groups).
func softmaxPort(x []float32, count, n, stride, block int) []float32 {
	return softmaxIdiomPort(x, count, n, stride, block, nil, true)
}

// softmaxIdiomPort is softmaxPort with the running sum rounded by add
// after each addition (nil: float32), summed from the last value of the
// group to the first when add is set (an order other than the
// yardstick's), and the maximum subtracted only when shift is set.
func softmaxIdiomPort(x []float32, count, n, stride, block int, add func(a, b float32) float32, shift bool) []float32 {
	y := make([]float32, len(x))
	groups(x, count, n, stride, block, func(at func(int) int, m float32) {
		if !shift {
			m = 0
		}
		var s float32
		for k := range n {
			i := k
			if add != nil {
				i = n - 1 - k
			}
			y[at(i)] = exp32(x[at(i)] - m)
			if add != nil {
				s = add(s, y[at(i)])
			} else {
				s += y[at(i)]
			}
		}
		for i := range n {
			y[at(i)] /= s
		}
	})
	return y
}

// lsePort is the log-sum-exp of each group of softmaxPort, in order.
func lsePort(x []float32, count, n, stride, block int) []float32 {
	var out []float32
	groups(x, count, n, stride, block, func(at func(int) int, m float32) {
		var s float32
		for i := range n {
			s += exp32(x[at(i)] - m)
		}
		out = append(out, m+log32(s))
	})
	return out
}
