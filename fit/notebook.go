package fit

import (
	"bytes"
	"cmp"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strings"
	"unicode"
	"unicode/utf8"

	"lensbook/lens"
)

// The notebook document is lensbook's own file: one JSON object holding the
// datasets (points, rejected rows, masks, error renormalisation), the event
// settings and the list of steps with their settings, seeds, status and
// results. Layout of version 1 (field order as written):
//
//	{
//	  "format": "lensbook-notebook",
//	  "version": 1,
//	  "title": "…", "notes": "…",
//	  "event": {"name": "…", "coords": {"ra_deg": 268.5, "dec_deg": -29.1},
//	            "ref": 1, "tol": 0.001, "blend": [{"mode": "free", "fb": 0}],
//	            "masks": [{"dataset": 0, "points": [7], "ranges": null, "reason": "…"}],
//	            "tref": 2461250.5, "observers": [null, {"name": "…", "t": […], "x": […], "y": […], "z": […]}]},
//	  "fingerprint": "<hex SHA-256 of all datasets' numbers, see DataFingerprint>",
//	  "datasets": [{
//	    "name": "…", "band": "I", "time_system": "HJD-UTC", "zero_point": 25, "ld": 0.5,
//	    "points": 3, "fingerprint": "<hex, see DatasetFingerprint>",
//	    "t": […], "flux": […], "err": […], "line": […],   (absent when "omitted": true)
//	    "omitted": false,
//	    "masked": [0, 7],                                  (indices of masked points)
//	    "err_scale": 1.2, "err_floor": 0.003,
//	    "source": {"file": "…", "rejected": [{"line": 9, "column": 3, "reason": "…"}],
//	               "notes": […], "lines": {…}, "options": {…}}
//	  }],
//	  "steps": [{"id": "s1", "kind": "single-lens", "settings": {…}, "seed": "42",
//	             "status": "done", "result": {…}, "note": "…"}]
//	}
//
// Floats are written in the shortest decimal form that reads back to the same
// bits, so round trips are exact. Seeds are decimal strings because JSON
// numbers above 2^53 lose digits in JavaScript. Step settings and results are
// kept as raw JSON here; the step code gives them their types.
//
// Decoding is strict: unknown fields, trailing data, inconsistent lengths or
// counts, non-finite or out-of-range numbers, over-long strings and control
// characters in labels are errors, and nothing is returned on error.

const (
	NotebookFormat  = "lensbook-notebook"
	NotebookVersion = 1 // the version EncodeNotebook writes and the newest DecodeNotebook reads
)

// Bounds on documents, checked before and after decoding so that files and
// links from other people cannot exhaust the tab's memory.
const (
	// MaxNotebookBytes bounds the (decompressed) JSON text. At 2 bytes for the
	// shortest array element, 10⁷ points need at least 60 MB, so such a
	// document is refused before its arrays are allocated.
	MaxNotebookBytes = 32 << 20
	MaxPoints        = 1_000_000 // points over all datasets
	MaxDatasets      = 64
	MaxSteps         = 1000
	MaxRejectedRows  = 1_000_000 // rejected-row records over all datasets
	MaxNameLen       = 1024      // bytes in a name, label, file name, step id or kind, reason
	MaxTextLen       = 1 << 20   // bytes in free text (title, notes)
	MaxNotesPerSet   = 1000      // parser notes per dataset
)

// StepStatus is where a step stands.
type StepStatus string

const (
	StepPending   StepStatus = "pending"
	StepRunning   StepStatus = "running"
	StepDone      StepStatus = "done"
	StepFailed    StepStatus = "failed"
	StepCancelled StepStatus = "cancelled"
)

// Step is one entry of the notebook: a pure function of its inputs, settings
// and seed, with its result once run.
type Step struct {
	ID       string          `json:"id"`   // unique within the notebook
	Kind     string          `json:"kind"` // e.g. "single-lens", "binary-search", "refine", "posterior"
	Settings json.RawMessage `json:"settings,omitempty"`
	Seed     uint64          `json:"seed,string"`
	Status   StepStatus      `json:"status"`
	Result   json.RawMessage `json:"result,omitempty"`
	Note     string          `json:"note,omitempty"` // user's note, plain text
}

// SetSettings stores v (any JSON-encodable settings struct) as the step's
// settings.
func (s *Step) SetSettings(v any) error { return setRaw(&s.Settings, v) }

// SetResult stores v as the step's result.
func (s *Step) SetResult(v any) error { return setRaw(&s.Result, v) }

// DecodeSettings decodes the step's settings into v; fields of the document
// that v does not have are an error, so a mismatch of step kind and type
// shows. Empty settings leave v unchanged.
func (s *Step) DecodeSettings(v any) error { return getRaw(s.Settings, v, s.ID, "settings") }

// DecodeResult decodes the step's result into v (see DecodeSettings).
func (s *Step) DecodeResult(v any) error { return getRaw(s.Result, v, s.ID, "result") }

