// Package site builds lensbook's static web site and serves it.
//
// A site is a flat folder: index.html, the bundled page (app.js, app.css), the
// worker loader (worker.js), Go's wasm_exec.js, one .wasm file per program under
// wasm/, and the demo event under demo/. Every text and wasm file also gets
// precompressed .gz and .br siblings, which Handler sends when the browser
// accepts them, so a deployment never compresses at request time.
package site

import (
	"bytes"
	"compress/gzip"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"time"

	"github.com/andybalholm/brotli"
	"github.com/evanw/esbuild/pkg/api"
)

// CSP is the Content-Security-Policy of every response: scripts only from the
// site itself (no inline script), WebAssembly compilation allowed, images also
// from data: and blob: URLs (figure export previews), nothing from other origins.
const CSP = "default-src 'self'; img-src 'self' data: blob:; script-src 'self' 'wasm-unsafe-eval'; " +
	"object-src 'none'; base-uri 'none'; form-action 'none'; frame-ancestors 'self'"

// Options control one site build.
type Options struct {
	Root string // repository root (holds go.mod, web/, wasm/, testdata/)
	Out  string // output folder; created, and emptied first

	// Fast trades compression ratio for build time (brotli quality 5, gzip
	// level 6 instead of 11 and 9): for serve and tests, not for dist.
	Fast bool
	// TypeCheck runs the TypeScript compiler (tsc -p .) on web/ before bundling.
	TypeCheck bool
	// DemoDir is the folder of the demo event; "" means testdata/demo.
	DemoDir string
	Log     io.Writer // progress lines; nil means none
}

// Build writes a complete site to o.Out. Any compiler, bundler or type error
// is returned; the folder is then incomplete and must not be served.
func Build(o Options) error {
	start := time.Now()
	logf := func(format string, a ...any) {
		if o.Log != nil {
			fmt.Fprintf(o.Log, format+"\n", a...)
		}
	}
	if err := os.RemoveAll(o.Out); err != nil {
		return err
	}
	if err := os.MkdirAll(filepath.Join(o.Out, "demo"), 0o755); err != nil {
		return err
	}
	if err := EnsureNodeModules(o.Root, o.Log); err != nil {
		return err
	}
	if o.TypeCheck {
		if err := TypeCheck(o.Root); err != nil {
			return err
		}
	}

	mains, err := wasmMains(o.Root)
	if err != nil {
		return err
	}
	var wg sync.WaitGroup
	errs := make([]error, len(mains)+1)
	for i, m := range mains {
		wg.Add(1)
		go func() {
			defer wg.Done()
			errs[i] = buildWasm(o.Root, m, filepath.Join(o.Out, filepath.Base(m)+".wasm"))
		}()
	}
	errs[len(mains)] = bundle(o.Root, o.Out)
	wg.Wait()
	if err := errors.Join(errs...); err != nil {
		return err
	}
	if err := copyStatic(o.Root, o.Out); err != nil {
		return err
	}
	demo := o.DemoDir
	if demo == "" {
		demo = filepath.Join(o.Root, "testdata", "demo")
	}
	if err := copyDemo(demo, filepath.Join(o.Out, "demo")); err != nil {
		return err
	}
	if err := writeHeadersFile(o.Out); err != nil {
		return err
	}
	logf("built %d wasm module(s) and the page in %v", len(mains), time.Since(start).Round(time.Millisecond))
	t := time.Now()
	if err := Precompress(o.Out, o.Fast); err != nil {
		return err
	}
	logf("precompressed in %v", time.Since(t).Round(time.Millisecond))
	return nil
}

// EnsureNodeModules runs `npm ci` from the committed lock file when
// node_modules is missing, so a fresh clone needs only Go and Node.
func EnsureNodeModules(root string, log io.Writer) error {
	if _, err := os.Stat(filepath.Join(root, "node_modules", "uplot", "package.json")); err == nil {
		return nil
	}
	if log != nil {
		fmt.Fprintln(log, "node_modules missing: running npm ci")
	}
	cmd := exec.Command("npm", "ci", "--no-audit", "--no-fund")
	cmd.Dir = root
	var buf bytes.Buffer
	cmd.Stdout, cmd.Stderr = &buf, &buf
	if err := cmd.Run(); err != nil {
		return fmt.Errorf("npm ci: %v\n%s", err, buf.String())
	}
	return nil
}

