//go:build unix

package cluster

import (
	"syscall"
	"time"
)

// cpuTime returns the process's user plus system CPU time, so benchmarks
// can report a figure that does not depend on how busy the machine is.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
