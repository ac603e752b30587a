package attention

import (
	"fmt"

	"github.com/plumbref/plumb/internal/num"
	"github.com/plumbref/plumb/mask"
)

// Forward is scaled dot-product attention (Vaswani et al. 2017, "Attention
// Is All You Need", arXiv 1706.03762, §3.2.1 Eq. (1) and §3.2.2), the
// reference: for query head h of batch entry b and query row i,
//
//	s_j   = logit of key j, built as Options says (scale, cap, bias, ALiBi, mask)
//	lse_i = log(e^{σ_h} + Σ_j e^{s_j})               (σ_h = −Inf without sinks)
//	P_ij  = e^{s_j − lse_i}
//	O_i   = Σ_j P_ij V_j                              (V of kv head kv(h))
//
// It returns the output O, [Batch, HeadsQ, Lq, Dv] in o.Layout, and the
// natural log-sum-exp of each row, [Batch, HeadsQ, Lq] (HeadsMajor) or
// [Batch, Lq, HeadsQ] (SeqMajor), so that O row r goes with lse[r] in both
// layouts. The log-sum-exp includes the sink, and is what Merge and
// Backward's dLSE refer to.
//
// This is the direct form: one row at a time, the logits computed as
// written, the maximum subtracted before exp (which changes no value
// mathematically and keeps e^{s−max} ≤ 1), the probabilities normalised
// before they weight V. Its inner loops are the definition:
//
//	for j := range keys {            // s_j as above, −Inf where hidden
//		m = max(m, s_j)
//	}
//	for j := range keys {
//		P_j = exp(s_j − m); sum += P_j
//	}
//	sum += exp(σ_h − m)
//	P_j /= sum; lse = m + log(sum)
//	O_i = Σ_j P_j V_j                // keys with P_j = 0 are skipped
//
// Special cases are:
//
//	a row that sees no key (mask, −Inf bias, Lk = 0), and no sink:
//	                            O row 0 (EmptyRowZero) or NaN (EmptyRowNaN), lse −Inf
//	a row that sees no key but has a finite sink:  O row 0, lse σ_h
//	logits near ±1000:          exact: only differences s_j − max are exponentiated
//	NaN in a visible logit:     that row's O and lse are NaN
//	+Inf in a visible logit:    that row's O and lse are NaN (Inf − Inf)
//	−Inf in a visible logit:    its key has weight 0; a row of −Inf logits sees no key
//	NaN or ±Inf in q, k or the bias: the logits it reaches are NaN or ±Inf, as above
//	Inf or NaN in a V row of weight 0 (hidden key): ignored
//	a logit of finite inputs overflows to NaN or ±Inf: error ErrOverflow (see Options)
//	Batch = 0 or Lq = 0:        empty outputs
//
// Accuracy: the package documentation's table, measured on the golden
// cases computed at 50 digits.
func Forward(q, k, v []float64, s Shape, o Options) (out, lse []float64, err error) {
	return runForward("Forward", q, k, v, s, o, forward)
}

// Forward32 is the float32 instantiation of the same body as Forward: the
// straightforward low-precision implementation the compare package uses as
// a yardstick; not a reference. Every product and sum is rounded to
// float32; exp, log, tanh and cosh are evaluated in float64 and rounded.
// With o.Idiom set it computes as a port of that idiom does instead: its
// running sums rounded to a narrower format, or its softmax unshifted
// (see Idiom); the yardstick of such a port.
//
// Special cases are those of Forward.
//
// Accuracy, as a yardstick: the package documentation's table (inputs
// rounded to float32, logits near ±1000 left out).
func Forward32(q, k, v []float32, s Shape, o Options) (out, lse []float32, err error) {
	return runForward("Forward32", q, k, v, s, o, withIdiom[float32](o.Idiom))
}

// runForward validates a call of the exported function fn and runs body,
// one of the forward forms, on it.
func runForward[T num.Float](fn string, q, k, v []T, s Shape, o Options, body func(p *plan, q, k, v []T) (out, lse []T)) (out, lse []T, err error) {
	p, err := newPlan(fn, len(q), len(k), len(v), s, &o)
	if err != nil {
		return nil, nil, err
	}
	out, lse = body(p, q, k, v)
	if err := p.overflowErr(fn, bitsOf[T]()); err != nil {
		return nil, nil, err
	}
	return out, lse, nil
}

