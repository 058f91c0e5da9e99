package fit

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"runtime"
	"strconv"
	"strings"
	"testing"
)

// synthDataset returns n points with seeded values, including awkward floats
// (tiny, huge, negative zero flux) to exercise exact round trips.
func synthDataset(n int, seed uint64) *Dataset {
	r := rand.New(rand.NewPCG(seed, 1))
	d := &Dataset{Name: "synthetic", Band: "I", TimeSystem: "BJD-TDB", ZeroPoint: 25, LD: 0.55,
		T: make([]float64, n), Flux: make([]float64, n), Err: make([]float64, n), Line: make([]int, n)}
	t := 2460100.0
	for i := range n {
		t += r.Float64() * 0.1
		d.T[i] = t
		d.Flux[i] = 1000 * r.NormFloat64()
		d.Err[i] = 1 + r.Float64()
		d.Line[i] = i + 2
	}
	if n > 3 {
		d.Flux[0] = math.Copysign(0, -1)
		d.Flux[1] = 5e-324
		d.Flux[2] = 1.7976931348623157e308
		d.Err[3] = 1e-300
	}
	return d
}

// demoNotebook builds a notebook with a parsed dataset, a synthetic one of n
// points, masks, renormalisation and three steps.
func demoNotebook(t testing.TB, n int) *Notebook {
	t.Helper()
	d1, err := Parse("mag_hjd2450000.dat", readFixture(t, "mag_hjd2450000.dat"), magOpts)
	if err != nil {
		t.Fatal(err)
	}
	d1.Band = "V"
	d1.ErrScale, d1.ErrFloor = 1.3, 0.004
	d2 := synthDataset(n, 42)
	ev := NewEvent("demo event 2026", d1, d2)
	ev.Tol = 1e-3
	ev.Coords = &Coords{RA: 268.75, Dec: -29.5} // the model's copy, loaded from the one "coords" field
	ev.Blend = []Blend{{Mode: BlendNonNegative}, {Mode: BlendFixed, Fb: 12.5}}
	if _, err := ev.Mask(Mask{Dataset: 0, Points: []int{3, 4}, Reason: "cloud"}); err != nil {
		t.Fatal(err)
	}
	if _, err := ev.Mask(Mask{Dataset: 1, Ranges: [][2]float64{{d2.T[5], d2.T[9]}}, Reason: "bad night"}); err != nil {
		t.Fatal(err)
	}
	return &Notebook{
		Title:  "Demo",
		Notes:  "line one\nline two",
		Event:  ev,
		Coords: &Coords{RA: 268.75, Dec: -29.5},
		Steps: []Step{
			{ID: "s1", Kind: "single-lens", Settings: json.RawMessage(`{"finite":false}`), Seed: 1, Status: StepDone,
				Result: json.RawMessage(`{"t0":2461250.3,"chi2":123.25}`)},
			{ID: "s2", Kind: "binary-search", Settings: json.RawMessage(`{"grid":[31,31]}`), Seed: math.MaxUint64, Status: StepCancelled},
			{ID: "s3", Kind: "refine", Status: StepPending, Note: "try <b>wide</b>"},
		},
	}
}

func encodeOK(t testing.TB, nb *Notebook) []byte {
	t.Helper()
	b, err := EncodeNotebook(nb)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func TestNotebookRoundTrip(t *testing.T) {
	nb := demoNotebook(t, 500)
	doc := encodeOK(t, nb)
	got, err := DecodeNotebook(doc)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, nb) {
		t.Errorf("decoded notebook differs:\n got %+v\nwant %+v", got, nb)
	}
	// Bit-for-bit: the fingerprint covers the IEEE bits of every number.
	if got.Fingerprint() != nb.Fingerprint() {
		t.Error("fingerprints differ")
	}
	if got.Event.Datasets[1].Flux[0] != 0 || !math.Signbit(got.Event.Datasets[1].Flux[0]) {
		t.Error("negative zero lost")
	}
	if again := encodeOK(t, got); !bytes.Equal(again, doc) {
		t.Error("re-encoding gives different bytes")
	}
	nb2, c, err := OpenNotebook(doc)
	if err != nil || c.Kind != "notebook" || c.Bytes != len(doc) || c.Points != 560 || c.Fingerprint != nb.Fingerprint() || nb2 == nil {
		t.Errorf("OpenNotebook: %+v, %v", c, err)
	}
	if !strings.Contains(string(doc), `"seed":"18446744073709551615"`) {
		t.Error("seed not written as a decimal string")
	}
}

