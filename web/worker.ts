// Compute worker loader (classic worker, bundled as worker.js): starts the Go
// engine (engine.wasm) and relays messages. Requests from the page are handed
// to Go as JSON strings; Go's replies are parsed here, off the page thread.

declare function importScripts(...urls: string[]): void;
declare const Go: { new (): { importObject: WebAssembly.Imports; run(i: WebAssembly.Instance): Promise<void> } };

interface EngineScope {
  lensbookHandle?: (msg: string) => void;
  postMessage(m: unknown): void;
  onmessage: ((e: MessageEvent) => void) | null;
}

const scope = self as unknown as EngineScope;
importScripts("wasm_exec.js");

const pending: string[] = [];
scope.onmessage = (e: MessageEvent) => {
  const msg = JSON.stringify(e.data);
  if (scope.lensbookHandle) scope.lensbookHandle(msg);
  else pending.push(msg);
};

// Go posts strings; intercept them before they reach the page and parse here.
const rawPost = scope.postMessage.bind(self);
scope.postMessage = (m: unknown) => {
  if (typeof m === "string") rawPost(JSON.parse(m));
  else rawPost(m);
};

const go = new Go();
WebAssembly.instantiateStreaming(fetch("engine.wasm"), go.importObject)
  .then((r) => {
    go.run(r.instance);
    // main() has registered lensbookHandle before its first await returns.
    while (pending.length) scope.lensbookHandle!(pending.shift()!);
  })
  .catch((err) => rawPost({ kind: "error", v: 1, id: 0, error: "engine failed to start: " + String(err), elapsed_ms: 0 }));
