//go:build !linux && !js && !wasip1

package main

import "time"

// treeCPU is not available without Linux's /proc.
func treeCPU(int) (time.Duration, bool) { return 0, false }

// treeMem and treeMemOf are not available without Linux's /proc.
func treeMem(int) (rss, hwm int64, ok bool) { return 0, 0, false }

func treeMemOf(int, map[int64]int64) (rss, hwm int64, ok bool) { return 0, 0, false }
