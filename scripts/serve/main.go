// Command serve builds the browser kit and serves dist/ on this machine only,
// with the page's Content-Security-Policy and cross-origin isolation headers.
//
//	go run ./scripts/serve [--addr 127.0.0.1:8080]
package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"time"

	"winnow/scripts/sitebuild"
)

func main() { os.Exit(run(os.Args[1:], os.Stdout, os.Stderr)) }

func run(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("serve", flag.ContinueOnError)
	fs.SetOutput(stderr)
	addr := fs.String("addr", "127.0.0.1:8080", "loopback `host:port` to listen on")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: go run ./scripts/serve [--addr 127.0.0.1:8080]")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		return 2
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "serve: unexpected argument %q\n", fs.Arg(0))
		fs.Usage()
		return 2
	}
	if err := sitebuild.CheckLoopback(*addr); err != nil {
		fmt.Fprintln(stderr, "serve:", err)
		return 2
	}
	res, err := sitebuild.Build(sitebuild.Options{})
	if err != nil {
		fmt.Fprintln(stderr, err)
		return 1
	}
	ln, err := net.Listen("tcp", *addr)
	if err != nil {
		fmt.Fprintln(stderr, "serve:", err)
		return 1
	}
	srv := &http.Server{
		Handler:           sitebuild.Handler(res.Dir, res.Policy),
		ReadHeaderTimeout: 10 * time.Second,
	}
	fmt.Fprintf(stdout, "winnow: serving %s at http://%s/ (offline single file: %s/winnow-offline.html)\n",
		res.Dir, ln.Addr(), res.Dir)
	if err := srv.Serve(ln); err != nil && !errors.Is(err, http.ErrServerClosed) {
		fmt.Fprintln(stderr, "serve:", err)
		return 1
	}
	return 0
}
