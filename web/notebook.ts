// Types of the notebook as the page holds it. The document itself is the
// notebook file of package fit (fit/notebook.go, format "lensbook-notebook"):
// the page keeps it as received from the engine and changes it only through
// engine steps (parse, edit, mask), so it is always valid. Step results are
// the engine's own result types (fit.SingleResult, fit.SearchResult, …).

export interface Problem {
  line: number;
  column?: number;
  reason: string;
}

export interface DocDataset {
  name: string;
  band?: string;
  time_system?: string;
  zero_point: number;
  ld: number;
  points: number;
  fingerprint: string;
  t?: number[];
  flux?: number[];
  err?: number[];
  line?: number[];
  omitted?: boolean;
  masked?: number[];
  err_scale?: number;
  err_floor?: number;
  source: { file?: string; rejected?: Problem[]; notes?: string[] };
}

export interface DocStep {
  id: string;
  kind: string;
  settings?: unknown;
  seed: string;
  status: "pending" | "running" | "done" | "failed" | "cancelled";
  result?: unknown;
  note?: string;
}

/** fit.Coords: a sky position in degrees. */
export interface Coords {
  ra_deg: number;
  dec_deg: number;
}

export interface NotebookDoc {
  format: string;
  version: number;
  title?: string;
  notes?: string;
  /** coords: sky position (ICRS, degrees); tref: t0,par (full JD, absent or 0 = t0 of the starting solution). */
  event: { name?: string; coords?: Coords; ref: number; tol?: number; masks?: unknown[]; tref?: number };
  fingerprint: string;
  datasets: DocDataset[];
  steps: DocStep[];
}

/** lens.Params as encoded by Go (no JSON tags): full JD, θE, days, radians. */
export interface Params {
  T0: number;
  U0: number;
  TE: number;
  Rho: number;
  S: number;
  Q: number;
  Alpha: number;
  PiEN: number;
  PiEE: number;
  DsDt: number;
  DAlphaDt: number;
}

export interface DatasetFit {
  name: string;
  n: number;
  chi2: number;
  fs: number;
  fb: number;
}

/** fit.Solution */
export interface Solution {
  label: string;
  params: Params;
  ref: number;
  chi2: number;
  dof: number;
  fits: DatasetFit[];
  free: string[];
  sigma?: number[];
  status: string;
  note?: string;
}

export type StepId = "data" | "single" | "grid" | "refine" | "posterior" | "report";
export const STEP_ORDER: StepId[] = ["data", "single", "grid", "refine", "posterior", "report"];
/** Step kinds written into the notebook document. */
export const STEP_KIND: Record<StepId, string> = {
  data: "data",
  single: "single-lens",
  grid: "binary-search",
  refine: "refine",
  posterior: "posterior",
  report: "report",
};

export type Status = "empty" | "running" | "done" | "cancelled" | "error";

export interface StepState {
  status: Status;
  stale: boolean; // an upstream step changed after this result was made
  settings: Record<string, unknown>;
  result?: unknown;
  message?: string;
  elapsedMs?: number;
}

export type Steps = Record<StepId, StepState>;

export function newSteps(): Steps {
  const st = (settings: Record<string, unknown>): StepState => ({ status: "empty", stale: false, settings });
  return {
    data: st({}),
    single: st({ noFinite: true }),
    grid: st({ logSMin: -1, logSMax: 1, ns: 31, logQMin: -6, logQMax: 0, nq: 31, alphas: 8 }),
    refine: st({ keep: 6, noPartners: false }),
    posterior: st({ walkers: 32, steps: 2000, solution: 0 }),
    report: st({}),
  };
}

/** Marks every result after `from` as stale (kept, shown dimmed, re-runnable). */
export function markDownstream(steps: Steps, from: StepId): void {
  const i = STEP_ORDER.indexOf(from);
  for (const id of STEP_ORDER.slice(i + 1)) if (steps[id].result !== undefined) steps[id].stale = true;
}

export const PARAM_LABELS: Record<string, string> = {
  T0: "t₀ (HJD′)",
  U0: "u₀",
  TE: "t_E (d)",
  Rho: "ρ",
  S: "s",
  Q: "q",
  Alpha: "α (deg)",
  PiEN: "π_E,N",
  PiEE: "π_E,E",
  t0: "t₀",
  u0: "u₀",
  tE: "t_E",
  rho: "ρ",
  s: "s",
  q: "q",
  alpha: "α",
};

/** Maps fit.Param names (in Solution.free) to lens.Params fields. */
export const FREE_TO_FIELD: Record<string, keyof Params> = {
  t0: "T0",
  u0: "U0",
  tE: "TE",
  rho: "Rho",
  s: "S",
  q: "Q",
  alpha: "Alpha",
  piEN: "PiEN",
  piEE: "PiEE",
  dsdt: "DsDt",
  dalphadt: "DAlphaDt",
};

/** protocol.PosteriorOut: summaries, diagnostics and a random subset of the draws (corner) per mode. */
export interface PosteriorResult {
  modes: {
    label: string;
    params: { name: string; unit: string; median: number | null; lower: number | null; upper: number | null; tau: number | null; ess: number | null; rhat: number | null }[];
    best_chi2: number | null;
    converged: boolean;
    reasons: string[] | null;
    acceptance: number | null;
    steps: number;
    samples: number;
    status: string;
    corner: { names: string[]; labels: string[]; samples: (number | null)[][] };
    /** lens.Params of the mode's fixed parameters and its t0,par (absent in results saved by older versions). */
    base?: Params;
    tref?: number;
  }[];
  comparison: { Mode: string; Chi2: number; DeltaChi2: number; DeltaBIC: number }[] | null;
  cancelled: boolean;
  exports: Record<string, { name: string; mime: string; text: string }>;
}
