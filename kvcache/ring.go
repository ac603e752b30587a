package kvcache

import (
	"fmt"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/num"
)

// RingSlot is the slot of a ring of slots slots that the token at position
// pos is written to: pos mod slots. A ring keeps the last slots tokens of
// a sequence, for attention with a sliding window of slots keys (Beltagy
// et al. 2020, "Longformer: The Long-Document Transformer", arXiv
// 2004.05150, §3.1; keeping only the window's keys in a buffer that
// wraps around is common practice).
//
// Special cases are:
//
//	pos < 0 or slots < 1   error ErrLength or ErrShape
func RingSlot(pos, slots int) (int, error) {
	if slots < 1 {
		return 0, fmt.Errorf("%w: RingSlot: slots = %d; want ≥ 1", ErrShape, slots)
	}
	if pos < 0 {
		return 0, fmt.Errorf("%w: RingSlot: pos = %d; want ≥ 0", ErrLength, pos)
	}
	return pos % slots, nil
}

// RingPositions lists the position each slot of a ring of slots slots
// holds after the tokens at positions 0 … n−1 have been written, each to
// slot p mod slots: slot r holds the latest such p,
//
//	pos[r] = r                                  if r < n ≤ slots
//	pos[r] = −1                                 if n ≤ r (not yet written)
//	pos[r] = n − 1 − ((n − 1 − r) mod slots)    if n > slots
//
// so that after n ≥ slots tokens the ring holds exactly positions
// n−slots … n−1.
//
// Special cases are:
//
//	n = 0                  every slot −1
//	n < 0, slots < 1       error ErrLength, ErrShape
//	slots > MaxElements    error ErrShape, before anything is allocated
func RingPositions(n, slots int) ([]int, error) {
	if slots < 1 || slots > MaxElements {
		return nil, fmt.Errorf("%w: RingPositions: slots = %d; want 1 ≤ slots ≤ MaxElements = %d", ErrShape, slots, MaxElements)
	}
	if n < 0 {
		return nil, fmt.Errorf("%w: RingPositions: n = %d; want ≥ 0", ErrLength, n)
	}
	pos := make([]int, slots)
	for r := range pos {
		switch {
		case r >= n:
			pos[r] = -1
		case n <= slots:
			pos[r] = r
		default:
			pos[r] = n - 1 - (n-1-r)%slots
		}
	}
	return pos, nil
}

// RingWrite writes the key and value of the token at position pos, kNew
// [Batch, HeadsKV, 1, Dk] and vNew [Batch, HeadsKV, 1, Dv] in layout, into
// slot pos mod Lk of the rings kRing [Batch, HeadsKV, Lk, Dk] and vRing
// [Batch, HeadsKV, Lk, Dv] (in layout, s.Lk the number of slots), in
// place, overwriting the token at position pos − Lk. s.HeadsQ, s.Lq are
// not used.
//
// Special cases are:
//
//	pos < 0                 error ErrLength
//	Lk < 1                  error ErrShape
//	slices of wrong lengths error ErrLength; nothing is written
//
// Accuracy: exact (a copy).
func RingWrite(kRing, vRing, kNew, vNew []float64, s attention.Shape, pos int, layout attention.Layout) error {
	return ringWrite("RingWrite", kRing, vRing, kNew, vNew, s, pos, layout)
}

// RingWrite32 is the float32 instantiation of the same body as RingWrite.
//
// Special cases are those of RingWrite.
func RingWrite32(kRing, vRing, kNew, vNew []float32, s attention.Shape, pos int, layout attention.Layout) error {
	return ringWrite("RingWrite32", kRing, vRing, kNew, vNew, s, pos, layout)
}

func ringWrite[T num.Float](fn string, kRing, vRing, kNew, vNew []T, s attention.Shape, pos int, layout attention.Layout) error {
	if err := checkRing(fn, kRing, vRing, s, layout); err != nil {
		return err
	}
	if pos < 0 {
		return fmt.Errorf("%w: %s: pos = %d; want ≥ 0", ErrLength, fn, pos)
	}
	if err := checkLen(fn, "kNew", len(kNew), "Batch·HeadsKV·Dk", s.Batch, s.HeadsKV, s.Dk); err != nil {
		return err
	}
	if err := checkLen(fn, "vNew", len(vNew), "Batch·HeadsKV·Dv", s.Batch, s.HeadsKV, s.Dv); err != nil {
		return err
	}
	slot := pos % s.Lk
	for b := range s.Batch {
		for g := range s.HeadsKV {
			dst := b*s.HeadsKV*s.Lk*s.Dk + rowOffset(layout, s.HeadsKV, s.Lk, g, slot, s.Dk)
			src := (b*s.HeadsKV + g) * s.Dk
			copy(kRing[dst:dst+s.Dk], kNew[src:src+s.Dk])
			dst = b*s.HeadsKV*s.Lk*s.Dv + rowOffset(layout, s.HeadsKV, s.Lk, g, slot, s.Dv)
			src = (b*s.HeadsKV + g) * s.Dv
			copy(vRing[dst:dst+s.Dv], vNew[src:src+s.Dv])
		}
	}
	return nil
}

