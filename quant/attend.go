package quant

import (
	"fmt"
	"math"
	"math/big"

	"github.com/plumbref/plumb/compare"
	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/internal/vocab"
)

// CacheTensor is a quantised key or value cache, [Batch, Heads, Len, Dim]
// row-major (heads-major: one row of Dim elements per token). Element i
// means c·s: c the value of its code (Code: the integer of the two's
// complement byte for CacheInt8, the OFP8 rev 1.0 value of the bit pattern
// for CacheE4M3 and CacheE5M2, decoded by compare.Format.Decode) and s the
// scale Scaling gives it:
//
//	Scaling         scales                 element (b, h, t, d) uses
//	per-tensor      1                      Scales[0]
//	per-head        Batch·Heads            Scales[b·Heads + h]
//	per-token       Batch·Heads·Len        Scales[(b·Heads + h)·Len + t]
//
// Every scale is a positive finite float32 value, so every c·s is exact in
// float64 (at most 8 + 24 significand bits). The int8 code −128 is
// accepted; QuantiseCache chooses codes in −127..127 (common practice for
// symmetric caches, so that the range is symmetric).
type CacheTensor struct {
	Batch, Heads, Len, Dim int
	Code                   CacheCode
	Scaling                CacheScaling
	Codes                  []uint8
	Scales                 []float64
}

// format returns the OFP8 format of an FP8 code, and its largest value.
func (c CacheCode) format() (compare.Format, float64) {
	switch c {
	case CacheE4M3:
		return compare.E4M3, 448
	case CacheE5M2:
		return compare.E5M2, 57344
	}
	return compare.Float64, 127
}

// scaleIndex returns the scale of element (b·Heads + h, t).
func (c *CacheTensor) scaleIndex(bh, t int) int {
	switch c.Scaling {
	case CachePerHead:
		return bh
	case CachePerToken:
		return bh*c.Len + t
	}
	return 0
}

// scales returns how many scales c's Scaling gives it.
func (c *CacheTensor) scaleCount() int {
	switch c.Scaling {
	case CachePerHead:
		return c.Batch * c.Heads
	case CachePerToken:
		return c.Batch * c.Heads * c.Len
	}
	return 1
}

func checkDims(fn, what string, dims ...int) (int, error) {
	n := 1
	for _, d := range dims {
		if d < 0 {
			return 0, fmt.Errorf("%w: %s: %s shape = %v; want dimensions ≥ 0", ErrSize, fn, what, dims)
		}
		if d > 0 && n > MaxElements/d {
			return 0, fmt.Errorf("%w: %s: %s shape = %v; want at most MaxElements = %d elements", ErrSize, fn, what, dims, MaxElements)
		}
		n *= d
	}
	return n, nil
}

// decode checks c for fn and returns its values, row-major.
func (c *CacheTensor) decode(fn, arg string) ([]float64, error) {
	n, err := checkDims(fn, arg, c.Batch, c.Heads, c.Len, c.Dim)
	if err != nil {
		return nil, err
	}
	if len(c.Codes) != n {
		return nil, fmt.Errorf("%w: %s: %s.Codes has %d values; want Batch·Heads·Len·Dim = %d", ErrLength, fn, arg, len(c.Codes), n)
	}
	if err := c.Code.Check(); err != nil {
		return nil, vocab.At(err, ErrOption, fn+": "+arg+".Code")
	}
	if err := c.Scaling.Check(); err != nil {
		return nil, vocab.At(err, ErrOption, fn+": "+arg+".Scaling")
	}
	if ns := c.scaleCount(); len(c.Scales) != ns {
		return nil, fmt.Errorf("%w: %s: %s.Scales has %d values; want %d (%v)", ErrLength, fn, arg, len(c.Scales), ns, c.Scaling)
	}
	for i, s := range c.Scales {
		if !ScaleFloat32.contains(s) {
			return nil, fmt.Errorf("%w: %s: %s.Scales[%d] = %v; want a positive finite float32 value", ErrScale, fn, arg, i, s)
		}
	}
	f, _ := c.Code.format()
	out := make([]float64, n)
	for bh := range c.Batch * c.Heads {
		for t := range c.Len {
			s := c.Scales[c.scaleIndex(bh, t)]
			for d := range c.Dim {
				i := (bh*c.Len+t)*c.Dim + d
				v := float64(int8(c.Codes[i]))
				if c.Code != CacheInt8 {
					v, _ = f.Decode(uint64(c.Codes[i])) // every 8-bit pattern decodes
				}
				out[i] = v * s // exact
			}
		}
	}
	return out, nil
}

