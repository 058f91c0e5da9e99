// Shared parts of the Report step's two computed panels (physical quantities
// and forecast): their state, the posterior draws they send to the engine,
// and a run with progress, time left and Cancel. Drawing only; every number
// comes from the engine.

import { el, fmtDuration } from "./dom";
import type { EnginePool, Job } from "./engine";
import type { PosteriorResult } from "./notebook";
import type { DrawsIn, Progress } from "./protocol";

export type PanelStatus = "empty" | "running" | "done" | "cancelled" | "error";

/** One panel: its settings (kept while the user types), last result and status. */
export interface PanelState<S, R> {
  settings: S;
  result?: R;
  status: PanelStatus;
  /** The posterior changed after this result was made: kept, dimmed, re-runnable. */
  stale: boolean;
  message?: string;
  job?: Job<unknown>;
  /** The seed the result was made with (saved with it). */
  seed?: number;
}

/** What the panels need from the page. */
export interface PanelHost {
  pool: EnginePool;
  /** The notebook document sent with every request. */
  notebook(): unknown;
  posterior(): PosteriorResult | undefined;
  seed(): number;
  /** Re-renders the Report step and schedules an autosave. */
  update(): void;
}

/**
 * The posterior draws of every mode as the engine wants them (protocol
 * DrawsIn). A mode saved by a lensbook without the fixed parameters is sent
 * without them; the engine then says to run the posterior again.
 */
export function drawsOf(p: PosteriorResult | undefined): DrawsIn[] {
  return (p?.modes ?? []).filter((m) => m.corner?.names?.length).map((m) => ({ label: m.label, names: m.corner.names, samples: m.corner.samples, base: m.base ?? null, tref: m.tref ?? 0 }));
}

/**
 * Runs step for a panel: status and progress in the element with id box (its
 * .bar and .eta), Cancel through the job; a cancelled run keeps no result.
 */
export async function runPanel<R>(host: PanelHost, state: PanelState<unknown, R>, step: string, settings: unknown, box: string): Promise<void> {
  state.status = "running";
  state.message = "";
  const seed = host.seed();
  const started = performance.now();
  host.update();
  const job = host.pool.run<R>(step, settings, (p: Progress) => {
    const root = document.getElementById(box);
    const bar = root?.querySelector<HTMLElement>(".bar");
    const eta = root?.querySelector<HTMLElement>(".eta");
    if (!bar || !eta || !(p.total > 0)) return;
    const f = p.done / p.total;
    bar.style.width = (100 * f).toFixed(1) + "%";
    const spent = performance.now() - started;
    eta.textContent = `${p.done} / ${p.total} · about ${fmtDuration(f > 0 ? (spent * (1 - f)) / f : NaN)} left`;
  });
  state.job = job as Job<unknown>;
  try {
    const r = await job.done;
    if (r.kind === "cancelled") {
      state.status = state.result === undefined ? "empty" : "done";
      state.message = "Cancelled; the previous result (if any) is kept.";
    } else {
      state.result = r.result as R;
      state.seed = seed;
      state.status = "done";
      state.stale = false;
      state.message = `Finished in ${fmtDuration(performance.now() - started)}.`;
    }
  } catch (e) {
    state.status = "error";
    state.message = (e as Error).message;
  } finally {
    state.job = undefined;
    host.update();
  }
}

/** The progress bar with time left and Cancel of a running panel. */
export function progressRow(state: PanelState<unknown, unknown>, id: string): HTMLElement {
  const cancel = el("button", { class: "cancel", id: `cancel-${id}`, text: "Cancel" });
  cancel.addEventListener("click", () => state.job?.cancel());
  return el("div", { class: "progress" }, el("div", { class: "track" }, el("div", { class: "bar" })), el("span", { class: "eta", text: "starting…" }), cancel);
}

/** A labelled number input bound to obj[key] (blank reads as 0, the engine's "not given"). */
export function numInput(label: string, obj: Record<string, unknown>, key: string, attrs: Record<string, string | number> = {}): HTMLElement {
  const v = obj[key] as number;
  const i = el("input", { type: "number", name: key, "aria-label": label, value: v ? String(v) : "", step: "any", ...attrs });
  const keep = () => {
    const x = i.value.trim() === "" ? 0 : Number(i.value);
    if (Number.isFinite(x)) obj[key] = x;
  };
  i.addEventListener("input", keep);
  i.addEventListener("change", keep);
  return el("label", {}, label + " ", i);
}

/** Status line of a panel: message, and the stale note. */
export function statusLine(state: PanelState<unknown, unknown>): HTMLElement[] {
  const out: HTMLElement[] = [];
  if (state.stale && state.result !== undefined) out.push(el("p", { class: "warn stale-note", text: "Stale: the posterior changed after these numbers were made. Run again to update them." }));
  if (state.message) out.push(el("p", { class: state.status === "error" ? "error" : "message", role: "status", text: state.message }));
  return out;
}
