package site

import (
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestAcceptsEncoding(t *testing.T) {
	for _, c := range []struct {
		header, token string
		want          bool
	}{
		{"gzip, deflate, br, zstd", "br", true},
		{"gzip, deflate, br, zstd", "gzip", true},
		{"gzip;q=0, br", "gzip", false},
		{"gzip;q=0.5", "gzip", true},
		{"gzip;q=0.0", "gzip", false},
		{"", "br", false},
		{"brotli", "br", false},
	} {
		if got := acceptsEncoding(c.header, c.token); got != c.want {
			t.Errorf("acceptsEncoding(%q, %q) = %v, want %v", c.header, c.token, got, c.want)
		}
	}
}

// TestHandler checks the headers every response carries, the MIME types, the
// choice of precompressed sibling, and that nothing outside the site folder or
// of an unknown kind is served.
func TestHandler(t *testing.T) {
	dir := t.TempDir()
	for name, body := range map[string]string{
		"index.html": "<!doctype html>", "engine.wasm": "\x00asm", "app.js": "x", "_headers": "secret",
		"demo/a.dat": "1 2 3", "notes.exe": "MZ",
	} {
		p := filepath.Join(dir, name)
		os.MkdirAll(filepath.Dir(p), 0o755)
		if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if err := Precompress(dir, true); err != nil {
		t.Fatal(err)
	}
	h := Handler(func() string { return dir })
	get := func(path, enc string) *httptest.ResponseRecorder {
		r := httptest.NewRequest(http.MethodGet, path, nil)
		if enc != "" {
			r.Header.Set("Accept-Encoding", enc)
		}
		w := httptest.NewRecorder()
		h.ServeHTTP(w, r)
		return w
	}
	for _, c := range []struct {
		path, enc, wantType, wantEnc string
		code                         int
	}{
		{"/", "", "text/html; charset=utf-8", "", 200},
		{"/engine.wasm", "gzip, br", "application/wasm", "br", 200},
		{"/engine.wasm", "gzip", "application/wasm", "gzip", 200},
		{"/engine.wasm", "", "application/wasm", "", 200},
		{"/app.js", "br", "text/javascript; charset=utf-8", "br", 200},
		{"/demo/a.dat", "", "text/plain; charset=utf-8", "", 200},
		{"/_headers", "", "", "", 404},
		{"/notes.exe", "", "", "", 404},
		{"/engine.wasm.br", "", "", "", 404},
		{"/../../etc/passwd", "", "", "", 404},
		{"/missing.js", "", "", "", 404},
	} {
		w := get(c.path, c.enc)
		if w.Code != c.code {
			t.Errorf("%s: status %d, want %d", c.path, w.Code, c.code)
			continue
		}
		if !strings.Contains(w.Header().Get("Content-Security-Policy"), "script-src 'self' 'wasm-unsafe-eval'") {
			t.Errorf("%s: CSP %q", c.path, w.Header().Get("Content-Security-Policy"))
		}
		if c.code != 200 {
			continue
		}
		if got := w.Header().Get("Content-Type"); got != c.wantType {
			t.Errorf("%s: Content-Type %q, want %q", c.path, got, c.wantType)
		}
		if got := w.Header().Get("Content-Encoding"); got != c.wantEnc {
			t.Errorf("%s (Accept-Encoding %q): Content-Encoding %q, want %q", c.path, c.enc, got, c.wantEnc)
		}
		if w.Header().Get("X-Content-Type-Options") != "nosniff" {
			t.Errorf("%s: no nosniff", c.path)
		}
	}
	if r := httptest.NewRecorder(); true {
		h.ServeHTTP(r, httptest.NewRequest(http.MethodPost, "/", nil))
		if r.Code != http.StatusMethodNotAllowed {
			t.Errorf("POST: status %d", r.Code)
		}
	}
}
