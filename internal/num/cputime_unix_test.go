//go:build unix

package num

import (
	"syscall"
	"time"
)

// processCPU is the CPU time the process has used, user and system, on
// every thread: on a shared machine it counts the cycles a benchmark got,
// not the time it waited for them.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