// bitsOf is the width of T, 32 or 64.
func bitsOf[T num.Float]() int {
	var z T
	if _, ok := any(z).(float32); ok {
		return 32
	}
	return 64
}

// Grads are the gradients of a loss with respect to the inputs of Forward.
// DQ, DK and DV have the shapes and layout of Q, K and V. DSinks has one
// entry per query head when Options.Sinks is set, DBias the shape of
// Options.Bias ([BiasBatch, BiasHeads, Lq, Lk], summed over the broadcast
// dimensions) when a bias is set; otherwise they are nil.
type Grads struct {
	DQ, DK, DV    []float64
	DSinks, DBias []float64
}

// Grads32 is Grads for Backward32.
type Grads32 struct {
	DQ, DK, DV    []float32
	DSinks, DBias []float32
}

// Backward is the gradient of Forward, the reference. Given dOut = ∂L/∂O
// and, optionally, dLSE = ∂L/∂lse (nil means 0), it returns ∂L/∂Q, ∂L/∂K,
// ∂L/∂V and, when present, the gradients of the sink logits and the bias,
// by the standard calculus of softmax (stated here because no single paper
// owns it):
//
//	dV_j  = Σ_i P_ij dO_i
//	dP_ij = dO_i · V_j
//	D_i   = Σ_j P_ij dP_ij                    (= dO_i · O_i)
//	dS_ij = P_ij (dP_ij − D_i + dLSE_i)
//	dBias_ij = dS_ij                          (summed over broadcast dims)
//	dσ_h  = Σ_{b,i} P_sink,i (dLSE_i − D_i),  P_sink,i = e^{σ_h − lse_i}
//	dT_ij = dS_ij · sech²(t_ij / c)           (soft-cap; 1 without a cap)
//	dQ_i  = Scale Σ_j dT_ij K_j,  dK_j = Scale Σ_i dT_ij Q_i
//
// dK and dV of a kv head are summed over every query head that reads it
// (grouped attention). The forward pass is recomputed; dOut has the shape
// and layout of O, dLSE that of lse.
//
// Special cases are:
//
//	an empty row under EmptyRowZero: contributes nothing
//	an empty row under EmptyRowNaN:  its dQ row, and the dK and dV of its
//	                                 kv head in that batch entry, are NaN
//	a key of weight 0 (hidden, −Inf bias, exp underflow): contributes nothing
//	ALiBi slopes, Scale, SoftCap: treated as constants (no gradient)
//
// Accuracy: the package documentation's table, measured on the golden
// cases computed at 50 digits; dQ and dK of the cases with logits near
// ±1000 are limited by the conditioning of the problem once the logits are
// rounded to float64 (see there).
func Backward(q, k, v, dOut, dLSE []float64, s Shape, o Options) (Grads, error) {
	return grads64(runBackward("Backward", q, k, v, dOut, dLSE, s, o, backward))
}

// Backward32 is the float32 instantiation of the same body as Backward: the
// straightforward low-precision implementation the compare package uses as
// a yardstick; not a reference. It computes in plain float32 whatever
// o.Idiom says: the idioms are modelled for the forward pass only.
//
// Special cases are those of Backward.
//
// Accuracy, as a yardstick: the package documentation's table (inputs
// rounded to float32, logits near ±1000 left out).
func Backward32(q, k, v, dOut, dLSE []float32, s Shape, o Options) (Grads32, error) {
	return grads32(runBackward("Backward32", q, k, v, dOut, dLSE, s, o, backward))
}

// runBackward validates a call of the exported function fn, with the
// gradients dOut and dLSE (nil: zero) beside q, k and v, and runs body, one
// of the backward forms, on it.
func runBackward[T num.Float](fn string, q, k, v, dOut, dLSE []T, s Shape, o Options, body func(p *plan, q, k, v, dout, dlse []T) grads[T]) (grads[T], error) {
	p, err := newPlan(fn, len(q), len(k), len(v), s, &o)
	if err != nil {
		return grads[T]{}, err
	}
	if err := checkLen(ErrLength, fn, "dOut", len(dOut), "Batch·HeadsQ·Lq·Dv", s.Batch, s.HeadsQ, s.Lq, s.Dv); err != nil {
		return grads[T]{}, err
	}
	if dLSE != nil {
		if err := checkLen(ErrLength, fn, "dLSE", len(dLSE), "Batch·HeadsQ·Lq", s.Batch, s.HeadsQ, s.Lq); err != nil {
			return grads[T]{}, err
		}
	}
	g := body(p, q, k, v, dOut, dLSE)
	if err := p.overflowErr(fn, bitsOf[T]()); err != nil {
		return grads[T]{}, err
	}
	return g, nil
}

