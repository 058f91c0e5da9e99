package protocol

import (
	"context"
	"encoding/json"
	"fmt"

	"lensbook/fit"
)

// Share links and model links (fit.EncodeLink): the notebook compressed into
// the URL fragment. Opening one first describes it (fit.Contents) so the page
// can ask before replacing anything; a model link's datasets come back as
// pending and are filled by "attach", which checks each file's fingerprint.

func init() {
	register("link-encode", stepLinkEncode)
	register("link-decode", stepLinkDecode)
	register("describe", stepDescribe)
	register("attach", stepAttach)
}

// LinkOut is an encoded link with the description of what it holds.
type LinkOut struct {
	Link     string        `json:"link"`
	Contents *fit.Contents `json:"contents"`
}

func stepLinkEncode(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in struct {
		Notebook  json.RawMessage `json:"notebook"`
		ModelOnly bool            `json:"model_only"`
	}
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, err := loadNotebook(in.Notebook)
	if err != nil {
		return nil, err
	}
	link, c, err := fit.EncodeLink(nb, &fit.LinkOptions{ModelOnly: in.ModelOnly})
	if err != nil {
		return nil, err
	}
	return LinkOut{Link: link, Contents: c}, nil
}

// Opened is a decoded link or notebook file: the document and its description.
type Opened struct {
	Notebook json.RawMessage `json:"notebook"`
	Contents *fit.Contents   `json:"contents"`
}

func stepLinkDecode(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in struct {
		Link string `json:"link"`
	}
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, c, err := fit.DecodeLink(in.Link)
	if err != nil {
		return nil, err
	}
	doc, err := docOf(nb)
	if err != nil {
		return nil, err
	}
	return Opened{Notebook: doc, Contents: c}, nil
}

// stepDescribe decodes a notebook file and describes it without opening it.
func stepDescribe(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in textIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, err := fit.DecodeNotebook([]byte(in.Text))
	if err != nil {
		return nil, err
	}
	doc, err := docOf(nb)
	if err != nil {
		return nil, err
	}
	c := fit.Describe(nb, "notebook")
	c.Bytes = len(in.Text)
	return Opened{Notebook: doc, Contents: c}, nil
}

// stepAttach reads a data file for pending dataset Index with the import
// options recorded in the notebook and attaches it if its fingerprint matches.
func stepAttach(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in struct {
		Notebook json.RawMessage `json:"notebook"`
		Index    int             `json:"index"`
		File     string          `json:"file"`
		Text     string          `json:"text"`
	}
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, err := loadNotebook(in.Notebook)
	if err != nil {
		return nil, err
	}
	if in.Index < 0 || nb.Event == nil || in.Index >= len(nb.Event.Datasets) {
		return nil, fmt.Errorf("dataset %d does not exist", in.Index+1)
	}
	d, err := fit.Parse(in.File, []byte(in.Text), nb.Event.Datasets[in.Index].Source.Options)
	if err != nil {
		return nil, err
	}
	if err := nb.Attach(in.Index, d); err != nil {
		return nil, err
	}
	return docOf(nb)
}