// DecodeCache returns the values of c's codes times their scales, c·s,
// [Batch, Heads, Len, Dim] row-major, each exact in float64. A NaN FP8
// pattern gives NaN, an E5M2 infinity ±Inf.
//
// Special cases are:
//
//	a dimension 0               empty result
//	a negative dimension or more than MaxElements   error ErrSize
//	Codes or Scales of the wrong length             error ErrLength
//	an invalid Code or Scaling                      error ErrOption
//	a scale ≤ 0, NaN, ±Inf or not a float32 value   error ErrScale
func DecodeCache(c CacheTensor) ([]float64, error) { return c.decode("DecodeCache", "c") }

// QuantiseCache returns x, [batch, heads, n, dim] row-major, as a
// CacheTensor of the given code and scaling. Each block of elements that
// shares a scale (see CacheTensor) gets the scale
//
//	s = amax / qmax, rounded upward to float32,
//
// amax the block's largest magnitude and qmax 127 (int8), 448 (E4M3) or
// 57344 (E5M2), the largest finite magnitude of the codes (OFP8 rev 1.0
// for the FP8 formats); a block of zeros gets s = 1. Each element's code is
// then the nearest to x/s, decided exactly, ties to even: for int8 the
// nearest integer (at most qmax in magnitude, since s ≥ amax/qmax), for FP8
// the nearest value of the format (never beyond its largest, for the same
// reason; an element that rounds to zero gets the code of +0). Rounding s
// upward is the rule of Quantise and for the same reason: no element is
// clipped, so |x − c·s| ≤ s/2 for int8 and at most half a step of the
// format for FP8.
//
// Special cases are:
//
//	a dimension 0               empty codes
//	NaN or ±Inf in x            error ErrValue
//	an amax whose scale lies beyond float32             error ErrValue
//	len(x) ≠ batch·heads·n·dim                          error ErrLength
//	and those of DecodeCache
func QuantiseCache(x []float64, batch, heads, n, dim int, code CacheCode, scaling CacheScaling) (CacheTensor, error) {
	return quantiseCache("QuantiseCache", x, batch, heads, n, dim, code, scaling)
}

// QuantiseCache32 is QuantiseCache of float32 values (widened exactly).
//
// Special cases are those of QuantiseCache.
func QuantiseCache32(x []float32, batch, heads, n, dim int, code CacheCode, scaling CacheScaling) (CacheTensor, error) {
	return quantiseCache("QuantiseCache32", x, batch, heads, n, dim, code, scaling)
}

func quantiseCache[T num.Float](fn string, x []T, batch, heads, n, dim int, code CacheCode, scaling CacheScaling) (CacheTensor, error) {
	c := CacheTensor{Batch: batch, Heads: heads, Len: n, Dim: dim, Code: code, Scaling: scaling}
	size, err := checkDims(fn, "x", batch, heads, n, dim)
	if err != nil {
		return CacheTensor{}, err
	}
	if len(x) != size {
		return CacheTensor{}, fmt.Errorf("%w: %s: x has %d values; want batch·heads·n·dim = %d", ErrLength, fn, len(x), size)
	}
	if err := code.Check(); err != nil {
		return CacheTensor{}, vocab.At(err, ErrOption, fn+": code")
	}
	if err := scaling.Check(); err != nil {
		return CacheTensor{}, vocab.At(err, ErrOption, fn+": scaling")
	}
	amax := make([]float64, c.scaleCount())
	for i, v := range x {
		f := float64(v)
		if math.IsNaN(f) || math.IsInf(f, 0) {
			return CacheTensor{}, fmt.Errorf("%w: %s: x[%d] = %v; want a finite value", ErrValue, fn, i, f)
		}
		b := c.scaleIndex(i/(n*dim), i/dim%n)
		amax[b] = max(amax[b], math.Abs(f))
	}
	_, qmax := code.format()
	c.Scales = make([]float64, len(amax))
	for b, a := range amax {
		if a == 0 {
			c.Scales[b] = 1
			continue
		}
		s, ok := ScaleFloat32.up(quotientUp(a, qmax))
		if !ok {
			return CacheTensor{}, fmt.Errorf("%w: %s: a block's largest magnitude %v needs the scale %v/%v, beyond float32", ErrValue, fn, a, a, qmax)
		}
		c.Scales[b] = s
	}
	c.Codes = make([]uint8, size)
	for i, v := range x {
		c.Codes[i] = code.nearestCode(float64(v), c.Scales[c.scaleIndex(i/(n*dim), i/dim%n)])
	}
	return c, nil
}

