// Command build compiles the browser kit into dist/: the wasm program, the
// bundled page and worker, and the self-contained offline page. It prints
// each artefact's size.
//
//	go run ./scripts/build [--out DIR] [--no-minify]
package main

import (
	"flag"
	"fmt"
	"io"
	"os"

	"winnow/scripts/sitebuild"
)

func main() { os.Exit(run(os.Args[1:], os.Stdout, os.Stderr)) }

func run(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("build", flag.ContinueOnError)
	fs.SetOutput(stderr)
	out := fs.String("out", "", "output directory (default: dist/ in the module root)")
	noMinify := fs.Bool("no-minify", false, "readable JavaScript and CSS, for debugging")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: go run ./scripts/build [--out DIR] [--no-minify]")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		return 2
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "build: unexpected argument %q\n", fs.Arg(0))
		fs.Usage()
		return 2
	}
	res, err := sitebuild.Build(sitebuild.Options{Out: *out, NoMinify: *noMinify})
	if err != nil {
		fmt.Fprintln(stderr, err)
		return 1
	}
	PrintSizes(stdout, res)
	return 0
}

// PrintSizes writes one line per artefact and the compressed wasm size.
func PrintSizes(w io.Writer, res *sitebuild.Result) {
	fmt.Fprintf(w, "built %s\n", res.Dir)
	for _, a := range res.Artefacts {
		fmt.Fprintf(w, "  %-22s %10d bytes  %8.2f MiB\n", a.Name, a.Bytes, float64(a.Bytes)/(1<<20))
	}
	fmt.Fprintf(w, "  %-22s %10d bytes  %8.2f MiB  (gzip, embedded in the offline page)\n", "winnow.wasm.gz", res.WasmGzipBytes, float64(res.WasmGzipBytes)/(1<<20))
}
