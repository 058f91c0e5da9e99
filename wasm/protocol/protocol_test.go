package protocol

import (
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

// TestTypeScriptMirror keeps web/protocol.ts in step with this package: the
// version and every reply kind must appear there.
func TestTypeScriptMirror(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("..", "..", "web", "protocol.ts"))
	if err != nil {
		t.Fatal(err)
	}
	ts := string(b)
	m := regexp.MustCompile(`PROTOCOL_VERSION = (\d+);`).FindStringSubmatch(ts)
	if m == nil {
		t.Fatal("web/protocol.ts has no PROTOCOL_VERSION")
	}
	if v, _ := strconv.Atoi(m[1]); v != Version {
		t.Errorf("web/protocol.ts PROTOCOL_VERSION = %d, Go Version = %d", v, Version)
	}
	for _, k := range []string{KindProgress, KindResult, KindError, KindCancelled, `"cancel"`} {
		if !strings.Contains(ts, strings.Trim(k, `"`)) {
			t.Errorf("web/protocol.ts does not mention %s", k)
		}
	}
	// Settings and results the page builds or reads field by field: every
	// JSON field of the Go type is a field of the TypeScript interface of the
	// same name (nested anonymous types: a field anywhere in the interface).
	for _, c := range []struct {
		name string
		typ  any
	}{
		{"DrawsIn", DrawsIn{}}, {"PhysicalSettings", PhysicalSettings{}}, {"QuantityOut", QuantityOut{}},
		{"PhysicalOut", PhysicalOut{}}, {"PhysicalOut", PhysicalMode{}},
		{"ForecastSettings", ForecastSettings{}}, {"TimeDist", TimeDist{}},
		{"ForecastOut", ForecastOut{}}, {"ForecastOut", ForecastMode{}},
	} {
		block := regexp.MustCompile(`(?s)export interface ` + c.name + ` \{\n(.*?)\n\}`).FindStringSubmatch(ts)
		if block == nil {
			t.Errorf("web/protocol.ts has no interface %s", c.name)
			continue
		}
		rt := reflect.TypeOf(c.typ)
		for i := range rt.NumField() {
			tag, _, _ := strings.Cut(rt.Field(i).Tag.Get("json"), ",")
			if tag == "" || tag == "-" {
				continue
			}
			if !regexp.MustCompile(`(?m)^\s*` + regexp.QuoteMeta(tag) + `\??:`).MatchString(block[1]) {
				t.Errorf("web/protocol.ts interface %s lacks the field %q of %s", c.name, tag, rt.Name())
			}
		}
	}
}

func TestHandleErrors(t *testing.T) {
	ctx := context.Background()
	r := Handle(ctx, Request{V: Version + 1, ID: 3, Step: "info"}, nil)
	if r.Kind != KindError || !strings.Contains(r.Error, "version") || r.ID != 3 {
		t.Errorf("wrong version: %+v", r)
	}
	r = Handle(ctx, Request{V: Version, ID: 4, Step: "no-such-step"}, nil)
	if r.Kind != KindError || !strings.Contains(r.Error, "not available yet") {
		t.Errorf("unknown step: %+v", r)
	}
	r = Handle(ctx, Request{V: Version, ID: 5, Step: "preview", Settings: json.RawMessage(`{"file":"a","text":"1 2 3","bogus":1}`)}, nil)
	if r.Kind != KindError || !strings.Contains(r.Error, "bogus") {
		t.Errorf("unknown setting accepted: %+v", r)
	}
	r = Handle(ctx, Request{V: Version, ID: 6, Step: "single", Settings: json.RawMessage(`{"notebook":null,"settings":{}}`)}, nil)
	if r.Kind != KindError || !strings.Contains(r.Error, "notebook") {
		t.Errorf("missing notebook: %+v", r)
	}
	r = Handle(ctx, Request{V: Version, ID: 7, Step: "info"}, nil)
	var info Info
	if r.Kind != KindResult || json.Unmarshal(r.Result, &info) != nil || info.Version != Version || len(info.Steps) == 0 {
		t.Errorf("info: %+v", r)
	}
}

