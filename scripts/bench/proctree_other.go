//go:build !linux && !js && !wasip1

package main

import "time"

// treeCPU is not available without Linux's /proc.
func treeCPU(int) (time.Duration, bool) { return 0, false }