// TypeCheck runs the TypeScript compiler without emitting (esbuild strips types
// but never checks them).
func TypeCheck(root string) error {
	cmd := exec.Command(filepath.Join(root, "node_modules", ".bin", "tsc"), "-p", ".")
	cmd.Dir = root
	out, err := cmd.CombinedOutput()
	if err != nil {
		return fmt.Errorf("tsc: %v\n%s", err, out)
	}
	return nil
}

// wasmMains lists the main packages under wasm/ (as ./wasm/name paths).
func wasmMains(root string) ([]string, error) {
	cmd := exec.Command("go", "list", "-f", "{{if eq .Name \"main\"}}{{.Dir}}{{end}}", "./wasm/...")
	cmd.Dir = root
	cmd.Env = append(os.Environ(), "GOOS=js", "GOARCH=wasm")
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		return nil, fmt.Errorf("go list ./wasm/...: %v\n%s", err, stderr.String())
	}
	var mains []string
	for _, dir := range strings.Fields(string(out)) {
		rel, err := filepath.Rel(root, dir)
		if err != nil {
			return nil, err
		}
		mains = append(mains, "./"+filepath.ToSlash(rel))
	}
	if len(mains) == 0 {
		return nil, errors.New("no main package under wasm/")
	}
	return mains, nil
}

func buildWasm(root, pkg, out string) error {
	cmd := exec.Command("go", "build", "-trimpath", "-ldflags=-s -w", "-o", out, pkg)
	cmd.Dir = root
	cmd.Env = append(os.Environ(), "GOOS=js", "GOARCH=wasm")
	b, err := cmd.CombinedOutput()
	if err != nil {
		return fmt.Errorf("GOOS=js GOARCH=wasm go build %s: %v\n%s", pkg, err, b)
	}
	return nil
}

// entry is one esbuild entry point: a TypeScript file in web/ and its output name.
type entry struct {
	src, name string
	format    api.Format
	optional  bool
}

var entries = []entry{
	{src: "web/main.ts", name: "app", format: api.FormatESModule},
	// The worker is a classic worker (importScripts loads wasm_exec.js), so IIFE.
	{src: "web/worker.ts", name: "worker", format: api.FormatIIFE},
	// The magnification-map view is a separate module owned by its own package;
	// index.html loads it only when it exists.
	{src: "web/mapview.ts", name: "mapview", format: api.FormatESModule, optional: true},
}

func bundle(root, out string) error {
	for _, e := range entries {
		if _, err := os.Stat(filepath.Join(root, e.src)); err != nil {
			if e.optional && errors.Is(err, fs.ErrNotExist) {
				continue
			}
			return err
		}
		res := api.Build(api.BuildOptions{
			AbsWorkingDir:     root,
			EntryPoints:       []string{e.src},
			EntryNames:        e.name,
			Outdir:            out,
			Bundle:            true,
			Format:            e.format,
			Target:            api.ES2020,
			Platform:          api.PlatformBrowser,
			MinifyWhitespace:  true,
			MinifyIdentifiers: true,
			MinifySyntax:      true,
			Sourcemap:         api.SourceMapLinked,
			Loader:            map[string]api.Loader{".css": api.LoaderCSS},
			LogLevel:          api.LogLevelSilent,
			Write:             true,
		})
		if len(res.Errors) > 0 {
			msgs := api.FormatMessages(res.Errors, api.FormatMessagesOptions{Kind: api.ErrorMessage})
			return fmt.Errorf("esbuild %s:\n%s", e.src, strings.Join(msgs, ""))
		}
	}
	return nil
}