func setRaw(dst *json.RawMessage, v any) error {
	b, err := json.Marshal(v)
	if err != nil {
		return fmt.Errorf("fit: step: %w", err)
	}
	*dst = b
	return nil
}

func getRaw(r json.RawMessage, v any, id, what string) error {
	if len(r) == 0 {
		return nil
	}
	dec := json.NewDecoder(bytes.NewReader(r))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return fmt.Errorf("fit: step %q %s: %v", clip(id), what, jsonErr(err))
	}
	return nil
}

// Coords is a sky position.
type Coords struct {
	RA  float64 `json:"ra_deg"`  // right ascension (degrees, [0, 360))
	Dec float64 `json:"dec_deg"` // declination (degrees, [−90, 90])
}

// Notebook is the in-memory notebook document.
type Notebook struct {
	Title string
	Notes string
	// Event holds the datasets and the model conventions (reference point,
	// tolerance, blend rules, mask records). Never nil after decoding.
	Event *Event
	// Coords is the event's sky position (ICRS), nil when unknown.
	Coords *Coords
	Steps  []Step

	// Pending lists datasets whose points are not in the document (a model
	// link, or a notebook saved from one): Event.Datasets[p.Index] then holds
	// the labels, options, masks and renormalisation but no points, until
	// Attach supplies data with the recorded fingerprint.
	Pending []PendingData
}

// datasets returns the notebook's datasets (nil when there is no event).
func (nb *Notebook) datasets() []*Dataset {
	if nb.Event == nil {
		return nil
	}
	return nb.Event.Datasets
}

// PendingData describes the points a dataset expects.
type PendingData struct {
	Index       int    `json:"index"`       // in Notebook.Event.Datasets
	File        string `json:"file"`        // file name the data came from
	Points      int    `json:"points"`      // number of points
	Fingerprint string `json:"fingerprint"` // DatasetFingerprint of the points
}

// DatasetFingerprint is the hex SHA-256 of a canonical encoding of a
// dataset's numbers: the ASCII tag "lensbook-data-v1\n", the point count as
// a little-endian uint64, then for each point the IEEE-754 bits of T, Flux
// and Err as little-endian uint64. Labels, line numbers, masks and
// renormalisation do not enter it.
func DatasetFingerprint(d *Dataset) string {
	return hex.EncodeToString(datasetDigest(d))
}

func datasetDigest(d *Dataset) []byte {
	h := sha256.New()
	h.Write([]byte("lensbook-data-v1\n"))
	var buf [24 * 256]byte
	binary.LittleEndian.PutUint64(buf[:8], uint64(len(d.T)))
	h.Write(buf[:8])
	k := 0
	for i := range d.T {
		binary.LittleEndian.PutUint64(buf[k:], math.Float64bits(d.T[i]))
		binary.LittleEndian.PutUint64(buf[k+8:], math.Float64bits(d.Flux[i]))
		binary.LittleEndian.PutUint64(buf[k+16:], math.Float64bits(d.Err[i]))
		k += 24
		if k == len(buf) {
			h.Write(buf[:])
			k = 0
		}
	}
	h.Write(buf[:k])
	return h.Sum(nil)
}

// DataFingerprint is the hex SHA-256 over the datasets in order: the tag
// "lensbook-datasets-v1\n", the count as a little-endian uint64, then each
// dataset's raw 32-byte DatasetFingerprint. It identifies the data of a
// notebook in links and exports.
func DataFingerprint(ds []*Dataset) string {
	fps := make([]string, len(ds))
	for i, d := range ds {
		fps[i] = DatasetFingerprint(d)
	}
	return combineFingerprints(fps)
}

func combineFingerprints(fps []string) string {
	h := sha256.New()
	h.Write([]byte("lensbook-datasets-v1\n"))
	var n [8]byte
	binary.LittleEndian.PutUint64(n[:], uint64(len(fps)))
	h.Write(n[:])
	for _, f := range fps {
		b, _ := hex.DecodeString(f)
		h.Write(b)
	}
	return hex.EncodeToString(h.Sum(nil))
}

// Fingerprint returns DataFingerprint of the notebook's data, using the
// recorded fingerprints of pending datasets.
func (nb *Notebook) Fingerprint() string {
	ds := nb.datasets()
	fps := make([]string, len(ds))
	for i, d := range ds {
		fps[i] = DatasetFingerprint(d)
	}
	for _, p := range nb.Pending {
		if p.Index >= 0 && p.Index < len(fps) {
			fps[p.Index] = p.Fingerprint
		}
	}
	return combineFingerprints(fps)
}

func (nb *Notebook) pending(i int) *PendingData {
	for k := range nb.Pending {
		if nb.Pending[k].Index == i {
			return &nb.Pending[k]
		}
	}
	return nil
}