// checkRing validates the shape and the rings of a ring call.
func checkRing[T num.Float](fn string, kRing, vRing []T, s attention.Shape, layout attention.Layout) error {
	if err := layout.Check(); err != nil {
		return err
	}
	hq := s.HeadsQ
	if hq < 1 {
		hq = s.HeadsKV // RingWrite does not use HeadsQ
	}
	sh := s
	sh.HeadsQ, sh.Lq = hq, max(s.Lq, 0)
	if err := checkHeads(fn, sh); err != nil {
		return err
	}
	if s.Lk < 1 {
		return fmt.Errorf("%w: %s: Shape.Lk = %d; want ≥ 1 slot", ErrShape, fn, s.Lk)
	}
	if err := checkLen(fn, "kRing", len(kRing), "Batch·HeadsKV·Lk·Dk", s.Batch, s.HeadsKV, s.Lk, s.Dk); err != nil {
		return err
	}
	return checkLen(fn, "vRing", len(vRing), "Batch·HeadsKV·Lk·Dv", s.Batch, s.HeadsKV, s.Lk, s.Dv)
}

// AttendRing is one decoding step against a ring of s.Lk = W slots after
// the tokens at positions 0 … n−1 have been written to it (RingWrite),
// the newest at n − 1 being the query's own: q [Batch, HeadsQ, 1, Dk]
// attends to the L = min(n, W) positions n−L … n−1 the ring holds. It
// unrolls the ring into position order,
//
//	k[l] = kRing[(n − L + l) mod W],  l = 0 … L−1,
//
// and returns attention.Decode(q, k, v, s_L, L − 1, o), s_L being s with
// Lk = L. That is, bit for bit (TestRingIsSlidingWindow), the last row of
// attention over all n positions with the sliding window mask.Window(W),
// which shows the query the W keys p − W < j ≤ p, itself included: the
// logits of the window's keys are the same numbers (ALiBi sees the same
// distances p − j), in the same order, and the keys the window hides add
// exact zeros there. A bias, if any, is [BiasBatch, BiasHeads, 1, L] over
// the window's keys in position order.
//
// Special cases are those of attention.Decode, and:
//
//	n ≤ W                  the ring holds every position; plain causal decoding
//	n < 1                  error ErrLength
//	s.Lq ≠ 1               error ErrShape
//	o.Mask set             error ErrOption: the ring is the window
//
// Accuracy: that of attention.Decode.
func AttendRing(q, kRing, vRing []float64, s attention.Shape, n int, o attention.Options) (out, lse []float64, err error) {
	return attendRing("AttendRing", ops64, q, kRing, vRing, s, n, o)
}

// AttendRing32 is the float32 instantiation of the same body as
// AttendRing, calling attention.Decode32: a yardstick, not a reference.
//
// Special cases are those of AttendRing.
func AttendRing32(q, kRing, vRing []float32, s attention.Shape, n int, o attention.Options) (out, lse []float32, err error) {
	return attendRing("AttendRing32", ops32, q, kRing, vRing, s, n, o)
}

func attendRing[T num.Float](fn string, f ops[T], q, kRing, vRing []T, s attention.Shape, n int, o attention.Options) (out, lse []T, err error) {
	if err := checkRing(fn, kRing, vRing, s, o.Layout); err != nil {
		return nil, nil, err
	}
	switch {
	case s.Lq != 1:
		return nil, nil, fmt.Errorf("%w: %s: Shape.Lq = %d; want 1 (one decoding step)", ErrShape, fn, s.Lq)
	case n < 1:
		return nil, nil, fmt.Errorf("%w: %s: n = %d; want ≥ 1 (the query's own token is written)", ErrLength, fn, n)
	case !o.Mask.IsZero():
		return nil, nil, fmt.Errorf("%w: %s: Options.Mask = %v; want none (the ring of %d slots is the window)", ErrOption, fn, o.Mask, s.Lk)
	}
	w := s.Lk
	l := min(n, w)
	k := make([]T, s.Batch*s.HeadsKV*l*s.Dk)
	v := make([]T, s.Batch*s.HeadsKV*l*s.Dv)
	for b := range s.Batch {
		for g := range s.HeadsKV {
			for t := range l {
				slot := (n - l + t) % w
				src := b*s.HeadsKV*w*s.Dk + rowOffset(o.Layout, s.HeadsKV, w, g, slot, s.Dk)
				dst := b*s.HeadsKV*l*s.Dk + rowOffset(o.Layout, s.HeadsKV, l, g, t, s.Dk)
				copy(k[dst:dst+s.Dk], kRing[src:src+s.Dk])
				src = b*s.HeadsKV*w*s.Dv + rowOffset(o.Layout, s.HeadsKV, w, g, slot, s.Dv)
				dst = b*s.HeadsKV*l*s.Dv + rowOffset(o.Layout, s.HeadsKV, l, g, t, s.Dv)
				copy(v[dst:dst+s.Dv], vRing[src:src+s.Dv])
			}
		}
	}
	sl := s
	sl.Lk = l
	return f.decode(q, k, v, sl, l-1, o)
}