// TestNotebookFixture decodes the version-1 example kept in testdata (a
// regression guard for the format, written by EncodeNotebook).
func TestNotebookFixture(t *testing.T) {
	path := filepath.Join("..", "testdata", "notebook", "v1-demo.json")
	want := encodeOK(t, demoNotebook(t, 20))
	if os.Getenv("LENSBOOK_UPDATE") != "" {
		os.WriteFile(path, want, 0o644)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	nb, err := DecodeNotebook(b)
	if err != nil {
		t.Fatal(err)
	}
	if got := encodeOK(t, nb); !bytes.Equal(got, b) {
		t.Error("fixture does not re-encode to the same bytes")
	}
	if !bytes.Equal(b, want) {
		t.Error("fixture differs from the current encoding (format changed? bump the version and add a migration, or regenerate with LENSBOOK_UPDATE=1)")
	}
}

// TestDatasetFingerprint rebuilds the canonical encoding from its
// description in the DatasetFingerprint doc and hashes it with crypto/sha256.
func TestDatasetFingerprint(t *testing.T) {
	d := &Dataset{T: []float64{2460000.5, 2460001.25}, Flux: []float64{1, math.Copysign(0, -1)}, Err: []float64{0.5, 2}}
	var b []byte
	b = append(b, "lensbook-data-v1\n"...)
	b = binary.LittleEndian.AppendUint64(b, 2)
	for i := range 2 {
		for _, v := range []float64{d.T[i], d.Flux[i], d.Err[i]} {
			b = binary.LittleEndian.AppendUint64(b, math.Float64bits(v))
		}
	}
	sum := sha256.Sum256(b)
	if got := DatasetFingerprint(d); got != hex.EncodeToString(sum[:]) {
		t.Errorf("fingerprint %s, want %x", got, sum)
	}
	all := []byte("lensbook-datasets-v1\n")
	all = binary.LittleEndian.AppendUint64(all, 1)
	all = append(all, sum[:]...)
	sum2 := sha256.Sum256(all)
	if got := DataFingerprint([]*Dataset{d}); got != hex.EncodeToString(sum2[:]) {
		t.Errorf("data fingerprint %s, want %x", got, sum2)
	}
	// Sensitive to every bit of the numbers (here the sign of zero), blind to labels.
	e := *d
	e.Flux = []float64{1, 0}
	if DatasetFingerprint(&e) == DatasetFingerprint(d) {
		t.Error("fingerprint ignores the sign of zero")
	}
	e = *d
	e.Name, e.Line = "renamed", []int{7, 8}
	if DatasetFingerprint(&e) != DatasetFingerprint(d) {
		t.Error("fingerprint depends on labels")
	}
	// Larger than the internal buffer.
	big := synthDataset(1000, 3)
	h := sha256.New()
	h.Write([]byte("lensbook-data-v1\n"))
	binary.Write(h, binary.LittleEndian, uint64(1000))
	for i := range 1000 {
		binary.Write(h, binary.LittleEndian, []float64{big.T[i], big.Flux[i], big.Err[i]})
	}
	if got := DatasetFingerprint(big); got != hex.EncodeToString(h.Sum(nil)) {
		t.Error("fingerprint of 1000 points differs from the streamed reference")
	}
}

// mutate decodes doc into generic JSON, applies f and re-encodes.
func mutate(t testing.TB, doc []byte, f func(m map[string]any)) []byte {
	t.Helper()
	var m map[string]any
	dec := json.NewDecoder(bytes.NewReader(doc))
	dec.UseNumber()
	if err := dec.Decode(&m); err != nil {
		t.Fatal(err)
	}
	f(m)
	b, err := json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func ds0(m map[string]any) map[string]any { return m["datasets"].([]any)[0].(map[string]any) }

// TestNotebookHostile: each bad document gives a clear error and no notebook.
func TestNotebookHostile(t *testing.T) {
	doc := encodeOK(t, demoNotebook(t, 50))
	set := func(f func(m map[string]any)) []byte { return mutate(t, doc, f) }
	header := `{"format":"lensbook-notebook","version":1,"event":{"ref":0},"fingerprint":"` + strings.Repeat("0", 64) + `","steps":[],"datasets":[`
	manyPoints := func(n int) []byte {
		var b bytes.Buffer
		b.WriteString(header)
		b.WriteString(`{"name":"x","zero_point":25,"ld":0,"points":` + strconv.Itoa(n) + `,"fingerprint":"` + strings.Repeat("0", 64) + `","source":{"lines":{},"options":{}}`)
		for _, k := range []string{"t", "flux", "err", "line"} {
			b.WriteString(`,"` + k + `":[`)
			b.WriteString(strings.Repeat("1,", n-1) + "1]")
		}
		b.WriteString("}]}")
		return b.Bytes()
	}
	for _, tc := range []struct {
		name string
		doc  []byte
		want string
	}{
		{"not JSON", []byte("<html>"), "cannot read format and version"},
		{"no format", set(func(m map[string]any) { delete(m, "format") }), "no \"format\" field"},
		{"wrong format", set(func(m map[string]any) { m["format"] = "spreadsheet" }), "format \"spreadsheet\""},
		{"no version", set(func(m map[string]any) { delete(m, "version") }), "no \"version\""},
		{"newer version", set(func(m map[string]any) { m["version"] = 2 }), "newer lensbook"},
		{"version 0", set(func(m map[string]any) { m["version"] = 0 }), "does not exist"},
		{"version as text", set(func(m map[string]any) { m["version"] = "1" }), "cannot read format and version"},
		{"unknown field", set(func(m map[string]any) { m["surprise"] = 1 }), "unknown field"},
		{"trailing data", append(slicesClone(doc), []byte(`{"x":1}`)...), "unexpected data after"},
		{"negative count", set(func(m map[string]any) { ds0(m)["points"] = -5 }), "negative point count"},
		{"count mismatch", set(func(m map[string]any) { ds0(m)["points"] = 61 }), "\"points\" is 61"},
		{"lengths differ", set(func(m map[string]any) { d := ds0(m); d["flux"] = d["flux"].([]any)[1:] }), "arrays hold"},
		{"altered number", set(func(m map[string]any) { ds0(m)["flux"].([]any)[0] = json.Number("123.5") }), "do not match the recorded fingerprint"},
		{"zero uncertainty", set(func(m map[string]any) { ds0(m)["err"].([]any)[0] = json.Number("0") }), "uncertainty 0"},
		{"overflowing number", bytes.Replace(doc, []byte(`"zero_point":25`), []byte(`"zero_point":1e999`), 1), "1e999"},
		{"mask out of range", set(func(m map[string]any) { ds0(m)["masked"] = []any{3, 4, 999} }), "masked index 999"},
		{"mask out of order", set(func(m map[string]any) { ds0(m)["masked"] = []any{4, 3} }), "out of order"},
		{"mask record not applied", set(func(m map[string]any) { ds0(m)["masked"] = []any{3} }), "not marked as masked"},
		{"negative line count", set(func(m map[string]any) {
			ds0(m)["source"].(map[string]any)["lines"].(map[string]any)["comment"] = -1
		}), "negative line count"},
		{"line counts", set(func(m map[string]any) {
			ds0(m)["source"].(map[string]any)["lines"].(map[string]any)["comment"] = 99
		}), "do not add up"},
		{"null dataset", set(func(m map[string]any) { m["datasets"].([]any)[0] = nil }), "null"},
		{"omitted with data", set(func(m map[string]any) { ds0(m)["omitted"] = true }), "marked omitted but holds points"},
		{"bad fingerprint text", set(func(m map[string]any) { ds0(m)["fingerprint"] = "<script>" }), "64 hex digits"},
		{"altered overall fingerprint", set(func(m map[string]any) { m["fingerprint"] = strings.Repeat("a", 64) }), "does not match the datasets"},
		{"repeated step id", set(func(m map[string]any) { m["steps"].([]any)[1].(map[string]any)["id"] = "s1" }), "empty or repeated"},
		{"unknown status", set(func(m map[string]any) { m["steps"].([]any)[0].(map[string]any)["status"] = "exploded" }), "unknown status"},
		{"bad step kind", set(func(m map[string]any) { m["steps"].([]any)[0].(map[string]any)["kind"] = "<script>" }), "kind"},
		{"bad value kind", bytes.Replace(doc, []byte(`"kind":"magnitude"`), []byte(`"kind":"lumens"`), 1), "unknown value kind"},
		{"seed not a number", set(func(m map[string]any) { m["steps"].([]any)[0].(map[string]any)["seed"] = "-1" }), "seed"},
		{"control character", set(func(m map[string]any) { ds0(m)["name"] = "a\u0007b" }), "control character"},
		{"long name", set(func(m map[string]any) { ds0(m)["name"] = strings.Repeat("x", MaxNameLen+1) }), "longer than"},
		{"bad coordinates", set(func(m map[string]any) {
			m["event"].(map[string]any)["coords"] = map[string]any{"ra_deg": 400, "dec_deg": 0}
		}), "out of range"},
		{"bad blend mode", set(func(m map[string]any) {
			m["event"].(map[string]any)["blend"] = []any{map[string]any{"mode": "sideways"}}
		}), "blend mode"},
		{"bad reference", set(func(m map[string]any) { m["event"].(map[string]any)["ref"] = 7 }), "reference point"},
		{"too many datasets", set(func(m map[string]any) {
			d := m["datasets"].([]any)
			for len(d) <= MaxDatasets {
				d = append(d, d[0])
			}
			m["datasets"] = d
		}), "datasets, more than"},
		{"too many points", manyPoints(MaxPoints + 1), "more than 1000000 points"}, // ~1 s native, skipped under -short on wasm
		{"too large", append([]byte(`{"format":"lensbook-notebook","version":1,"title":"`), bytes.Repeat([]byte(" "), MaxNotebookBytes)...), "larger than"},
		{"deep nesting", bytes.Replace(doc, []byte(`{"finite":false}`), []byte(strings.Repeat("[", 20000)+strings.Repeat("]", 20000)), 1), "depth"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if testing.Short() && runtime.GOARCH == "wasm" && tc.name == "too many points" {
				t.Skip("decoding a million points takes ~10 s under wasm")
			}
			nb, err := DecodeNotebook(tc.doc)
			if err == nil || nb != nil {
				t.Fatalf("accepted: nb=%v err=%v", nb != nil, err)
			}
			t.Log(err)
			if !strings.Contains(err.Error(), tc.want) || !strings.HasPrefix(err.Error(), "fit: notebook: ") {
				t.Errorf("error %q does not say %q", err, tc.want)
			}
		})
	}
}

func slicesClone(b []byte) []byte { return append([]byte(nil), b...) }

// observerRows is a 5-row spacecraft table (geocentric AU, ICRS axes)
// spanning the synthetic datasets' times.
func observerRows(name string) *ObserverTable {
	o := &ObserverTable{Name: name}
	for i := range 5 {
		o.T = append(o.T, 2461000+100*float64(i))
		o.X = append(o.X, 0.1+0.01*float64(i))
		o.Y = append(o.Y, -0.7)
		o.Z = append(o.Z, 0.3-0.02*float64(i))
	}
	return o
}

// TestNotebookParallaxFields: the sky position, t0,par and the observatory
// tables come back into the Event (the model reads them from there), and
// documents written before these fields existed still read as version 1
// with none of them set.
func TestNotebookParallaxFields(t *testing.T) {
	nb := demoNotebook(t, 30)
	nb.Coords = nil // only the model knows the position: it is still saved
	nb.Event.TRef = 2461250.5
	nb.Event.Observers = []*ObserverTable{nil, observerRows("probe")}
	doc := encodeOK(t, nb)
	got, err := DecodeNotebook(doc)
	if err != nil {
		t.Fatal(err)
	}
	ev := got.Event
	if ev.Coords == nil || *ev.Coords != (Coords{RA: 268.75, Dec: -29.5}) || got.Coords == nil || *got.Coords != *ev.Coords {
		t.Errorf("coordinates after load: event %v, notebook %v", ev.Coords, got.Coords)
	}
	if ev.Coords == got.Coords {
		t.Error("event and notebook share one Coords value: editing one would move the other")
	}
	if ev.TRef != 2461250.5 {
		t.Errorf("TRef = %v, want 2461250.5", ev.TRef)
	}
	if len(ev.Observers) != 2 || ev.Observers[0] != nil || !reflect.DeepEqual(ev.Observers[1], nb.Event.Observers[1]) {
		t.Errorf("observers after load: %+v", ev.Observers)
	}
	if again := encodeOK(t, got); !bytes.Equal(again, doc) {
		t.Error("re-encoding gives different bytes")
	}
	// The notebook's own position wins over the model's when both are set.
	nb.Coords = &Coords{RA: 10, Dec: 20}
	got, err = DecodeNotebook(encodeOK(t, nb))
	if err != nil {
		t.Fatal(err)
	}
	if *got.Event.Coords != (Coords{RA: 10, Dec: 20}) {
		t.Errorf("event coordinates %v, want the notebook's {10 20}", *got.Event.Coords)
	}
	// An older version-1 document (no tref, no observers) reads unchanged.
	old := mutate(t, doc, func(m map[string]any) {
		e := m["event"].(map[string]any)
		delete(e, "tref")
		delete(e, "observers")
		delete(e, "coords")
	})
	got, err = DecodeNotebook(old)
	if err != nil {
		t.Fatal(err)
	}
	if got.Event.TRef != 0 || got.Event.Observers != nil || got.Event.Coords != nil || got.Coords != nil {
		t.Errorf("older document gained fields: TRef %v, observers %v, coords %v/%v", got.Event.TRef, got.Event.Observers, got.Event.Coords, got.Coords)
	}
}

// TestNotebookHostileParallax: bad t0,par and observatory tables are refused
// with an error naming the problem.
func TestNotebookHostileParallax(t *testing.T) {
	nb := demoNotebook(t, 30)
	nb.Event.TRef = 2461250.5
	nb.Event.Observers = []*ObserverTable{nil, observerRows("probe")}
	doc := encodeOK(t, nb)
	obs := func(m map[string]any) map[string]any {
		return m["event"].(map[string]any)["observers"].([]any)[1].(map[string]any)
	}
	for _, tc := range []struct {
		name string
		doc  []byte
		want string
	}{
		{"negative tref", mutate(t, doc, func(m map[string]any) { m["event"].(map[string]any)["tref"] = -1 }), "t0,par -1"},
		{"huge tref", mutate(t, doc, func(m map[string]any) { m["event"].(map[string]any)["tref"] = 1e300 }), "not a Julian date"},
		{"tref as text", mutate(t, doc, func(m map[string]any) { m["event"].(map[string]any)["tref"] = "2461250" }), "tref"},
		{"more tables than datasets", mutate(t, doc, func(m map[string]any) {
			e := m["event"].(map[string]any)
			e["observers"] = append(e["observers"].([]any), nil)
		}), "3 observatory tables for 2 datasets"},
		{"short table", mutate(t, doc, func(m map[string]any) {
			o := obs(m)
			for _, k := range []string{"t", "x", "y", "z"} {
				o[k] = o[k].([]any)[:3]
			}
		}), "dataset 2: observatory \"probe\": 3 rows"},
		{"columns differ", mutate(t, doc, func(m map[string]any) { o := obs(m); o["z"] = o["z"].([]any)[1:] }), "differ in length"},
		{"time goes back", mutate(t, doc, func(m map[string]any) { obs(m)["t"].([]any)[2] = 2461000 }), "does not increase"},
		{"control character in name", mutate(t, doc, func(m map[string]any) { obs(m)["name"] = "a\u0000" }), "observatory name of dataset 2 contains control character"},
		{"unknown table field", mutate(t, doc, func(m map[string]any) { obs(m)["frame"] = "ecliptic" }), "unknown field"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			nb, err := DecodeNotebook(tc.doc)
			if err == nil || nb != nil {
				t.Fatalf("accepted: nb=%v err=%v", nb != nil, err)
			}
			t.Log(err)
			if !strings.Contains(err.Error(), tc.want) || !strings.HasPrefix(err.Error(), "fit: notebook: ") {
				t.Errorf("error %q does not say %q", err, tc.want)
			}
		})
	}
}

