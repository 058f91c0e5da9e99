package fit

import (
	"bytes"
	"compress/flate"
	"encoding/base64"
	"encoding/json"
	"io"
	"strings"
	"testing"
)

func TestLinkFullRoundTrip(t *testing.T) {
	nb := demoNotebook(t, 200)
	link, c, err := EncodeLink(nb, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(link, LinkPrefixFull) || c.Kind != "full link" || c.Bytes != len(link) || len(link) > LinkFullMax {
		t.Fatalf("kind %q, %d characters", c.Kind, len(link))
	}
	got, c2, err := DecodeLink("https://example.invalid/lensbook/#" + link)
	if err != nil {
		t.Fatal(err)
	}
	if got.Fingerprint() != nb.Fingerprint() || c2.Fingerprint != c.Fingerprint || c2.Points != 260 {
		t.Errorf("fingerprint or counts differ: %+v", c2)
	}
	if !bytes.Equal(encodeOK(t, got), encodeOK(t, nb)) {
		t.Error("notebook changed through the link")
	}
	if again, _, _ := EncodeLink(got, nil); again != link {
		t.Error("link encoding is not deterministic")
	}
	if len(c2.Datasets) != 2 || !c2.Datasets[0].Included || c2.Datasets[0].Masked != 2 || len(c2.Steps) != 3 {
		t.Errorf("contents %+v", c2)
	}
}

func TestLinkModel(t *testing.T) {
	nb := demoNotebook(t, 10_000) // too large for a full link
	link, c, err := EncodeLink(nb, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(link, LinkPrefixModel) || c.Kind != "model link" {
		t.Fatalf("kind %q, %d characters", c.Kind, len(link))
	}
	got, c2, err := DecodeLink(link)
	if err != nil {
		t.Fatal(err)
	}
	if len(got.Pending) != 2 || c2.Datasets[1].Included || c2.Datasets[1].Points != 10_000 || c2.Datasets[0].File != "mag_hjd2450000.dat" {
		t.Errorf("contents %+v", c2)
	}
	if got.Fingerprint() != nb.Fingerprint() {
		t.Error("model link lost the data fingerprint")
	}
	if len(got.Steps) != 3 || string(got.Steps[0].Result) != string(nb.Steps[0].Result) {
		t.Error("steps lost")
	}
	// ModelOnly on a small notebook.
	small := demoNotebook(t, 20)
	link, c, err = EncodeLink(small, &LinkOptions{ModelOnly: true})
	if err != nil || c.Kind != "model link" {
		t.Fatalf("ModelOnly: %v %v", c, err)
	}
}

// TestLinkHostile: each bad link gives a clear error and no notebook.
func TestLinkHostile(t *testing.T) {
	good, _, err := EncodeLink(demoNotebook(t, 50), nil)
	if err != nil {
		t.Fatal(err)
	}
	pack := func(prefix string, doc []byte) string {
		return prefix + deflateBase64(doc)
	}
	doc := encodeOK(t, demoNotebook(t, 50))
	// A stream of n JSON array elements, compressed without holding it in memory.
	streamed := func(head string, n int, elem string, tail string) string {
		var buf bytes.Buffer
		zw, _ := flate.NewWriter(&buf, flate.BestSpeed)
		io.WriteString(zw, head)
		chunk := strings.Repeat(elem, 1<<16)
		for w := 0; w < n; w += 1 << 16 {
			io.WriteString(zw, chunk[:len(elem)*min(1<<16, n-w)])
		}
		io.WriteString(zw, tail)
		zw.Close()
		return LinkPrefixFull + base64.RawURLEncoding.EncodeToString(buf.Bytes())
	}
	tenMillion := streamed(`{"format":"lensbook-notebook","version":1,"event":{},"fingerprint":"","steps":[],"datasets":[{"points":10000000,"t":[`,
		3*10_000_000, "0,", "0]}]}")
	bomb := streamed("", 40<<20, " ", "")
	var trailing bytes.Buffer
	zw, _ := flate.NewWriter(&trailing, flate.BestCompression)
	zw.Write(doc)
	zw.Close()
	trailing.WriteString("extra")
	evil := demoNotebook(t, 20)
	evil.Event.Datasets[0].Name = `<img src=x onerror=alert(1)>`
	evilLink, _, err := EncodeLink(evil, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name, link, want string
	}{
		{"empty", "", "not a lensbook link"},
		{"other fragment", "#section-2", "not a lensbook link"},
		{"newer link version", "lb2f:" + good[5:], "version \"lb2f\""},
		{"not base64", LinkPrefixFull + "<script>alert(1)</script>", "not base64url"},
		{"truncated", good[:len(good)/2], "link:"},
		{"truncated by one", good[:len(good)-1], "link:"},
		{"not deflate", LinkPrefixFull + base64.RawURLEncoding.EncodeToString([]byte("hello, this is not deflate")), "damaged compressed data"},
		{"deflate bomb", bomb, "expands to more than"},
		{"ten million points", tenMillion, "expands to more than"},
		{"trailing bytes", LinkPrefixFull + base64.RawURLEncoding.EncodeToString(trailing.Bytes()), "unexpected bytes after"},
		{"wrong notebook version", pack(LinkPrefixFull, mutate(t, doc, func(m map[string]any) { m["version"] = 3 })), "newer lensbook"},
		{"negative count", pack(LinkPrefixFull, mutate(t, doc, func(m map[string]any) { ds0(m)["points"] = -1 })), "negative point count"},
		{"model link with data", pack(LinkPrefixModel, doc), "must not include data"},
		{"full link without data", pack(LinkPrefixFull, mustOmit(t, demoNotebook(t, 20))), "must include its data"},
		{"too long", LinkPrefixFull + strings.Repeat("A", LinkMax), "more than the"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			nb, c, err := DecodeLink(tc.link)
			if err == nil || nb != nil || c != nil {
				t.Fatalf("accepted (err %v)", err)
			}
			t.Log(err)
			if !strings.Contains(err.Error(), tc.want) || !strings.HasPrefix(err.Error(), "fit: link: ") {
				t.Errorf("error %q does not say %q", err, tc.want)
			}
		})
	}
	// Every cut of a link fails cleanly.
	for cut := 0; cut < len(good); cut += 1 + len(good)/97 {
		if nb, _, err := DecodeLink(good[:cut]); err == nil || nb != nil {
			t.Errorf("link cut at %d accepted", cut)
		}
	}
	// Markup in names is carried as text and flagged.
	nb, c, err := DecodeLink(evilLink)
	if err != nil {
		t.Fatal(err)
	}
	if nb.Event.Datasets[0].Name != `<img src=x onerror=alert(1)>` || c.Datasets[0].Name != nb.Event.Datasets[0].Name ||
		!strings.Contains(strings.Join(c.Warnings, "\n"), "dataset 1 name: contains markup") {
		t.Errorf("markup name: %q, warnings %q", nb.Event.Datasets[0].Name, c.Warnings)
	}
}

func mustOmit(t testing.TB, nb *Notebook) []byte {
	doc, err := encodeNotebook(nb, true)
	if err != nil {
		t.Fatal(err)
	}
	return doc
}

func FuzzDecodeLink(f *testing.F) {
	tiny := &Notebook{Event: NewEvent("e", synthDataset(4, 9)), Steps: []Step{{ID: "a", Kind: "refine", Status: StepPending}}}
	full, _, _ := EncodeLink(tiny, nil)
	model, _, _ := EncodeLink(tiny, &LinkOptions{ModelOnly: true})
	f.Add(full)
	f.Add(model)
	f.Add(full[:len(full)/2])
	f.Add("lb1f:")
	f.Add("lb1m:" + deflateBase64([]byte(`{"format":"lensbook-notebook","version":1}`)))
	f.Fuzz(func(t *testing.T, link string) {
		nb, c, err := DecodeLink(link)
		if err != nil {
			if nb != nil || c != nil {
				t.Fatal("partial result with an error")
			}
			return
		}
		again, _, err := EncodeLink(nb, &LinkOptions{FullMax: LinkMax, ModelOnly: c.Kind == "model link"})
		if err != nil {
			t.Fatalf("decoded link does not encode: %v", err)
		}
		nb2, c2, err := DecodeLink(again)
		if err != nil || nb2.Fingerprint() != nb.Fingerprint() || c2.Kind != c.Kind || c2.Points != c.Points {
			t.Fatalf("round trip changed the link: %v", err)
		}
	})
}

// Benchmarks on a 10,000-point notebook (full link forced), against deflate
// and base64 of the same document alone.

func BenchmarkLinkEncode10k(b *testing.B) {
	nb, doc, _ := bench10k(b)
	b.SetBytes(int64(len(doc)))
	opts := &LinkOptions{FullMax: LinkMax}
	c0 := processCPU()
	for b.Loop() {
		s, _, err := EncodeLink(nb, opts)
		if err != nil || !strings.HasPrefix(s, LinkPrefixFull) {
			b.Fatal(err)
		}
		benchSink = s
	}
	reportCPU(b, c0)
}

func BenchmarkLinkEncode10kBaseline(b *testing.B) {
	_, doc, _ := bench10k(b)
	b.SetBytes(int64(len(doc)))
	c0 := processCPU()
	for b.Loop() {
		benchSink = deflateBase64(doc)
	}
	reportCPU(b, c0)
}

func BenchmarkLinkDecode10k(b *testing.B) {
	nb, doc, _ := bench10k(b)
	s, _, _ := EncodeLink(nb, &LinkOptions{FullMax: LinkMax})
	b.SetBytes(int64(len(doc)))
	b.ReportMetric(float64(len(s)), "link-chars")
	c0 := processCPU()
	for b.Loop() {
		got, _, err := DecodeLink(s)
		if err != nil {
			b.Fatal(err)
		}
		benchSink = got
	}
	reportCPU(b, c0)
}

func BenchmarkLinkDecode10kBaseline(b *testing.B) {
	_, doc, bare := bench10k(b)
	raw, _ := json.Marshal(bare)
	s := deflateBase64(raw)
	b.SetBytes(int64(len(doc)))
	c0 := processCPU()
	for b.Loop() {
		z, _ := base64.RawURLEncoding.DecodeString(s)
		r, _ := io.ReadAll(flate.NewReader(bytes.NewReader(z)))
		var v bareArrays
		if err := json.Unmarshal(r, &v); err != nil {
			b.Fatal(err)
		}
		benchSink = v
	}
	reportCPU(b, c0)
}

// BenchmarkLinkEncode10kDefault is the button press on a 10,000-point
// notebook: the full attempt stops at the size limit, then a model link.
func BenchmarkLinkEncode10kDefault(b *testing.B) {
	nb, doc, _ := bench10k(b)
	b.SetBytes(int64(len(doc)))
	c0 := processCPU()
	for b.Loop() {
		s, _, err := EncodeLink(nb, nil)
		if err != nil || !strings.HasPrefix(s, LinkPrefixModel) {
			b.Fatal(err)
		}
		benchSink = s
	}
	reportCPU(b, c0)
}
