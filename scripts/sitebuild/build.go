package sitebuild

import (
	"bytes"
	"crypto/sha256"
	"encoding/base64"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strings"

	"github.com/evanw/esbuild/pkg/api"
	"github.com/klauspost/compress/gzip"
)

// Options says where to build from and to. The zero value builds the module
// found from the working directory into its dist/ folder.
type Options struct {
	Root     string // module root holding go.mod, site/ and wasm/; "": nearest go.mod at or above the working directory
	Out      string // output directory; "": Root/dist. Created if missing; the artefacts in it are replaced
	Go       string // go command; "": the running toolchain's, else "go" from PATH
	NoMinify bool   // readable JavaScript and CSS, for debugging
}

// Artefact is one file written to the output directory.
type Artefact struct {
	Name  string // file name inside Result.Dir
	Bytes int64
}

// Result describes a finished build.
type Result struct {
	Dir           string     // the output directory, absolute
	Artefacts     []Artefact // in a fixed order: index.html, app.css, app.js, worker.js, winnow.wasm, winnow-offline.html
	WasmBytes     int64      // winnow.wasm as compiled
	WasmGzipBytes int64      // winnow.wasm gzip-compressed, as embedded (before base64) in the offline page
	OfflineBytes  int64      // winnow-offline.html
	Policy        string     // the Content-Security-Policy both pages carry and Handler sends
}

// Markers in site/index.html that Build fills in or replaces. Build fails
// when one is missing, so the shell and the build cannot drift apart.
const (
	markerPolicy = "{{content-security-policy}}"
	markerStyle  = `<link rel="stylesheet" href="app.css">`
	markerScript = `<script src="app.js" defer></script>`
)

// Element ids of the inert data blocks in the offline page; site/main.js reads them.
const (
	idWasmGz    = "winnow-wasm-gz"
	idWorkerSrc = "winnow-worker-src"
)

// wasmExecModule is the import path site/worker.js uses for the toolchain's
// wasm_exec.js, resolved by a build plugin to the copy read at build time.
const wasmExecModule = "winnow:wasm-exec"

