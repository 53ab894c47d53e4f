//go:build unix

package server

import (
	"syscall"
	"time"
)

// processCPU returns the CPU time (user + system) used by this process, so
// benchmarks can report work independent of other load on the machine.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