// Attach supplies the points of pending dataset i from a freshly parsed
// dataset d (typically Parse with the dataset's Source.Options). The count
// and fingerprint must match the record; on success the notebook's labels,
// masks and renormalisation are kept, the points and d's provenance are
// taken, and i is no longer pending. On error nothing changes.
func (nb *Notebook) Attach(i int, d *Dataset) error {
	p := nb.pending(i)
	if p == nil {
		return fmt.Errorf("fit: dataset %d is not waiting for data", i+1)
	}
	if d.Len() != p.Points {
		return fmt.Errorf("fit: dataset %d expects %d points, the file gives %d: not the same data (check the file and import options)", i+1, p.Points, d.Len())
	}
	if fp := DatasetFingerprint(d); fp != p.Fingerprint {
		return fmt.Errorf("fit: dataset %d: data fingerprint %.12s… differs from the expected %.12s…: not the same numbers (check the file, time offset and zero point)", i+1, fp, p.Fingerprint)
	}
	dst := nb.Event.Datasets[i]
	dst.T = slices.Clone(d.T)
	dst.Flux = slices.Clone(d.Flux)
	dst.Err = slices.Clone(d.Err)
	dst.Line = slices.Clone(d.Line)
	if dst.Line == nil {
		dst.Line = make([]int, len(dst.T))
	}
	opts := dst.Source.Options
	dst.Source = d.Source
	dst.Source.Rejected = slices.Clone(d.Source.Rejected)
	dst.Source.Notes = slices.Clone(d.Source.Notes)
	if d.Source.Options == (ImportOptions{}) {
		dst.Source.Options = opts
	}
	nb.Pending = slices.DeleteFunc(nb.Pending, func(q PendingData) bool { return q.Index == i })
	return nil
}

// ---- wire format (version 1) ----

type wireNotebook struct {
	Format      string         `json:"format"`
	Version     int            `json:"version"`
	Title       string         `json:"title,omitempty"`
	Notes       string         `json:"notes,omitempty"`
	Event       wireEvent      `json:"event"`
	Fingerprint string         `json:"fingerprint"`
	Datasets    []*wireDataset `json:"datasets"`
	Steps       []Step         `json:"steps"`
}

// wireEvent is the event without its datasets (stored beside it).
type wireEvent struct {
	Name   string         `json:"name,omitempty"`
	Coords *Coords        `json:"coords,omitempty"`
	Ref    lens.Reference `json:"ref"`
	Tol    float64        `json:"tol,omitempty"`
	Blend  []Blend        `json:"blend,omitempty"`
	Masks  []Mask         `json:"masks,omitempty"`
	// TRef and Observers were added within version 1: both are optional,
	// and documents without them read as before (no t0,par recorded, all
	// datasets ground-based).
	TRef      float64          `json:"tref,omitempty"`
	Observers []*ObserverTable `json:"observers,omitempty"`
}

type wireDataset struct {
	Name        string     `json:"name"`
	Band        string     `json:"band,omitempty"`
	TimeSystem  string     `json:"time_system,omitempty"`
	ZeroPoint   float64    `json:"zero_point"`
	LD          float64    `json:"ld"`
	Points      int        `json:"points"`
	Fingerprint string     `json:"fingerprint"`
	T           []float64  `json:"t,omitempty"`
	Flux        []float64  `json:"flux,omitempty"`
	Err         []float64  `json:"err,omitempty"`
	Line        []int      `json:"line,omitempty"`
	Omitted     bool       `json:"omitted,omitempty"`
	Masked      []int      `json:"masked,omitempty"`
	ErrScale    float64    `json:"err_scale,omitempty"`
	ErrFloor    float64    `json:"err_floor,omitempty"`
	Source      wireSource `json:"source"`
}

type wireSource struct {
	File     string        `json:"file,omitempty"`
	Rejected []wireProblem `json:"rejected,omitempty"`
	Notes    []string      `json:"notes,omitempty"`
	Lines    LineCount     `json:"lines"`
	Options  ImportOptions `json:"options"`
}

type wireProblem struct {
	Line   int    `json:"line"`
	Column int    `json:"column,omitempty"`
	Reason string `json:"reason"`
}

// EncodeNotebook checks nb (as DecodeNotebook would) and returns its JSON
// document, version NotebookVersion.
func EncodeNotebook(nb *Notebook) ([]byte, error) {
	return encodeNotebook(nb, false)
}

