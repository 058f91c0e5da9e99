//go:build e2e && !js

// Package e2e drives the lensbook notebook in headless Chromium (chromedp):
// the site is built exactly as `go run ./build serve` builds it, served on
// 127.0.0.1 by the same handler, and used through its buttons and inputs.
// Run with `go test -tags e2e ./e2e/` (go run ./build test does). A missing
// browser fails the tests: install Debian's chromium package.
package e2e

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"net"
	"net/http"
	"net/url"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/cdproto/browser"
	"github.com/chromedp/cdproto/network"
	"github.com/chromedp/chromedp"

	"lensbook/build/site"
)

var (
	root    string // repository root
	demoDir string // demo event folder
	baseURL string // http://127.0.0.1:port/
	siteDir string
)

func TestMain(m *testing.M) {
	os.Exit(run(m))
}

func run(m *testing.M) int {
	out, err := exec.Command("go", "env", "GOMOD").Output()
	if err != nil {
		fmt.Fprintln(os.Stderr, "e2e: go env GOMOD:", err)
		return 1
	}
	root = filepath.Dir(strings.TrimSpace(string(out)))
	// LENSBOOK_DEMO_DIR points at another demo folder (development only).
	demoDir = os.Getenv("LENSBOOK_DEMO_DIR")
	if demoDir == "" {
		demoDir = filepath.Join(root, "testdata", "demo")
	}
	tmp, err := os.MkdirTemp("", "lensbook-e2e-")
	if err != nil {
		fmt.Fprintln(os.Stderr, "e2e:", err)
		return 1
	}
	defer os.RemoveAll(tmp)
	siteDir = filepath.Join(tmp, "site")
	start := time.Now()
	if err := site.Build(site.Options{Root: root, Out: siteDir, Fast: true, DemoDir: demoDir}); err != nil {
		fmt.Fprintln(os.Stderr, "e2e: building the site:", err)
		return 1
	}
	fmt.Fprintf(os.Stderr, "e2e: site built in %v\n", time.Since(start).Round(time.Millisecond))
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		fmt.Fprintln(os.Stderr, "e2e:", err)
		return 1
	}
	srv := &http.Server{Handler: counting(site.Handler(func() string { return siteDir }))}
	go srv.Serve(ln)
	defer srv.Close()
	baseURL = "http://" + ln.Addr().String() + "/"
	return m.Run()
}

// served counts the bytes the server sent (compressed bodies, as on the
// wire without TLS and headers) and the paths asked for, workers and frames
// included, which the page's own network events do not show.
var served struct {
	sync.Mutex
	bytes int64
	paths []string
}

type countWriter struct {
	http.ResponseWriter
	n int64
}

func (w *countWriter) Write(b []byte) (int, error) {
	n, err := w.ResponseWriter.Write(b)
	w.n += int64(n)
	return n, err
}

func counting(h http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		cw := &countWriter{ResponseWriter: w}
		h.ServeHTTP(cw, r)
		served.Lock()
		served.bytes += cw.n
		served.paths = append(served.paths, r.URL.Path)
		served.Unlock()
	})
}

func resetServed() {
	served.Lock()
	served.bytes, served.paths = 0, nil
	served.Unlock()
}

func servedSoFar() (int64, []string) {
	served.Lock()
	defer served.Unlock()
	return served.bytes, append([]string(nil), served.paths...)
}

// page is one browser with one tab, recording console errors, every network
// request and the downloads.
type page struct {
	t      *testing.T
	ctx    context.Context
	dl     string // download folder
	mu     sync.Mutex
	errs   []string
	reqs   []string
	bytes  map[network.RequestID]float64 // encoded (compressed) bytes per finished request
	downs  map[string]string             // download guid → suggested file name
	doneDL map[string]bool
}

func chromiumPath(t *testing.T) string {
	for _, p := range []string{"/usr/bin/chromium", "/usr/lib/chromium/chromium", "/usr/bin/chromium-browser"} {
		if _, err := os.Stat(p); err == nil {
			return p
		}
	}
	t.Fatal("chromium not found: install it (apt-get install -y chromium); the browser tests never skip")
	return ""
}

