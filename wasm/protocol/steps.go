package protocol

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"

	"lensbook/fit"
	"lensbook/lens"
)

// The notebook travels with every request as the notebook document of
// package fit (fit.EncodeNotebook): the page never edits numbers itself, and
// every request is re-validated by fit.DecodeNotebook, so a worker sees
// exactly what a saved file would hold.

func init() {
	register("notebook-new", stepNotebookNew)
	register("notebook-decode", stepNotebookDecode)
	register("notebook-encode", stepNotebookEncode)
	register("preview", stepPreview)
	register("parse", stepParse)
	register("edit", stepEdit)
	register("mask", stepMask)
	register("single", stepSingle)
	register("grid", stepGrid)
	register("grid-merge", stepGridMerge)
	register("refine", stepRefine)
}

func loadNotebook(raw json.RawMessage) (*fit.Notebook, error) {
	if len(raw) == 0 || string(raw) == "null" {
		return nil, errors.New("settings: notebook missing")
	}
	return fit.DecodeNotebook(raw)
}

func docOf(nb *fit.Notebook) (json.RawMessage, error) {
	b, err := fit.EncodeNotebook(nb)
	return json.RawMessage(b), err
}

// loadEvent decodes a notebook and returns it with its event (see event).
func loadEvent(raw json.RawMessage) (*fit.Notebook, *fit.Event, error) {
	nb, err := loadNotebook(raw)
	if err != nil {
		return nil, nil, err
	}
	ev, err := event(nb)
	return nb, ev, err
}

// event returns the notebook's event, refusing one without data points.
func event(nb *fit.Notebook) (*fit.Event, error) {
	if len(nb.Pending) > 0 {
		return nil, fmt.Errorf("%d dataset(s) are waiting for their data files", len(nb.Pending))
	}
	if nb.Event == nil || len(nb.Event.Datasets) == 0 {
		return nil, fit.ErrNoData
	}
	return nb.Event, nil
}

// partial returns v with ctx's error when ctx was cancelled, so Handle
// replies "cancelled" carrying the partial result.
func partial(ctx context.Context, v any) (any, error) {
	if err := ctx.Err(); err != nil {
		return v, err
	}
	return v, nil
}

func stepNotebookNew(_ context.Context, _ json.RawMessage, _ func(Progress)) (any, error) {
	return docOf(&fit.Notebook{Event: fit.NewEvent("")})
}

type textIn struct {
	File string `json:"file"`
	Text string `json:"text"`
}

// NamedText is a file offered for download: its name, MIME type and content.
type NamedText struct {
	Name string `json:"name"`
	Mime string `json:"mime"`
	Text string `json:"text"`
}

func stepNotebookDecode(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in textIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, err := fit.DecodeNotebook([]byte(in.Text))
	if err != nil {
		return nil, err
	}
	return docOf(nb)
}

type nbIn struct {
	Notebook json.RawMessage `json:"notebook"`
}

func stepNotebookEncode(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in nbIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, err := loadNotebook(in.Notebook)
	if err != nil {
		return nil, err
	}
	b, err := fit.EncodeNotebook(nb)
	if err != nil {
		return nil, err
	}
	name := "notebook"
	if nb.Event != nil && nb.Event.Name != "" {
		name = nb.Event.Name
	} else if nb.Title != "" {
		name = nb.Title
	}
	return NamedText{Name: safeFileName(name) + ".lensbook.json", Mime: "application/json", Text: string(b)}, nil
}

// safeFileName keeps letters, digits, '-', '_' and '.' of a user's name.
func safeFileName(s string) string {
	var b strings.Builder
	for _, r := range s {
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '-', r == '_', r == '.':
			b.WriteRune(r)
		case r == ' ':
			b.WriteByte('-')
		}
	}
	if b.Len() == 0 || b.Len() > 80 {
		return "notebook"
	}
	return b.String()
}

func stepPreview(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in textIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	return fit.Sniff(in.File, []byte(in.Text))
}

type parseIn struct {
	Notebook json.RawMessage   `json:"notebook"`
	File     string            `json:"file"`
	Text     string            `json:"text"`
	Options  fit.ImportOptions `json:"options"`
}

func stepParse(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in parseIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, err := loadNotebook(in.Notebook)
	if err != nil {
		return nil, err
	}
	d, err := fit.Parse(in.File, []byte(in.Text), in.Options)
	if err != nil {
		return nil, err
	}
	nb.Event.Datasets = append(nb.Event.Datasets, d)
	return docOf(nb)
}

type editIn struct {
	Notebook json.RawMessage `json:"notebook"`
	Dataset  int             `json:"dataset"`
	Field    string          `json:"field"` // name, band, time_system, zero_point, ld, err_scale, err_floor, remove
	Value    json.RawMessage `json:"value"`
}

