package kvcache

import (
	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/num"
)

// VerifyDraft scores s.Lq draft tokens in one pass: their queries q
// [Batch, HeadsQ, Lq, Dk] against the cache of s.Lk tokens, kCache
// [Batch, HeadsKV, Lk, Dk] and vCache, followed by the drafts' own keys
// and values kDraft [Batch, HeadsKV, Lq, Dk] and vDraft (all in o.Layout),
// draft i at position Lk + i seeing the cache and drafts 0 … i (causal
// order among themselves). It appends the drafts to the cache and returns
//
//	attention.Decode(q, k, v, {…, Lq, Lk + Lq, …}, Lk, o)
//
// which is, bit for bit (TestDraftIsSteps), the Lq single decoding steps
// in which step i appends draft i's key and value and decodes its query at
// position Lk + i: Decode's row i depends only on the keys up to Lk + i.
// Verifying several drafted tokens in one pass of the large model is the
// speculative decoding of Leviathan et al. 2023, "Fast Inference from
// Transformers via Speculative Decoding", arXiv 2211.17192.
//
// Special cases are those of attention.Decode, and:
//
//	Lq = 0                  empty outputs
//	slices of wrong lengths error ErrLength
//	(Lk + Lq)·HeadsKV·D beyond MaxElements per batch entry: error ErrShape
//
// Accuracy: that of attention.Decode.
func VerifyDraft(q, kCache, vCache, kDraft, vDraft []float64, s attention.Shape, o attention.Options) (out, lse []float64, err error) {
	return verifyDraft("VerifyDraft", ops64, q, kCache, vCache, kDraft, vDraft, s, o)
}

// VerifyDraft32 is the float32 instantiation of the same body as
// VerifyDraft, calling attention.Decode32: a yardstick, not a reference.
//
// Special cases are those of VerifyDraft.
func VerifyDraft32(q, kCache, vCache, kDraft, vDraft []float32, s attention.Shape, o attention.Options) (out, lse []float32, err error) {
	return verifyDraft("VerifyDraft32", ops32, q, kCache, vCache, kDraft, vDraft, s, o)
}

func verifyDraft[T num.Float](fn string, f ops[T], q, kc, vc, kd, vd []T, s attention.Shape, o attention.Options) (out, lse []T, err error) {
	if err := checkHeads(fn, s); err != nil {
		return nil, nil, err
	}
	if err := o.Layout.Check(); err != nil {
		return nil, nil, err
	}
	for _, c := range []struct {
		name, formula string
		got, l, d     int
	}{
		{"kCache", "Batch·HeadsKV·Lk·Dk", len(kc), s.Lk, s.Dk},
		{"vCache", "Batch·HeadsKV·Lk·Dv", len(vc), s.Lk, s.Dv},
		{"kDraft", "Batch·HeadsKV·Lq·Dk", len(kd), s.Lq, s.Dk},
		{"vDraft", "Batch·HeadsKV·Lq·Dv", len(vd), s.Lq, s.Dv},
	} {
		if err := checkLen(fn, c.name, c.got, c.formula, s.Batch, s.HeadsKV, c.l, c.d); err != nil {
			return nil, nil, err
		}
	}
	all := s
	all.Lk = s.Lk + s.Lq // both fit an int: their tensors exist
	if err := checkMax(fn, "the extended cache", "Batch·HeadsKV·(Lk+Lq)·max(Dk, Dv)", s.Batch, s.HeadsKV, all.Lk, max(s.Dk, s.Dv)); err != nil {
		return nil, nil, err
	}
	k := appendKeys(kc, kd, s, s.Dk, o.Layout)
	v := appendKeys(vc, vd, s, s.Dv, o.Layout)
	return f.decode(q, k, v, all, s.Lk, o)
}

// appendKeys is the cache [Batch, HeadsKV, Lk, d] with the s.Lq rows of
// draft [Batch, HeadsKV, Lq, d] after each head's rows, in layout.
func appendKeys[T num.Float](cache, draft []T, s attention.Shape, d int, layout attention.Layout) []T {
	n := s.Lk + s.Lq
	all := make([]T, s.Batch*s.HeadsKV*n*d)
	for b := range s.Batch {
		for g := range s.HeadsKV {
			for t := range n {
				src, l, tt := cache, s.Lk, t
				if t >= s.Lk {
					src, l, tt = draft, s.Lq, t-s.Lk
				}
				i := b*s.HeadsKV*l*d + rowOffset(layout, s.HeadsKV, l, g, tt, d)
				j := b*s.HeadsKV*n*d + rowOffset(layout, s.HeadsKV, n, g, t, d)
				copy(all[j:j+d], src[i:i+d])
			}
		}
	}
	return all
}
