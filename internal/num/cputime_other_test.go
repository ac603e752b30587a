//go:build !unix

package num

import "time"

// processCPU is not measured here: BenchmarkMatrixProduct reports wall time only.
func processCPU() time.Duration { return 0 }
