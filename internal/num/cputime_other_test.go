//go:build !unix

package num

import "time"

// processCPU is not measured here: BenchmarkGemm reports wall time only.
func processCPU() time.Duration { return 0 }
