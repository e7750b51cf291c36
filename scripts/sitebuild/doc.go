// Package sitebuild builds winnow's static browser kit and serves it.
//
// [Build] compiles the ./wasm package for GOOS=js GOARCH=wasm with the go
// command of the running toolchain (-trimpath -ldflags "-s -w"), reads
// wasm_exec.js from $(go env GOROOT)/lib/wasm at build time (it is never
// committed), and bundles and minifies site/ with esbuild's Go API
// (github.com/evanw/esbuild/pkg/api) into one output directory:
//
//	index.html            the page shell, with its Content-Security-Policy as a <meta> tag
//	app.css, app.js       the page's style and script (app.js an IIFE bundle of site/main.js)
//	worker.js             the Web Worker: wasm_exec.js and site/worker.js in one classic script
//	winnow.wasm           the Go program
//	winnow-offline.html   one self-contained file: style and script inline, the worker
//	                      source as inert text, the wasm gzip-compressed and base64-encoded;
//	                      it opens from file:// with no server
//
// The offline page inflates the wasm with the browser's DecompressionStream
// and starts the worker from a Blob URL. Its one executable inline script and
// its inline style are allowed by sha256 hashes computed here, so the policy
// never needs 'unsafe-inline'.
//
// [Handler] serves a built directory with the headers the page is designed
// for: the same Content-Security-Policy (no connection outside the page's own
// origin), Cross-Origin-Opener-Policy and Cross-Origin-Embedder-Policy, and
// application/wasm for .wasm. scripts/serve and the browser tests in site/
// share it, so both see the same page.
package sitebuild
