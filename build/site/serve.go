package site

import (
	"fmt"
	"io/fs"
	"net/http"
	"os"
	"path"
	"path/filepath"
	"strings"
	"sync/atomic"
	"time"
)

// contentTypes fixes the MIME type of every file kind the site holds, so no
// response depends on content sniffing or the host's mime tables.
var contentTypes = map[string]string{
	".html":        "text/html; charset=utf-8",
	".js":          "text/javascript; charset=utf-8",
	".css":         "text/css; charset=utf-8",
	".wasm":        "application/wasm",
	".json":        "application/json",
	".map":         "application/json",
	".svg":         "image/svg+xml",
	".png":         "image/png",
	".ico":         "image/x-icon",
	".webmanifest": "application/manifest+json",
	".txt":         "text/plain; charset=utf-8",
	".dat":         "text/plain; charset=utf-8",
	".csv":         "text/plain; charset=utf-8",
	".ecsv":        "text/plain; charset=utf-8",
	".md":          "text/plain; charset=utf-8",
}

// Handler serves the site folder returned by dir() (read at every request, so a
// rebuilt site can be swapped in) with the CSP, fixed MIME types, and the
// precompressed .br or .gz sibling when the request accepts it.
func Handler(dir func() string) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		h := w.Header()
		h.Set("Content-Security-Policy", CSP)
		h.Set("X-Content-Type-Options", "nosniff")
		h.Set("Referrer-Policy", "no-referrer")
		h.Set("Cache-Control", "no-cache")
		if r.Method != http.MethodGet && r.Method != http.MethodHead {
			http.Error(w, "method not allowed", http.StatusMethodNotAllowed)
			return
		}
		p := path.Clean("/" + r.URL.Path)
		if p == "/" {
			p = "/index.html"
		}
		ext := path.Ext(p)
		ct, ok := contentTypes[ext]
		if !ok || strings.HasSuffix(p, ".gz") || strings.HasSuffix(p, ".br") || strings.Contains(p, "/_") {
			http.NotFound(w, r)
			return
		}
		root := dir()
		name := filepath.Join(root, filepath.FromSlash(p))
		if _, err := os.Stat(name); err != nil {
			http.NotFound(w, r)
			return
		}
		h.Set("Content-Type", ct)
		h.Add("Vary", "Accept-Encoding")
		accept := r.Header.Get("Accept-Encoding")
		for _, enc := range []struct{ token, ext string }{{"br", ".br"}, {"gzip", ".gz"}} {
			if !acceptsEncoding(accept, enc.token) {
				continue
			}
			f, err := os.Open(name + enc.ext)
			if err != nil {
				continue
			}
			defer f.Close()
			st, err := f.Stat()
			if err != nil {
				continue
			}
			h.Set("Content-Encoding", enc.token)
			http.ServeContent(w, r, "", st.ModTime(), f)
			return
		}
		f, err := os.Open(name)
		if err != nil {
			http.NotFound(w, r)
			return
		}
		defer f.Close()
		st, _ := f.Stat()
		http.ServeContent(w, r, "", st.ModTime(), f)
	})
}

// acceptsEncoding reports whether an Accept-Encoding header allows token
// (present and not with q=0).
func acceptsEncoding(header, token string) bool {
	for _, part := range strings.Split(header, ",") {
		fields := strings.Split(part, ";")
		if strings.TrimSpace(fields[0]) != token {
			continue
		}
		for _, f := range fields[1:] {
			if v, ok := strings.CutPrefix(strings.TrimSpace(f), "q="); ok {
				return strings.Trim(v, "0.") != ""
			}
		}
		return true
	}
	return false
}

// Watch polls the source folders every interval and calls rebuild after a
// change; it never returns. Polling (rather than OS notifications) keeps the
// build program free of platform code; a tree of a few hundred files costs
// well under a millisecond per scan.
func Watch(root string, interval time.Duration, rebuild func()) {
	last := fingerprint(root)
	for {
		time.Sleep(interval)
		if fp := fingerprint(root); fp != last {
			last = fp
			rebuild()
		}
	}
}

var watched = []string{"web", "wasm", "fit", "lens", "testdata/demo", "go.mod", "package-lock.json"}

func fingerprint(root string) string {
	var b strings.Builder
	for _, w := range watched {
		filepath.WalkDir(filepath.Join(root, w), func(p string, d fs.DirEntry, err error) error {
			if err != nil {
				return nil
			}
			if d.IsDir() {
				if n := d.Name(); n == "node_modules" || strings.HasPrefix(n, ".") {
					return filepath.SkipDir
				}
				return nil
			}
			if info, err := d.Info(); err == nil {
				fmt.Fprintf(&b, "%s %d %d\n", p, info.Size(), info.ModTime().UnixNano())
			}
			return nil
		})
	}
	return b.String()
}

// Current holds the folder of the site being served; rebuilds swap it.
type Current struct{ p atomic.Pointer[string] }

func (c *Current) Set(dir string) { c.p.Store(&dir) }
func (c *Current) Get() string    { return *c.p.Load() }
