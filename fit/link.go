package fit

import (
	"bytes"
	"compress/flate"
	"encoding/base64"
	"errors"
	"fmt"
	"io"
	"strings"
)

// A share link carries a notebook in the URL fragment, which browsers never
// send to a server. The fragment is a version prefix of our own followed by
// the notebook document compressed with deflate (RFC 1951) and written in
// unpadded base64url (RFC 4648 §5):
//
//	lb1f:<base64url(deflate(notebook JSON))>   full link: data included
//	lb1m:<base64url(deflate(notebook JSON))>   model link: every dataset
//	                                           omitted, with its point count,
//	                                           file name and fingerprint
//
// EncodeLink makes a full link when it fits in LinkFullMax characters, else a
// model link; opening a model link asks for the data files, and Notebook.Attach
// checks each against its fingerprint. The "1" is the link-encoding version;
// the notebook inside carries its own document version.

const (
	LinkPrefixFull  = "lb1f:"
	LinkPrefixModel = "lb1m:"

	// LinkFullMax is the longest full link EncodeLink makes (characters of
	// the fragment): links are pasted into mail and chat, and ~100 kB is a
	// size those carry (common practice, no source).
	LinkFullMax = 100_000
	// LinkMax bounds any link, encoded or decoded: 2 MB is about the longest
	// URL browsers accept (Chromium's limit, from memory).
	LinkMax = 2_000_000
)

// LinkOptions tune EncodeLink. A nil *LinkOptions means the defaults.
type LinkOptions struct {
	// FullMax is the longest full link (characters); 0 means LinkFullMax.
	FullMax int
	// ModelOnly makes a model link even when a full link would fit.
	ModelOnly bool
}

// Contents describes a notebook for display before it replaces anything:
// the page shows it when a link or file is opened.
type Contents struct {
	Kind        string            `json:"kind"`  // "notebook", "full link" or "model link"
	Bytes       int               `json:"bytes"` // size of the link (characters) or document (bytes)
	Title       string            `json:"title"`
	Event       string            `json:"event"`
	Fingerprint string            `json:"fingerprint"` // DataFingerprint of all datasets
	Points      int               `json:"points"`      // points over all datasets
	Datasets    []DatasetContents `json:"datasets"`
	Steps       []StepContents    `json:"steps"`
	// Warnings lists user-supplied texts to treat with care (markup,
	// direction controls), e.g. "dataset 2 name: contains markup characters…".
	Warnings []string `json:"warnings"`
}

// DatasetContents describes one dataset of a notebook.
type DatasetContents struct {
	Name        string `json:"name"`
	Band        string `json:"band"`
	File        string `json:"file"`
	Points      int    `json:"points"`
	Rejected    int    `json:"rejected"`    // rejected rows recorded
	Masked      int    `json:"masked"`      // points masked by the user
	Included    bool   `json:"included"`    // false when the points must be supplied (model link)
	Fingerprint string `json:"fingerprint"` // DatasetFingerprint
}

// StepContents describes one step.
type StepContents struct {
	ID     string     `json:"id"`
	Kind   string     `json:"kind"`
	Status StepStatus `json:"status"`
	Seed   uint64     `json:"seed,string"`
}

// Describe describes nb. kind is copied to Contents.Kind.
func Describe(nb *Notebook, kind string) *Contents {
	c := &Contents{Kind: kind, Title: nb.Title, Fingerprint: nb.Fingerprint()}
	warn := func(what, s string) {
		if w := TextWarning(s); w != "" {
			c.Warnings = append(c.Warnings, what+": "+w)
		}
	}
	warn("title", nb.Title)
	warn("notes", nb.Notes)
	if nb.Event != nil {
		c.Event = nb.Event.Name
		warn("event name", nb.Event.Name)
		for j, m := range nb.Event.Masks {
			warn(fmt.Sprintf("mask %d reason", j+1), m.Reason)
		}
	}
	for i, d := range nb.datasets() {
		dc := DatasetContents{Name: d.Name, Band: d.Band, File: d.Source.File,
			Points: d.Len(), Rejected: d.Source.Lines.Rejected, Included: true,
			Fingerprint: DatasetFingerprint(d)}
		if p := nb.pending(i); p != nil {
			dc.Points, dc.Included, dc.Fingerprint = p.Points, false, p.Fingerprint
		}
		if dc.Rejected == 0 {
			dc.Rejected = len(d.Source.Rejected)
		}
		for _, m := range d.Masked {
			if m {
				dc.Masked++
			}
		}
		c.Points += dc.Points
		c.Datasets = append(c.Datasets, dc)
		w := fmt.Sprintf("dataset %d ", i+1)
		warn(w+"name", d.Name)
		warn(w+"band", d.Band)
		warn(w+"time system", d.TimeSystem)
		warn(w+"file name", d.Source.File)
	}
	for i, s := range nb.Steps {
		c.Steps = append(c.Steps, StepContents{ID: s.ID, Kind: s.Kind, Status: s.Status, Seed: s.Seed})
		warn(fmt.Sprintf("step %d note", i+1), s.Note)
		warn(fmt.Sprintf("step %d id", i+1), s.ID)
	}
	return c
}

