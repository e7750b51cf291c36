package sitebuild

import (
	"os"
	"os/exec"
	"strings"
	"testing"
)

// The boundaries of the layout (style guide §8): only wasm/ imports
// syscall/js, and the wasm binary pulls in neither the build tool (esbuild)
// nor the test driver (chromedp).
func TestImportBoundaries(t *testing.T) {
	if testing.Short() {
		t.Skip("go list over the module; skipped with -short")
	}
	goCmd := findGo()
	list := func(env []string, pkgs ...string) []string {
		t.Helper()
		cmd := exec.Command(goCmd, append([]string{"list", "-e", "-deps"}, pkgs...)...)
		cmd.Dir = "../.."
		cmd.Env = append(os.Environ(), env...)
		out, err := cmd.CombinedOutput()
		if err != nil {
			t.Fatalf("go list -deps %v: %v\n%s", pkgs, err, out)
		}
		return strings.Fields(string(out))
	}
	deps := list([]string{"GOOS=js", "GOARCH=wasm"}, "./wasm")
	if !strings.Contains(strings.Join(deps, " "), "winnow/core/analysis") {
		t.Fatalf("go list -deps ./wasm lacks winnow/core/analysis; the listing is broken: %v", deps)
	}
	for _, p := range deps {
		if strings.Contains(p, "esbuild") || strings.Contains(p, "chromedp") {
			t.Errorf("the wasm binary depends on %s", p)
		}
	}
	// Direct imports only: under GOOS=js the standard library itself
	// reaches syscall/js (package syscall uses it).
	cmd := exec.Command(goCmd, "list", "-e", "-f", "{{.ImportPath}}: {{join .Imports \" \"}}", "./core/...", "./scripts/...")
	cmd.Dir = "../.."
	cmd.Env = append(os.Environ(), "GOOS=js", "GOARCH=wasm")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, out)
	}
	if !strings.Contains(string(out), "winnow/core/analysis: ") {
		t.Fatalf("go list ./core/... lacks winnow/core/analysis; the listing is broken:\n%s", out)
	}
	for _, line := range strings.Split(string(out), "\n") {
		pkg, imports, _ := strings.Cut(line, ": ")
		for _, imp := range strings.Fields(imports) {
			if imp == "syscall/js" {
				t.Errorf("%s imports syscall/js; only wasm/ may", pkg)
			}
		}
	}
}
