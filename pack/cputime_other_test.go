//go:build !unix

package pack

// cpuTimeNs is not measured here.
func cpuTimeNs() int64 { return -1 }