func encodeNotebook(nb *Notebook, omitAll bool) ([]byte, error) {
	if err := nb.Validate(); err != nil {
		return nil, err
	}
	ev := nb.Event
	w := &wireNotebook{
		Format:  NotebookFormat,
		Version: NotebookVersion,
		Title:   nb.Title,
		Notes:   nb.Notes,
		Event: wireEvent{Name: ev.Name, Coords: cmp.Or(nb.Coords, ev.Coords), Ref: ev.Ref, Tol: ev.Tol,
			Blend: ev.Blend, Masks: ev.Masks, TRef: ev.TRef, Observers: ev.Observers},
		Datasets: make([]*wireDataset, len(ev.Datasets)),
		Steps:    nb.Steps,
	}
	if w.Steps == nil {
		w.Steps = []Step{}
	}
	fps := make([]string, len(ev.Datasets))
	for i, d := range ev.Datasets {
		wd := &wireDataset{
			Name: d.Name, Band: d.Band, TimeSystem: d.TimeSystem,
			ZeroPoint: d.ZeroPoint, LD: d.LD,
			ErrScale: d.ErrScale, ErrFloor: d.ErrFloor,
			Source: wireSource{
				File:    d.Source.File,
				Notes:   d.Source.Notes,
				Lines:   d.Source.Lines,
				Options: d.Source.Options,
			},
		}
		for _, p := range d.Source.Rejected {
			wd.Source.Rejected = append(wd.Source.Rejected, wireProblem{p.Line, p.Column, p.Reason})
		}
		for k, m := range d.Masked {
			if m {
				wd.Masked = append(wd.Masked, k)
			}
		}
		if p := nb.pending(i); p != nil {
			wd.Points, wd.Fingerprint, wd.Omitted = p.Points, p.Fingerprint, true
		} else {
			wd.Points, wd.Fingerprint = d.Len(), DatasetFingerprint(d)
			if omitAll {
				wd.Omitted = true
			} else {
				wd.T, wd.Flux, wd.Err, wd.Line = d.T, d.Flux, d.Err, d.Line
				if wd.T == nil {
					wd.T, wd.Flux, wd.Err = []float64{}, []float64{}, []float64{}
				}
				if wd.Line == nil {
					wd.Line = make([]int, d.Len())
				}
			}
		}
		fps[i] = wd.Fingerprint
		w.Datasets[i] = wd
	}
	w.Fingerprint = combineFingerprints(fps)
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetEscapeHTML(false) // the page renders text; escaping would only obscure it
	if err := enc.Encode(w); err != nil {
		return nil, fmt.Errorf("fit: notebook: %w", err)
	}
	if buf.Len() > MaxNotebookBytes {
		return nil, fmt.Errorf("fit: notebook: document is %d bytes, more than the %d a notebook may hold", buf.Len(), MaxNotebookBytes)
	}
	return buf.Bytes(), nil
}

// ReadNotebook reads at most MaxNotebookBytes from r and decodes them.
func ReadNotebook(r io.Reader) (*Notebook, error) {
	data, err := io.ReadAll(io.LimitReader(r, MaxNotebookBytes+1))
	if err != nil {
		return nil, fmt.Errorf("fit: notebook: %w", err)
	}
	return DecodeNotebook(data)
}

// OpenNotebook decodes a notebook file and describes it (Contents.Kind
// "notebook") so the page can show what it holds before replacing anything.
func OpenNotebook(data []byte) (*Notebook, *Contents, error) {
	nb, err := DecodeNotebook(data)
	if err != nil {
		return nil, nil, err
	}
	c := Describe(nb, "notebook")
	c.Bytes = len(data)
	return nb, c, nil
}

// migrations[v] turns a version-v document (as a JSON object) into version
// v+1. Version 1 is the first published version, so there is nothing to
// migrate yet; the loop in DecodeNotebook runs every migration in order once
// there are.
var migrations = map[int]func(doc map[string]json.RawMessage) error{}

// DecodeNotebook decodes and checks a notebook document. An older version is
// migrated; a newer one, another format, or any inconsistency is an error and
// no notebook is returned.
func DecodeNotebook(data []byte) (*Notebook, error) {
	if len(data) > MaxNotebookBytes {
		return nil, fmt.Errorf("fit: notebook: document is larger than %d bytes", MaxNotebookBytes)
	}
	// Fast path: a current document decodes strictly in one pass.
	w, werr := decodeWire(data)
	if werr == nil && w.Format == NotebookFormat && w.Version == NotebookVersion {
		return w.notebook()
	}
	// Otherwise say why, format and version first.
	var head struct {
		Format  *string `json:"format"`
		Version *int    `json:"version"`
	}
	if err := json.NewDecoder(bytes.NewReader(data)).Decode(&head); err != nil {
		return nil, fmt.Errorf("fit: notebook: cannot read format and version: %v", jsonErr(err))
	}
	switch {
	case head.Format == nil:
		return nil, errors.New("fit: notebook: no \"format\" field; not a lensbook notebook")
	case *head.Format != NotebookFormat:
		return nil, fmt.Errorf("fit: notebook: format %q is not %q", clip(*head.Format), NotebookFormat)
	case head.Version == nil:
		return nil, errors.New("fit: notebook: no \"version\" field")
	case *head.Version > NotebookVersion:
		return nil, fmt.Errorf("fit: notebook: version %d was written by a newer lensbook; this one reads versions up to %d", *head.Version, NotebookVersion)
	case *head.Version < 1:
		return nil, fmt.Errorf("fit: notebook: version %d does not exist (versions start at 1)", *head.Version)
	case *head.Version == NotebookVersion:
		return nil, werr
	}
	var doc map[string]json.RawMessage
	if err := json.Unmarshal(data, &doc); err != nil {
		return nil, fmt.Errorf("fit: notebook: %v", jsonErr(err))
	}
	for v := *head.Version; v < NotebookVersion; v++ {
		m, ok := migrations[v]
		if !ok {
			return nil, fmt.Errorf("fit: notebook: no migration from version %d", v)
		}
		if err := m(doc); err != nil {
			return nil, fmt.Errorf("fit: notebook: migrating version %d: %w", v, err)
		}
	}
	doc["version"] = json.RawMessage(fmt.Sprint(NotebookVersion))
	migrated, err := json.Marshal(doc)
	if err != nil {
		return nil, fmt.Errorf("fit: notebook: %w", err)
	}
	if w, err = decodeWire(migrated); err != nil {
		return nil, err
	}
	return w.notebook()
}

