package protocol

import (
	"context"
	"encoding/json"
	"strings"

	"lensbook/fit"
)

func init() { register("coords", stepCoords) }

// coordsIn sets the event's sky position and, optionally, its t0,par.
type coordsIn struct {
	Notebook json.RawMessage `json:"notebook"`
	// Position is right ascension then declination as typed in the Data
	// step ("17:59:02.3 −29:03:11", "269.7596, -29.0531"; see
	// fit.ParsePosition); blank clears the position.
	Position string `json:"position"`
	// TRef, when present, is the reference epoch t0,par (full JD; 0 = the
	// t0 of the starting solution).
	TRef *float64 `json:"tref,omitempty"`
}

// stepCoords parses the position with fit.ParsePosition (its error text is
// returned as is, for the page to show beside the field) and stores it both as
// the notebook's position and in the model's event, where parallax reads it.
func stepCoords(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in coordsIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, err := loadNotebook(in.Notebook)
	if err != nil {
		return nil, err
	}
	if strings.TrimSpace(in.Position) == "" {
		nb.Coords, nb.Event.Coords = nil, nil
	} else {
		c, err := fit.ParsePosition(in.Position)
		if err != nil {
			return nil, err
		}
		c2 := c
		nb.Coords, nb.Event.Coords = &c, &c2
	}
	if in.TRef != nil {
		nb.Event.TRef = *in.TRef
	}
	return docOf(nb) // EncodeNotebook validates the t0,par range
}