// EncodeLink returns the URL fragment (without '#') carrying nb: a full link
// when it fits opts.FullMax characters, else a model link. It fails when even
// the model link exceeds LinkMax (large step results): save a notebook file
// instead.
func EncodeLink(nb *Notebook, opts *LinkOptions) (string, *Contents, error) {
	fullMax := LinkFullMax
	modelOnly := false
	if opts != nil {
		if opts.FullMax > 0 {
			fullMax = opts.FullMax
		}
		modelOnly = opts.ModelOnly
	}
	if !modelOnly && len(nb.Pending) == 0 {
		doc, err := encodeNotebook(nb, false)
		if err != nil {
			return "", nil, err
		}
		// Compress only as far as the size limit allows: a large notebook
		// is abandoned after ~fullMax·3/4 compressed bytes, not compressed whole.
		if z, ok := deflateLimited(doc, (fullMax-len(LinkPrefixFull))*3/4); ok {
			if s := LinkPrefixFull + base64.RawURLEncoding.EncodeToString(z); len(s) <= fullMax {
				c := Describe(nb, "full link")
				c.Bytes = len(s)
				return s, c, nil
			}
		}
	}
	doc, err := encodeNotebook(nb, true)
	if err != nil {
		return "", nil, err
	}
	s := LinkPrefixModel + deflateBase64(doc)
	if len(s) > LinkMax {
		return "", nil, fmt.Errorf("fit: link: even without the data the link would be %d characters, more than %d; save a notebook file instead", len(s), LinkMax)
	}
	// Summarize what the recipient will get.
	got, err := DecodeNotebook(doc)
	if err != nil {
		return "", nil, fmt.Errorf("fit: link: internal check failed: %w", err)
	}
	c := Describe(got, "model link")
	c.Bytes = len(s)
	return s, c, nil
}

var errLinkLimit = errors.New("limit reached")

// limitWriter fails once more than max bytes are written.
type limitWriter struct {
	buf bytes.Buffer
	max int
}

func (w *limitWriter) Write(p []byte) (int, error) {
	if w.buf.Len()+len(p) > w.max {
		return 0, errLinkLimit
	}
	return w.buf.Write(p)
}

// deflateLimited compresses doc, giving up (ok false) when the compressed
// stream would exceed max bytes.
func deflateLimited(doc []byte, max int) (z []byte, ok bool) {
	lw := &limitWriter{max: max}
	zw, _ := flate.NewWriter(lw, flate.BestCompression)
	if _, err := zw.Write(doc); err != nil {
		return nil, false
	}
	if err := zw.Close(); err != nil {
		return nil, false
	}
	return lw.buf.Bytes(), true
}

func deflateBase64(doc []byte) string {
	var buf bytes.Buffer
	zw, _ := flate.NewWriter(&buf, flate.BestCompression) // level is valid: no error
	zw.Write(doc)                                         // bytes.Buffer writes cannot fail
	zw.Close()
	return base64.RawURLEncoding.EncodeToString(buf.Bytes())
}

// DecodeLink decodes a link fragment (with or without its leading '#', or a
// whole URL containing one) made by EncodeLink. The compressed payload may
// inflate to at most MaxNotebookBytes; the notebook inside is checked as by
// DecodeNotebook. On error no notebook is returned. The Contents is for
// showing the user what the link holds before anything is replaced.
func DecodeLink(link string) (*Notebook, *Contents, error) {
	if i := strings.IndexByte(link, '#'); i >= 0 {
		link = link[i+1:]
	}
	link = strings.TrimSpace(link)
	if len(link) > LinkMax {
		return nil, nil, fmt.Errorf("fit: link: %d characters, more than the %d accepted", len(link), LinkMax)
	}
	var kind string
	switch {
	case strings.HasPrefix(link, LinkPrefixFull):
		kind = "full link"
	case strings.HasPrefix(link, LinkPrefixModel):
		kind = "model link"
	case strings.HasPrefix(link, "lb") && len(link) > 4 && link[4] == ':':
		return nil, nil, fmt.Errorf("fit: link: version %q is not one this lensbook reads (lb1f, lb1m); it may come from a newer lensbook", clip(link[:4]))
	default:
		return nil, nil, errors.New("fit: link: not a lensbook link (no lb1f: or lb1m: prefix)")
	}
	payload := link[len(LinkPrefixFull):]
	raw, err := base64.RawURLEncoding.Strict().DecodeString(payload)
	if err != nil {
		return nil, nil, fmt.Errorf("fit: link: damaged or cut short (not base64url: %v)", err)
	}
	br := bytes.NewReader(raw)
	zr := flate.NewReader(br)
	doc, err := io.ReadAll(io.LimitReader(zr, MaxNotebookBytes+1))
	if err != nil {
		if errors.Is(err, io.ErrUnexpectedEOF) {
			return nil, nil, errors.New("fit: link: cut short (the compressed data ends early)")
		}
		return nil, nil, fmt.Errorf("fit: link: damaged compressed data: %v", err)
	}
	if len(doc) > MaxNotebookBytes {
		return nil, nil, fmt.Errorf("fit: link: expands to more than %d bytes; refused", MaxNotebookBytes)
	}
	if br.Len() != 0 {
		return nil, nil, fmt.Errorf("fit: link: %d unexpected bytes after the compressed data", br.Len())
	}
	nb, err := DecodeNotebook(doc)
	if err != nil {
		return nil, nil, errors.New("fit: link: " + strings.TrimPrefix(err.Error(), "fit: "))
	}
	switch {
	case kind == "full link" && len(nb.Pending) > 0:
		return nil, nil, errors.New("fit: link: a full link must include its data")
	case kind == "model link" && len(nb.Pending) != len(nb.Event.Datasets):
		return nil, nil, errors.New("fit: link: a model link must not include data")
	}
	c := Describe(nb, kind)
	c.Bytes = len(link)
	return nb, c, nil
}
