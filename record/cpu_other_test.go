//go:build !unix

package record

import "time"

// cpuTime is not measured here; the CPU metrics are left out.
func cpuTime() time.Duration { return 0 }