// call runs one step natively and fails the test on anything but a result.
func call(t *testing.T, ctx context.Context, step string, settings any, v any) Reply {
	t.Helper()
	b, err := json.Marshal(settings)
	if err != nil {
		t.Fatal(err)
	}
	r := Handle(ctx, Request{V: Version, ID: 1, Step: step, Settings: b}, nil)
	if r.Kind != KindResult && r.Kind != KindCancelled {
		t.Fatalf("%s: %s %s", step, r.Kind, r.Error)
	}
	if v != nil {
		if err := json.Unmarshal(r.Result, v); err != nil {
			t.Fatalf("%s: decoding result: %v", step, err)
		}
	}
	return r
}

// TestDataSteps reads the demo files through preview and parse, edits and
// masks, and checks the notebook document after each step; then a cancelled
// grid chunk must reply "cancelled".
func TestDataSteps(t *testing.T) {
	ctx := context.Background()
	var doc json.RawMessage
	call(t, ctx, "notebook-new", struct{}{}, &doc)
	dir := filepath.Join("..", "..", "testdata", "demo")
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatalf("demo event: %v", err)
	}
	n := 0
	for _, e := range ents {
		if filepath.Ext(e.Name()) != ".dat" {
			continue
		}
		text, err := os.ReadFile(filepath.Join(dir, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		var pv struct {
			Proposed json.RawMessage `json:"proposed"`
		}
		call(t, ctx, "preview", map[string]string{"file": e.Name(), "text": string(text)}, &pv)
		call(t, ctx, "parse", map[string]any{"notebook": doc, "file": e.Name(), "text": string(text), "options": pv.Proposed}, &doc)
		n++
	}
	var d struct {
		Datasets []struct {
			Name   string
			Points int
			Masked []int
		}
	}
	json.Unmarshal(doc, &d)
	if len(d.Datasets) != n || n == 0 {
		t.Fatalf("%d datasets in the notebook, %d files", len(d.Datasets), n)
	}
	call(t, ctx, "edit", map[string]any{"notebook": doc, "dataset": 0, "field": "name", "value": "<b>renamed</b>"}, &doc)
	json.Unmarshal(doc, &d)
	if d.Datasets[0].Name != "<b>renamed</b>" {
		t.Errorf("edit: name %q", d.Datasets[0].Name)
	}
	bad := Handle(ctx, Request{V: Version, Step: "edit", Settings: mustJSON(map[string]any{"notebook": doc, "dataset": 0, "field": "ld", "value": 3})}, nil)
	if bad.Kind != KindError {
		t.Errorf("edit accepted limb darkening 3: %+v", bad)
	}
	// mask a box around everything fainter than magnitude 0 in the first 5 days
	var t0 struct {
		Datasets []struct{ T []float64 }
	}
	json.Unmarshal(doc, &t0)
	first := t0.Datasets[0].T[0]
	call(t, ctx, "mask", map[string]any{"notebook": doc, "t1": first, "t2": first + 5, "m1": 0, "m2": 40, "solution": nil, "unmask": false, "dataset": -1}, &doc)
	json.Unmarshal(doc, &d)
	if len(d.Datasets[0].Masked) == 0 {
		t.Error("mask: no point masked in the box")
	}
	call(t, ctx, "mask", map[string]any{"notebook": doc, "unmask": true, "dataset": -1, "t1": 0, "t2": 0, "m1": 0, "m2": 0, "solution": nil}, &doc)
	d.Datasets = nil
	json.Unmarshal(doc, &d)
	for _, ds := range d.Datasets {
		if len(ds.Masked) != 0 {
			t.Error("unmask left masked points")
		}
	}
	// a cancelled context gives a "cancelled" reply
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	r := Handle(cctx, Request{V: Version, Step: "grid", Settings: mustJSON(map[string]any{"notebook": doc, "start": map[string]float64{"T0": 2460480.3, "U0": 0.02, "TE": 34}, "settings": map[string]any{"ns": 3, "nq": 3}, "chunk": 0, "chunks": 1})}, nil)
	if r.Kind != KindCancelled {
		t.Errorf("cancelled grid replied %s %s", r.Kind, r.Error)
	}
}

func mustJSON(v any) json.RawMessage {
	b, err := json.Marshal(v)
	if err != nil {
		panic(err)
	}
	return b
}
