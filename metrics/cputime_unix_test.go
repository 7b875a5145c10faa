//go:build unix

package metrics

import "syscall"

// cpuTimeNs is the process's user plus system CPU time, for benchmarks on a
// shared machine where wall time per op includes waiting for a core; -1
// when it cannot be read.
func cpuTimeNs() int64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return -1
	}
	return ru.Utime.Nano() + ru.Stime.Nano()
}