// copyStatic copies web/*.html and image files, and Go's wasm_exec.js.
func copyStatic(root, out string) error {
	ents, err := os.ReadDir(filepath.Join(root, "web"))
	if err != nil {
		return err
	}
	_, haveMap := os.Stat(filepath.Join(root, "web", "mapview.ts"))
	for _, e := range ents {
		switch filepath.Ext(e.Name()) {
		case ".html", ".svg", ".png", ".ico", ".webmanifest":
		default:
			continue
		}
		b, err := os.ReadFile(filepath.Join(root, "web", e.Name()))
		if err != nil {
			return err
		}
		if e.Name() == "index.html" {
			tag := ""
			if haveMap == nil {
				// loaded on demand by the page (see web/main.ts, mapViewOnDemand)
				tag = `<meta name="lensbook-mapview" content="mapview.js">`
			}
			b = bytes.Replace(b, []byte("<!--mapview-->"), []byte(tag), 1)
		}
		if err := os.WriteFile(filepath.Join(out, e.Name()), b, 0o644); err != nil {
			return err
		}
	}
	goroot, err := exec.Command("go", "env", "GOROOT").Output()
	if err != nil {
		return fmt.Errorf("go env GOROOT: %v", err)
	}
	return copyFile(filepath.Join(strings.TrimSpace(string(goroot)), "lib", "wasm", "wasm_exec.js"),
		filepath.Join(out, "wasm_exec.js"))
}

// copyDemo copies the demo event folder and writes demo/index.json listing its
// photometry files (.dat, .txt, .csv, .ecsv, .pho; not the README or truth),
// which the page's demo button reads.
func copyDemo(src, out string) error {
	ents, err := os.ReadDir(src)
	if errors.Is(err, fs.ErrNotExist) {
		ents = nil
	} else if err != nil {
		return err
	}
	files := []string{}
	for _, e := range ents {
		if e.IsDir() {
			continue
		}
		if err := copyFile(filepath.Join(src, e.Name()), filepath.Join(out, e.Name())); err != nil {
			return err
		}
		switch strings.ToLower(filepath.Ext(e.Name())) {
		case ".dat", ".txt", ".csv", ".ecsv", ".pho":
			files = append(files, e.Name())
		}
	}
	sort.Strings(files)
	b, _ := json.Marshal(map[string]any{"files": files})
	return os.WriteFile(filepath.Join(out, "index.json"), b, 0o644)
}

// writeHeadersFile writes _headers, the per-path header file several static
// hosts read, so a deployed dist folder keeps the CSP and MIME rules of Handler.
func writeHeadersFile(out string) error {
	s := "/*\n  Content-Security-Policy: " + CSP + "\n  X-Content-Type-Options: nosniff\n  Referrer-Policy: no-referrer\n" +
		"/*.wasm\n  Content-Type: application/wasm\n"
	return os.WriteFile(filepath.Join(out, "_headers"), []byte(s), 0o644)
}

func copyFile(src, dst string) error {
	b, err := os.ReadFile(src)
	if err != nil {
		return err
	}
	return os.WriteFile(dst, b, 0o644)
}

// compressible reports whether a file gets .gz/.br siblings.
func compressible(name string) bool {
	switch filepath.Ext(name) {
	case ".wasm", ".js", ".css", ".html", ".json", ".svg", ".txt", ".dat", ".csv", ".ecsv", ".md":
		return true
	}
	return false
}

// Precompress writes name.gz and name.br beside every compressible file in dir
// (recursively), in parallel.
func Precompress(dir string, fast bool) error {
	var files []string
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() && compressible(p) {
			files = append(files, p)
		}
		return err
	})
	if err != nil {
		return err
	}
	gzLevel, brQuality := gzip.BestCompression, 11
	if fast {
		gzLevel, brQuality = 6, 5
	}
	sem := make(chan struct{}, 4)
	var wg sync.WaitGroup
	var mu sync.Mutex
	var errs []error
	for _, f := range files {
		for _, kind := range []string{"gz", "br"} {
			wg.Add(1)
			sem <- struct{}{}
			go func() {
				defer func() { <-sem; wg.Done() }()
				if err := compressFile(f, kind, gzLevel, brQuality); err != nil {
					mu.Lock()
					errs = append(errs, err)
					mu.Unlock()
				}
			}()
		}
	}
	wg.Wait()
	return errors.Join(errs...)
}

func compressFile(path, kind string, gzLevel, brQuality int) error {
	in, err := os.ReadFile(path)
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	var w io.WriteCloser
	if kind == "gz" {
		w, _ = gzip.NewWriterLevel(&buf, gzLevel)
	} else {
		w = brotli.NewWriterLevel(&buf, brQuality)
	}
	if _, err := w.Write(in); err != nil {
		return err
	}
	if err := w.Close(); err != nil {
		return err
	}
	return os.WriteFile(path+"."+kind, buf.Bytes(), 0o644)
}
