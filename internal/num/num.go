// Package num holds the numeric helpers that plumb's packages share.
package num

// Float is the element type a kernel body is written over. The float64
// instantiation is the reference; the float32 instantiation is the
// straightforward low-precision implementation that the compare package
// uses as a yardstick.
type Float interface {
	~float32 | ~float64
}