// stepEdit changes one label or setting of a dataset (or removes it); the
// notebook is re-validated by encoding it, so an out-of-range value is refused.
func stepEdit(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in editIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, err := loadNotebook(in.Notebook)
	if err != nil {
		return nil, err
	}
	ds := nb.Event.Datasets
	if in.Dataset < 0 || in.Dataset >= len(ds) {
		return nil, fmt.Errorf("dataset %d does not exist", in.Dataset+1)
	}
	d := ds[in.Dataset]
	str := func(dst *string) error { return json.Unmarshal(in.Value, dst) }
	num := func(dst *float64) error { return json.Unmarshal(in.Value, dst) }
	switch in.Field {
	case "name":
		err = str(&d.Name)
	case "band":
		err = str(&d.Band)
	case "time_system":
		err = str(&d.TimeSystem)
	case "zero_point":
		err = num(&d.ZeroPoint)
	case "ld":
		err = num(&d.LD)
	case "err_scale":
		err = num(&d.ErrScale)
	case "err_floor":
		err = num(&d.ErrFloor)
	case "remove":
		nb.Event.Unmask(in.Dataset)
		for k := range nb.Event.Masks {
			if nb.Event.Masks[k].Dataset > in.Dataset {
				nb.Event.Masks[k].Dataset--
			}
		}
		nb.Event.Datasets = append(ds[:in.Dataset:in.Dataset], ds[in.Dataset+1:]...)
		if in.Dataset < len(nb.Event.Blend) {
			nb.Event.Blend = append(nb.Event.Blend[:in.Dataset:in.Dataset], nb.Event.Blend[in.Dataset+1:]...)
		}
	default:
		return nil, fmt.Errorf("unknown dataset field %q", in.Field)
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %v", in.Field, err)
	}
	return docOf(nb)
}

type maskIn struct {
	Notebook json.RawMessage `json:"notebook"`
	// Box in full JD and magnitude (as plotted: aligned magnitudes when Solution is set).
	T1       float64       `json:"t1"`
	T2       float64       `json:"t2"`
	M1       float64       `json:"m1"`
	M2       float64       `json:"m2"`
	Solution *fit.Solution `json:"solution"`
	Unmask   bool          `json:"unmask"` // clear every mask instead
	Dataset  int           `json:"dataset"`
}

// stepMask masks the points inside a box drawn on the light curve, recording
// the mask (fit.Event.Mask) so the notebook says what was excluded and why.
func stepMask(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in maskIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, err := loadNotebook(in.Notebook)
	if err != nil {
		return nil, err
	}
	if in.Unmask {
		nb.Event.Unmask(in.Dataset)
		return docOf(nb)
	}
	t1, t2 := in.T1, in.T2
	for k, d := range nb.Event.Datasets {
		mags, _ := plotMags(nb.Event, k, in.Solution)
		var pts []int
		for i, t := range d.T {
			if t >= t1 && t <= t2 && mags[i] >= in.M1 && mags[i] <= in.M2 && d.Used(i) {
				pts = append(pts, i)
			}
		}
		if len(pts) == 0 {
			continue
		}
		if _, err := nb.Event.Mask(fit.Mask{Dataset: k, Points: pts, Reason: "box on the light curve"}); err != nil {
			return nil, err
		}
	}
	return docOf(nb)
}

type singleIn struct {
	Notebook json.RawMessage    `json:"notebook"`
	Settings fit.SingleSettings `json:"settings"`
}

func stepSingle(ctx context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in singleIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	_, ev, err := loadEvent(in.Notebook)
	if err != nil {
		return nil, err
	}
	res, err := fit.FitSingle(ctx, ev, in.Settings)
	if err != nil {
		return res, err
	}
	return partial(ctx, res)
}

type gridIn struct {
	Notebook json.RawMessage  `json:"notebook"`
	Start    lens.Params      `json:"start"`
	Settings fit.GridSettings `json:"settings"`
	Chunk    int              `json:"chunk"`
	Chunks   int              `json:"chunks"`
}

// stepGrid computes one chunk of the binary grid; the page runs one chunk per
// worker and merges them with grid-merge (fit.MergeGrid gives the grid of a
// single chunk exactly).
func stepGrid(ctx context.Context, raw json.RawMessage, report func(Progress)) (any, error) {
	var in gridIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	_, ev, err := loadEvent(in.Notebook)
	if err != nil {
		return nil, err
	}
	g0, err := fit.NewGrid(in.Start, in.Settings)
	if err != nil {
		return nil, err
	}
	if in.Chunks < 1 {
		in.Chunks = 1
	}
	total := len(fit.ChunkNodes(len(g0.Nodes), in.Chunk, in.Chunks))
	done := 0
	var finished []fit.GridNode
	g, err := fit.RunGridChunk(ctx, ev, in.Start, in.Settings, in.Chunk, in.Chunks, func(nd fit.GridNode) {
		done++
		finished = append(finished, nd)
		p := Progress{Done: done, Total: total}
		// Send each finished node so a terminated worker still leaves its
		// work behind (a few hundred bytes per node).
		p.Partial, _ = json.Marshal(finished)
		finished = finished[:0]
		report(p)
	})
	if err != nil {
		return g, err
	}
	return partial(ctx, g)
}

type mergeIn struct {
	Parts []*fit.GridResult `json:"parts"`
	Keep  int               `json:"keep"`
	// Lost lists chunks whose worker was stopped before it replied (a cancel
	// it could not acknowledge in time): the nodes it reported in progress
	// messages, with the grid they belong to, so they are kept.
	Lost []lostChunk `json:"lost"`
}

