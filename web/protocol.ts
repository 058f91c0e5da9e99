// Mirror of wasm/protocol/protocol.go: the messages between the page and the
// compute workers. Keep the two in step (TestTypeScriptMirror checks the
// version number and the kinds).

export const PROTOCOL_VERSION = 1;

export interface Request {
  v: number;
  id: number;
  step: string;
  settings: unknown;
}

export interface Control {
  v: number;
  kind: "cancel";
  id: number;
}

export type ReplyKind = "progress" | "result" | "error" | "cancelled";

export interface Progress {
  done: number;
  total: number;
  note?: string;
  partial?: unknown;
}

export interface Reply {
  v: number;
  id: number;
  kind: ReplyKind;
  progress?: Progress;
  result?: unknown;
  error?: string;
  elapsed_ms: number;
}

/** First message of a worker once its Go program runs. */
export interface Ready {
  kind: "ready";
  v: number;
  steps: string[];
}

/** Settings of the "coords" step (wasm/protocol/coords.go); its result is the notebook document. */
export interface CoordsSettings {
  notebook: unknown;
  /** RA then Dec, sexagesimal or degrees (fit.ParsePosition); blank clears the position. */
  position: string;
  /** t0,par (full JD; 0 = the t0 of the starting solution); absent keeps the notebook's. */
  tref?: number;
}