// decodeWire decodes a version-1 document strictly: unknown fields and
// trailing data are errors.
func decodeWire(data []byte) (*wireNotebook, error) {
	w := new(wireNotebook)
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(w); err != nil {
		return nil, fmt.Errorf("fit: notebook: %v", jsonErr(err))
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, errors.New("fit: notebook: unexpected data after the document")
	}
	return w, nil
}

// jsonErr keeps JSON errors short: encoding/json may quote long input.
func jsonErr(err error) string {
	return clip2(strings.ReplaceAll(err.Error(), "fit: ", ""), 300)
}

func clip2(s string, n int) string {
	if len(s) <= n {
		return s
	}
	for n > 0 && !utf8.RuneStart(s[n]) {
		n--
	}
	return s[:n] + "…"
}

func (w *wireNotebook) notebook() (*Notebook, error) {
	if len(w.Datasets) > MaxDatasets {
		return nil, fmt.Errorf("fit: notebook: %d datasets, more than %d", len(w.Datasets), MaxDatasets)
	}
	we := w.Event
	nb := &Notebook{Title: w.Title, Notes: w.Notes, Coords: we.Coords, Steps: w.Steps,
		Event: &Event{Name: we.Name, Ref: we.Ref, Tol: we.Tol, Blend: we.Blend, Masks: we.Masks,
			TRef: we.TRef, Observers: we.Observers}}
	if we.Coords != nil {
		c := *we.Coords // the model's copy: editing one does not move the other
		nb.Event.Coords = &c
	}
	if nb.Steps == nil {
		nb.Steps = []Step{}
	}
	fps := make([]string, len(w.Datasets))
	total := 0
	for i, wd := range w.Datasets {
		where := fmt.Sprintf("fit: notebook: dataset %d", i+1)
		if wd == nil {
			return nil, fmt.Errorf("%s: null", where)
		}
		if wd.Points < 0 {
			return nil, fmt.Errorf("%s: negative point count %d", where, wd.Points)
		}
		if total += wd.Points; total > MaxPoints {
			return nil, fmt.Errorf("fit: notebook: more than %d points in all", MaxPoints)
		}
		if !isHex256(wd.Fingerprint) {
			return nil, fmt.Errorf("%s: fingerprint is not 64 hex digits", where)
		}
		d := &Dataset{
			Name: wd.Name, Band: wd.Band, TimeSystem: wd.TimeSystem,
			ZeroPoint: wd.ZeroPoint, LD: wd.LD,
			ErrScale: wd.ErrScale, ErrFloor: wd.ErrFloor,
			Source: Provenance{
				File:    wd.Source.File,
				Notes:   wd.Source.Notes,
				Lines:   wd.Source.Lines,
				Options: wd.Source.Options,
			},
		}
		if len(wd.Source.Rejected) > MaxRejectedRows {
			return nil, fmt.Errorf("%s: more than %d rejected rows", where, MaxRejectedRows)
		}
		for _, p := range wd.Source.Rejected {
			d.Source.Rejected = append(d.Source.Rejected, Problem{wd.Source.File, p.Line, p.Column, p.Reason})
		}
		if wd.Omitted {
			if wd.T != nil || wd.Flux != nil || wd.Err != nil || wd.Line != nil {
				return nil, fmt.Errorf("%s: marked omitted but holds points", where)
			}
			nb.Pending = append(nb.Pending, PendingData{Index: i, File: wd.Source.File, Points: wd.Points, Fingerprint: wd.Fingerprint})
		} else {
			for _, l := range []int{len(wd.T), len(wd.Flux), len(wd.Err), len(wd.Line)} {
				if l != wd.Points {
					return nil, fmt.Errorf("%s: \"points\" is %d but the arrays hold t %d, flux %d, err %d, line %d values",
						where, wd.Points, len(wd.T), len(wd.Flux), len(wd.Err), len(wd.Line))
				}
			}
			d.T, d.Flux, d.Err, d.Line = wd.T, wd.Flux, wd.Err, wd.Line
		}
		if len(wd.Masked) > 0 {
			d.Masked = make([]bool, wd.Points)
			prev := -1
			for _, k := range wd.Masked {
				if k <= prev || k >= wd.Points {
					return nil, fmt.Errorf("%s: masked index %d out of order or out of range [0, %d)", where, k, wd.Points)
				}
				d.Masked[k] = true
				prev = k
			}
		}
		fps[i] = wd.Fingerprint
		nb.Event.Datasets = append(nb.Event.Datasets, d)
	}
	if err := nb.Validate(); err != nil {
		return nil, err
	}
	// The recorded fingerprints must match the numbers: a changed number is
	// an altered or damaged document.
	for i, d := range nb.Event.Datasets {
		if nb.pending(i) == nil {
			if fp := DatasetFingerprint(d); fp != fps[i] {
				return nil, fmt.Errorf("fit: notebook: dataset %d: numbers do not match the recorded fingerprint (altered or damaged document)", i+1)
			}
		}
	}
	if combineFingerprints(fps) != w.Fingerprint {
		return nil, errors.New("fit: notebook: data fingerprint does not match the datasets (altered or damaged document)")
	}
	return nb, nil
}