// nearestCode returns the code whose value times s is nearest to x, ties
// to even, decided exactly; |x| ≤ qmax·s.
func (c CacheCode) nearestCode(x, s float64) uint8 {
	f, qmax := c.format()
	if c == CacheInt8 {
		return uint8(int8(clamp(nearest(x, s, HalfEven), -int(qmax), int(qmax))))
	}
	v := f.RoundSaturating(x / s)
	best := v
	target := new(big.Rat).SetFloat64(x)
	dist := func(u float64) *big.Rat {
		d := new(big.Rat).SetFloat64(u * s) // exact: at most 4 + 24 bits
		d.Sub(d, target)
		return d.Abs(d)
	}
	for _, u := range []float64{v - f.ULP(v), v + f.ULP(v), v - f.ULP(v)/2, v + f.ULP(v)/2} {
		if u = f.RoundSaturating(u); u == best {
			continue
		}
		switch dist(u).Cmp(dist(best)) {
		case -1:
			best = u
		case 0:
			if f.Encode(u)&1 == 0 {
				best = u
			}
		}
	}
	if best == 0 {
		best = 0 // +0: an element that rounds to zero gets the code of +0, not −0
	}
	return uint8(f.Encode(best))
}

// AppendCache returns the per-token cache c with n new tokens appended to
// every (batch entry, head): x is [Batch, Heads, n, Dim] row-major, each of
// its rows quantised with its own scale as QuantiseCache gives it, and
// the rows and scales already in c are kept as they are, bit for bit (a
// per-token cache never requantises what it holds). The result has
// Len = c.Len + n; c is not modified.
//
// Special cases are:
//
//	n = 0                       a copy of c
//	c.Scaling not per-token     error ErrOption (a shared scale would have to change with the new rows)
//	len(x) ≠ Batch·Heads·n·Dim  error ErrLength
//	c.Len + n beyond MaxElements                 error ErrSize
//	and those of QuantiseCache for x and of DecodeCache for c
func AppendCache(c CacheTensor, x []float64, n int) (CacheTensor, error) {
	return appendCache("AppendCache", c, x, n)
}

// AppendCache32 is AppendCache of float32 rows (widened exactly).
//
// Special cases are those of AppendCache.
func AppendCache32(c CacheTensor, x []float32, n int) (CacheTensor, error) {
	return appendCache("AppendCache32", c, x, n)
}

func appendCache[T num.Float](fn string, c CacheTensor, x []T, n int) (CacheTensor, error) {
	if _, err := c.decode(fn, "c"); err != nil {
		return CacheTensor{}, err
	}
	if c.Scaling != CachePerToken {
		return CacheTensor{}, fmt.Errorf("%w: %s: c.Scaling = %v; want per-token", ErrOption, fn, c.Scaling)
	}
	if n < 0 || n > MaxElements-c.Len {
		return CacheTensor{}, fmt.Errorf("%w: %s: n = %d; want 0 ≤ n ≤ MaxElements − c.Len = %d", ErrSize, fn, n, MaxElements-c.Len)
	}
	if _, err := checkDims(fn, "result", c.Batch, c.Heads, c.Len+n, c.Dim); err != nil {
		return CacheTensor{}, err
	}
	add, err := quantiseCache(fn, x, c.Batch, c.Heads, n, c.Dim, c.Code, CachePerToken)
	if err != nil {
		return CacheTensor{}, err
	}
	r := CacheTensor{Batch: c.Batch, Heads: c.Heads, Len: c.Len + n, Dim: c.Dim, Code: c.Code, Scaling: CachePerToken}
	for bh := range c.Batch * c.Heads {
		r.Codes = append(r.Codes, c.Codes[bh*c.Len*c.Dim:][:c.Len*c.Dim]...)
		r.Codes = append(r.Codes, add.Codes[bh*n*c.Dim:][:n*c.Dim]...)
		r.Scales = append(r.Scales, c.Scales[bh*c.Len:][:c.Len]...)
		r.Scales = append(r.Scales, add.Scales[bh*n:][:n]...)
	}
	return r, nil
}

