package protocol

import (
	"context"
	"encoding/json"
	"math"
	"strings"
	"testing"

	"lensbook/fit"
)

// TestStepCoords: a typed position reaches the notebook and its event and
// survives the round trip; a bad one comes back with fit.ParsePosition's
// message; blank clears it.
func TestStepCoords(t *testing.T) {
	doc, err := fit.EncodeNotebook(&fit.Notebook{Event: fit.NewEvent("e")})
	if err != nil {
		t.Fatal(err)
	}
	call := func(pos string, tref *float64) (*fit.Notebook, error) {
		raw, _ := json.Marshal(coordsIn{Notebook: doc, Position: pos, TRef: tref})
		out, err := stepCoords(context.Background(), raw, nil)
		if err != nil {
			return nil, err
		}
		return fit.DecodeNotebook(out.(json.RawMessage))
	}
	tref := 2460800.0
	nb, err := call("18:00:00 -30:30:00", &tref)
	if err != nil {
		t.Fatal(err)
	}
	// 18h = 270°, −30°30′ = −30.5° (sexagesimal arithmetic).
	if c := nb.Event.Coords; c == nil || math.Abs(c.RA-270) > 1e-12 || math.Abs(c.Dec+30.5) > 1e-12 || nb.Coords == nil || *nb.Coords != *c {
		t.Errorf("coordinates: event %v, notebook %v; want RA 270, Dec −30.5", nb.Event.Coords, nb.Coords)
	}
	if nb.Event.TRef != tref {
		t.Errorf("TRef = %v, want %v", nb.Event.TRef, tref)
	}
	_, perr := fit.ParsePosition("25:00:00 -30:00:00")
	if _, err := call("25:00:00 -30:00:00", nil); err == nil || perr == nil || err.Error() != perr.Error() {
		t.Errorf("bad position: error %v, want fit's %v", err, perr)
	}
	bad := -5.0
	if _, err := call("270 -30", &bad); err == nil || !strings.Contains(err.Error(), "t0,par") {
		t.Errorf("negative t0,par: %v", err)
	}
	nb, err = call("  ", nil)
	if err != nil || nb.Coords != nil || nb.Event.Coords != nil {
		t.Errorf("blank position: %v, %v, %v", err, nb.Coords, nb.Event.Coords)
	}
}
