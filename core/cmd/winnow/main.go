// Command winnow is the command-line front end of winnow: the built-in demo,
// NIfTI header summaries and first-level fits. It calls the same pipeline
// (package analysis) as the in-browser kit.
//
// Exit status: 0 success; 2 bad input or usage, with one line on stderr
// naming the file, the field and what was expected; 1 anything else.
package main

import (
	"os"
)

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}
