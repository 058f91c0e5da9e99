//go:build js && wasm

// Command engine is lensbook's compute worker: the fit engine compiled to
// WebAssembly and run inside a Web Worker (web/worker.ts loads it). It only
// translates: JSON messages from the page go to protocol.Handle, replies go
// back with postMessage.
//
// JavaScript → Go: self.lensbookHandle(jsonString) for a Request or a Control.
// Go → JavaScript: self.postMessage(jsonString) for each Reply, and
// {"kind":"ready","v":Version,"steps":[...]} once at start.
package main

import (
	"context"
	"encoding/json"
	"sync"
	"syscall/js"
	"time"

	"lensbook/wasm/protocol"
)

func main() {
	self := js.Global()
	post := func(v any) {
		b, err := json.Marshal(v)
		if err != nil {
			b, _ = json.Marshal(protocol.Reply{V: protocol.Version, Kind: protocol.KindError, Error: err.Error()})
		}
		self.Call("postMessage", string(b))
	}
	var mu sync.Mutex
	cancels := map[int]context.CancelFunc{}

	self.Set("lensbookHandle", js.FuncOf(func(_ js.Value, args []js.Value) any {
		if len(args) != 1 || args[0].Type() != js.TypeString {
			post(protocol.Reply{V: protocol.Version, Kind: protocol.KindError, Error: "engine: message must be a JSON string"})
			return nil
		}
		raw := []byte(args[0].String())
		var ctl protocol.Control
		if json.Unmarshal(raw, &ctl) == nil && ctl.Kind == "cancel" {
			mu.Lock()
			if c := cancels[ctl.ID]; c != nil {
				c()
			}
			mu.Unlock()
			return nil
		}
		var req protocol.Request
		if err := json.Unmarshal(raw, &req); err != nil {
			post(protocol.Reply{V: protocol.Version, Kind: protocol.KindError, Error: "engine: bad request: " + err.Error()})
			return nil
		}
		ctx, cancel := context.WithCancel(context.Background())
		mu.Lock()
		cancels[req.ID] = cancel
		mu.Unlock()
		// The step runs on its own goroutine so this callback returns at once.
		go func() {
			last := time.Now()
			send := func(r protocol.Reply) {
				post(r)
				// Go on wasm is single-threaded: a busy goroutine never lets the
				// worker's event loop deliver a "cancel" message. Sleeping briefly
				// parks every goroutine, which hands control back to JavaScript
				// for one turn of the event loop; at most every 50 ms this costs
				// well under 1 % of the run time.
				if time.Since(last) > 50*time.Millisecond {
					time.Sleep(time.Millisecond)
					last = time.Now()
				}
			}
			final := protocol.Handle(ctx, req, send)
			mu.Lock()
			delete(cancels, req.ID)
			mu.Unlock()
			cancel()
			post(final)
		}()
		return nil
	}))
	post(map[string]any{"kind": "ready", "v": protocol.Version, "steps": protocol.Steps()})
	select {}
}
