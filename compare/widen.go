package compare

// Widen returns x converted to float64, exactly: the way to hand a float32
// candidate (a kernel's output, or a kernel package's float32
// instantiation) to Diff, Check or Approx.
func Widen[T Float](x []T) []float64 {
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = float64(v)
	}
	return out
}
