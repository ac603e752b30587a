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