// AttendOptions are the choices of Attend beyond its shapes.
type AttendOptions struct {
	// Scale multiplies the logits; 0 means 1/√Dim of the keys (Vaswani et
	// al. 2017, "Attention Is All You Need", arXiv 1706.03762, Eq. (1)).
	Scale float64
	// Causal lets query i see key j only when j ≤ i + Lk − Lq (the causal
	// mask aligned at the end of the keys, the query rows being the last
	// Lq of the Lk positions). A query that sees no key gives zeros.
	Causal bool
	// Prob quantises the softmax weights before their product with V.
	Prob ProbCode
}

// Attend returns softmax attention on a quantised key/value cache, q
// [Batch, HeadsQ, Lq, Dk] row-major (float64) and k, v CacheTensors of
// Batch, Heads, Len = Lk and Dim = Dk (k) or Dv (v), their codes
// dequantised exactly (DecodeCache) and the attention then computed in
// float64. Query head h reads key/value head h / (HeadsQ/Heads), contiguous
// groups (Ainslie et al. 2023, "GQA", arXiv 2305.13245, §2). For one query
// row, with τ = o.Scale:
//
//	x_j = τ·Σ_d q_d·k̂_jd            the logits, over the visible keys j
//	e_j = exp(x_j − max_j x_j)       ∈ (0, 1], the largest exactly 1
//	l   = Σ_j e_j
//	out = (Σ_j e_j·v̂_j) / l          (Prob = none)
//
// the softmax of Vaswani et al. 2017, Eq. (1), shifted by the row maximum
// (which does not change its value). With Prob = e4m3 (e5m2) the
// unnormalised weights are quantised before their product with V, with
// the fixed scale 1/Q, Q = 448 (57344), the largest E4M3 (E5M2) value, so
// that the row maximum e = 1 is the largest code:
//
//	c_j = RoundSaturating_F(fl(Q·e_j))   the E4M3 (E5M2) value nearest Q·e_j, ties to even
//	out = ((Σ_j c_j·v̂_j) / Q) / l
//
// and l is the sum of the unquantised weights (common practice for
// kernels that quantise P before P·V and accumulate the row sum from the
// unquantised weights: a convention, from memory). Every step is a float64
// operation in the order written (sums in increasing j, no fused
// multiply-add), so the reference models the quantisation of P exactly as
// defined: the same e_j give the same codes.
//
// Accuracy: with Prob = none, Attend equals attention.Forward on the
// dequantised keys and values within a few float64 roundings per term
// (the tests check 1e−12 relative to max|v̂|); the dequantisation itself is
// exact.
//
// Special cases are:
//
//	Batch, Lq or Lk = 0          empty or zero results
//	a query that sees no key     zeros
//	NaN or ±Inf in q or the caches  NaN or ±Inf as float64 arithmetic gives them
//	k and v of other Batch, Heads or Len, or Heads not dividing headsQ   error ErrSize
//	len(q) ≠ Batch·headsQ·lq·Dk  error ErrLength
//	a Scale NaN, ±Inf or < 0     error ErrOption
//	an invalid Prob              error ErrOption
//	and those of DecodeCache for k and v
func Attend(q []float64, headsQ, lq int, k, v CacheTensor, o AttendOptions) ([]float64, error) {
	return attend("Attend", q, headsQ, lq, k, v, o)
}

// Attend32 is the float32 instantiation of the same body as Attend: every
// product and sum rounded to float32, the dequantised keys and values
// rounded once to float32, exp evaluated in float64 and rounded. It is the
// yardstick a float32 kernel on a quantised cache is measured against, not
// a reference.
//
// Special cases are those of Attend.
func Attend32(q []float32, headsQ, lq int, k, v CacheTensor, o AttendOptions) ([]float32, error) {
	return attend("Attend32", q, headsQ, lq, k, v, o)
}

