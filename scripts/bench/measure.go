//go:build !js && !wasip1

package main

import (
	"bytes"
	"context"
	"fmt"
	"math"
	"os/exec"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"time"
)

// sample is one timed run.
type sample struct {
	Wall, CPU time.Duration
	MaxRSS    int64 // bytes; subprocesses only
}

// secs returns the run's time on the chosen clock: CPU time (user + system
// of the measured process) when it is known, else wall time.
func (s sample) secs(clock string) float64 {
	if clock == "cpu" && s.CPU > 0 {
		return s.CPU.Seconds()
	}
	return s.Wall.Seconds()
}

// timeIt runs f in this process and measures it. A GC first keeps the
// previous step's garbage out of the measurement.
func timeIt(f func() error) (sample, error) {
	runtime.GC()
	c0, t0 := selfCPU(), time.Now()
	err := f()
	wall, cpu := time.Since(t0), selfCPU()-c0
	return sample{Wall: wall, CPU: cpu}, err
}

// runCmd runs a subprocess to completion and measures it; stdout is
// returned, stderr is folded into the error when the command fails.
func runCmd(ctx context.Context, cmd *exec.Cmd) (sample, []byte, error) {
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	if ctx != nil {
		if dl, ok := ctx.Deadline(); ok && time.Until(dl) <= 0 {
			return sample{}, nil, ctx.Err()
		}
	}
	t0 := time.Now()
	err := cmd.Run()
	wall := time.Since(t0)
	s := sample{Wall: wall}
	if ps := cmd.ProcessState; ps != nil {
		s.CPU = ps.UserTime() + ps.SystemTime()
		s.MaxRSS = maxRSSBytes(ps)
	}
	if err != nil {
		msg := strings.TrimSpace(errb.String())
		if len(msg) > 600 {
			msg = "..." + msg[len(msg)-600:]
		}
		return s, out.Bytes(), fmt.Errorf("%s: %v: %s", strings.Join(shortArgs(cmd.Args), " "), err, msg)
	}
	return s, out.Bytes(), nil
}

func shortArgs(a []string) []string {
	if len(a) > 3 {
		return a[:3]
	}
	return a
}

// stats are the median, minimum and maximum of finite values.
func stats(v []float64) (med, lo, hi float64, ok bool) {
	var f []float64
	for _, x := range v {
		if !math.IsNaN(x) && !math.IsInf(x, 0) {
			f = append(f, x)
		}
	}
	if len(f) == 0 {
		return 0, 0, 0, false
	}
	slices.Sort(f)
	n := len(f)
	if n%2 == 1 {
		med = f[n/2]
	} else {
		med = (f[n/2-1] + f[n/2]) / 2
	}
	return med, f[0], f[n-1], true
}

// meetsTarget evaluates a target such as "<= 1.5" or ">= 2" for v.
func meetsTarget(target string, v float64) (bool, error) {
	t := strings.TrimSpace(target)
	var op string
	for _, o := range []string{"<=", ">=", "<", ">"} {
		if strings.HasPrefix(t, o) {
			op = o
			break
		}
	}
	if op == "" {
		return false, fmt.Errorf("target %q: want an operator <=, >=, < or > and a number", target)
	}
	x, err := strconv.ParseFloat(strings.TrimSpace(t[len(op):]), 64)
	if err != nil {
		return false, fmt.Errorf("target %q: %v", target, err)
	}
	switch op {
	case "<=":
		return v <= x, nil
	case ">=":
		return v >= x, nil
	case "<":
		return v < x, nil
	default:
		return v > x, nil
	}
}
