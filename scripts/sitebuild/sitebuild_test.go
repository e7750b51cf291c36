package sitebuild

import (
	"bytes"
	"crypto/sha256"
	"encoding/base64"
	"io"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/evanw/esbuild/pkg/api"
	"github.com/klauspost/compress/gzip"
)

// The site's modules bundle without esbuild errors, and the worker bundle
// carries the virtual wasm_exec module's text.
func TestBundleSite(t *testing.T) {
	site := filepath.Join("..", "..", "site")
	app, err := bundle(bundleOpts(filepath.Join(site, "main.js"), "app.js"), true)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(app, "winnow") {
		t.Errorf("app bundle does not mention winnow (%d bytes)", len(app))
	}
	const marker = "globalThis.__wasmExecMarker=1;"
	o := bundleOpts(filepath.Join(site, "worker.js"), "worker.js")
	o.Plugins = append(o.Plugins, virtualModule(wasmExecModule, marker))
	w, err := bundle(o, false)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(w, "__wasmExecMarker") {
		t.Errorf("worker bundle lacks the wasm_exec module")
	}
	css, err := bundle(bundleOpts(filepath.Join(site, "style.css"), "app.css"), true)
	if err != nil {
		t.Fatal(err)
	}
	if len(css) == 0 {
		t.Error("empty CSS bundle")
	}
}

func bundleOpts(entry, out string) (o apiOptions) {
	o.EntryPoints = []string{entry}
	o.Outfile = filepath.Join(os.TempDir(), out)
	if strings.HasSuffix(out, ".js") {
		o.Format = formatIIFE
	}
	return o
}

// A bundle error comes back as an error with esbuild's formatted message.
func TestBundleError(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.js")
	if err := os.WriteFile(bad, []byte("import './missing.js';\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	_, err := bundle(bundleOpts(bad, "bad.out.js"), true)
	if err == nil || !strings.Contains(err.Error(), "missing.js") {
		t.Fatalf("err = %v, want a message naming missing.js", err)
	}
}

// The hash source is the base64 SHA-256 of the exact text (CSP Level 3,
// "hash-source"); the empty string's digest is the published SHA-256 test
// vector e3b0c442...b855 (FIPS 180-2 examples, common practice).
func TestHashSource(t *testing.T) {
	if got, want := hashSource(""), "'sha256-47DEQpj8HBSa+/TImW+5JCeuQeRkm5NMpJWZG3hSuFU='"; got != want {
		t.Errorf("hashSource(\"\") = %s, want %s", got, want)
	}
	p := Policy("a()", "b{}")
	for _, want := range []string{"default-src 'self'", "'wasm-unsafe-eval'", hashSource("a()"), hashSource("b{}"), "worker-src 'self' blob:", "object-src 'none'", "base-uri 'none'"} {
		if !strings.Contains(p, want) {
			t.Errorf("policy %q lacks %q", p, want)
		}
	}
	if strings.Contains(p, "unsafe-inline") || strings.Contains(p, "http") {
		t.Errorf("policy %q allows inline code or names a remote origin", p)
	}
}

const shell = `<html><head><meta http-equiv="Content-Security-Policy" content="{{content-security-policy}}">` +
	`<link rel="stylesheet" href="app.css"></head><body><script src="app.js" defer></script></body></html>`

// The offline page inlines the script whose hash the policy lists, and its
// embedded wasm decodes (base64, then gzip) to the original bytes.
func TestPages(t *testing.T) {
	wasm := bytes.Repeat([]byte("\x00asm\x01\x00\x00\x00"), 100)
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz)
	zw.Write(wasm)
	zw.Close()
	policy := Policy("run()", "p{}")
	index, offline, err := pages(shell, policy, "run()", "p{}", "work()", gz.Bytes())
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(index, `content="`+policy+`"`) || !strings.Contains(index, markerScript) {
		t.Errorf("index.html lacks its policy or script tag:\n%s", index)
	}
	if !strings.Contains(offline, "<script>run()</script>") || !strings.Contains(offline, "<style>p{}</style>") {
		t.Errorf("offline page lacks the inline script or style:\n%s", offline)
	}
	sum := sha256.Sum256([]byte("run()"))
	if !strings.Contains(offline, base64.StdEncoding.EncodeToString(sum[:])) {
		t.Error("offline page's policy lacks the inline script's hash")
	}
	start := strings.Index(offline, `id="`+idWasmGz+`">`) + len(`id="`+idWasmGz+`">`)
	end := strings.Index(offline[start:], "</script>")
	raw, err := base64.StdEncoding.DecodeString(offline[start : start+end])
	if err != nil {
		t.Fatal(err)
	}
	zr, err := gzip.NewReader(bytes.NewReader(raw))
	if err != nil {
		t.Fatal(err)
	}
	got, _ := io.ReadAll(zr)
	if !bytes.Equal(got, wasm) {
		t.Error("embedded wasm does not round-trip")
	}
	if _, _, err := pages("<html></html>", policy, "", "", "", nil); err == nil {
		t.Error("a shell without markers was accepted")
	}
}

// The handler sends the page's headers and the wasm MIME type (the type
// WebAssembly.instantiateStreaming requires, per the WebAssembly Web API).
func TestHandler(t *testing.T) {
	dir := t.TempDir()
	os.WriteFile(filepath.Join(dir, "index.html"), []byte("<p>hi</p>"), 0o644)
	os.WriteFile(filepath.Join(dir, "winnow.wasm"), []byte("\x00asm"), 0o644)
	srv := httptest.NewServer(Handler(dir, "default-src 'self'"))
	defer srv.Close()
	for _, c := range []struct{ path, ctype string }{{"/", "text/html"}, {"/winnow.wasm", "application/wasm"}} {
		resp, err := http.Get(srv.URL + c.path)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != 200 {
			t.Errorf("%s: status %d", c.path, resp.StatusCode)
		}
		h := resp.Header
		if !strings.HasPrefix(h.Get("Content-Type"), c.ctype) {
			t.Errorf("%s: Content-Type %q, want %s", c.path, h.Get("Content-Type"), c.ctype)
		}
		for k, v := range map[string]string{
			"Content-Security-Policy":      "default-src 'self'",
			"Cross-Origin-Opener-Policy":   "same-origin",
			"Cross-Origin-Embedder-Policy": "require-corp",
		} {
			if h.Get(k) != v {
				t.Errorf("%s: %s = %q, want %q", c.path, k, h.Get(k), v)
			}
		}
	}
	resp, err := http.Post(srv.URL+"/", "text/plain", strings.NewReader("x"))
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusMethodNotAllowed {
		t.Errorf("POST: status %d, want 405", resp.StatusCode)
	}
}

func TestCheckLoopback(t *testing.T) {
	for _, c := range []struct {
		addr string
		ok   bool
	}{
		{"127.0.0.1:8080", true}, {"localhost:0", true}, {"[::1]:9000", true}, {"127.0.0.2:80", true},
		{"0.0.0.0:8080", false}, {":8080", false}, {"192.168.1.5:8080", false}, {"example.org:80", false}, {"8080", false},
	} {
		err := CheckLoopback(c.addr)
		if (err == nil) != c.ok {
			t.Errorf("CheckLoopback(%q) = %v, want ok=%v", c.addr, err, c.ok)
		}
	}
}

type apiOptions = api.BuildOptions

const formatIIFE = api.FormatIIFE
