//go:build e2e && !js

package e2e

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// TestModelLink: a model link (lb1m:, the parameters and results with a
// fingerprint of the data, no data) made from a page with the demo fitted is
// opened in a fresh browser profile. The page shows what it holds and asks
// for each data file; a file of other numbers — another site's file, or the
// right file with one value changed — is refused with the reason beside the
// file input and nothing is replaced; the right files are attached, the
// notebook's fingerprint is the original's, the results table is the
// original's, and running the fit again reproduces it.
func TestModelLink(t *testing.T) {
	tr := readTruth(t)
	p := newPage(t)
	p.open("")
	uploadDemo(t, p)
	p.runStep("single", 2*time.Minute)
	var table []string
	p.evalInto(`Array.from(document.querySelectorAll("#single-table td")).map(e => e.textContent)`, &table)
	fingerprint := p.eval(`lensbook.current().notebook.fingerprint`).(string)

	p.click("#model-link")
	p.waitJS(`location.hash.startsWith("#lb1m:")`, 20*time.Second)
	link := p.eval(`location.href`).(string)
	t.Logf("model link: %d characters", len(link))

	q := newPage(t)
	if err := chromedpNavigate(q, link); err != nil {
		t.Fatal(err)
	}
	q.waitJS(`!!document.querySelector("#offer-open")`, time.Minute)
	offer := q.eval(`document.querySelector("#offer").innerText`).(string)
	for _, s := range tr.Sites {
		if !strings.Contains(offer, "you will be asked for "+s.File) {
			t.Errorf("the offer does not say it will ask for %s:\n%s", s.File, offer)
		}
	}
	q.click("#offer-open")
	q.waitJS(`document.querySelectorAll("[data-attach]").length === `+itoa(len(tr.Sites)), 20*time.Second)
	if n := q.eval(`document.querySelectorAll("#single-table").length`); n != 1.0 {
		t.Error("the link's single-lens results are not shown")
	}
	var files []string
	q.evalInto(`lensbook.current().notebook.datasets.map(d => d.source.file)`, &files)
	state := func() string {
		return q.eval(`JSON.stringify(lensbook.current().notebook) + JSON.stringify(Object.values(lensbook.steps()).map(s => [s.status, s.stale]))`).(string)
	}
	before := state()

	// refused: another site's file, and the right file with one number changed
	right := filepath.Join(demoDir, files[0])
	text, err := os.ReadFile(right)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(string(text), "\n")
	changed := false
	for i, l := range lines {
		if l == "" || strings.HasPrefix(l, "#") || !strings.ContainsAny(l[:1], "0123456789") {
			continue
		}
		f := strings.Fields(l)
		// the last digit of the uncertainty: same count, other numbers
		last := f[len(f)-1]
		d := last[len(last)-1]
		nd := byte('1')
		if d == '1' {
			nd = '2'
		}
		f[len(f)-1] = last[:len(last)-1] + string(nd)
		lines[i] = strings.Join(f, " ")
		changed = true
		break
	}
	if !changed {
		t.Fatal("no data line to change")
	}
	dir := t.TempDir()
	tampered := filepath.Join(dir, "changed-"+files[0])
	if err := os.WriteFile(tampered, []byte(strings.Join(lines, "\n")), 0o644); err != nil {
		t.Fatal(err)
	}
	// the right file without its last data line
	cutText := strings.TrimRight(string(text), "\n")
	cut := filepath.Join(dir, "cut-"+files[0])
	if err := os.WriteFile(cut, []byte(cutText[:strings.LastIndex(cutText, "\n")+1]), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct{ file, want string }{
		{filepath.Join(demoDir, files[1]), "rejected"},
		{cut, "expects"},
		{tampered, "fingerprint"},
	} {
		if err := chromedpUpload(q, `[data-attach="0"]`, []string{c.file}); err != nil {
			t.Fatal(err)
		}
		name := jsString(filepath.Base(c.file))
		q.waitJS(`(document.querySelector("[data-pending='0'] .attach-error") || {textContent: ""}).textContent.startsWith(`+name+`)`, 20*time.Second)
		msg := q.eval(`document.querySelector("[data-pending='0'] .attach-error").textContent`).(string)
		t.Logf("refused %s: %s", filepath.Base(c.file), msg)
		if !strings.Contains(msg, "was not attached") || !strings.Contains(msg, c.want) {
			t.Errorf("message for %s: %q, want one saying it was not attached (%s)", c.file, msg, c.want)
		}
		if state() != before {
			t.Errorf("a refused file (%s) changed the notebook or a step", c.file)
		}
		if n := q.eval(`document.querySelectorAll("[data-attach]").length`); n != float64(len(tr.Sites)) {
			t.Errorf("%v datasets wait after a refused file, want %d", n, len(tr.Sites))
		}
	}
	q.eval(`document.querySelector("[data-pending='0']").scrollIntoView({block: "center"}), true`)
	q.screenshotSmall(filepath.Join(os.TempDir(), "lensbook-model-link-refused.png"), 4<<20)

	// the right files
	for k, f := range files {
		if err := chromedpUpload(q, `[data-attach="`+itoa(k)+`"]`, []string{filepath.Join(demoDir, f)}); err != nil {
			t.Fatal(err)
		}
		q.waitJS(`document.querySelectorAll("[data-attach]").length === `+itoa(len(files)-k-1), 20*time.Second)
	}
	if msg := q.eval(`document.querySelector("#step-data .message").textContent`).(string); !strings.Contains(msg, "match the fingerprint") || !strings.Contains(msg, "Every dataset has its data") {
		t.Errorf("after the last file: %q", msg)
	}
	if got := q.eval(`lensbook.current().notebook.fingerprint`); got != fingerprint {
		t.Errorf("notebook fingerprint %v after attaching, original %v", got, fingerprint)
	}
	if n := q.eval(`document.querySelectorAll(".attach-error").length`); n != 0.0 {
		t.Error("an old refusal is still shown after the right files were attached")
	}
	var linked []string
	q.evalInto(`Array.from(document.querySelectorAll("#single-table td")).map(e => e.textContent)`, &linked)
	if strings.Join(linked, "|") != strings.Join(table, "|") {
		t.Errorf("results from the model link differ:\noriginal %v\nlink     %v", table, linked)
	}
	if q.eval(`lensbook.steps().single.stale`) != false {
		t.Error("attaching the same data made the fit stale")
	}
	// the fit reproduced from the attached data
	q.runStep("single", 2*time.Minute)
	var rerun []string
	q.evalInto(`Array.from(document.querySelectorAll("#single-table td")).map(e => e.textContent)`, &rerun)
	if strings.Join(rerun, "|") != strings.Join(table, "|") {
		t.Errorf("the fit run again on the attached data differs:\noriginal %v\nrerun    %v", table, rerun)
	}
	for _, pg := range []*page{p, q} {
		if errs := pg.consoleErrors(); len(errs) > 0 {
			t.Errorf("console errors: %v", errs)
		}
		if bad := pg.offOrigin(); len(bad) > 0 {
			t.Errorf("requests outside the origin: %v", bad)
		}
	}
}