func newPage(t *testing.T) *page {
	t.Helper()
	prof, err := os.MkdirTemp("", "lensbook-chromium-")
	if err != nil {
		t.Fatal(err)
	}
	opts := append(chromedp.DefaultExecAllocatorOptions[:],
		chromedp.ExecPath(chromiumPath(t)),
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.Flag("disable-quic", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.UserDataDir(prof),
		chromedp.WindowSize(1280, 1000),
	)
	actx, acancel := chromedp.NewExecAllocator(context.Background(), opts...)
	ctx, cancel := chromedp.NewContext(actx)
	p := &page{t: t, ctx: ctx, dl: t.TempDir(), bytes: map[network.RequestID]float64{}, downs: map[string]string{}, doneDL: map[string]bool{}}
	t.Cleanup(func() {
		cancel()
		acancel()
		for range 5 {
			if os.RemoveAll(prof) == nil {
				break
			}
			time.Sleep(200 * time.Millisecond)
		}
	})
	msgs := chromedp.Console(ctx)
	go func() {
		for m, err := range msgs {
			if err != nil {
				return
			}
			if m.Type == chromedp.ConsoleError || m.Type == chromedp.ConsoleException {
				p.mu.Lock()
				p.errs = append(p.errs, fmt.Sprintf("%s: %s (%s:%d)", m.Type, m.Text, m.URL, m.Line))
				p.mu.Unlock()
			}
		}
	}()
	if err := chromedp.Listen(ctx, func(ev any) {
		p.mu.Lock()
		defer p.mu.Unlock()
		switch e := ev.(type) {
		case *network.EventRequestWillBeSent:
			p.reqs = append(p.reqs, e.Request.URL)
		case *network.EventLoadingFinished:
			p.bytes[e.RequestID] = e.EncodedDataLength
		}
	}); err != nil {
		t.Fatal(err)
	}
	if err := chromedp.ListenBrowser(ctx, func(ev any) {
		p.mu.Lock()
		defer p.mu.Unlock()
		switch e := ev.(type) {
		case *browser.EventDownloadWillBegin:
			p.downs[e.GUID] = e.SuggestedFilename
		case *browser.EventDownloadProgress:
			if e.State == browser.DownloadProgressStateCompleted {
				p.doneDL[e.GUID] = true
			}
		}
	}); err != nil {
		t.Fatal(err)
	}
	if _, err := chromedp.Call(ctx, network.Enable, network.EnableParams{}); err != nil {
		t.Fatal(err)
	}
	if _, err := chromedp.Call(ctx, network.SetCacheDisabled, network.SetCacheDisabledParams{CacheDisabled: true}); err != nil {
		t.Fatal(err)
	}
	yes := true
	if _, err := chromedp.CallBrowser(ctx, browser.SetDownloadBehavior, browser.SetDownloadBehaviorParams{
		Behavior: browser.SetDownloadBehaviorBehaviorAllowAndName, DownloadPath: p.dl, EventsEnabled: &yes}); err != nil {
		t.Fatal(err)
	}
	return p
}

// open loads the page (with query, e.g. "?workers=3") and waits until the
// engine is ready; it returns the time from navigation start to ready (ms).
func (p *page) open(query string) float64 {
	p.t.Helper()
	if err := chromedp.Do(p.ctx, chromedp.Navigate(baseURL+query)); err != nil {
		p.t.Fatal(err)
	}
	p.waitJS(`document.body.dataset.ready === "1"`, 60*time.Second)
	return p.eval(`Number(document.body.dataset.readyAt)`).(float64)
}

// eval evaluates a JavaScript expression (promises awaited) and returns its JSON value.
func (p *page) eval(js string) any {
	p.t.Helper()
	ctx, cancel := context.WithTimeout(p.ctx, 60*time.Second)
	defer cancel()
	v, err := chromedp.Run(ctx, chromedp.Evaluate[any](js, chromedp.EvalAwaitPromise))
	if err != nil {
		p.t.Fatalf("evaluating %s: %v", js, err)
	}
	return v
}

// evalInto evaluates js and decodes its JSON value into v.
func (p *page) evalInto(js string, v any) {
	p.t.Helper()
	b, err := json.Marshal(p.eval(js))
	if err != nil {
		p.t.Fatal(err)
	}
	if err := json.Unmarshal(b, v); err != nil {
		p.t.Fatal(err)
	}
}

// waitJS polls a JavaScript condition until it is true.
func (p *page) waitJS(cond string, timeout time.Duration) {
	p.t.Helper()
	ctx, cancel := context.WithTimeout(p.ctx, timeout)
	defer cancel()
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](cond, chromedp.WithPollingTimeout(timeout), chromedp.WithPollingInterval(50*time.Millisecond))); err != nil {
		notice, _ := chromedp.Run(p.ctx, chromedp.Evaluate[string](`(document.querySelector("#notice") || {}).textContent || ""`))
		p.t.Fatalf("waiting for %s: %v (console errors: %v; notice: %q)", cond, err, p.consoleErrors(), notice)
	}
}