// grads64 and grads32 return the gradients of runBackward in the exported
// types.
func grads64(g grads[float64], err error) (Grads, error) {
	return Grads{DQ: g.dq, DK: g.dk, DV: g.dv, DSinks: g.dsinks, DBias: g.dbias}, err
}

func grads32(g grads[float32], err error) (Grads32, error) {
	return Grads32{DQ: g.dq, DK: g.dk, DV: g.dv, DSinks: g.dsinks, DBias: g.dbias}, err
}

// Decode is attention of new queries against a key/value cache: the Lq
// queries sit at key positions pos, pos+1, …, pos+Lq−1 of the Lk cached
// keys, and query i sees key j iff j ≤ pos+i and o.Mask (if set) shows it,
// for instance a Window. It is Forward with o.Align = mask.AlignStart,
// o.Offset = pos and the causal mask intersected with o.Mask; the Align and
// Offset of o are ignored. Keys after pos+Lq−1, if the cache holds any, are
// hidden.
//
// With pos = Lk − Lq this is the last Lq rows of a causal prefill over all
// Lk keys; with Lq = 1 it is one decoding step.
//
// Special cases are those of Forward, and:
//
//	pos < 0 or pos+Lq > Lk:  error ErrOption
//
// Accuracy: that of Forward. Decoding one token at a time reproduces the
// rows of the causal prefill bit for bit (TestDecodeReproducesPrefill).
func Decode(q, kCache, vCache []float64, s Shape, pos int, o Options) (out, lse []float64, err error) {
	return decode("Decode", q, kCache, vCache, s, pos, o)
}

// Decode32 is the float32 instantiation of the same body as Decode (that
// of Forward32): the straightforward low-precision implementation the
// compare package uses as a yardstick; not a reference.
//
// Special cases are those of Decode. Accuracy, as a yardstick: that of
// Forward32. It honours o.Idiom as Forward32 does. Decoding one token at a time reproduces the rows of the
// causal prefill of Forward32 bit for bit.
func Decode32(q, kCache, vCache []float32, s Shape, pos int, o Options) (out, lse []float32, err error) {
	return decode("Decode32", q, kCache, vCache, s, pos, o)
}

func decode[T num.Float](fn string, q, k, v []T, s Shape, pos int, o Options) (out, lse []T, err error) {
	if err := decodeOptions(fn, s, pos, &o); err != nil {
		return nil, nil, err
	}
	body := forward[T]
	if bitsOf[T]() == 32 {
		body = withIdiom[T](o.Idiom) // Decode32 honours the idiom, as Forward32 does
	}
	return runForward(fn, q, k, v, s, o, body)
}

// decodeOptions turns the options of a decoding call into those of
// Forward: the queries at key positions pos …, the causal mask
// intersected with o.Mask.
func decodeOptions(fn string, s Shape, pos int, o *Options) error {
	if pos < 0 || pos+s.Lq > s.Lk {
		return fmt.Errorf("%w: %s: pos = %d; want 0 ≤ pos ≤ Lk − Lq = %d (the Lq = %d queries sit at positions pos … pos+Lq−1 of the Lk = %d cached keys)",
			ErrOption, fn, pos, s.Lk-s.Lq, s.Lq, s.Lk)
	}
	m := mask.Causal()
	if !isZeroMask(o.Mask) {
		var err error
		m, err = mask.Intersect(m, o.Mask)
		if err != nil {
			return fmt.Errorf("%w: %s: Options.Mask = %v; want a mask that the causal mask can be intersected with (%w)", ErrMask, fn, o.Mask, err)
		}
	}
	o.Mask, o.Align, o.Offset = m, mask.AlignStart, pos
	return nil
}

// isZeroMask reports whether m is the zero Mask, which Options reads as
// mask.Full().
func isZeroMask(m mask.Mask) bool { return m.IsZero() }
