package main

import (
	"bytes"
	"strings"
	"testing"
)

// Usage errors exit with status 2 and a message, before any build
// (interface.md: exit status 2 for bad usage).
func TestUsageErrors(t *testing.T) {
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--port", "80"}, "usage: go run ./scripts/serve"},
		{[]string{"--addr", "0.0.0.0:8080"}, "not a loopback address"},
		{[]string{"--addr", "192.168.0.10:8080"}, "not a loopback address"},
		{[]string{"--addr", "8080"}, "want host:port"},
		{[]string{"extra"}, `unexpected argument "extra"`},
	} {
		var out, errb bytes.Buffer
		if code := run(c.args, &out, &errb); code != 2 {
			t.Errorf("%v: exit %d, want 2", c.args, code)
		}
		if !strings.Contains(errb.String(), c.want) {
			t.Errorf("%v: stderr %q, want it to contain %q", c.args, errb.String(), c.want)
		}
	}
}