// Build compiles the wasm program, bundles the site and writes the artefacts
// listed in the package documentation. Nothing in Out is touched until every
// artefact has been produced.
func Build(opt Options) (*Result, error) {
	root, err := moduleRoot(opt.Root)
	if err != nil {
		return nil, err
	}
	out := opt.Out
	if out == "" {
		out = filepath.Join(root, "dist")
	}
	if out, err = filepath.Abs(out); err != nil {
		return nil, err
	}
	goCmd := opt.Go
	if goCmd == "" {
		goCmd = findGo()
	}

	tmp, err := os.MkdirTemp("", "winnow-sitebuild-")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(tmp)

	// The Go program.
	wasmPath := filepath.Join(tmp, "winnow.wasm")
	cmd := exec.Command(goCmd, "build", "-trimpath", "-ldflags", "-s -w", "-o", wasmPath, "./wasm")
	cmd.Dir = root
	cmd.Env = append(os.Environ(), "GOOS=js", "GOARCH=wasm", "CGO_ENABLED=0")
	if msg, err := cmd.CombinedOutput(); err != nil {
		return nil, fmt.Errorf("sitebuild: GOOS=js GOARCH=wasm go build ./wasm: %v\n%s", err, msg)
	}
	wasm, err := os.ReadFile(wasmPath)
	if err != nil {
		return nil, err
	}
	goroot, err := exec.Command(goCmd, "env", "GOROOT").Output()
	if err != nil {
		return nil, fmt.Errorf("sitebuild: go env GOROOT: %v", err)
	}
	wasmExec, err := os.ReadFile(filepath.Join(strings.TrimSpace(string(goroot)), "lib", "wasm", "wasm_exec.js"))
	if err != nil {
		return nil, fmt.Errorf("sitebuild: the toolchain's wasm_exec.js: %v", err)
	}

	// The page's script, its style and the worker.
	site := filepath.Join(root, "site")
	minify := !opt.NoMinify
	appJS, err := bundle(api.BuildOptions{
		EntryPoints: []string{filepath.Join(site, "main.js")},
		Outfile:     filepath.Join(tmp, "app.js"),
		Format:      api.FormatIIFE,
	}, minify)
	if err != nil {
		return nil, err
	}
	appCSS, err := bundle(api.BuildOptions{
		EntryPoints: []string{filepath.Join(site, "style.css")},
		Outfile:     filepath.Join(tmp, "app.css"),
	}, minify)
	if err != nil {
		return nil, err
	}
	workerJS, err := bundle(api.BuildOptions{
		EntryPoints: []string{filepath.Join(site, "worker.js")},
		Outfile:     filepath.Join(tmp, "worker.js"),
		Format:      api.FormatIIFE,
		Plugins:     []api.Plugin{virtualModule(wasmExecModule, string(wasmExec))},
	}, minify)
	if err != nil {
		return nil, err
	}
	for _, c := range []struct {
		name, text, closer string
	}{{"app.js", appJS, "</script"}, {"worker.js", workerJS, "</script"}, {"app.css", appCSS, "</style"}} {
		if strings.Contains(strings.ToLower(c.text), c.closer) {
			return nil, fmt.Errorf("sitebuild: %s contains %q and cannot be inlined in the offline page", c.name, c.closer)
		}
	}

	var gz bytes.Buffer
	zw, err := gzip.NewWriterLevel(&gz, gzip.BestCompression)
	if err != nil {
		return nil, err
	}
	if _, err := zw.Write(wasm); err != nil {
		return nil, err
	}
	if err := zw.Close(); err != nil {
		return nil, err
	}

	shell, err := os.ReadFile(filepath.Join(site, "index.html"))
	if err != nil {
		return nil, err
	}
	policy := Policy(appJS, appCSS)
	index, offline, err := pages(string(shell), policy, appJS, appCSS, workerJS, gz.Bytes())
	if err != nil {
		return nil, err
	}

	files := []struct {
		name string
		data []byte
	}{
		{"index.html", []byte(index)},
		{"app.css", []byte(appCSS)},
		{"app.js", []byte(appJS)},
		{"worker.js", []byte(workerJS)},
		{"winnow.wasm", wasm},
		{"winnow-offline.html", []byte(offline)},
	}
	// Write everything to temporary names first, then rename: a failed
	// build leaves the previous dist/ whole.
	if err := os.MkdirAll(out, 0o755); err != nil {
		return nil, err
	}
	res := &Result{Dir: out, Policy: policy, WasmBytes: int64(len(wasm)), WasmGzipBytes: int64(gz.Len()), OfflineBytes: int64(len(offline))}
	for _, f := range files {
		if err := os.WriteFile(filepath.Join(out, "."+f.name+".tmp"), f.data, 0o644); err != nil {
			return nil, err
		}
	}
	for _, f := range files {
		if err := os.Rename(filepath.Join(out, "."+f.name+".tmp"), filepath.Join(out, f.name)); err != nil {
			return nil, err
		}
		res.Artefacts = append(res.Artefacts, Artefact{Name: f.name, Bytes: int64(len(f.data))})
	}
	return res, nil
}

// Policy returns the Content-Security-Policy for a build whose offline page
// inlines the script appJS and the style appCSS: nothing outside the page's
// own origin may be loaded or contacted; WebAssembly compilation, the worker
// from a Blob URL and the two inline blocks (by hash) are allowed.
func Policy(appJS, appCSS string) string {
	return strings.Join([]string{
		"default-src 'self'",
		"script-src 'self' 'wasm-unsafe-eval' " + hashSource(appJS),
		"style-src 'self' " + hashSource(appCSS),
		"worker-src 'self' blob:",
		"connect-src 'self' blob: data:",
		"img-src 'self' blob: data:",
		"font-src 'self'",
		"object-src 'none'",
		"base-uri 'none'",
		"form-action 'none'",
	}, "; ")
}

// hashSource is the CSP source expression allowing an inline block with
// exactly this text (CSP Level 3, "hash-source").
func hashSource(text string) string {
	sum := sha256.Sum256([]byte(text))
	return "'sha256-" + base64.StdEncoding.EncodeToString(sum[:]) + "'"
}

