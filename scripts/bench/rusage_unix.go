//go:build unix

package main

import (
	"os"
	"syscall"
	"time"
)

// selfCPU is the user plus system CPU time of this process so far.
func selfCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// maxRSSBytes is the peak resident set size of a finished child process.
// Linux reports ru_maxrss in KiB (getrusage(2)); macOS reports bytes.
func maxRSSBytes(ps *os.ProcessState) int64 {
	ru, ok := ps.SysUsage().(*syscall.Rusage)
	if !ok || ru == nil {
		return 0
	}
	if rssInBytes {
		return int64(ru.Maxrss)
	}
	return int64(ru.Maxrss) * 1024
}
