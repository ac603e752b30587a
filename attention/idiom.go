package attention

import (
	"math"

	"github.com/plumbref/plumb/internal/elem"
	"github.com/plumbref/plumb/internal/num"
)

// Idiom is a float32 port's arithmetic where it departs, on purpose and by
// a common idiom, from the straightforward float32 implementation: the
// format of its running sums and what its softmax subtracts before
// exponentiating. The zero value is the straightforward implementation.
//
// Only the float32 instantiations of the direct form honour it: Forward32
// and Decode32 (through Options.Idiom) and the methods Idiom.Softmax32 and
// Idiom.LogSumExp32. They are then the yardstick of a port that declares
// the idiom, not a reference. The float64 functions ignore it (an idiom
// describes a port's arithmetic, not the mathematics), and so do
// Backward32 and the fast and tiled forms, which always compute in plain
// float32.
type Idiom struct {
	// Accumulation is the format every running sum is rounded to after
	// each addition: the dot product of each logit, the softmax sum (the
	// sink's term included), and each element of the weighted sum of
	// values. Products and exponentials are float32 (the product of two
	// bfloat16 or binary16 inputs is exact in float32).
	Accumulation Accumulation
	// Shift is what the softmax subtracts from the logits: the row
	// maximum, or nothing. With ShiftNone the log-sum-exp is log(Σ e^s)
	// itself.
	Shift SoftmaxShift
}

// check validates the idiom's words for a call of fn, naming it as where
// ("Forward32: Options.Idiom").
func (id Idiom) check(where string) error {
	if err := accumulationWords.CheckAt(where+".Accumulation", id.Accumulation); err != nil {
		return err
	}
	return shiftWords.CheckAt(where+".Shift", id.Shift)
}

// Softmax32 is Softmax32 computed as a port of the idiom does (see Idiom):
// the yardstick of such a port, not a reference. The zero Idiom gives
// Softmax32's bits.
//
// Special cases are those of Softmax, and with ShiftNone: a logit above
// about 88.72 makes e^s +Inf and its row NaN; with AccumulateBinary16 a
// sum above 65504 (one logit above about 11.09) is +Inf, which makes the
// row 0 (or NaN where an e^s is +Inf too).
func (id Idiom) Softmax32(x []float32, n int) ([]float32, error) {
	const fn = "Idiom.Softmax32"
	if err := id.check(fn + ": Idiom"); err != nil {
		return nil, err
	}
	if id == (Idiom{}) {
		return softmax(x, n, fn)
	}
	if err := checkRows(n, len(x), fn); err != nil {
		return nil, err
	}
	out := append([]float32{}, x...)
	for r := 0; r < len(x); r += n {
		softmaxRowIdiom(out[r:r+n], float32(math.Inf(-1)), true, id)
	}
	return out, nil
}

// LogSumExp32 is LogSumExp32 computed as a port of the idiom does (see
// Idiom): with ShiftMax, m + log1p of the accumulated Σ_{j≠a} e^{x_j − m};
// with ShiftNone, log of the accumulated Σ_j e^{x_j}. The yardstick of
// such a port, not a reference; the zero Idiom gives LogSumExp32's bits.
//
// Special cases are those of LogSumExp, and with ShiftNone a logit above
// about 88.72 (about 11.09 with AccumulateBinary16) gives +Inf.
func (id Idiom) LogSumExp32(x []float32, n int) ([]float32, error) {
	const fn = "Idiom.LogSumExp32"
	if err := id.check(fn + ": Idiom"); err != nil {
		return nil, err
	}
	if id == (Idiom{}) {
		return logSumExp(x, n, fn)
	}
	if err := checkRows(n, len(x), fn); err != nil {
		return nil, err
	}
	out := make([]float32, len(x)/n)
	for r := range out {
		out[r] = lseRowIdiom(x[r*n:(r+1)*n], id)
	}
	return out, nil
}

// withIdiom is the direct form of Forward run with the idiom id: what
// Forward32 and Decode32 run.
func withIdiom[T num.Float](id Idiom) func(p *plan, q, k, v []T) (out, lse []T) {
	return func(p *plan, q, k, v []T) (out, lse []T) {
		p.idiom = id
		return forward(p, q, k, v)
	}
}

// accumulate returns acc + x as a running sum in the format a keeps: the
// exact sum rounded once to bfloat16 or binary16 (num.Narrow.Add), and the
// sum in T for AccumulateFloat32.
func accumulate[T num.Float](a Accumulation, acc, x T) T {
	switch a {
	case AccumulateBFloat16:
		return T(num.BFloat16.Add(float64(acc), float64(x)))
	case AccumulateBinary16:
		return T(num.Binary16.Add(float64(acc), float64(x)))
	}
	return acc + x
}

// softmaxRowIdiom is softmaxRow computed as a port of the idiom id does:
// the sum accumulated in id.Accumulation, the exponent s − m or s itself
// (ShiftNone). The maximum is still found, for the empty row and the NaN
// row, which the idiom does not change.
func softmaxRowIdiom[T num.Float](s []T, sink T, emptyNaN bool, id Idiom) (lse, psink T, empty bool) {
	m, empty := rowMax(s, sink, emptyNaN)
	if empty {
		return T(math.Inf(-1)), 0, true
	}
	shift := m
	if id.Shift == ShiftNone {
		shift = 0
	}
	if m != m {
		shift = m // a NaN logit makes the whole row NaN, shifted or not
	}
	var sum T
	for j, x := range s {
		e := T(elem.Exp(float64(x - shift)))
		s[j] = e
		sum = accumulate(id.Accumulation, sum, e)
	}
	es := T(elem.Exp(float64(sink - shift)))
	sum = accumulate(id.Accumulation, sum, es)
	for j := range s {
		s[j] /= sum
	}
	return shift + T(elem.Log(float64(sum))), es / sum, false
}

// lseRowIdiom is lseRow computed as a port of the idiom id does; see
// Idiom.LogSumExp32.
func lseRowIdiom[T num.Float](x []T, id Idiom) T {
	a, m, done := rowArgMax(x)
	if done {
		return m
	}
	var sum T
	if id.Shift == ShiftNone {
		for _, v := range x {
			sum = accumulate(id.Accumulation, sum, T(elem.Exp(float64(v))))
		}
		return T(elem.Log(float64(sum)))
	}
	for j, v := range x {
		if j != a {
			sum = accumulate(id.Accumulation, sum, T(elem.Exp(float64(v-m))))
		}
	}
	return m + T(elem.Log1p(float64(sum)))
}
