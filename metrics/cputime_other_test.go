//go:build !unix

package metrics

// cpuTimeNs is not available here: -1.
func cpuTimeNs() int64 { return -1 }