func isHex256(s string) bool {
	if len(s) != 64 {
		return false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !(c >= '0' && c <= '9' || c >= 'a' && c <= 'f') {
			return false
		}
	}
	return true
}

// Validate checks the notebook against the document rules: bounds, equal
// slice lengths, finite numbers, sensible counts, unique step ids, labels
// without control characters. EncodeNotebook and DecodeNotebook call it.
func (nb *Notebook) Validate() error {
	if err := checkText("title", nb.Title, MaxTextLen, true); err != nil {
		return err
	}
	if err := checkText("notes", nb.Notes, MaxTextLen, true); err != nil {
		return err
	}
	if nb.Event == nil {
		return errors.New("fit: notebook: no event")
	}
	ev := nb.Event
	if err := checkText("event name", ev.Name, MaxNameLen, false); err != nil {
		return err
	}
	for _, c := range []*Coords{nb.Coords, ev.Coords} {
		if c != nil && (!(c.RA >= 0 && c.RA < 360) || !(c.Dec >= -90 && c.Dec <= 90)) {
			return fmt.Errorf("fit: notebook: coordinates RA %g°, Dec %g° out of range", c.RA, c.Dec)
		}
	}
	if !(ev.TRef >= 0 && ev.TRef < 1e8) {
		return fmt.Errorf("fit: notebook: reference epoch t0,par %g is not a Julian date (want 0 for unset, or in [0, 1e8) days)", ev.TRef)
	}
	if len(ev.Observers) > len(ev.Datasets) {
		return fmt.Errorf("fit: notebook: %d observatory tables for %d datasets", len(ev.Observers), len(ev.Datasets))
	}
	rows := 0
	for i, o := range ev.Observers {
		if o == nil {
			continue // ground-based
		}
		if err := checkText(fmt.Sprintf("observatory name of dataset %d", i+1), o.Name, MaxNameLen, false); err != nil {
			return err
		}
		if rows += len(o.T); rows > MaxPoints {
			return fmt.Errorf("fit: notebook: more than %d observatory ephemeris rows in all", MaxPoints)
		}
		if err := o.Validate(); err != nil {
			return fmt.Errorf("fit: notebook: dataset %d: %v", i+1, strings.TrimPrefix(err.Error(), "fit: "))
		}
	}
	if strings.HasPrefix(ev.Ref.String(), "Reference(") {
		return fmt.Errorf("fit: notebook: unknown reference point %d", int(ev.Ref))
	}
	if !(ev.Tol >= 0 && ev.Tol < 1) {
		return fmt.Errorf("fit: notebook: tolerance %g outside [0, 1)", ev.Tol)
	}
	ds := ev.Datasets
	if len(ds) > MaxDatasets {
		return fmt.Errorf("fit: notebook: %d datasets, more than %d", len(ds), MaxDatasets)
	}
	if len(ev.Blend) > len(ds) {
		return fmt.Errorf("fit: notebook: %d blend rules for %d datasets", len(ev.Blend), len(ds))
	}
	for i, b := range ev.Blend {
		if b.Mode < BlendFree || b.Mode > BlendFixed || !finite(b.Fb) {
			return fmt.Errorf("fit: notebook: blend rule %d: mode %d or blend flux %g invalid", i+1, int(b.Mode), b.Fb)
		}
	}
	seenPending := map[int]bool{}
	for _, p := range nb.Pending {
		if p.Index < 0 || p.Index >= len(ds) || seenPending[p.Index] {
			return fmt.Errorf("fit: notebook: pending dataset index %d invalid or repeated", p.Index)
		}
		seenPending[p.Index] = true
		if p.Points < 0 || p.Points > MaxPoints || !isHex256(p.Fingerprint) {
			return fmt.Errorf("fit: notebook: pending dataset %d: bad count or fingerprint", p.Index+1)
		}
	}
	total, rejected := 0, 0
	npts := make([]int, len(ds))
	for i, d := range ds {
		where := fmt.Sprintf("fit: notebook: dataset %d", i+1)
		if d == nil {
			return fmt.Errorf("%s: missing", where)
		}
		n := d.Len()
		if seenPending[i] {
			if d.T != nil || d.Flux != nil || d.Err != nil || d.Line != nil {
				return fmt.Errorf("%s: pending but holds points", where)
			}
			for _, p := range nb.Pending {
				if p.Index == i {
					n = p.Points
				}
			}
		} else if len(d.Flux) != n || len(d.Err) != n || (d.Line != nil && len(d.Line) != n) {
			return fmt.Errorf("%s: slice lengths differ: t %d, flux %d, err %d, line %d", where, n, len(d.Flux), len(d.Err), len(d.Line))
		}
		npts[i] = n
		if total += n; total > MaxPoints {
			return fmt.Errorf("fit: notebook: more than %d points in all", MaxPoints)
		}
		if d.Masked != nil && len(d.Masked) != n {
			return fmt.Errorf("%s: mask has %d entries for %d points", where, len(d.Masked), n)
		}
		for k := range d.T {
			if !finite(d.T[k]) || !finite(d.Flux[k]) {
				return fmt.Errorf("%s point %d: time or flux is not finite", where, k+1)
			}
			if !(d.Err[k] > 0) || math.IsInf(d.Err[k], 0) {
				return fmt.Errorf("%s point %d: uncertainty %g is not finite and > 0", where, k+1, d.Err[k])
			}
			if d.Line != nil && d.Line[k] < 0 {
				return fmt.Errorf("%s point %d: negative line number", where, k+1)
			}
		}
		for _, f := range []struct {
			name string
			s    string
		}{{"name", d.Name}, {"band", d.Band}, {"time system", d.TimeSystem}, {"file name", d.Source.File},
			{"options name", d.Source.Options.Name}, {"options band", d.Source.Options.Band}, {"options time system", d.Source.Options.TimeSystem}} {
			if err := checkText(where+" "+f.name, f.s, MaxNameLen, false); err != nil {
				return err
			}
		}
		if !finite(d.ZeroPoint) || !(d.LD >= 0 && d.LD < 1) {
			return fmt.Errorf("%s: zero point %g or limb darkening %g out of range", where, d.ZeroPoint, d.LD)
		}
		if !(d.ErrScale >= 0) || math.IsInf(d.ErrScale, 0) || !(d.ErrFloor >= 0) || math.IsInf(d.ErrFloor, 0) {
			return fmt.Errorf("%s: error scale %g and floor %g must be finite and ≥ 0", where, d.ErrScale, d.ErrFloor)
		}
		o := d.Source.Options
		if o.TimeCol < 0 || o.ValueCol < 0 || o.ErrCol < 0 || o.Kind < KindUnset || o.Kind > KindFlux ||
			!finite(o.TimeOffset) || !finite(o.ZeroPoint) || !finite(o.LD) {
			return fmt.Errorf("%s: import options out of range", where)
		}
		lc := d.Source.Lines
		if lc.Total < 0 || lc.Data < 0 || lc.Rejected < 0 || lc.Comment < 0 || lc.Blank < 0 || lc.Header < 0 {
			return fmt.Errorf("%s: negative line count", where)
		}
		if lc.Total > 0 && (lc.Data+lc.Rejected+lc.Comment+lc.Blank+lc.Header != lc.Total || lc.Data != n) {
			return fmt.Errorf("%s: line counts do not add up (total %d, data %d for %d points, rejected %d, comment %d, blank %d, header %d)",
				where, lc.Total, lc.Data, n, lc.Rejected, lc.Comment, lc.Blank, lc.Header)
		}
		if len(d.Source.Notes) > MaxNotesPerSet {
			return fmt.Errorf("%s: more than %d notes", where, MaxNotesPerSet)
		}
		for _, s := range d.Source.Notes {
			if err := checkText(where+" note", s, MaxNameLen, false); err != nil {
				return err
			}
		}
		if rejected += len(d.Source.Rejected); rejected > MaxRejectedRows {
			return fmt.Errorf("fit: notebook: more than %d rejected-row records", MaxRejectedRows)
		}
		for _, p := range d.Source.Rejected {
			if p.Line < 0 || p.Column < 0 {
				return fmt.Errorf("%s: rejected row with negative line or column", where)
			}
			if err := checkText(where+" rejection reason", p.Reason, MaxNameLen, false); err != nil {
				return err
			}
		}
	}
	if err := checkMasks(ev, npts, seenPending); err != nil {
		return err
	}
	if len(nb.Steps) > MaxSteps {
		return fmt.Errorf("fit: notebook: %d steps, more than %d", len(nb.Steps), MaxSteps)
	}
	ids := map[string]bool{}
	for i, s := range nb.Steps {
		where := fmt.Sprintf("fit: notebook: step %d", i+1)
		if s.ID == "" || ids[s.ID] {
			return fmt.Errorf("%s: id %q empty or repeated", where, clip(s.ID))
		}
		ids[s.ID] = true
		if err := checkText(where+" id", s.ID, 64, false); err != nil {
			return err
		}
		if !validKind(s.Kind) {
			return fmt.Errorf("%s: kind %q must be 1–64 characters a–z, 0–9, '-' or '_'", where, clip(s.Kind))
		}
		switch s.Status {
		case StepPending, StepRunning, StepDone, StepFailed, StepCancelled:
		default:
			return fmt.Errorf("%s: unknown status %q", where, clip(string(s.Status)))
		}
		if err := checkRaw(where+" settings", s.Settings); err != nil {
			return err
		}
		if err := checkRaw(where+" result", s.Result); err != nil {
			return err
		}
		if err := checkText(where+" note", s.Note, MaxTextLen, true); err != nil {
			return err
		}
	}
	return nil
}

