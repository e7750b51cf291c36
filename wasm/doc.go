// Command wasm is winnow's browser back end: the Go program that runs inside
// the page's dedicated Web Worker (GOOS=js GOARCH=wasm). It is the only
// package that imports syscall/js, and it does three things and no maths:
// it decodes a request (a JS object) into analysis inputs and options, calls
// package analysis (the same pipeline as the command line), and encodes the
// result as JS values, moving each map as one Float32Array that is
// transferred, not copied.
//
// The message protocol is documented in protocol.go and, in the same words,
// in site/protocol.js. Files arrive as Blob objects and are read through an
// io.Reader that slices the Blob in 4 MiB chunks with the worker-only
// FileReaderSync, so a run is never held whole in JS memory. A gzip run
// may instead arrive decompressed from a second worker over a MessagePort
// (the parallel read, pipe_js.go).
//
// The glue that touches syscall/js is in files tagged js && wasm; the
// conversions beside it are plain Go, covered by host tests.
package main
