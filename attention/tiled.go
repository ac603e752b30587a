package attention

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/internal/elem"
	"github.com/plumbref/plumb/internal/num"
)

// ForwardTiled is Forward computed the way a tiled kernel computes it: each
// query row walks the keys in blocks of block keys, keeping a running
// maximum m, a running sum ℓ of e^{s−m} and an unnormalised output a
// (Milakov & Gimelshein 2018, "Online normalizer calculation for softmax",
// arXiv 1805.02867, Algorithm 3, extended to the weighted sum of V):
//
//	m₀ = σ_h, ℓ₀ = 1 (with a sink) or m₀ = −Inf, ℓ₀ = 0, a₀ = 0
//	for each block J:
//		m′ = max(m, max_{j∈J} s_j)
//		ℓ  = ℓ·e^{m−m′} + Σ_{j∈J} e^{s_j−m′}
//		a  = a·e^{m−m′} + Σ_{j∈J} e^{s_j−m′} V_j
//		m  = m′
//	O_i = a/ℓ,  lse_i = m + log ℓ
//
// A block with no visible key is skipped. The result equals Forward's in
// exact arithmetic; in float64 it differs by rounding only (the tests bound
// the normwise difference by 1e-14 and check it against the golden values).
// It is the code to read, and to diff against, when porting a tiled kernel:
// with the same block size the port's running m and ℓ follow the same
// recurrence.
//
// Special cases are those of Forward, and:
//
//	block < 1:    error ErrOption
//	block ≥ Lk:   one block, the direct form's arithmetic up to the order of
//	              normalisation
//
// Accuracy: the package documentation's table, measured on the golden
// cases for blocks of 1, 2, 3 and 64 keys.
func ForwardTiled(q, k, v []float64, s Shape, block int, o Options) (out, lse []float64, err error) {
	return runTiled("ForwardTiled", q, k, v, s, block, o)
}

// ForwardTiled32 is the float32 instantiation of the same body as
// ForwardTiled: the straightforward low-precision implementation the
// compare package uses as a yardstick; not a reference. The running
// maximum, sum and output are float32; exp and log are evaluated in
// float64 and rounded.
//
// Special cases are those of ForwardTiled.
//
// Accuracy, as a yardstick: the package documentation's table (inputs
// rounded to float32, logits near ±1000 left out, blocks of 1, 2, 3 and 64
// keys).
func ForwardTiled32(q, k, v []float32, s Shape, block int, o Options) (out, lse []float32, err error) {
	return runTiled("ForwardTiled32", q, k, v, s, block, o)
}

// runTiled validates a call of fn, the options before the block size, and
// runs the tiled form.
func runTiled[T num.Float](fn string, q, k, v []T, s Shape, block int, o Options) (out, lse []T, err error) {
	p, err := newPlan(fn, len(q), len(k), len(v), s, &o)
	if err != nil {
		return nil, nil, err
	}
	if block < 1 {
		return nil, nil, fmt.Errorf("%w: %s: block = %d; want ≥ 1 key per block", ErrOption, fn, block)
	}
	out, lse = forwardTiled(p, q, k, v, block)
	if err := p.overflowErr(fn, bitsOf[T]()); err != nil {
		return nil, nil, err
	}
	return out, lse, nil
}

// nanMax is max(a, b), NaN when either is NaN.
func nanMax[T num.Float](a, b T) T {
	if b > a || b != b {
		return b
	}
	return a
}

func forwardTiled[T num.Float](p *plan, q, k, v []T, block int) (out, lse []T) {
	s := p.s
	out = make([]T, s.oLen())
	lse = make([]T, s.lseLen())
	blk := make([]T, min(block, s.Lk))
	acc := make([]T, s.Dv)
	negInf := T(math.Inf(-1))
	for r := range p.rows {
		b, h, kv, i := r.b, r.h, r.kv, r.i
		m, l := T(p.sinkLogit(h)), T(0)
		if m != negInf {
			l = 1
		}
		clear(acc)
		for j0 := 0; j0 < s.Lk; j0 += block {
			x := blk[:min(block, s.Lk-j0)]
			logitsRow(p, q, k, b, h, i, j0, x, nil)
			bm := negInf
			for _, t := range x {
				bm = nanMax(bm, t)
			}
			if bm == negInf {
				continue
			}
			m2 := nanMax(m, bm)
			if alpha := T(elem.Exp(float64(m - m2))); alpha != 1 {
				l *= alpha
				for d := range acc {
					acc[d] *= alpha
				}
			}
			for jj, t := range x {
				e := T(elem.Exp(float64(t - m2)))
				if e == 0 {
					continue
				}
				l += e
				vj := v[p.vOff(b, kv, j0+jj):][:s.Dv]
				for d, y := range vj {
					acc[d] += T(e * y)
				}
			}
			m = m2
		}
		oi := out[p.oOff(b, h, i):][:s.Dv]
		if m == negInf {
			lse[p.lOff(b, h, i)] = negInf
			if p.emptyNaN {
				nanFill(oi)
			}
			continue
		}
		lse[p.lOff(b, h, i)] = m + T(elem.Log(float64(l)))
		for d := range oi {
			oi[d] = acc[d] / l
		}
	}
	return out, lse
}