// checkMasks checks the mask records: indices and ranges in range, and
// every point they name marked in its dataset's Masked slice.
func checkMasks(ev *Event, npts []int, pending map[int]bool) error {
	if len(ev.Masks) > MaxSteps {
		return fmt.Errorf("fit: notebook: %d mask records, more than %d", len(ev.Masks), MaxSteps)
	}
	for j, m := range ev.Masks {
		where := fmt.Sprintf("fit: notebook: mask record %d", j+1)
		if m.Dataset < 0 || m.Dataset >= len(npts) {
			return fmt.Errorf("%s: dataset %d out of range", where, m.Dataset)
		}
		if err := checkText(where+" reason", m.Reason, MaxNameLen, false); err != nil {
			return err
		}
		d := ev.Datasets[m.Dataset]
		for _, k := range m.Points {
			if k < 0 || k >= npts[m.Dataset] {
				return fmt.Errorf("%s: point %d out of range [0, %d)", where, k, npts[m.Dataset])
			}
			if d.Masked == nil || !d.Masked[k] {
				return fmt.Errorf("%s: point %d is not marked as masked in dataset %d", where, k, m.Dataset+1)
			}
		}
		for _, r := range m.Ranges {
			if !finite(r[0]) || !finite(r[1]) || r[0] > r[1] {
				return fmt.Errorf("%s: time range [%g, %g] not finite or reversed", where, r[0], r[1])
			}
			if pending[m.Dataset] {
				continue
			}
			for k, t := range d.T {
				if t >= r[0] && t <= r[1] && (d.Masked == nil || !d.Masked[k]) {
					return fmt.Errorf("%s: point %d lies in the masked range but is not marked as masked", where, k)
				}
			}
		}
	}
	return nil
}