// TestNotebookMarkupKept: markup in names is stored as typed and flagged.
func TestNotebookMarkupKept(t *testing.T) {
	nb := demoNotebook(t, 10)
	const evil = `<img src=x onerror=alert(1)>`
	nb.Event.Datasets[0].Name = evil
	nb.Title = "A \u202Etxt.exe"
	got, err := DecodeNotebook(encodeOK(t, nb))
	if err != nil {
		t.Fatal(err)
	}
	if got.Event.Datasets[0].Name != evil {
		t.Errorf("name changed to %q", got.Event.Datasets[0].Name)
	}
	c := Describe(got, "notebook")
	joined := strings.Join(c.Warnings, "\n")
	if !strings.Contains(joined, "dataset 1 name: contains markup") || !strings.Contains(joined, "title: contains the text-direction control U+202E") ||
		!strings.Contains(joined, "step 3 note: contains markup") {
		t.Errorf("warnings %q", c.Warnings)
	}
}

func TestNotebookEncodeRefuses(t *testing.T) {
	for _, tc := range []struct {
		name string
		mod  func(nb *Notebook)
		want string
	}{
		{"no event", func(nb *Notebook) { nb.Event = nil }, "no event"},
		{"NaN flux", func(nb *Notebook) { nb.Event.Datasets[1].Flux[7] = math.NaN() }, "not finite"},
		{"short slice", func(nb *Notebook) { d := nb.Event.Datasets[1]; d.Err = d.Err[1:] }, "slice lengths differ"},
		{"invalid JSON result", func(nb *Notebook) { nb.Steps[0].Result = json.RawMessage("{") }, "not valid JSON"},
		{"invalid UTF-8", func(nb *Notebook) { nb.Title = "\xff" }, "UTF-8"},
		{"negative scale", func(nb *Notebook) { nb.Event.Datasets[0].ErrScale = -1 }, "error scale"},
	} {
		nb := demoNotebook(t, 20)
		tc.mod(nb)
		if _, err := EncodeNotebook(nb); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: err %v, want %q", tc.name, err, tc.want)
		}
	}
}

