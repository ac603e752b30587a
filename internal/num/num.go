// Package num holds the numeric helpers that plumb's packages share.
package num

// Float is the element type a kernel body is written over. The float64
// instantiation is the reference; the float32 instantiation is the
// straightforward low-precision implementation that the compare package
// uses as a yardstick.
type Float interface {
	~float32 | ~float64
}

// Convert returns x converted element by element to To: exact from float32
// to float64, rounded to nearest (ties to even) from float64 to float32.
// nil stays nil, so an absent optional tensor stays absent.
func Convert[To, From Float](x []From) []To {
	if x == nil {
		return nil
	}
	out := make([]To, len(x))
	for i, v := range x {
		out[i] = To(v)
	}
	return out
}

// Unravel returns the index in a row-major array of the given shape of
// the element at flat offset off: the last index runs fastest. A zero
// dimension is skipped (its index stays 0), so the call is safe on an
// empty shape; an offset past the end wraps in the first dimension.
func Unravel(off int, shape []int) []int {
	idx := make([]int, len(shape))
	for k := len(shape) - 1; k >= 0; k-- {
		if shape[k] > 0 {
			idx[k] = off % shape[k]
			off /= shape[k]
		}
	}
	return idx
}