// click clicks the element as a user would. The page re-renders a step's
// panel when its state changes; a node replaced between the query and the
// click ("Could not find node with given id") is queried again.
func (p *page) click(sel string) {
	p.t.Helper()
	ctx, cancel := context.WithTimeout(p.ctx, 30*time.Second)
	defer cancel()
	for try := 0; ; try++ {
		err := chromedp.Do(ctx, chromedp.Click(chromedp.CSS(sel), chromedp.NodeVisible))
		if err == nil {
			return
		}
		if try >= 4 || !strings.Contains(err.Error(), "Could not find node") {
			p.t.Fatalf("click %s: %v", sel, err)
		}
		time.Sleep(100 * time.Millisecond)
	}
}

// press clicks a button and waits up to 10 s for started, a JS condition
// that its action has begun (or ended). A click the page lost (the button
// re-rendered or moved between chromedp's query and its mouse event) is
// pressed again, up to three presses, each logged.
func (p *page) press(sel, started string) {
	p.t.Helper()
	for try := 1; ; try++ {
		p.click(sel)
		ctx, cancel := context.WithTimeout(p.ctx, 10*time.Second)
		_, err := chromedp.Run(ctx, chromedp.Poll[bool](started, chromedp.WithPollingTimeout(10*time.Second), chromedp.WithPollingInterval(50*time.Millisecond)))
		cancel()
		if err == nil {
			return
		}
		if try == 3 {
			p.t.Fatalf("pressed %s three times, nothing started (%s): %v", sel, started, err)
		}
		p.t.Logf("pressed %s, nothing started within 10 s: pressing again", sel)
	}
}

// setInput sets a form field as a user would (value, then a change event).
func (p *page) setInput(sel string, v any) {
	p.t.Helper()
	b, _ := json.Marshal(sel)
	val, _ := json.Marshal(fmt.Sprint(v))
	ok := p.eval(fmt.Sprintf(`(() => { const e = document.querySelector(%s); if (!e) return false; e.value = %s; e.dispatchEvent(new Event("change", {bubbles: true})); return true; })()`, b, val))
	if ok != true {
		p.t.Fatalf("no input %s", sel)
	}
}

// runStep clicks a step's Run button and waits for it to finish. The click
// goes through press: a click lost to the page moving the button (a step
// above it re-rendered; the figures keep their space, TestFiguresKeepTheirSpace)
// is pressed again.
func (p *page) runStep(id string, timeout time.Duration) time.Duration {
	p.t.Helper()
	start := time.Now()
	p.eval(fmt.Sprintf(`(window.lbBefore = lensbook.steps()[%q].result, window.lbBeforeMsg = lensbook.steps()[%q].message, true)`, id, id))
	p.press("#run-"+id, fmt.Sprintf(`(() => { const s = lensbook.steps()[%q]; return s.status === "running" || s.result !== window.lbBefore || s.message !== window.lbBeforeMsg; })()`, id))
	p.waitJS(fmt.Sprintf(`lensbook.steps()[%q].status !== "running"`, id), timeout)
	d := time.Since(start)
	st := p.eval(fmt.Sprintf(`lensbook.steps()[%q].status + ": " + (lensbook.steps()[%q].message || "")`, id, id)).(string)
	if !strings.HasPrefix(st, "done") {
		p.t.Fatalf("step %s ended %s", id, st)
	}
	p.t.Logf("step %s: %s (%v wall)", id, st, d.Round(time.Millisecond))
	return d
}

func (p *page) consoleErrors() []string {
	p.mu.Lock()
	defer p.mu.Unlock()
	return append([]string(nil), p.errs...)
}

// offOrigin lists requests to anything but the test server (data: and blob:
// URLs stay in the tab).
func (p *page) offOrigin() []string {
	p.mu.Lock()
	defer p.mu.Unlock()
	base, _ := url.Parse(baseURL)
	var bad []string
	for _, r := range p.reqs {
		u, err := url.Parse(r)
		if err != nil {
			bad = append(bad, r)
			continue
		}
		if u.Scheme == "data" || u.Scheme == "blob" {
			continue
		}
		if u.Host != base.Host {
			bad = append(bad, r)
		}
	}
	return bad
}

