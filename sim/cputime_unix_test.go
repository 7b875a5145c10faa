//go:build unix

package sim

import "syscall"

// processCPU is the CPU time this process has used (user + system), in
// seconds; benchmarks report it beside wall time since the machine is shared.
func processCPU() float64 {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return float64(ru.Utime.Nano()+ru.Stime.Nano()) / 1e9
}
