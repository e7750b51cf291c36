//go:build linux

package main

import (
	"os"
	"strconv"
	"strings"
	"time"
)

// clockTicks is USER_HZ, the unit of utime and stime in /proc/PID/stat
// (proc(5)); 100 on Linux for every common architecture.
const clockTicks = 100

// treeCPU is the user plus system CPU time of process root and all its
// live descendants, from /proc (proc(5): fields 14 utime and 15 stime of
// /proc/PID/stat, and 16, 17 for waited-for children). ok is false where
// /proc is not readable.
func treeCPU(root int) (time.Duration, bool) {
	ents, err := os.ReadDir("/proc")
	if err != nil {
		return 0, false
	}
	type proc struct{ ppid, ticks int64 }
	procs := map[int64]proc{}
	for _, e := range ents {
		pid, err := strconv.ParseInt(e.Name(), 10, 64)
		if err != nil {
			continue
		}
		b, err := os.ReadFile("/proc/" + e.Name() + "/stat")
		if err != nil {
			continue
		}
		// The command name is in parentheses and may hold spaces.
		s := string(b)
		i := strings.LastIndexByte(s, ')')
		if i < 0 {
			continue
		}
		f := strings.Fields(s[i+1:])
		// f[0] is field 3 (state): field n is f[n-3].
		if len(f) < 15 {
			continue
		}
		ppid, _ := strconv.ParseInt(f[1], 10, 64)
		var ticks int64
		for _, k := range []int{14, 15, 16, 17} {
			v, _ := strconv.ParseInt(f[k-3], 10, 64)
			ticks += v
		}
		procs[pid] = proc{ppid, ticks}
	}
	if _, ok := procs[int64(root)]; !ok {
		return 0, false
	}
	var total int64
	for pid, p := range procs {
		for q := pid; ; {
			if q == int64(root) {
				total += p.ticks
				break
			}
			pp, ok := procs[q]
			if !ok || pp.ppid == q || pp.ppid == 0 {
				break
			}
			q = pp.ppid
		}
	}
	return time.Duration(total) * time.Second / clockTicks, true
}
