// Command winnow is the command-line front end of winnow: the built-in demo,
// NIfTI header summaries and first-level fits. It calls the same pipeline
// (package analysis) as the in-browser kit.
//
// Exit status: 0 success; 2 bad input or usage, with one line on stderr
// naming the file, the field and what was expected; 1 anything else.
package main

import (
	"os"
	"runtime/debug"
)

func main() {
	// The fit's large allocations (per-voxel sums, maps) live until the end,
	// so a lower GC target keeps the peak close to what is live instead of
	// twice it, at little cost in time.
	debug.SetGCPercent(15)
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}
