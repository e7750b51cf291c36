package main

import (
	"bytes"
	"strings"
	"testing"

	"winnow/scripts/sitebuild"
)

func TestUsageErrors(t *testing.T) {
	var out, errb bytes.Buffer
	if code := run([]string{"--bogus"}, &out, &errb); code != 2 {
		t.Errorf("exit %d, want 2", code)
	}
	if !strings.Contains(errb.String(), "usage: go run ./scripts/build") {
		t.Errorf("stderr %q lacks the usage line", errb.String())
	}
}

func TestPrintSizes(t *testing.T) {
	var out bytes.Buffer
	PrintSizes(&out, &sitebuild.Result{Dir: "dist", Artefacts: []sitebuild.Artefact{{Name: "winnow.wasm", Bytes: 3 << 20}}, WasmGzipBytes: 1 << 20})
	for _, want := range []string{"winnow.wasm", "3145728 bytes", "3.00 MiB", "winnow.wasm.gz", "1.00 MiB"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("output lacks %q:\n%s", want, out.String())
		}
	}
}