func validKind(k string) bool {
	if k == "" || len(k) > 64 {
		return false
	}
	for i := 0; i < len(k); i++ {
		c := k[i]
		if !(c >= 'a' && c <= 'z' || c >= '0' && c <= '9' || c == '-' || c == '_') {
			return false
		}
	}
	return true
}

func checkRaw(what string, r json.RawMessage) error {
	if r == nil {
		return nil
	}
	if len(r) > MaxNotebookBytes || !json.Valid(r) {
		return fmt.Errorf("fit: notebook: %s is not valid JSON", what)
	}
	return nil
}

// checkText bounds a string and refuses invalid UTF-8 and control characters
// (line breaks and tabs are allowed in multi-line text). Markup is allowed:
// it is stored as typed and flagged by Describe; the page renders text.
func checkText(what, s string, max int, multiline bool) error {
	if !strings.HasPrefix(what, "fit: ") {
		what = "fit: notebook: " + what
	}
	if len(s) > max {
		return fmt.Errorf("%s is longer than %d bytes", what, max)
	}
	if !utf8.ValidString(s) {
		return fmt.Errorf("%s is not valid UTF-8", what)
	}
	for _, r := range s {
		if unicode.IsControl(r) && !(multiline && (r == '\n' || r == '\t' || r == '\r')) {
			return fmt.Errorf("%s contains control character %U", what, r)
		}
	}
	return nil
}

// TextWarning returns why a user-supplied string deserves care when shown,
// or "" if none: markup characters (the page must render it as text, never
// HTML) or bidirectional-override characters that can disguise text.
func TextWarning(s string) string {
	if strings.ContainsAny(s, "<>&") {
		return "contains markup characters (<, > or &); shown as plain text"
	}
	for _, r := range s {
		if r >= '\u202a' && r <= '\u202e' || r >= '\u2066' && r <= '\u2069' || r == '\u200e' || r == '\u200f' {
			return fmt.Sprintf("contains the text-direction control %U", r)
		}
	}
	return ""
}