func TestNotebookAttach(t *testing.T) {
	nb := demoNotebook(t, 30)
	doc, err := encodeNotebook(nb, true) // all datasets omitted, as in a model link
	if err != nil {
		t.Fatal(err)
	}
	got, err := DecodeNotebook(doc)
	if err != nil {
		t.Fatal(err)
	}
	if len(got.Pending) != 2 || got.Event.Datasets[0].T != nil || got.Fingerprint() != nb.Fingerprint() {
		t.Fatalf("pending %v", got.Pending)
	}
	// Re-read the file with the recorded options.
	d0 := got.Event.Datasets[0]
	fresh, err := Parse(d0.Source.File, readFixture(t, "mag_hjd2450000.dat"), d0.Source.Options)
	if err != nil {
		t.Fatal(err)
	}
	// Wrong options (another zero point) give other numbers: refused.
	o := d0.Source.Options
	o.ZeroPoint = 24
	wrong, _ := Parse(d0.Source.File, readFixture(t, "mag_hjd2450000.dat"), o)
	if err := got.Attach(0, wrong); err == nil || !strings.Contains(err.Error(), "fingerprint") {
		t.Errorf("wrong data attached: %v", err)
	}
	if err := got.Attach(0, synthDataset(3, 1)); err == nil || !strings.Contains(err.Error(), "expects 60 points") {
		t.Errorf("wrong count attached: %v", err)
	}
	if err := got.Attach(0, fresh); err != nil {
		t.Fatal(err)
	}
	if err := got.Attach(0, fresh); err == nil {
		t.Error("attached twice")
	}
	if err := got.Attach(1, nb.Event.Datasets[1]); err != nil {
		t.Fatal(err)
	}
	// Now the notebook is complete and equals the original.
	if len(got.Pending) != 0 || !bytes.Equal(encodeOK(t, got), encodeOK(t, nb)) {
		t.Error("after attaching, the notebook differs from the original")
	}
	if got.Event.Datasets[0].ErrScale != 1.3 || !got.Event.Datasets[0].Masked[3] {
		t.Error("renormalisation or mask lost in Attach")
	}
}

