//go:build !unix

package sim

// processCPU is not measured on this system.
func processCPU() float64 { return 0 }
