//go:build !unix && !js && !wasip1

package main

import (
	"os"
	"time"
)

// selfCPU is not available here: callers fall back to wall time.
func selfCPU() time.Duration { return 0 }

func maxRSSBytes(*os.ProcessState) int64 { return 0 }