func FuzzDecodeNotebook(f *testing.F) {
	// Small seeds keep the fuzzer's minimisation quick.
	tiny := &Notebook{Event: NewEvent("e", synthDataset(4, 9)),
		Steps: []Step{{ID: "a", Kind: "refine", Status: StepDone, Seed: 3, Result: json.RawMessage(`{"chi2":1}`)}}}
	tiny.Event.Mask(Mask{Dataset: 0, Points: []int{1}, Reason: "x"})
	f.Add(encodeOK(f, tiny))
	doc, _ := encodeNotebook(tiny, true)
	f.Add(doc)
	f.Add([]byte(`{"format":"lensbook-notebook","version":1,"event":{"ref":0},"fingerprint":"","datasets":[],"steps":[]}`))
	f.Add([]byte(`{"format":"lensbook-notebook","version":2}`))
	withObs := &Notebook{Event: NewEvent("e", synthDataset(4, 9))}
	withObs.Event.Coords, withObs.Event.TRef = &Coords{RA: 270, Dec: -30}, 2461100
	withObs.Event.Observers = []*ObserverTable{observerRows("s")}
	f.Add(encodeOK(f, withObs))
	f.Fuzz(func(t *testing.T, data []byte) {
		nb, err := DecodeNotebook(data)
		if err != nil {
			if nb != nil {
				t.Fatal("notebook returned with an error")
			}
			return
		}
		again, err := EncodeNotebook(nb)
		if err != nil {
			t.Fatalf("decoded notebook does not encode: %v", err)
		}
		nb2, err := DecodeNotebook(again)
		if err != nil {
			t.Fatalf("re-encoded notebook does not decode: %v", err)
		}
		if nb2.Fingerprint() != nb.Fingerprint() || !reflect.DeepEqual(Describe(nb2, "x"), Describe(nb, "x")) {
			t.Fatal("round trip changed the notebook")
		}
	})
}