func attend[T num.Float](fn string, q []T, headsQ, lq int, k, v CacheTensor, o AttendOptions) ([]T, error) {
	kd, err := k.decode(fn, "k")
	if err != nil {
		return nil, err
	}
	vd, err := v.decode(fn, "v")
	if err != nil {
		return nil, err
	}
	if k.Batch != v.Batch || k.Heads != v.Heads || k.Len != v.Len {
		return nil, fmt.Errorf("%w: %s: v is [%d, %d, %d, ·]; want k's [Batch, Heads, Len] = [%d, %d, %d]", ErrSize, fn, v.Batch, v.Heads, v.Len, k.Batch, k.Heads, k.Len)
	}
	if k.Heads < 1 || headsQ < 1 || headsQ%k.Heads != 0 {
		return nil, fmt.Errorf("%w: %s: headsQ = %d, k.Heads = %d; want heads ≥ 1 with k.Heads dividing headsQ", ErrSize, fn, headsQ, k.Heads)
	}
	if k.Dim < 1 || v.Dim < 1 {
		return nil, fmt.Errorf("%w: %s: k.Dim = %d, v.Dim = %d; want both ≥ 1", ErrSize, fn, k.Dim, v.Dim)
	}
	nq, err := checkDims(fn, "q", k.Batch, headsQ, lq, k.Dim)
	if err != nil {
		return nil, err
	}
	if len(q) != nq {
		return nil, fmt.Errorf("%w: %s: q has %d values; want Batch·headsQ·lq·Dk = %d", ErrLength, fn, len(q), nq)
	}
	nout, err := checkDims(fn, "output", k.Batch, headsQ, lq, v.Dim)
	if err != nil {
		return nil, err
	}
	if math.IsNaN(o.Scale) || math.IsInf(o.Scale, 0) || o.Scale < 0 {
		return nil, fmt.Errorf("%w: %s: o.Scale = %v; want a finite value ≥ 0 (0: 1/√Dk)", ErrOption, fn, o.Scale)
	}
	if err := o.Prob.Check(); err != nil {
		return nil, vocab.At(err, ErrOption, fn+": o.Prob")
	}
	tau := T(o.Scale)
	if o.Scale == 0 {
		tau = T(1 / math.Sqrt(float64(k.Dim)))
	}
	lk, dk, dv := k.Len, k.Dim, v.Dim
	kt, vt := make([]T, len(kd)), make([]T, len(vd))
	for i, x := range kd {
		kt[i] = T(x)
	}
	for i, x := range vd {
		vt[i] = T(x)
	}
	var pf compare.Format
	var qp T
	switch o.Prob {
	case ProbE4M3:
		pf, qp = compare.E4M3, 448
	case ProbE5M2:
		pf, qp = compare.E5M2, 57344
	}
	out := make([]T, nout)
	x := make([]T, lk)
	acc := make([]T, dv)
	group := headsQ / k.Heads
	for b := range k.Batch {
		for h := range headsQ {
			kvh := b*k.Heads + h/group
			for i := range lq {
				qi := q[((b*headsQ+h)*lq+i)*dk:][:dk]
				hi := lk
				if o.Causal {
					hi = min(lk, max(0, i+lk-lq+1))
				}
				if hi == 0 {
					continue // no visible key: zeros
				}
				m := T(math.Inf(-1))
				for j := range hi {
					kj := kt[(kvh*lk+j)*dk:][:dk]
					var d T
					for c := range dk {
						d += T(qi[c] * kj[c])
					}
					x[j] = T(tau * d)
					m = max(m, x[j])
				}
				clear(acc)
				var l T
				for j := range hi {
					e := T(math.Exp(float64(x[j] - m)))
					l += e
					if o.Prob != ProbExact {
						e = T(pf.RoundSaturating(float64(T(qp * e))))
					}
					vj := vt[(kvh*lk+j)*dv:][:dv]
					for c := range dv {
						acc[c] += T(e * vj[c])
					}
				}
				oi := out[((b*headsQ+h)*lq+i)*dv:][:dv]
				for c := range dv {
					a := acc[c]
					if o.Prob != ProbExact {
						a /= qp
					}
					oi[c] = a / l
				}
			}
		}
	}
	return out, nil
}

// DecodeCache32 is DecodeCache with each exact value rounded once to
// float32.
//
// Special cases are those of DecodeCache.
func DecodeCache32(c CacheTensor) ([]float32, error) {
	x, err := c.decode("DecodeCache32", "c")
	return toFloat32(x), err
}