// Merge combines two partial attention results over disjoint key sets A
// and B of the same queries into the result over A ∪ B (Milakov &
// Gimelshein 2018, arXiv 1805.02867, §3.1 Eq. (3)–(4), applied to
// normalised outputs): per row r,
//
//	M      = max(lseA_r, lseB_r)
//	lse_r  = M + log(e^{lseA_r − M} + e^{lseB_r − M})
//	O_r    = e^{lseA_r − lse_r} OA_r + e^{lseB_r − lse_r} OB_r
//
// outA and outB hold rows of dv values, one row per entry of lseA and lseB,
// in the same order (Forward's out and lse in either layout qualify). The
// merge is commutative, and associative up to rounding, so any number of
// key blocks can be folded in any order. A sink belongs to exactly one of
// the parts (it is a key without a value); with Forward that means passing
// Sinks to one call only.
//
// Special cases are:
//
//	both parts empty (lse −Inf):   O row 0, lse −Inf
//	one part empty:                the other part, exactly
//	NaN in either lse:             NaN row
//	lengths that do not agree, dv < 1:  error ErrLength or ErrShape
//
// Accuracy: the package documentation's table, measured on the golden
// merge cases computed at 50 digits (empty parts, lse 1400 apart, lse near
// 1000). Merging two Forward results over a
// split of the keys, at every split point, agrees with Forward over all
// keys within 1e-14 (TestMergeSplitsKeys).
func Merge(outA, lseA, outB, lseB []float64, dv int) (out, lse []float64, err error) {
	return merge("Merge", outA, lseA, outB, lseB, dv)
}

// Merge32 is the float32 instantiation of the same body as Merge: the
// straightforward low-precision implementation the compare package uses as
// a yardstick; not a reference. The weights are float32; exp and log are
// evaluated in float64 and rounded.
//
// Special cases are those of Merge.
//
// Accuracy, as a yardstick: the package documentation's table (the golden
// merge cases, parts rounded to float32).
func Merge32(outA, lseA, outB, lseB []float32, dv int) (out, lse []float32, err error) {
	return merge("Merge32", outA, lseA, outB, lseB, dv)
}

// checkMerge validates the lengths of a merge, for the exported function
// fn.
func checkMerge(fn string, oa, la, ob, lb, dv int) error {
	if dv < 1 {
		return fmt.Errorf("%w: %s: dv = %d; want ≥ 1", ErrShape, fn, dv)
	}
	if err := checkLen(ErrLength, fn, "lseB", lb, "len(lseA)", la); err != nil {
		return err
	}
	if err := checkLen(ErrLength, fn, "outA", oa, "len(lseA)·dv", la, dv); err != nil {
		return err
	}
	return checkLen(ErrLength, fn, "outB", ob, "len(lseB)·dv", lb, dv)
}

func merge[T num.Float](fn string, outA, lseA, outB, lseB []T, dv int) (out, lse []T, err error) {
	if err := checkMerge(fn, len(outA), len(lseA), len(outB), len(lseB), dv); err != nil {
		return nil, nil, err
	}
	out, lse = mergeRows(outA, lseA, outB, lseB, dv)
	return out, lse, nil
}

// mergeRows is the body of Merge.
func mergeRows[T num.Float](outA, lseA, outB, lseB []T, dv int) (out, lse []T) {
	out = make([]T, len(outA))
	lse = make([]T, len(lseA))
	negInf := T(math.Inf(-1))
	for r := range lse {
		a, b := lseA[r], lseB[r]
		m := nanMax(a, b)
		if m == negInf {
			lse[r] = negInf
			continue
		}
		wa := T(elem.Exp(float64(a - m)))
		wb := T(elem.Exp(float64(b - m)))
		sum := wa + wb
		lse[r] = m + T(elem.Log(float64(sum)))
		wa, wb = wa/sum, wb/sum
		o := out[r*dv:][:dv]
		if wa != 0 {
			for d, x := range outA[r*dv:][:dv] {
				o[d] = T(wa * x)
			}
		}
		if wb != 0 {
			for d, x := range outB[r*dv:][:dv] {
				o[d] += T(wb * x)
			}
		}
	}
	return out, lse
}