// Benchmarks on a 10,000-point notebook, against encoding/json on the bare
// arrays (the least any JSON document of these numbers costs).

var benchSink any

type bareArrays struct{ T, Flux, Err []float64 }

func bench10k(b *testing.B) (*Notebook, []byte, bareArrays) {
	nb := demoNotebook(b, 10_000-60)
	doc := encodeOK(b, nb)
	var bare bareArrays
	for _, d := range nb.Event.Datasets {
		bare.T = append(bare.T, d.T...)
		bare.Flux = append(bare.Flux, d.Flux...)
		bare.Err = append(bare.Err, d.Err...)
	}
	return nb, doc, bare
}

func BenchmarkNotebookEncode10k(b *testing.B) {
	nb, doc, _ := bench10k(b)
	b.SetBytes(int64(len(doc)))
	c0 := processCPU()
	for b.Loop() {
		benchSink, _ = EncodeNotebook(nb)
	}
	reportCPU(b, c0)
}

func BenchmarkNotebookEncode10kBaseline(b *testing.B) {
	_, doc, bare := bench10k(b)
	b.SetBytes(int64(len(doc)))
	c0 := processCPU()
	for b.Loop() {
		benchSink, _ = json.Marshal(bare)
	}
	reportCPU(b, c0)
}

func BenchmarkNotebookDecode10k(b *testing.B) {
	_, doc, _ := bench10k(b)
	b.SetBytes(int64(len(doc)))
	c0 := processCPU()
	for b.Loop() {
		nb, err := DecodeNotebook(doc)
		if err != nil {
			b.Fatal(err)
		}
		benchSink = nb
	}
	reportCPU(b, c0)
}