type lostChunk struct {
	Start    lens.Params      `json:"start"`
	Settings fit.GridSettings `json:"settings"`
	Chunk    int              `json:"chunk"`
	Chunks   int              `json:"chunks"`
	Nodes    []fit.GridNode   `json:"nodes"`
}

// GridOut is the merged grid with its χ² map and best distinct minima.
type GridOut struct {
	Grid    *fit.GridResult `json:"grid"`
	LogS    []float64       `json:"log_s"`
	LogQ    []float64       `json:"log_q"`
	Chi2    [][]Num         `json:"chi2"` // [iq][is], null where not computed
	Minima  []fit.GridNode  `json:"minima"`
	Done    int             `json:"done"`
	Total   int             `json:"total"`
	Partial bool            `json:"partial"`
}

func stepGridMerge(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in mergeIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	var parts []*fit.GridResult
	for _, p := range in.Parts {
		if p != nil {
			parts = append(parts, p)
		}
	}
	for _, l := range in.Lost {
		g, err := fit.NewGrid(l.Start, l.Settings)
		if err != nil {
			return nil, err
		}
		g.Chunks, g.NChunks, g.Status = []int{l.Chunk}, l.Chunks, fit.Cancelled
		for _, nd := range l.Nodes {
			if nd.Index < 0 || nd.Index >= len(g.Nodes) || g.Nodes[nd.Index].IS != nd.IS || g.Nodes[nd.Index].IQ != nd.IQ {
				return nil, fmt.Errorf("grid node %d does not belong to this grid", nd.Index)
			}
			g.Nodes[nd.Index] = nd
			g.Evals += nd.Evals
		}
		parts = append(parts, g)
	}
	if len(parts) == 0 {
		return nil, errors.New("no grid chunk finished")
	}
	g, err := fit.MergeGrid(parts...)
	if err != nil {
		return nil, err
	}
	out := &GridOut{Grid: g, Total: len(g.Nodes), Partial: g.Status != fit.Converged}
	s := g.Settings
	for i := range s.NS {
		out.LogS = append(out.LogS, lin(s.LogSMin, s.LogSMax, i, s.NS))
	}
	for i := range s.NQ {
		out.LogQ = append(out.LogQ, lin(s.LogQMin, s.LogQMax, i, s.NQ))
	}
	for _, row := range g.Map() {
		out.Chi2 = append(out.Chi2, nums(row))
	}
	out.Done = g.DoneNodes()
	keep := in.Keep
	if keep <= 0 {
		keep = 6
	}
	out.Minima = g.Minima(keep)
	return out, nil
}

func lin(a, b float64, i, n int) float64 {
	if n == 1 {
		return 0.5 * (a + b)
	}
	return a + (b-a)*float64(i)/float64(n-1)
}

type refineIn struct {
	Notebook json.RawMessage    `json:"notebook"`
	Grid     *fit.GridResult    `json:"grid"`  // refine the grid's best minima ...
	Start    *lens.Params       `json:"start"` // ... or this one model
	Settings fit.SearchSettings `json:"settings"`
}

// stepRefine refines the best minima of a merged grid with every binary
// parameter free, with their degenerate partners (fit.RefineGrid), or one
// given model (fit.Refine and fit.Partners).
func stepRefine(ctx context.Context, raw json.RawMessage, report func(Progress)) (any, error) {
	var in refineIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	_, ev, err := loadEvent(in.Notebook)
	if err != nil {
		return nil, err
	}
	if in.Start != nil {
		l, err := fit.NewLikelihood(ev)
		if err != nil {
			return nil, err
		}
		sol, err := fit.Refine(ctx, l, *in.Start, in.Settings.Refine)
		if err != nil {
			return nil, err
		}
		sol.Label = "solution 1"
		res := &fit.SearchResult{Status: sol.Status, Candidates: []fit.Candidate{{Solution: sol}}}
		if !in.Settings.NoPartners && ctx.Err() == nil {
			ps, err := fit.Partners(ctx, l, sol, in.Settings.Refine)
			if err != nil {
				return nil, err
			}
			res.Candidates[0].Partners = ps
		}
		return partial(ctx, res)
	}
	if in.Grid == nil {
		return nil, errors.New("settings: give a grid or a start model")
	}
	res, err := fit.RefineGrid(ctx, ev, in.Grid, in.Settings)
	if err != nil {
		return res, err
	}
	return partial(ctx, res)
}

// Num is a float64 that encodes NaN and ±Inf as JSON null.
type Num float64

func (n Num) MarshalJSON() ([]byte, error) {
	f := float64(n)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return json.Marshal(f)
}

func (n *Num) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*n = Num(math.NaN())
		return nil
	}
	var f float64
	if err := json.Unmarshal(b, &f); err != nil {
		return err
	}
	*n = Num(f)
	return nil
}

func nums(x []float64) []Num {
	out := make([]Num, len(x))
	for i, v := range x {
		out[i] = Num(v)
	}
	return out
}
