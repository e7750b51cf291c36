//go:build linux

package main

import (
	"errors"
	"os"
	"strconv"
	"strings"
	"time"
)

// clockTicks is USER_HZ, the unit of utime and stime in /proc/PID/stat
// (proc(5)); 100 on Linux for every common architecture.
const clockTicks = 100

// procTree returns process root and its live descendants, each with the
// fields of its /proc/PID/stat after the command name (f[0] is field 3,
// state: field n is f[n-3]). ok is false where /proc is not readable or
// root is not running.
func procTree(root int) (map[int64][]string, bool) {
	if root < 0 {
		return nil, false
	}
	ents, err := os.ReadDir("/proc")
	if err != nil {
		return nil, false
	}
	stat := map[int64][]string{}
	parent := map[int64]int64{}
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
		if len(f) < 2 {
			continue
		}
		stat[pid] = f
		parent[pid], _ = strconv.ParseInt(f[1], 10, 64)
	}
	if _, ok := parent[int64(root)]; !ok {
		return nil, false
	}
	tree := map[int64][]string{}
	for pid, f := range stat {
		for q, hops := pid, 0; hops < 64; hops++ {
			if q == int64(root) {
				tree[pid] = f
				break
			}
			pp, ok := parent[q]
			if !ok || pp == q || pp == 0 {
				break
			}
			q = pp
		}
	}
	return tree, true
}

// treeCPU is the user plus system CPU time of process root and all its
// live descendants, from /proc (proc(5): fields 14 utime and 15 stime of
// /proc/PID/stat, and 16, 17 for waited-for children). ok is false where
// /proc is not readable.
func treeCPU(root int) (time.Duration, bool) {
	tree, ok := procTree(root)
	if !ok {
		return 0, false
	}
	var total int64
	for _, f := range tree {
		if len(f) < 15 {
			continue
		}
		for _, k := range []int{14, 15, 16, 17} {
			v, _ := strconv.ParseInt(f[k-3], 10, 64)
			total += v
		}
	}
	return time.Duration(total) * time.Second / clockTicks, true
}

// treeMem is the sum of VmRSS and of VmHWM (proc(5), /proc/PID/status, kB)
// over process root and its live descendants; ok is false where /proc is
// not readable.
func treeMem(root int) (rss, hwm int64, ok bool) {
	return treeMemOf(root, nil)
}

// treeMemOf is treeMem that also records each process's VmRSS in per (when
// not nil), by pid.
func treeMemOf(root int, per map[int64]int64) (rss, hwm int64, ok bool) {
	tree, ok := procTree(root)
	if !ok {
		return 0, 0, false
	}
	for pid := range tree {
		r, h, err := statusMem(pid)
		if err != nil {
			continue
		}
		if per != nil {
			per[pid] = r
		}
		rss += r
		hwm += h
	}
	return rss, hwm, true
}

// statusMem reads VmRSS and VmHWM of one process, in bytes.
func statusMem(pid int64) (rss, hwm int64, err error) {
	b, err := os.ReadFile("/proc/" + strconv.FormatInt(pid, 10) + "/status")
	if err != nil {
		return 0, 0, err
	}
	for _, line := range strings.Split(string(b), "\n") {
		k, v, ok := strings.Cut(line, ":")
		if !ok || (k != "VmRSS" && k != "VmHWM") {
			continue
		}
		f := strings.Fields(v)
		if len(f) < 1 {
			continue
		}
		x, err := strconv.ParseInt(f[0], 10, 64)
		if err != nil {
			continue
		}
		if k == "VmRSS" {
			rss = x << 10
		} else {
			hwm = x << 10
		}
	}
	if rss == 0 && hwm == 0 {
		return 0, 0, errors.New("no VmRSS")
	}
	return rss, hwm, nil
}