func BenchmarkNotebookDecode10kBaseline(b *testing.B) {
	_, doc, bare := bench10k(b)
	raw, _ := json.Marshal(bare)
	b.SetBytes(int64(len(doc)))
	c0 := processCPU()
	for b.Loop() {
		var v bareArrays
		if err := json.Unmarshal(raw, &v); err != nil {
			b.Fatal(err)
		}
		benchSink = v
	}
	reportCPU(b, c0)
}

func TestStepTypedHelpers(t *testing.T) {
	type settings struct {
		Grid [2]int `json:"grid"`
		Seed uint64 `json:"seed"`
	}
	var s Step
	if err := s.SetSettings(settings{Grid: [2]int{31, 31}, Seed: 7}); err != nil {
		t.Fatal(err)
	}
	var got settings
	if err := s.DecodeSettings(&got); err != nil || got.Grid != [2]int{31, 31} || got.Seed != 7 {
		t.Errorf("got %+v, %v", got, err)
	}
	s.Settings = json.RawMessage(`{"grid":[1,2],"other":1}`)
	if err := s.DecodeSettings(&got); err == nil || !strings.Contains(err.Error(), "unknown field") {
		t.Errorf("unknown field accepted: %v", err)
	}
	if err := s.SetResult(math.NaN()); err == nil {
		t.Error("NaN result accepted")
	}
}