// pages fills the shell: the served page links app.css and app.js; the
// offline page carries them inline together with the worker source and the
// compressed wasm in inert blocks that are data, not script.
func pages(shell, policy, appJS, appCSS, workerJS string, wasmGz []byte) (index, offline string, err error) {
	for _, m := range []string{markerPolicy, markerStyle, markerScript} {
		if n := strings.Count(shell, m); n != 1 {
			return "", "", fmt.Errorf("sitebuild: site/index.html has %d copies of %q, want 1", n, m)
		}
	}
	index = strings.Replace(shell, markerPolicy, policy, 1)
	offline = strings.Replace(index, markerStyle, "<style>"+appCSS+"</style>", 1)
	data := `<script type="application/octet-stream" id="` + idWasmGz + `">` +
		base64.StdEncoding.EncodeToString(wasmGz) + "</script>\n" +
		`<script type="text/plain" id="` + idWorkerSrc + `">` + workerJS + "</script>\n" +
		"<script>" + appJS + "</script>"
	offline = strings.Replace(offline, markerScript, data, 1)
	return index, offline, nil
}

// bundle runs one esbuild build in memory and returns its single output.
func bundle(o api.BuildOptions, minify bool) (string, error) {
	o.Bundle = true
	o.Write = false
	o.Platform = api.PlatformBrowser
	o.Target = api.ES2020
	o.Charset = api.CharsetUTF8
	o.LegalComments = api.LegalCommentsNone
	o.LogLevel = api.LogLevelSilent
	o.MinifyWhitespace, o.MinifyIdentifiers, o.MinifySyntax = minify, minify, minify
	r := api.Build(o)
	if len(r.Errors) > 0 {
		msgs := api.FormatMessages(r.Errors, api.FormatMessagesOptions{Kind: api.ErrorMessage})
		return "", errors.New("sitebuild: esbuild:\n" + strings.Join(msgs, ""))
	}
	for _, f := range r.OutputFiles {
		if f.Path == o.Outfile {
			return string(f.Contents), nil
		}
	}
	return "", fmt.Errorf("sitebuild: esbuild wrote no %s", filepath.Base(o.Outfile))
}

// virtualModule resolves one import path to the given JavaScript text.
func virtualModule(path, contents string) api.Plugin {
	const ns = "winnow-virtual"
	return api.Plugin{
		Name: "winnow-virtual",
		Setup: func(b api.PluginBuild) {
			b.OnResolve(api.OnResolveOptions{Filter: "^" + strings.ReplaceAll(path, ":", "\\:") + "$"},
				func(a api.OnResolveArgs) (api.OnResolveResult, error) {
					return api.OnResolveResult{Path: path, Namespace: ns}, nil
				})
			b.OnLoad(api.OnLoadOptions{Filter: ".*", Namespace: ns},
				func(a api.OnLoadArgs) (api.OnLoadResult, error) {
					return api.OnLoadResult{Contents: &contents, Loader: api.LoaderJS}, nil
				})
		},
	}
}

// moduleRoot returns dir, or the nearest directory at or above the working
// directory holding go.mod.
func moduleRoot(dir string) (string, error) {
	if dir != "" {
		return filepath.Abs(dir)
	}
	d, err := os.Getwd()
	if err != nil {
		return "", err
	}
	for {
		if _, err := os.Stat(filepath.Join(d, "go.mod")); err == nil {
			return d, nil
		}
		up := filepath.Dir(d)
		if up == d {
			return "", errors.New("sitebuild: no go.mod at or above the working directory; set Options.Root")
		}
		d = up
	}
}

// findGo returns the go command of the toolchain running this program when
// it can be found, else "go" to be looked up in PATH.
func findGo() string {
	exe := "go"
	if runtime.GOOS == "windows" {
		exe = "go.exe"
	}
	for _, root := range []string{os.Getenv("GOROOT"), runtime.GOROOT()} {
		if root == "" {
			continue
		}
		p := filepath.Join(root, "bin", exe)
		if _, err := os.Stat(p); err == nil {
			return p
		}
	}
	return "go"
}
