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

/** One posterior mode as the page keeps it (wasm/protocol DrawsIn): the corner draws, fixed parameters and t0,par. */
export interface DrawsIn {
  label: string;
  names: string[];
  /** [column][row] in exported units (alpha in degrees). */
  samples: (number | null)[][];
  /** lens.Params of the mode's fixed parameters. */
  base: unknown;
  tref: number;
}

/** Settings of the "physical" step (wasm/protocol PhysicalSettings). */
export interface PhysicalSettings {
  /** "theta": θ* ± error given; "colour": (V−K)₀ and K₀ through the colour–surface-brightness relation. */
  theta_source: "theta" | "colour";
  theta_star: number; // µas
  theta_star_err: number;
  vk0: number;
  vk0_err: number;
  k0: number;
  k0_err: number;
  /** "dwarf", "subgiant", "giant" or "" (unknown). */
  class: string;
  ds: number; // kpc; 0 = not given
  ds_err: number;
  seed: number;
}

/** A derived quantity (wasm/protocol QuantityOut); null where not finite. */
export interface QuantityOut {
  name: string;
  unit: string;
  median: number | null;
  lower: number | null;
  upper: number | null;
  non_finite: number;
}

/** Result of the "physical" step (wasm/protocol PhysicalOut). */
export interface PhysicalOut {
  modes: {
    label: string;
    draws: number;
    error?: string;
    quantities: QuantityOut[] | null;
    assumptions: string[] | null;
    warnings: string[] | null;
    unbound_fraction: number | null;
  }[];
  exports: Record<string, { name: string; mime: string; text: string }>;
}

/** Settings of the "forecast" step (wasm/protocol ForecastSettings); 0 means the default. */
export interface ForecastSettings {
  /** Start of the window and "now" (full JD); 0 = the last data point. */
  from: number;
  days: number; // 0 = 30
  draws: number; // 0 = 200
  points: number; // 0 = 1000
  seed: number;
}

/** fit.TimeDistribution over the draws (full JD); null where no draw has the event. */
export interface TimeDist {
  median: number | null;
  lower: number | null;
  upper: number | null;
  fraction: number | null;
}

/** Result of the "forecast" step (wasm/protocol ForecastOut). */
export interface ForecastOut {
  settings: ForecastSettings;
  modes: {
    label: string;
    draws: number;
    t: number[];
    amp: (number | null)[];
    amp_lower: (number | null)[];
    amp_upper: (number | null)[];
    mag: (number | null)[];
    mag_lower: (number | null)[];
    mag_upper: (number | null)[];
    next_peak: (number | null)[];
    next_crossing?: (number | null)[];
    peak: TimeDist;
    crossing: TimeDist;
    crossings: boolean;
    method: string[] | null;
    warnings: string[] | null;
  }[];
  exports?: Record<string, { name: string; mime: string; text: string }>;
}