func (p *page) transferred() (total float64, n int) {
	p.mu.Lock()
	defer p.mu.Unlock()
	for _, b := range p.bytes {
		total += b
	}
	return total, len(p.bytes)
}

// download waits for a download with a name containing want and returns its content.
func (p *page) download(want string, timeout time.Duration) []byte {
	p.t.Helper()
	deadline := time.Now().Add(timeout)
	for time.Now().Before(deadline) {
		p.mu.Lock()
		for guid, name := range p.downs {
			if strings.Contains(name, want) && p.doneDL[guid] {
				p.mu.Unlock()
				b, err := os.ReadFile(filepath.Join(p.dl, guid))
				if err != nil {
					p.t.Fatal(err)
				}
				return b
			}
		}
		p.mu.Unlock()
		time.Sleep(100 * time.Millisecond)
	}
	p.t.Fatalf("no finished download named like %q (have %v)", want, p.downs)
	return nil
}

// screenshot saves a full-page PNG under name in the test's output folder.
func (p *page) screenshot(path string) {
	p.t.Helper()
	png, err := chromedp.Run(p.ctx, chromedp.FullScreenshot(100))
	if err != nil {
		p.t.Fatal(err)
	}
	if err := os.WriteFile(path, png, 0o644); err != nil {
		p.t.Fatal(err)
	}
}

func chromedpUpload(p *page, sel string, files []string) error {
	ctx, cancel := context.WithTimeout(p.ctx, 30*time.Second)
	defer cancel()
	return chromedp.Do(ctx, chromedp.SetUploadFiles(chromedp.CSS(sel), files, chromedp.NodeReady))
}

// screenshotSmall saves the visible viewport as a PNG of at most maxBytes,
// halving the resolution step by step (box filter) until it fits: the
// README's screenshot.
func (p *page) screenshotSmall(path string, maxBytes int) {
	p.t.Helper()
	raw, err := chromedp.Run(p.ctx, chromedp.CaptureScreenshot())
	if err != nil {
		p.t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(raw))
	if err != nil {
		p.t.Fatal(err)
	}
	for scale := 1.0; scale > 0.2; scale *= 0.8 {
		small := shrink(img, scale)
		var buf bytes.Buffer
		enc := png.Encoder{CompressionLevel: png.BestCompression}
		if err := enc.Encode(&buf, small); err != nil {
			p.t.Fatal(err)
		}
		if buf.Len() <= maxBytes {
			if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
				p.t.Fatal(err)
			}
			p.t.Logf("screenshot %s: %dx%d, %d bytes", path, small.Bounds().Dx(), small.Bounds().Dy(), buf.Len())
			return
		}
	}
	p.t.Errorf("screenshot does not fit in %d bytes", maxBytes)
}

// shrink scales img by f (≤ 1) with a box filter.
func shrink(img image.Image, f float64) image.Image {
	if f >= 1 {
		return img
	}
	b := img.Bounds()
	w, h := int(float64(b.Dx())*f), int(float64(b.Dy())*f)
	out := image.NewNRGBA(image.Rect(0, 0, w, h))
	for y := range h {
		y0, y1 := b.Min.Y+int(float64(y)/f), b.Min.Y+int(float64(y+1)/f)
		for x := range w {
			x0, x1 := b.Min.X+int(float64(x)/f), b.Min.X+int(float64(x+1)/f)
			var r, g, bl, n uint32
			for yy := y0; yy < max(y1, y0+1); yy++ {
				for xx := x0; xx < max(x1, x0+1); xx++ {
					cr, cg, cb, _ := img.At(xx, yy).RGBA()
					r, g, bl, n = r+cr, g+cg, bl+cb, n+1
				}
			}
			out.Set(x, y, color.NRGBA{uint8(r / n >> 8), uint8(g / n >> 8), uint8(bl / n >> 8), 255})
		}
	}
	return out
}

func chromedpReload(p *page) error {
	ctx, cancel := context.WithTimeout(p.ctx, 30*time.Second)
	defer cancel()
	return chromedp.Do(ctx, chromedp.Reload())
}

func chromedpNavigate(p *page, u string) error {
	ctx, cancel := context.WithTimeout(p.ctx, 30*time.Second)
	defer cancel()
	return chromedp.Do(ctx, chromedp.Navigate(u))
}
