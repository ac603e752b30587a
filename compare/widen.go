package compare

import "github.com/plumbref/plumb/internal/num"

// Widen returns x converted to float64, exactly: the way to hand a float32
// candidate (a kernel's output, or a kernel package's float32
// instantiation) to Diff, Check or Approx. nil stays nil.
func Widen[T Float](x []T) []float64 { return num.Convert[float64](x) }

// Narrow returns x rounded to float32, each value to the nearest float32,
// ties to even (Go's conversion; a value beyond float32's range becomes
// ±Inf): the way to hand the reference's float64 inputs to a float32
// kernel, and the values plumb gen -dtype float32 writes. Widen(Narrow(x))
// equals Float32.RoundSlice(x). nil stays nil.
func Narrow(x []float64) []float32 { return num.Convert[float32](x) }
