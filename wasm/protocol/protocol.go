// Package protocol is the message protocol between the notebook page and the
// compute workers, and the table of steps a worker can run.
//
// The page sends one JSON Request per job; the worker answers with any number
// of "progress" Replies and then exactly one final Reply whose Kind is
// "result", "error" or "cancelled". A Control message with Kind "cancel" asks
// the worker to stop the job with that ID; the job then ends with "cancelled"
// and carries whatever partial result the step had. web/protocol.ts mirrors
// these types; TestTypeScriptMirror keeps the two in step.
//
// The package is plain Go (no syscall/js): the wasm worker and the native tests
// run the same Handle, which is how native and browser results are compared.
package protocol

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"sort"
	"time"
)

// Version is bumped whenever a message or result shape changes incompatibly.
const Version = 1

// Request asks a worker to run one step.
type Request struct {
	V        int             `json:"v"`        // protocol version, must equal Version
	ID       int             `json:"id"`       // chosen by the page, unique per page session
	Step     string          `json:"step"`     // one of Steps()
	Settings json.RawMessage `json:"settings"` // step-specific input (datasets, model, options)
}

// Control is a message about a running request.
type Control struct {
	V    int    `json:"v"`
	Kind string `json:"kind"` // "cancel"
	ID   int    `json:"id"`
}

// Reply kinds.
const (
	KindProgress  = "progress"
	KindResult    = "result"
	KindError     = "error"
	KindCancelled = "cancelled"
)

// Reply is one message from the worker about request ID.
type Reply struct {
	V        int             `json:"v"`
	ID       int             `json:"id"`
	Kind     string          `json:"kind"`
	Progress *Progress       `json:"progress,omitempty"`
	Result   json.RawMessage `json:"result,omitempty"` // step output; partial when Kind is "cancelled"
	Error    string          `json:"error,omitempty"`
	// ElapsedMS is the wall time the step has run (milliseconds), measured in the worker.
	ElapsedMS float64 `json:"elapsed_ms"`
}

// Progress reports how far a step is. Done and Total count the step's own work
// units (grid nodes, sampler steps); the page derives time left from them.
type Progress struct {
	Done  int    `json:"done"`
	Total int    `json:"total"`
	Note  string `json:"note,omitempty"`
	// Partial is an optional snapshot of results so far (for example finished grid cells).
	Partial json.RawMessage `json:"partial,omitempty"`
}

// Step runs one kind of job. report may be called any number of times from the
// step's goroutine. A step that sees ctx cancelled returns its partial result
// together with ctx.Err().
type Step func(ctx context.Context, settings json.RawMessage, report func(Progress)) (any, error)

var steps = map[string]Step{}

// register adds a step; called from init functions in this package.
func register(name string, s Step) {
	if _, dup := steps[name]; dup {
		panic("protocol: step registered twice: " + name)
	}
	steps[name] = s
}

// Steps lists the step names this build of the engine can run, sorted.
func Steps() []string {
	names := make([]string, 0, len(steps))
	for n := range steps {
		names = append(names, n)
	}
	sort.Strings(names)
	return names
}

// ErrNotAvailable marks a step whose engine code is not part of this build.
var ErrNotAvailable = errors.New("not available yet")

// Handle runs req and returns its final reply; progress replies go to send.
// It never panics on bad input: a malformed request gets an "error" reply.
func Handle(ctx context.Context, req Request, send func(Reply)) (final Reply) {
	start := time.Now()
	elapsed := func() float64 { return float64(time.Since(start).Microseconds()) / 1000 }
	final = Reply{V: Version, ID: req.ID}
	fail := func(err error) Reply {
		final.Kind, final.Error, final.ElapsedMS = KindError, err.Error(), elapsed()
		return final
	}
	if req.V != Version {
		return fail(fmt.Errorf("protocol version %d, engine speaks %d: reload the page", req.V, Version))
	}
	step, ok := steps[req.Step]
	if !ok {
		return fail(fmt.Errorf("step %q: %w", req.Step, ErrNotAvailable))
	}
	defer func() {
		if r := recover(); r != nil {
			final = fail(fmt.Errorf("step %s failed: %v", req.Step, r))
		}
	}()
	out, err := step(ctx, req.Settings, func(p Progress) {
		if send != nil {
			send(Reply{V: Version, ID: req.ID, Kind: KindProgress, Progress: &p, ElapsedMS: elapsed()})
		}
	})
	var res json.RawMessage
	if out != nil {
		b, merr := json.Marshal(out)
		if merr != nil {
			return fail(fmt.Errorf("step %s: encoding result: %v", req.Step, merr))
		}
		res = b
	}
	switch {
	case err != nil && ctx.Err() != nil && errors.Is(err, ctx.Err()):
		final.Kind, final.Result = KindCancelled, res
	case err != nil:
		return fail(err)
	default:
		final.Kind, final.Result = KindResult, res
	}
	final.ElapsedMS = elapsed()
	return final
}

// decode unmarshals step settings strictly: unknown fields are errors, so a
// page and engine that disagree about a setting fail loudly.
func decode(settings json.RawMessage, v any) error {
	dec := json.NewDecoder(bytesReader(settings))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return fmt.Errorf("settings: %v", err)
	}
	return nil
}
