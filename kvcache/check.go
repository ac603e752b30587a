package kvcache

import (
	"fmt"
	"math"

	"github.com/plumbref/plumb/attention"
	"github.com/plumbref/plumb/internal/num"
)

// ops are the attention functions a body of this package calls, at one
// element type: the float64 references, or their float32 twins.
type ops[T num.Float] struct {
	decode  func(q, k, v []T, s attention.Shape, pos int, o attention.Options) ([]T, []T, error)
	forward func(q, k, v []T, s attention.Shape, o attention.Options) ([]T, []T, error)
	merge   func(outA, lseA, outB, lseB []T, dv int) ([]T, []T, error)
}

var (
	ops64 = ops[float64]{attention.Decode, attention.Forward, attention.Merge}
	ops32 = ops[float32]{attention.Decode32, attention.Forward32, attention.Merge32}
)

// product is the product of the factors, each ≥ 0, and whether it is at
// most limit. It compares by division, so that it never wraps around.
func product(limit int, factors ...int) (int, bool) {
	for _, f := range factors {
		if f < 0 {
			return 0, false
		}
		if f == 0 {
			return 0, true
		}
	}
	p := 1
	for _, f := range factors {
		if p > limit/f {
			return 0, false
		}
		p *= f
	}
	return p, true
}

// checkLen returns an error wrapping ErrLength unless got is the product
// of dims, spelled by formula ("Batch·HeadsQ·Lq·Dk").
func checkLen(fn, name string, got int, formula string, dims ...int) error {
	want, ok := product(math.MaxInt, dims...)
	if ok && got == want {
		return nil
	}
	if !ok {
		return fmt.Errorf("%w: %s: %s has %d elements; want %s = %s, which overflows an int", ErrLength, fn, name, got, formula, num.Factors(dims...))
	}
	return fmt.Errorf("%w: %s: %s has %d elements; want %s", ErrLength, fn, name, got, num.Product(formula, dims...))
}

// checkMax returns an error wrapping ErrShape if a tensor of the given
// dims, spelled by formula, would exceed MaxElements.
func checkMax(fn, name, formula string, dims ...int) error {
	if _, ok := product(MaxElements, dims...); ok {
		return nil
	}
	return fmt.Errorf("%w: %s: %s would hold %s elements; want ≤ MaxElements = %d", ErrShape, fn, name, formula+" = "+num.Factors(dims...), MaxElements)
}

// checkHeads validates the heads and head dimensions of a call.
func checkHeads(fn string, s attention.Shape) error {
	switch {
	case s.Batch < 0:
		return fmt.Errorf("%w: %s: Shape.Batch = %d; want ≥ 0", ErrShape, fn, s.Batch)
	case s.HeadsKV < 1:
		return fmt.Errorf("%w: %s: Shape.HeadsKV = %d; want ≥ 1", ErrShape, fn, s.HeadsKV)
	case s.HeadsQ < 1 || s.HeadsQ%s.HeadsKV != 0:
		return fmt.Errorf("%w: %s: Shape.HeadsQ = %d; want a positive multiple of HeadsKV = %d", ErrShape, fn, s.HeadsQ, s.HeadsKV)
	case s.Dk < 1:
		return fmt.Errorf("%w: %s: Shape.Dk = %d; want ≥ 1", ErrShape, fn, s.Dk)
	case s.Dv < 1:
		return fmt.Errorf("%w: %s: Shape.Dv = %d; want ≥ 1", ErrShape, fn, s.Dv)
	case s.Lq < 0:
		return fmt.Errorf("%w: %s: Shape.Lq = %d; want ≥ 0", ErrShape, fn, s.Lq)
	case s.Lk < 0:
		return fmt.Errorf("%w: %s: Shape.Lk = %d; want ≥ 0", ErrShape, fn, s.Lk)
	}
	return nil
}

// rowOffset is the offset of row t of kv head g in a tensor of one batch
// entry with heads heads and length rows of d values, in layout l.
func rowOffset(l attention.Layout, heads, length, g, t, d int) int {
	if l == attention.SeqMajor {
		return (t*heads + g) * d
	}
	return (g*length + t) * d
}
