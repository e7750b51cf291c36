package sitebuild

import (
	"fmt"
	"net"
	"net/http"
	"path"
	"strings"
)

// Handler serves the built directory dir with the headers the page is
// designed for: policy as Content-Security-Policy (use Result.Policy),
// cross-origin isolation (COOP same-origin, COEP require-corp), no sniffing,
// no referrer, no caching, and application/wasm for .wasm files. Only GET and
// HEAD are answered.
func Handler(dir, policy string) http.Handler {
	files := http.FileServer(http.Dir(dir))
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if r.Method != http.MethodGet && r.Method != http.MethodHead {
			w.Header().Set("Allow", "GET, HEAD")
			http.Error(w, "method not allowed", http.StatusMethodNotAllowed)
			return
		}
		h := w.Header()
		h.Set("Content-Security-Policy", policy)
		h.Set("Cross-Origin-Opener-Policy", "same-origin")
		h.Set("Cross-Origin-Embedder-Policy", "require-corp")
		h.Set("Cross-Origin-Resource-Policy", "same-origin")
		h.Set("X-Content-Type-Options", "nosniff")
		h.Set("Referrer-Policy", "no-referrer")
		h.Set("Cache-Control", "no-cache")
		switch path.Ext(r.URL.Path) {
		case ".wasm":
			h.Set("Content-Type", "application/wasm")
		case ".js":
			h.Set("Content-Type", "text/javascript; charset=utf-8")
		}
		files.ServeHTTP(w, r)
	})
}

// CheckLoopback returns an error unless addr ("host:port") names a loopback
// host: localhost or a literal address in 127.0.0.0/8 or ::1. The page is a
// local tool; serving it to the network is refused.
func CheckLoopback(addr string) error {
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		return fmt.Errorf("--addr %q: %v (want host:port, e.g. 127.0.0.1:8080)", addr, err)
	}
	if strings.EqualFold(host, "localhost") {
		return nil
	}
	ip := net.ParseIP(host)
	if ip == nil || !ip.IsLoopback() {
		return fmt.Errorf("--addr %q: host %q is not a loopback address; winnow serves only on this machine (want 127.0.0.1, ::1 or localhost)", addr, host)
	}
	return nil
}
