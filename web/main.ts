// lensbook notebook page: steps Data → Single lens → Binary search → Refine →
// Posterior → Report. The page renders and collects input; every number comes
// from the Go engine running in Web Workers (engine.ts). A step whose engine
// code is not in this build says "not available yet" instead of showing anything.
//
// Hook for the magnification-map view (web/mapview.ts, bundled to mapview.js
// and loaded after this module when it exists): window.lensbook, of type
// LensbookHook below, gives the current notebook document, solutions and
// selected model, notifies on change, and starts Refine from a model ("use as
// starting point"). The view mounts in <section id="map-panel">.

import "./style.css";
import { $, clear, download, el, fmt, fmtDuration, fmtUncertain } from "./dom";
import { EnginePool, type Job } from "./engine";
import { exportPNG, exportSVG, figureBox, PALETTE, SOLUTION_COLOURS } from "./figures";
import { causticsFigure, chi2MapFigure, cornerFigure, lightCurveFigure, type CausticsData } from "./plots";
import { LightCurvePlot, type DragMode, type PlotInput } from "./lightcurve";
import {
  FREE_TO_FIELD,
  markDownstream,
  newSteps,
  PARAM_LABELS,
  STEP_KIND,
  STEP_ORDER,
  type Coords,
  type DocStep,
  type NotebookDoc,
  type Params,
  type PosteriorResult,
  type Solution,
  type StepId,
  type Steps,
} from "./notebook";
import type { CoordsSettings, ForecastOut, PhysicalOut, Progress } from "./protocol";
import * as persist from "./persist";
import { newPhysical, renderPhysical, type PhysicalPanel } from "./physical";
import { forecastBands, newForecast, renderForecast, type ForecastHost, type ForecastPanel } from "./forecast";

const TIME_OFFSET = 2450000; // display HJD′ = JD − 2450000 (common practice)

// ---------- state ----------

let doc: NotebookDoc | undefined; // the notebook document (fit format), from the engine
let steps: Steps = newSteps();
let seed = 1;
const query = new URLSearchParams(location.search);
const pool = new EnginePool(Number(query.get("workers")) || EnginePool.defaultSize());
const lc = new LightCurvePlot($("#lc"), $("#resid"));
let selected = 0; // index into solutions() for plots
let curves: CurvesResult | undefined;
let curveSolutions: number[] = []; // solutions() index of each model curve in `curves`
const MAX_MODELS = 4;
const listeners = new Set<() => void>();
const running = new Map<StepId, Job<unknown>[]>();
// The Report step's computed panels (physical quantities, forecast), kept in the notebook as steps of their own kinds.
let physical: PhysicalPanel = newPhysical();
let forecast: ForecastPanel = newForecast();
let panelTick = 0; // bumped on every panel change, so the Report's cached output is rebuilt
const PANEL_KIND = { physical: "physical-quantities", forecast: "forecast" } as const;

interface Pending {
  file: string;
  text: string;
  preview?: Preview;
  options?: ImportOptions;
  error?: string;
}
let pending: Pending[] = [];

/** fit.Preview */
interface Preview {
  file: string;
  format: string;
  names: string[] | null;
  columns: number;
  rows: string[][] | null;
  row_lines: number[] | null;
  data_rows: number;
  proposed: ImportOptions;
  why: string[] | null;
  offset_ambiguous: boolean;
}
/** fit.ImportOptions */
interface ImportOptions {
  time_col: number;
  value_col: number;
  err_col: number;
  kind: number; // 1 magnitude, 2 flux
  time_offset: number;
  time_system: string;
  name: string;
  band: string;
  ld: number;
  zero_point: number;
}
/** fit.SingleResult */
interface SingleResult {
  point: Solution;
  finite?: Solution;
  preferFinite: boolean;
  anomaly: { found: boolean; t1: number; t2: number; n: number; sigma: number };
  status: string;
}
interface GridNode {
  logS: number;
  logQ: number;
  chi2: number;
  done: boolean;
  params: Params;
}
/** fit.Crossing: the caustic crossing the grid read from the data. */
interface GridCrossing {
  tIn: number;
  tOut: number;
  masked: [number, number][];
}
/** protocol.GridOut */
interface GridOut {
  grid: unknown;
  log_s: number[];
  log_q: number[];
  chi2: (number | null)[][];
  minima: GridNode[];
  done: number;
  total: number;
  partial: boolean;
}
/** fit.SearchResult without its grid */
interface SearchResult {
  candidates: { solution: Solution; partners: { kind: string; solution: Solution }[] | null; deltaChi2: number }[];
  status: string;
}
/** protocol.Curves */
interface CurvesResult {
  y_label: string;
  datasets: { t: number[]; y: (number | null)[]; e: (number | null)[]; resid?: (number | null)[] }[];
  models: { label: string; t: number[]; y: (number | null)[] }[];
  caustics: CausticsData[];
}

// ---------- helpers ----------

function single(): SingleResult | undefined {
  return steps.single.result as SingleResult | undefined;
}
function bestSingle(): Solution | undefined {
  const r = single();
  if (!r) return undefined;
  return r.preferFinite && r.finite ? r.finite : r.point;
}

/** Solutions shown in plots and tables: refined ones with partners, else the single-lens fit. */
function solutions(): Solution[] {
  const r = steps.refine.result as SearchResult | undefined;
  if (r?.candidates?.length) {
    const out: Solution[] = [];
    for (const c of r.candidates) {
      out.push(c.solution);
      for (const p of c.partners ?? []) if (p.solution) out.push({ ...p.solution, label: p.solution.label || `${c.solution.label} ${p.kind}` });
    }
    return out;
  }
  const s = bestSingle();
  return s ? [{ ...s, label: s.label || "single lens" }] : [];
}

function datasets() {
  return doc?.datasets ?? [];
}

function notify(): void {
  for (const f of listeners) f();
  scheduleAutosave();
}

// ---------- autosave (IndexedDB) ----------

let notebookId = persist.newId();
let autosaveTimer: number | undefined;
let autosavedAt = 0; // Date.now() of the last successful autosave

function scheduleAutosave(): void {
  if (!doc || datasets().length === 0) return;
  clearTimeout(autosaveTimer);
  autosaveTimer = window.setTimeout(() => void autosave(), 800);
}

async function autosave(): Promise<void> {
  const d = fullDoc();
  if (!d) return;
  const st = $("#autosave");
  try {
    await persist.save({
      id: notebookId,
      title: d.title || d.event.name || datasets()[0]?.name || "untitled",
      savedAt: Date.now(),
      datasets: d.datasets.length,
      points: d.datasets.reduce((n, x) => n + x.points, 0),
      doc: JSON.stringify(d),
    });
    autosavedAt = Date.now();
    st.textContent = "autosaved " + new Date().toLocaleTimeString();
    st.className = "engine";
  } catch (e) {
    st.textContent = "Autosave failed: " + (e as Error).message;
    st.className = "engine error";
  }
}

/** Offers the notebooks kept in this browser, newest first. */
async function offerRestore(): Promise<void> {
  let saved: persist.Saved[];
  try {
    saved = await persist.list();
  } catch (e) {
    $("#autosave").textContent = "Autosave unavailable: " + (e as Error).message;
    $("#autosave").className = "engine error";
    return;
  }
  if (saved.length === 0) return;
  const box = $("#offer");
  clear(box);
  box.append(el("h3", { text: "Notebooks kept in this browser" }));
  const ul = el("ul", { class: "saved" });
  for (const n of saved) {
    const restore = el("button", { class: "small", "data-restore": n.id, text: "Restore" });
    restore.addEventListener("click", async () => {
      if (await openDocText(n.doc)) {
        notebookId = n.id;
        box.hidden = true;
      }
    });
    const del = el("button", { class: "small", "data-delete": n.id, text: "Delete" });
    del.addEventListener("click", async () => {
      try {
        await persist.remove(n.id);
        li.remove();
        if (!ul.children.length) box.hidden = true;
      } catch (e) {
        alertBox("Could not delete: " + (e as Error).message);
      }
    });
    const li = el("li", {}, el("strong", { text: n.title }), ` · ${n.datasets} dataset${n.datasets === 1 ? "" : "s"}, ${n.points} points · saved ${new Date(n.savedAt).toLocaleString()} `, restore, " ", del);
    ul.append(li);
  }
  const dismiss = el("button", { class: "small", text: "Start fresh" });
  dismiss.addEventListener("click", () => (box.hidden = true));
  box.append(ul, dismiss);
  box.hidden = false;
}

// ---------- fit links ----------

interface Contents {
  kind: string;
  bytes: number;
  title: string;
  event: string;
  points: number;
  datasets: { name: string; band: string; file: string; points: number; masked: number; included: boolean }[] | null;
  steps: { kind: string; status: string }[] | null;
  warnings: string[] | null;
}

/**
 * Puts a fit link in the address bar: the whole notebook when it fits (about
 * 100 kB), else a model link; modelOnly always makes a model link (the
 * parameters, results and a fingerprint of the data, for data that must not
 * travel).
 */
async function makeLink(modelOnly = false): Promise<void> {
  const d = fullDoc();
  if (!d || !datasets().length) {
    alertBox("Add data first: a fit link carries the notebook.");
    return;
  }
  try {
    const r = await call<{ link: string; contents: Contents }>("link-encode", { notebook: d, model_only: modelOnly });
    history.replaceState(null, "", "#" + r.link);
    let copied = false;
    try {
      await navigator.clipboard.writeText(location.href);
      copied = true;
    } catch {
      /* no clipboard permission: the address bar holds the link */
    }
    const what = r.contents.kind === "model link" ? "a model link (parameters and a fingerprint of the data; the recipient needs the data files)" : "a full link (data included)";
    alertBox(`The address bar now holds ${what}, ${Math.round(r.link.length / 1000)} kB${copied ? "; copied to the clipboard" : ""}. The notebook travels in the part after #, which browsers never send to a server.`);
  } catch (e) {
    alertBox("Could not make a link: " + (e as Error).message);
  }
}

/** Shows what a link or file holds and opens it only when the user agrees. */
function offerOpen(c: Contents, docObj: NotebookDoc, source: string): void {
  const box = $("#offer");
  clear(box);
  box.append(el("h3", { text: `This ${source} holds a notebook` }));
  const facts = el("ul", { class: "saved" });
  facts.append(el("li", { text: `${c.kind}${c.title ? ": " + c.title : ""}${c.event ? " · event " + c.event : ""} · ${c.points} points` }));
  for (const d of c.datasets ?? []) facts.append(el("li", { text: `dataset “${d.name}”${d.band ? " (" + d.band + ")" : ""}: ${d.points} points${d.included ? "" : " — data not included, you will be asked for " + (d.file || "the file")}${d.masked ? `, ${d.masked} masked` : ""}` }));
  for (const st of c.steps ?? []) facts.append(el("li", { text: `step ${st.kind}: ${st.status}` }));
  for (const w of c.warnings ?? []) facts.append(el("li", { class: "warn", text: "Note: " + w }));
  const yes = el("button", { class: "primary", id: "offer-open", text: datasets().length ? "Replace my notebook with it" : "Open it" });
  yes.addEventListener("click", () => {
    box.hidden = true;
    notebookId = persist.newId();
    adoptDoc(docObj);
  });
  const no = el("button", { id: "offer-keep", text: "Keep what I have" });
  no.addEventListener("click", () => (box.hidden = true));
  box.append(facts, yes, " ", no);
  box.hidden = false;
}

async function openLinkFromURL(): Promise<boolean> {
  const h = decodeURIComponent(location.hash.slice(1));
  if (!h.startsWith("lb1")) return false;
  try {
    const r = await call<{ notebook: NotebookDoc; contents: Contents }>("link-decode", { link: h });
    r.contents.bytes = h.length;
    offerOpen(r.contents, r.notebook, "link");
  } catch (e) {
    alertBox("This link cannot be opened: " + (e as Error).message);
  }
  return true;
}

function changed(from: StepId): void {
  markDownstream(steps, from);
  // the panels work on the posterior: anything up to it changing makes them stale
  if (STEP_ORDER.indexOf(from) <= STEP_ORDER.indexOf("posterior"))
    for (const pn of [physical, forecast])
      if (pn.result !== undefined && !pn.stale) {
        pn.stale = true;
        panelTick++;
      }
  renderAll();
  notify();
}

function missing(...names: string[]): string[] {
  return names.filter((s) => !pool.has(s));
}

function alertBox(msg: string): void {
  const a = $("#notice");
  a.textContent = msg;
  a.hidden = false;
}

/** Runs engine work for a step with status, progress bar, time left and Cancel. */
async function runStep(
  id: StepId,
  work: (track: (jobs: Job<unknown>[]) => void, progress: (p: Progress[]) => void) => Promise<{ result: unknown; cancelled: boolean }>,
): Promise<void> {
  const st = steps[id];
  st.status = "running";
  st.message = "";
  const started = performance.now();
  renderStep(id);
  const onProgress = (ps: Progress[]) => {
    const bar = document.querySelector<HTMLElement>(`#step-${id} .bar`);
    const eta = document.querySelector<HTMLElement>(`#step-${id} .eta`);
    let done = 0;
    let total = 0;
    for (const p of ps) {
      done += p?.done ?? 0;
      total += p?.total ?? 0;
    }
    if (!bar || !eta || total === 0) return;
    const f = done / total;
    bar.style.width = (100 * f).toFixed(1) + "%";
    const spent = performance.now() - started;
    const left = f > 0 ? (spent * (1 - f)) / f : NaN;
    eta.textContent = `${done} / ${total} · about ${fmtDuration(left)} left`;
  };
  try {
    const { result, cancelled } = await work((jobs) => running.set(id, jobs), onProgress);
    computeWindows.push({ step: id, start: started, end: performance.now() });
    st.result = result;
    st.stale = false;
    st.status = cancelled ? "cancelled" : "done";
    st.elapsedMs = performance.now() - started;
    st.message = cancelled ? "Cancelled; partial results kept." : `Finished in ${fmtDuration(st.elapsedMs)}.`;
    if (id === "refine" || id === "single") selected = 0;
    changed(id);
    await updateCurves();
  } catch (e) {
    st.status = "error";
    st.message = (e as Error).message;
  } finally {
    running.delete(id);
    renderAll();
  }
}

/** When each step ran in the workers (performance.now() ms, from Run to the result's arrival), for the long-task measurement. */
const computeWindows: { step: StepId; start: number; end: number }[] = [];

/** When Cancel was last pressed and when the step's workers had all stopped (performance.now() ms). */
const lastCancel = { clicked: NaN, stopped: NaN };

function cancelStep(id: StepId): void {
  const jobs = running.get(id) ?? [];
  lastCancel.clicked = performance.now();
  lastCancel.stopped = NaN;
  for (const j of jobs) j.cancel();
  void Promise.all(jobs.map((j) => j.done.catch(() => undefined))).then(() => (lastCancel.stopped = performance.now()));
}

function oneJob(stepName: string, settings: unknown) {
  return async (track: (jobs: Job<unknown>[]) => void, progress: (p: Progress[]) => void) => {
    const job = pool.run<unknown>(stepName, settings, (p) => progress([p]));
    track([job]);
    const r = await job.done;
    return { result: r.result, cancelled: r.kind === "cancelled" };
  };
}

async function call<T>(stepName: string, settings: unknown): Promise<T> {
  const r = await pool.run<T>(stepName, settings).done;
  return r.result as T;
}

/** Replaces the document after an engine edit; data changes make every step stale. */
async function edit(stepName: string, settings: Record<string, unknown>, message?: string): Promise<void> {
  try {
    doc = await call<NotebookDoc>(stepName, { notebook: doc, ...settings });
    if (message) steps.data.message = message;
    changed("data");
    await updateCurves();
  } catch (e) {
    steps.data.message = (e as Error).message;
    steps.data.status = "error";
    renderAll();
  }
}

// ---------- data step ----------

async function addFiles(files: { name: string; text: string }[]): Promise<void> {
  for (const f of files) {
    const p: Pending = { file: f.name, text: f.text };
    pending.push(p);
    try {
      p.preview = await call<Preview>("preview", { file: f.name, text: f.text });
      p.options = { ...p.preview.proposed };
    } catch (e) {
      p.error = (e as Error).message;
    }
  }
  renderStep("data");
}

async function acceptPending(): Promise<void> {
  const todo = pending.filter((p) => p.options && !p.error);
  await runStep("data", async () => {
    for (const p of todo) {
      try {
        doc = await call<NotebookDoc>("parse", { notebook: doc, file: p.file, text: p.text, options: p.options });
        pending = pending.filter((x) => x !== p);
      } catch (e) {
        p.error = (e as Error).message;
      }
    }
    return { result: { datasets: datasets().length }, cancelled: false };
  });
  if (pending.some((p) => p.error)) steps.data.message = "Some files could not be read; see below.";
  renderAll();
}

async function loadDemo(): Promise<void> {
  const idx = (await (await fetch("demo/index.json")).json()) as { files: string[] };
  if (idx.files.length === 0) {
    alertBox("The demo event is not in this build yet.");
    return;
  }
  const files = await Promise.all(idx.files.map(async (name) => ({ name, text: await (await fetch("demo/" + name)).text() })));
  await addFiles(files);
  if (pending.length && pending.every((p) => p.options)) await acceptPending();
}

// ---------- event position ----------

/** What the position fields hold while the user types (kept across re-renders); undefined = show the notebook's. */
let coordsDraft: { pos: string; tref: string } | undefined;
/** The last answer of the coords step, shown beside the fields. */
let coordsNote: { error: boolean; text: string } | undefined;

/** fit.FormatRA/FormatDec on the page: "hh:mm:ss.sss ±dd:mm:ss.ss". */
function fmtPosition(c: Coords): string {
  const pad = (n: number, w = 2) => String(n).padStart(w, "0");
  let ms = Math.round((c.ra_deg / 15) * 3600 * 1000) % (24 * 3600 * 1000);
  if (ms < 0) ms += 24 * 3600 * 1000;
  const ra = `${pad(Math.floor(ms / 3600000))}:${pad(Math.floor(ms / 60000) % 60)}:${pad(Math.floor(ms / 1000) % 60)}.${pad(ms % 1000, 3)}`;
  const cs = Math.round(Math.abs(c.dec_deg) * 3600 * 100);
  const sign = c.dec_deg < 0 && cs > 0 ? "−" : "+";
  const dec = `${sign}${pad(Math.floor(cs / 360000))}:${pad(Math.floor(cs / 6000) % 60)}:${pad(Math.floor(cs / 100) % 60)}.${pad(cs % 100)}`;
  return `${ra} ${dec}`;
}

function docCoordsDraft(): { pos: string; tref: string } {
  const ev = doc?.event;
  return { pos: ev?.coords ? fmtPosition(ev.coords) : "", tref: ev?.tref ? String(+(ev.tref - TIME_OFFSET).toFixed(6)) : "" };
}

/** Sends the typed position (and t0,par) to the engine; its error text is shown as is beside the field. */
async function applyCoords(): Promise<void> {
  const d = coordsDraft ?? docCoordsDraft();
  const settings: CoordsSettings = { notebook: doc, position: d.pos };
  const t = d.tref.trim();
  if (t === "") settings.tref = 0;
  else {
    const v = Number(t);
    if (!Number.isFinite(v)) {
      coordsNote = { error: true, text: `t0,par “${t}” is not a number (HJD′ = JD − 2450000, or a full JD).` };
      renderStep("data");
      return;
    }
    settings.tref = v > 2e6 ? v : v + TIME_OFFSET; // a full JD is taken as is
  }
  try {
    doc = await call<NotebookDoc>("coords", settings);
  } catch (e) {
    coordsNote = { error: true, text: (e as Error).message };
    renderStep("data");
    return;
  }
  coordsDraft = undefined;
  const c = doc.event.coords;
  const tref = doc.event.tref ? `; t0,par = HJD′ ${fmt(doc.event.tref - TIME_OFFSET, 8)}` : "";
  coordsNote = { error: false, text: (c ? `Event position: ${fmtPosition(c)} (RA ${c.ra_deg.toFixed(5)}°, Dec ${c.dec_deg.toFixed(5)}°)` : "Event position cleared") + tref + "." };
  changed("data");
  await updateCurves();
}

function renderCoords(body: HTMLElement): void {
  const d = coordsDraft ?? docCoordsDraft();
  const pos = el("input", { id: "event-position", type: "text", size: 28, value: d.pos, placeholder: "17:59:02.3 −29:03:11  or  269.7596 −29.0531", autocomplete: "off", spellcheck: "false" });
  const tref = el("input", { id: "event-tref", type: "text", size: 12, value: d.tref, placeholder: "t0 of the fit", inputmode: "decimal" });
  const keep = () => (coordsDraft = { pos: pos.value, tref: tref.value });
  for (const i of [pos, tref]) for (const ev of ["input", "change"]) i.addEventListener(ev, keep);
  const apply = el("button", { id: "apply-coords", type: "button", class: "small", text: "Apply" });
  apply.addEventListener("click", () => void applyCoords());
  for (const i of [pos, tref])
    i.addEventListener("keydown", (e) => {
      if (e.key === "Enter") void applyCoords();
    });
  const note = el("p", { id: "coords-note", class: coordsNote?.error ? "error" : "hint", role: "status", "aria-live": "polite" });
  note.textContent = coordsNote?.text ?? "Right ascension and declination (ICRS), sexagesimal or degrees; needed for parallax. Blank clears it.";
  body.append(
    el(
      "div",
      { class: "coords", id: "coords" },
      el("label", { for: "event-position", text: "Event position (RA Dec) " }),
      pos,
      " ",
      el("label", { for: "event-tref", text: "t0,par (HJD′) " }),
      tref,
      " ",
      apply,
      note,
    ),
  );
}

function maskBox(mode: DragMode, t0: number, t1: number, y0: number, y1: number): void {
  if (mode !== "mask") return;
  const sol = curves && solutions()[selected];
  void edit("mask", { t1: t0 + TIME_OFFSET, t2: t1 + TIME_OFFSET, m1: y0, m2: y1, solution: sol ?? null, unmask: false, dataset: -1 }, "Masked the points in the box.");
}

function renderData(body: HTMLElement): void {
  const drop = el("div", { class: "drop", id: "drop", tabindex: 0 });
  const input = el("input", { type: "file", id: "file-input", multiple: true, accept: ".txt,.dat,.csv,.ecsv,.pho,.json,text/plain" });
  drop.append(
    el("p", {}, "Drop photometry files here (plain text or ECSV, one per telescope and band), a saved notebook, or ", el("label", { class: "linkish", for: "file-input", text: "choose files…" })),
    input,
  );
  input.addEventListener("change", async () => {
    const files = await Promise.all(Array.from(input.files ?? []).map(async (f) => ({ name: f.name, text: await f.text() })));
    input.value = "";
    await takeFiles(files);
  });
  drop.addEventListener("dragover", (e) => {
    e.preventDefault();
    drop.classList.add("over");
  });
  drop.addEventListener("dragleave", () => drop.classList.remove("over"));
  drop.addEventListener("drop", async (e) => {
    e.preventDefault();
    drop.classList.remove("over");
    const files = await Promise.all(Array.from(e.dataTransfer?.files ?? []).map(async (f) => ({ name: f.name, text: await f.text() })));
    await takeFiles(files);
  });
  body.append(drop);
  renderCoords(body);

  for (const p of pending) body.append(renderPending(p));
  const ready = pending.filter((p) => p.options && !p.error);
  if (ready.length) {
    const b = el("button", { class: "primary", id: "accept-files", text: `Add ${ready.length} dataset${ready.length === 1 ? "" : "s"}` });
    b.addEventListener("click", () => void acceptPending());
    body.append(b);
  }

  const ds = datasets();
  ds.forEach((d, k) => {
    if (!d.omitted) return;
    const inp = el("input", { type: "file", "aria-label": `data file for ${d.name}`, "data-attach": k });
    inp.addEventListener("change", async () => {
      const f = inp.files?.[0];
      inp.value = "";
      if (f) await attachFile(k, f.name, await f.text());
    });
    const note = attachNotes.get(k);
    body.append(
      el(
        "div",
        { class: "pending", "data-pending": k },
        el("p", { class: "warn", text: `Dataset “${d.name}” waits for its data: ${d.source.file || "the original file"}, ${d.points} points. Choose the same file; its numbers are checked against the fingerprint ${d.fingerprint.slice(0, 12)}….` }),
        inp,
        note ? el("p", { class: "error attach-error", role: "alert", text: note }) : null,
      ),
    );
  });
  if (ds.length) {
    const tbl = el("table", { class: "datasets", id: "datasets" });
    tbl.append(el("tr", {}, ...["", "name", "band", "time system", "zero point", "limb dark. u", "points", "masked", "excluded lines", ""].map((h) => el("th", { text: h }))));
    ds.forEach((d, k) => {
      const field = (key: "name" | "band" | "time_system" | "zero_point" | "ld", numeric: boolean) => {
        const i = el("input", { value: String(d[key] ?? ""), "aria-label": `${key} of dataset ${k + 1}`, size: key === "name" ? 24 : numeric ? 5 : 8 });
        i.addEventListener("change", () => {
          const v = numeric ? Number(i.value) : i.value;
          if (numeric && !Number.isFinite(v)) {
            i.value = String(d[key]);
            return;
          }
          void edit("edit", { dataset: k, field: key, value: v });
        });
        return el("td", {}, i);
      };
      const rejected = d.source.rejected ?? [];
      const rej = el("td");
      if (rejected.length) {
        const det = el("details", {}, el("summary", { text: String(rejected.length) }));
        const ul = el("ul", { class: "problems" });
        for (const p of rejected.slice(0, 300)) ul.append(el("li", { text: `line ${p.line}${p.column ? ", column " + p.column : ""}: ${p.reason}` }));
        if (rejected.length > 300) ul.append(el("li", { text: `… and ${rejected.length - 300} more` }));
        det.append(ul);
        rej.append(det);
      } else rej.textContent = "0";
      const masked = d.masked?.length ?? 0;
      const del = el("button", { class: "small", text: "Remove" });
      del.addEventListener("click", () => void edit("edit", { dataset: k, field: "remove", value: null }));
      const unmask = el("button", { class: "small", text: "Unmask", disabled: masked === 0 });
      unmask.addEventListener("click", () => void edit("mask", { unmask: true, dataset: k, t1: 0, t2: 0, m1: 0, m2: 0, solution: null }, "Unmasked."));
      // the dataset's colour on the plots, set through the CSSOM (the page's
      // content security policy refuses inline style attributes)
      const swatch = el("span", { class: "swatch", title: `colour of ${d.name} on the plots` });
      swatch.style.background = PALETTE[k % PALETTE.length];
      tbl.append(
        el(
          "tr",
          {},
          el("td", {}, swatch),
          field("name", false),
          field("band", false),
          field("time_system", false),
          field("zero_point", true),
          field("ld", true),
          el("td", { text: String(d.points) }),
          el("td", { text: String(masked) }),
          rej,
          el("td", {}, unmask, " ", del),
        ),
      );
      const notes = d.source.notes ?? [];
      if (notes.length) tbl.append(el("tr", { class: "notes" }, el("td"), el("td", { colspan: 9, class: "hint", text: `${d.source.file ?? ""}: ${notes.join(" · ")}` })));
    });
    body.append(tbl, el("p", { class: "hint", text: "To mask points, set “drag selects: mask” above the light curve and drag a box around them." }));
  }
}

/** Why the last file offered for a waiting dataset was refused, by dataset index. */
const attachNotes = new Map<number, string>();

/**
 * Gives a waiting dataset (from a model link) its data file. The engine reads
 * it with the recorded import options and attaches it only if its points match
 * the recorded count and fingerprint; a refused file changes nothing and the
 * reason is shown beside the file input. The data are the ones the results
 * were made with, so no result becomes stale.
 */
async function attachFile(k: number, file: string, text: string): Promise<void> {
  try {
    doc = await call<NotebookDoc>("attach", { notebook: doc, index: k, file, text });
  } catch (e) {
    attachNotes.set(k, `${file} was not attached: ${(e as Error).message.replace(/^fit: /, "")}`);
    renderStep("data");
    return;
  }
  attachNotes.clear();
  const waiting = datasets().filter((d) => d.omitted).length;
  steps.data.message = `Attached ${file}: its points match the fingerprint.` + (waiting ? ` ${waiting} dataset${waiting === 1 ? "" : "s"} still wait for data.` : " Every dataset has its data.");
  renderAll();
  notify();
  await updateCurves();
}

async function takeFiles(files: { name: string; text: string }[]): Promise<void> {
  const nbFiles = files.filter((f) => f.name.endsWith(".json"));
  if (nbFiles.length === 1 && files.length === 1) return openNotebookText(nbFiles[0].text);
  await addFiles(files);
}

function renderPending(p: Pending): HTMLElement {
  const box = el("div", { class: "pending" }, el("h4", { text: p.file }));
  if (p.error) box.append(el("p", { class: "error", text: p.error }));
  if (!p.preview || !p.options) return box;
  const m = p.options;
  const pv = p.preview;
  const cols = Array.from({ length: pv.columns }, (_, i) => i + 1);
  const name = (c: number) => pv.names?.[c - 1] || `column ${c}`;
  const tbl = el("table", { class: "preview" });
  tbl.append(el("tr", {}, el("th", { text: "line" }), ...cols.map((c) => el("th", { text: name(c) }))));
  (pv.rows ?? []).slice(0, 6).forEach((r, i) => tbl.append(el("tr", {}, el("td", { text: String(pv.row_lines?.[i] ?? "") }), ...cols.map((c) => el("td", { text: r[c - 1] ?? "" })))));
  box.append(tbl, el("p", { class: "hint", text: `${pv.data_rows} data rows · ${pv.format}` }));
  const sel = (label: string, key: "time_col" | "value_col" | "err_col") => {
    const s = el("select", { "aria-label": label });
    cols.forEach((c) => s.append(el("option", { value: c, text: name(c), selected: m[key] === c })));
    s.addEventListener("change", () => (m[key] = Number(s.value)));
    return el("label", {}, label + " ", s);
  };
  const kind = el("select", { "aria-label": "values are" }, el("option", { value: 1, text: "magnitudes", selected: m.kind === 1 }), el("option", { value: 2, text: "fluxes", selected: m.kind === 2 }));
  kind.addEventListener("change", () => (m.kind = Number(kind.value)));
  const off = el("select", { "aria-label": "times are" });
  for (const [v, t] of [
    [0, "full JD"],
    [2450000, "JD − 2450000"],
    [2460000, "JD − 2460000"],
    [2400000.5, "MJD"],
  ] as [number, string][])
    off.append(el("option", { value: v, text: t, selected: m.time_offset === v }));
  off.addEventListener("change", () => (m.time_offset = Number(off.value)));
  const text = (label: string, key: "name" | "band" | "time_system") => {
    const i = el("input", { value: m[key], size: 10, "aria-label": label });
    i.addEventListener("change", () => (m[key] = i.value));
    return el("label", {}, label + " ", i);
  };
  const num = (label: string, key: "zero_point" | "ld") => {
    const i = el("input", { value: String(m[key]), size: 6, "aria-label": label });
    i.addEventListener("change", () => (m[key] = Number(i.value)));
    return el("label", {}, label + " ", i);
  };
  box.append(
    el("div", { class: "mapping" }, sel("time", "time_col"), sel("value", "value_col"), sel("uncertainty", "err_col"), el("label", {}, "values are ", kind), el("label", {}, "times are ", off)),
    el("div", { class: "mapping" }, text("name", "name"), text("band", "band"), text("time system", "time_system"), num("zero point", "zero_point"), num("limb darkening u", "ld")),
  );
  if (pv.offset_ambiguous) box.append(el("p", { class: "warn", text: "The times fit more than one convention: check “times are”." }));
  if (pv.why?.length) box.append(el("p", { class: "hint", text: pv.why.join(" · ") }));
  return box;
}

// ---------- fitting steps ----------

function needData(): void {
  if (!datasets().length) throw new Error("Add at least one dataset first.");
}

async function runSingle(): Promise<void> {
  await runStep("single", async (track, progress) => {
    needData();
    const r = await oneJob("single", { notebook: doc, settings: { noFinite: !!steps.single.settings.noFinite } })(track, progress);
    // the per-point residuals are redrawn from the model; keeping them would
    // double the size of saved notebooks and links
    if (r.result) r.result = { ...(r.result as object), residuals: undefined };
    return r;
  });
}

async function runGrid(): Promise<void> {
  const set = steps.grid.settings;
  await runStep("grid", async (track, progress) => {
    needData();
    const start = bestSingle();
    if (!start) throw new Error("Run the single-lens fit first: the grid starts from it.");
    const chunks = pool.size;
    const settings = { ...set, seed };
    const ps: Progress[] = [];
    const done: unknown[][] = Array.from({ length: chunks }, () => []);
    const jobs = Array.from({ length: chunks }, (_, k) =>
      pool.run<unknown>("grid", { notebook: doc, start: start.params, settings, chunk: k, chunks }, (p) => {
        ps[k] = p;
        if (Array.isArray(p.partial)) done[k].push(...p.partial);
        progress(ps);
      }),
    );
    track(jobs);
    const parts = await Promise.all(jobs.map((j) => j.done));
    const cancelled = parts.some((p) => p.kind === "cancelled");
    // A worker stopped before replying leaves only the nodes it reported.
    const got: unknown[] = [];
    const lost: unknown[] = [];
    parts.forEach((p, k) => {
      if (p.result && !Array.isArray(p.result)) got.push(p.result);
      else if (done[k].length) lost.push({ start: start.params, settings, chunk: k, chunks, nodes: done[k] });
    });
    if (got.length === 0 && lost.length === 0) return { result: undefined, cancelled: true };
    const merged = await call<GridOut>("grid-merge", { parts: got, lost, keep: Number(steps.refine.settings.keep) || 6 });
    return { result: merged, cancelled };
  });
}

async function runRefine(start?: Params): Promise<void> {
  const set = steps.refine.settings;
  await runStep("refine", async (track, progress) => {
    needData();
    const settings = { keep: set.keep, noPartners: set.noPartners };
    if (start) return oneJob("refine", { notebook: doc, start, settings })(track, progress);
    const g = steps.grid.result as GridOut | undefined;
    if (!g) throw new Error("Run the binary search first (or send a model from the map view).");
    const r = await oneJob("refine", { notebook: doc, grid: g.grid, settings })(track, progress);
    // the grid is kept by its own step: store the refine result without a second copy
    if (r.result) r.result = { ...(r.result as object), grid: undefined };
    return r;
  });
}

async function runPosterior(): Promise<void> {
  const set = steps.posterior.settings;
  await runStep("posterior", async (track, progress) => {
    needData();
    const sols = solutions();
    if (!(steps.refine.result && sols.length)) throw new Error("Run Refine first: the sampler starts at a refined solution.");
    const sol = sols[Math.min(Number(set.solution), sols.length - 1)];
    return oneJob("posterior", { notebook: doc, solutions: [sol], settings: { ensemble: { Walkers: set.walkers, Steps: set.steps, Seed: seed } } })(track, progress);
  });
}

async function updateCurves(): Promise<void> {
  if (!doc || datasets().length === 0) {
    curves = undefined;
    renderPlots();
    return;
  }
  // Draw at most MAX_MODELS model curves: the selected solution and the best
  // others (a refine with partners can give a dozen; drawing them all would
  // make the plot unreadable and slow).
  const all = solutions();
  const idx = [selected, ...all.map((_, i) => i).filter((i) => i !== selected)].slice(0, MAX_MODELS).sort((a, b) => a - b);
  try {
    curveSolutions = idx.filter((i) => i < all.length);
    curves = await call<CurvesResult>("curves", { notebook: doc, solutions: curveSolutions.map((i) => all[i]), selected: curveSolutions.indexOf(selected), n: 0 });
  } catch (e) {
    curves = undefined;
    $("#plot-status").textContent = "Light curve: " + (e as Error).message;
  }
  renderPlots();
  if (steps.refine.result) renderStep("refine");
}

// ---------- notebook file ----------

/** The document with the page's steps written into it. */
function fullDoc(): NotebookDoc | undefined {
  if (!doc) return undefined;
  const out: DocStep[] = [];
  for (const id of STEP_ORDER) {
    const s = steps[id];
    if (id === "data" || id === "report") continue;
    out.push({
      id,
      kind: STEP_KIND[id],
      settings: s.settings,
      seed: String(seed),
      status: s.status === "done" ? "done" : s.status === "cancelled" ? "cancelled" : s.status === "error" ? "failed" : "pending",
      result: id === "posterior" ? withoutSamples(s.result) : s.result,
      note: s.stale ? "stale: inputs changed after this result" : undefined,
    });
  }
  const panels: [keyof typeof PANEL_KIND, PhysicalPanel | ForecastPanel][] = [
    ["physical", physical],
    ["forecast", forecast],
  ];
  for (const [id, pn] of panels) {
    if (pn.result === undefined) continue;
    // the forecast's export files are large and remade by running it again
    const result = id === "forecast" ? { ...(pn.result as ForecastOut), exports: undefined } : pn.result;
    out.push({ id, kind: PANEL_KIND[id], settings: pn.settings, seed: String(pn.seed ?? seed), status: "done", result, note: pn.stale ? "stale: inputs changed after this result" : undefined });
  }
  return { ...doc, steps: out };
}

/** Posterior result without the sample files (megabytes; re-run to export samples again). */
function withoutSamples(r: unknown): unknown {
  const p = r as PosteriorResult | undefined;
  if (!p?.exports) return r;
  const exports = Object.fromEntries(Object.entries(p.exports).filter(([k]) => !k.startsWith("samples-")));
  return { ...p, exports };
}

async function saveNotebook(): Promise<void> {
  try {
    const r = await call<{ name: string; text: string; mime: string }>("notebook-encode", { notebook: fullDoc() });
    download(r.name, r.text, r.mime);
  } catch (e) {
    alertBox("Could not save the notebook: " + (e as Error).message);
  }
}

async function openNotebookText(text: string): Promise<void> {
  if (await openDocText(text)) notebookId = persist.newId();
}

/** Decodes a notebook document (validated by the engine) and opens it. */
async function openDocText(text: string): Promise<boolean> {
  try {
    const r = await call<{ notebook: NotebookDoc; contents: Contents }>("describe", { file: "", text });
    adoptDoc(r.notebook);
    return true;
  } catch (e) {
    alertBox("Could not open the notebook: " + (e as Error).message);
    return false;
  }
}

/** Makes a validated document the open notebook, with its steps. */
function adoptDoc(d: NotebookDoc): void {
  doc = { ...d, steps: [] };
  coordsDraft = coordsNote = undefined;
  steps = newSteps();
  physical = newPhysical();
  forecast = newForecast();
  attachNotes.clear();
  panelTick++;
  for (const s of d.steps ?? []) {
    const pn = s.kind === PANEL_KIND.physical ? physical : s.kind === PANEL_KIND.forecast ? forecast : undefined;
    if (pn) {
      if (s.settings && typeof s.settings === "object") Object.assign(pn.settings, s.settings);
      pn.result = s.result as (PhysicalOut & ForecastOut) | undefined;
      pn.status = s.status === "done" && s.result ? "done" : "empty";
      pn.stale = !!s.note?.startsWith("stale");
      pn.seed = Number.isFinite(Number(s.seed)) && s.seed !== "" ? Number(s.seed) : undefined;
      continue;
    }
    const id = STEP_ORDER.find((k) => STEP_KIND[k] === s.kind || k === s.id);
    if (!id) continue;
    const st = steps[id];
    if (s.settings && typeof s.settings === "object") st.settings = s.settings as Record<string, unknown>;
    st.result = s.result;
    st.status = s.status === "done" ? "done" : s.status === "cancelled" ? "cancelled" : s.status === "failed" ? "error" : "empty";
    st.stale = !!s.note?.startsWith("stale");
    if (Number(s.seed)) seed = Number(s.seed);
  }
  pending = [];
  selected = 0;
  steps.data.status = datasets().length ? "done" : "empty";
  renderAll();
  notify();
  void updateCurves();
}

// ---------- rendering ----------

const TITLES: Record<StepId, [string, string]> = {
  data: ["Data", "Photometry files, one per telescope and band."],
  single: ["Single lens", "Point-lens fit: the baseline, the anomaly, and the start of the binary search."],
  grid: ["Binary search", "χ² over separation s and mass ratio q; each node optimised over t₀, u₀, t_E and α."],
  refine: ["Refine", "All parameters free from the best grid minima, with their degenerate partners."],
  posterior: ["Posterior", "Ensemble MCMC around a refined solution: medians and 68 % intervals."],
  report: ["Report", "Tables, figures and the notebook file."],
};

const ENGINE_STEPS: Record<StepId, string[]> = {
  data: ["preview", "parse"],
  single: ["single"],
  grid: ["grid", "grid-merge"],
  refine: ["refine"],
  posterior: ["posterior"],
  report: [],
};

function renderAll(): void {
  for (const id of STEP_ORDER) renderStep(id);
}

function statusText(id: StepId): string {
  const s = steps[id];
  if (pool.steps.length && missing(...ENGINE_STEPS[id]).length) return "not available yet";
  if (s.status === "running") return "running";
  if (s.stale) return "stale — inputs changed";
  switch (s.status) {
    case "done":
      return "done";
    case "cancelled":
      return "cancelled (partial)";
    case "error":
      return "error";
  }
  return "not run";
}

function renderStep(id: StepId): void {
  const li = $(`#step-${id}`);
  const s = steps[id];
  clear(li);
  const [title, sub] = TITLES[id];
  const status = statusText(id);
  li.className = "step" + (s.stale ? " stale" : "") + (s.status === "running" ? " running" : "");
  li.append(el("header", {}, el("h2", { text: title }), el("span", { class: "status", "data-status": status, text: status })), el("p", { class: "sub", text: sub }));
  const body = el("div", { class: "body" });
  li.append(body);
  const unavailable = missing(...ENGINE_STEPS[id]);
  if (unavailable.length && pool.steps.length) body.append(el("p", { class: "unavailable", text: `Not available yet: this engine build has no “${unavailable.join("”, “")}” step.` }));
  if (id === "data") renderData(body);
  else renderSettings(id, body, unavailable.length > 0);
  if (s.status === "running") {
    const cancel = el("button", { class: "cancel", id: `cancel-${id}`, text: "Cancel" });
    cancel.addEventListener("click", () => cancelStep(id));
    body.append(el("div", { class: "progress" }, el("div", { class: "track" }, el("div", { class: "bar" })), el("span", { class: "eta", text: "starting…" }), cancel));
  }
  if (s.message) body.append(el("p", { class: s.status === "error" ? "error" : "message", text: s.message }));
  renderOutputs(id, body);
}

function numberField(label: string, obj: Record<string, unknown>, key: string, id: StepId, attrs: Record<string, string | number> = {}, integer = false): HTMLElement {
  const i = el("input", { type: "number", value: String(obj[key]), "aria-label": label, name: key, ...attrs });
  i.addEventListener("change", () => {
    let v = Number(i.value);
    if (!Number.isFinite(v)) return;
    if (integer) v = Math.max(1, Math.round(v));
    obj[key] = v;
    changed(id);
  });
  return el("label", {}, label + " ", i);
}

/**
 * A checkbox for a setting named in the negative (noFinite, noPartners,
 * noCrossing): ticked while obj[key] is false.
 */
function offSwitch(label: string, obj: Record<string, unknown>, key: string, id: StepId, name: string, title?: string): HTMLElement {
  const c = el("input", { type: "checkbox", name, checked: !obj[key] });
  c.addEventListener("change", () => {
    obj[key] = !c.checked;
    changed(id);
  });
  return el("label", title ? { title } : {}, c, " " + label);
}

function renderSettings(id: StepId, body: HTMLElement, unavailable: boolean): void {
  const set = steps[id].settings;
  const form = el("div", { class: "settings" });
  let run: (() => Promise<void>) | undefined;
  const seedBox = () => {
    const i = el("input", { type: "number", value: String(seed), "aria-label": "seed", name: "seed" });
    i.addEventListener("change", () => {
      seed = Math.max(0, Math.round(Number(i.value) || 0));
      changed(id);
    });
    return el("label", {}, "seed ", i);
  };
  switch (id) {
    case "single":
      form.append(offSwitch("also try a finite source (ρ free)", set, "noFinite", id, "useFinite"));
      run = runSingle;
      break;
    case "grid":
      form.append(
        numberField("log s from", set, "logSMin", id, { step: 0.1 }),
        numberField("to", set, "logSMax", id, { step: 0.1 }),
        numberField("nodes", set, "ns", id, { min: 1 }, true),
        el("br"),
        numberField("log q from", set, "logQMin", id, { step: 0.5 }),
        numberField("to", set, "logQMax", id, { step: 0.5 }),
        numberField("nodes", set, "nq", id, { min: 1 }, true),
        el("br"),
        numberField("starting α per node", set, "alphas", id, { min: 1 }, true),
        seedBox(),
        el("span", { class: "hint", text: `split across ${pool.size} worker${pool.size === 1 ? "" : "s"}` }),
        el("br"),
        offSwitch(
          "use a caustic crossing read from the data",
          set,
          "noCrossing",
          id,
          "useCrossing",
          "When the single-lens residuals jump up and later down, the grid fits a point source without the data around the two jumps and adds trajectories that cross each caustic at the observed times.",
        ),
      );
      run = runGrid;
      break;
    case "refine":
      form.append(numberField("grid minima to refine", set, "keep", id, { min: 1 }, true), offSwitch("add degenerate partners (close/wide, mirror)", set, "noPartners", id, "usePartners"));
      run = () => runRefine();
      break;
    case "posterior": {
      const sols = steps.refine.result ? solutions() : [];
      const pick = el("select", { "aria-label": "solution" });
      sols.forEach((x, i) => pick.append(el("option", { value: i, text: x.label, selected: i === Number(set.solution) })));
      pick.addEventListener("change", () => {
        set.solution = Number(pick.value);
        changed("posterior");
      });
      form.append(el("label", {}, "solution ", pick), numberField("walkers", set, "walkers", id, { min: 4 }, true), numberField("steps", set, "steps", id, { min: 10 }, true), seedBox());
      run = runPosterior;
      break;
    }
    case "report":
      break;
  }
  body.append(form);
  if (run) {
    const b = el("button", { class: "primary run", id: `run-${id}`, text: "Run", disabled: steps[id].status === "running" || unavailable });
    b.addEventListener("click", () => void run!());
    body.append(b);
  }
}

const RAD = 180 / Math.PI;

function paramCell(sol: Solution, k: keyof Params): HTMLElement {
  let v = sol.params[k];
  const fi = sol.free?.findIndex((f) => FREE_TO_FIELD[f] === k) ?? -1;
  let sg = fi >= 0 ? sol.sigma?.[fi] : undefined;
  if (k === "T0") v -= TIME_OFFSET;
  if (k === "Alpha") {
    v *= RAD;
    if (sg !== undefined) sg *= RAD;
  }
  const u = fmtUncertain(v, sg);
  // without an error, t₀ to 1e-5 d (six significant digits of an HJD′ are 0.1 d)
  const bare = k === "T0" ? v.toFixed(5) : fmt(v, 6);
  const text = u.errs[0] ? `${u.value} ±\u00a0${u.errs[0]}` : fi >= 0 || k === "T0" || k === "U0" || k === "TE" ? bare : `${bare} (fixed)`;
  return el("td", { "data-param": k, "data-value": String(sol.params[k]), text });
}

/** Δχ² to two decimals at most: differences below 0.005 (1e-11 between a
 * solution and its numerically identical partner) print as 0. */
function fmtDeltaChi2(d: number): string {
  return Math.abs(d) < 0.005 ? "0" : Math.abs(d) < 100 ? String(Number(d.toFixed(2))) : fmt(d, 4);
}

function solutionTable(sols: Solution[], keys: (keyof Params)[], id: string, selectable: boolean): HTMLElement {
  const best = Math.min(...sols.map((s) => s.chi2));
  const tbl = el("table", { class: "results", id });
  tbl.append(el("tr", {}, el("th", { text: "solution" }), ...keys.map((k) => el("th", { text: PARAM_LABELS[k] ?? k })), el("th", { text: "χ²" }), el("th", { text: "Δχ²" }), el("th", { text: "dof" })));
  sols.forEach((s, i) => {
    const tr = el("tr", { "data-solution": i, class: selectable && i === selected ? "selected" : "" }, el("td", { text: s.label }));
    for (const k of keys) tr.append(paramCell(s, k));
    tr.append(el("td", { text: fmt(s.chi2, 7) }), el("td", { text: fmtDeltaChi2(s.chi2 - best) }), el("td", { text: String(s.dof) }));
    if (selectable)
      tr.addEventListener("click", () => {
        selected = i;
        void updateCurves();
        renderStep("refine");
        notify();
      });
    tbl.append(tr);
  });
  return tbl;
}


/**
 * Outputs are rebuilt only when what they show changed (the result object, the
 * selected solution, the curves); re-rendering a step's status after another
 * step ran reuses them, which keeps large SVG figures off the page thread.
 */
const outputCache = new Map<StepId, { key: unknown[]; node: HTMLElement }>();

function renderOutputs(id: StepId, body: HTMLElement): void {
  const s = steps[id];
  const key: unknown[] = [s.result, selected];
  if (id === "refine") key.push(curves);
  if (id === "report") key.push(steps.posterior.result, doc, pool.steps.length, steps.single.result, steps.refine.result, panelTick);
  const hit = outputCache.get(id);
  if (hit && hit.key.length === key.length && hit.key.every((k, i) => k === key[i])) {
    body.append(hit.node);
    return;
  }
  const out = el("div", { class: "outputs" });
  outputCache.set(id, { key, node: out });
  switch (id) {
    case "single": {
      const r = s.result as SingleResult | undefined;
      if (!r) break;
      const rows = [r.point, ...(r.finite ? [r.finite] : [])].map((x, i) => ({ ...x, label: i === 0 ? "point source" : "finite source" }));
      out.append(solutionTable(rows, ["T0", "U0", "TE", "Rho"], "single-table", false));
      out.append(el("p", { class: "hint", text: r.preferFinite ? "The finite-source fit is preferred." : "The point-source fit is preferred." }));
      if (r.anomaly?.found) {
        const b = el("button", { class: "small", id: "single-anomaly", text: `Zoom to anomaly (${fmt(r.anomaly.sigma, 3)}σ, ${r.anomaly.n} points)` });
        b.addEventListener("click", () => zoomToAnomaly());
        out.append(el("p", {}, "The data depart from the single lens between HJD′ " + fmt(r.anomaly.t1 - TIME_OFFSET, 7) + " and " + fmt(r.anomaly.t2 - TIME_OFFSET, 7) + ". ", b));
      } else out.append(el("p", { class: "hint", text: "No significant anomaly against the single lens." }));
      break;
    }
    case "grid": {
      const r = s.result as GridOut | undefined;
      if (!r) break;
      if (r.partial) out.append(el("p", { class: "warn", text: `Partial map: ${r.done} of ${r.total} nodes computed.` }));
      const gr = r.grid as { crossing?: GridCrossing; settings?: { noCrossing?: boolean } } | undefined;
      const cr = gr?.crossing;
      if (cr)
        out.append(
          el("p", {
            id: "grid-crossing",
            text: `Caustic crossing read from the residuals: entry near HJD′ ${fmt(cr.tIn - TIME_OFFSET, 7)}, exit near HJD′ ${fmt(cr.tOut - TIME_OFFSET, 7)}. The grid fitted a point source without the data in ${cr.masked.length} windows around the jumps and added trajectories crossing each caustic at these times; the refinement fits ρ with every point.`,
          }),
        );
      else if (gr?.settings?.noCrossing) out.append(el("p", { class: "hint", id: "grid-crossing-off", text: "Caustic-crossing seeds were switched off for this grid." }));
      const marks = r.minima.map((m, i) => ({ s: Math.pow(10, m.logS), q: Math.pow(10, m.logQ), label: String(i + 1) }));
      out.append(figureBox(chi2MapFigure({ log_s: r.log_s, log_q: r.log_q, chi2: r.chi2 }, marks), "chi2-map"));
      if (r.minima.length) {
        const best = r.minima[0].chi2;
        const tbl = el("table", { class: "results", id: "grid-table" });
        tbl.append(el("tr", {}, ...["minimum", "log s", "log q", "s", "q", "χ²", "Δχ²"].map((h) => el("th", { text: h }))));
        r.minima.forEach((m, i) => tbl.append(el("tr", {}, ...[String(i + 1), fmt(m.logS, 4), fmt(m.logQ, 4), fmt(Math.pow(10, m.logS), 4), fmt(Math.pow(10, m.logQ), 3), fmt(m.chi2, 7), fmtDeltaChi2(m.chi2 - best)].map((t) => el("td", { text: t })))));
        out.append(tbl);
      }
      break;
    }
    case "refine": {
      if (!s.result) break;
      const sols = solutions();
      if (!sols.length) {
        out.append(el("p", { class: "warn", text: "No solution was refined." }));
        break;
      }
      out.append(solutionTable(sols, ["T0", "U0", "TE", "Rho", "S", "Q", "Alpha"], "refine-table", true), el("p", { class: "hint", text: "Click a row to draw that solution; ± values are 1σ from the approximate covariance. Angles in degrees, t₀ as HJD′." }));
      if (curves?.caustics?.length) out.append(figureBox(causticsFigure(curves.caustics), "caustics"));
      break;
    }
    case "posterior": {
      const r = s.result as PosteriorResult | undefined;
      if (!r) break;
      if (r.cancelled) out.append(el("p", { class: "warn", text: "Cancelled: the summaries use the steps taken so far." }));
      for (const m of r.modes) {
        out.append(el("h4", { text: m.label }));
        if (m.converged) out.append(el("p", { class: "message", text: "Converged by the chain diagnostics." }));
        else out.append(el("div", { class: "warn not-converged" }, el("p", { text: "Not converged (run more steps, or read these numbers as provisional):" }), el("ul", {}, ...(m.reasons ?? []).map((r) => el("li", { text: r })))));
        const tbl = el("table", { class: "results", id: "posterior-table" });
        tbl.append(el("tr", {}, ...["parameter", "unit", "median", "−1σ", "+1σ", "τ (steps)", "ESS", "R̂"].map((h) => el("th", { text: h }))));
        const f = (x: number | null, n = 3) => (x === null ? "—" : fmt(x, n));
        for (const p of m.params) {
          const lo = p.median !== null && p.lower !== null ? p.median - p.lower : null;
          const hi = p.median !== null && p.upper !== null ? p.upper - p.median : null;
          // t₀ as HJD′ like every other time on the page; median and errors
          // to the decimal place of the smaller error
          const hjd = p.name === "t0" && p.median !== null && p.median > 2e6;
          const u = p.median === null ? { value: "—", errs: ["", ""] } : fmtUncertain(hjd ? p.median - TIME_OFFSET : p.median, lo, hi);
          const [ls, hs] = u.errs[0] ? u.errs : [f(lo, 2), f(hi, 2)];
          tbl.append(el("tr", { "data-param": p.name }, ...[PARAM_LABELS[p.name] ?? p.name, hjd ? "HJD′" : p.unit, u.value, ls, hs, f(p.tau), f(p.ess), f(p.rhat, 4)].map((t) => el("td", { text: t }))));
        }
        out.append(tbl, el("p", { class: "hint", text: `${m.steps} ensemble steps · ${m.samples} kept samples · acceptance ${f(m.acceptance)} · best χ² ${f(m.best_chi2, 7)}` }));
        if (m.corner?.names?.length)
          out.append(figureBox(cornerFigure({ names: m.corner.names, labels: m.corner.labels, samples: m.corner.samples.map((c) => nn(c)) }), "corner"));
      }
      break;
    }
    case "report":
      renderReport(out);
      break;
  }
  body.append(out);
}

const POSTERIOR_EXPORTS: [string, string][] = [
  ["params-csv-0", "parameters (CSV)"],
  ["params-ecsv-0", "parameters (ECSV)"],
  ["params-latex", "parameters (LaTeX)"],
  ["samples-csv-0", "posterior samples (CSV)"],
  ["samples-ecsv-0", "posterior samples (ECSV)"],
];

/** What the Report step's panels need from the page. */
const panelHost: ForecastHost = {
  pool,
  notebook: () => doc,
  posterior: () => steps.posterior.result as PosteriorResult | undefined,
  seed: () => seed,
  update: () => {
    panelTick++;
    renderStep("report");
    renderPlots();
    notify();
  },
  lastTime: () => {
    let last: number | undefined;
    for (const d of datasets()) for (const t of d.t ?? []) if (last === undefined || t > last) last = t;
    return last;
  },
  plotInput: () => plotInput(),
  showWindow: (t0, t1) => lc.setX(t0, t1),
};

/** Export buttons for every file a panel's result offers (name and label from the engine's keys). */
function panelExports(row: HTMLElement, exports: Record<string, { name: string; mime: string; text: string }> | undefined, labels: [string, string][], missing: string): void {
  for (const [prefix, label] of labels) {
    const keys = Object.keys(exports ?? {}).filter((k) => k.slice(0, k.lastIndexOf("-")) === prefix);
    if (keys.length === 0) {
      row.append(el("button", { "data-export": prefix + "-0", text: label, disabled: true, title: missing }));
      continue;
    }
    for (const k of keys.sort()) {
      const file = exports![k];
      const mode = Number(k.slice(k.lastIndexOf("-") + 1));
      const b = el("button", { "data-export": k, text: keys.length > 1 ? `${label}, mode ${mode + 1}` : label, title: file.name });
      b.addEventListener("click", () => download(file.name, file.text, file.mime));
      row.append(b);
    }
  }
}

function renderReport(out: HTMLElement): void {
  out.append(el("p", { class: "caution", text: "Every number here is a research estimate from the model and data as set up in this notebook. Physical quantities rest on the assumptions printed beside them; check them before you publish or schedule on them." }));
  const post = steps.posterior.result as PosteriorResult | undefined;
  out.append(renderPhysical(panelHost, physical), renderForecast(panelHost, forecast));
  const row = el("div", { class: "exports" });
  for (const [kind, label] of POSTERIOR_EXPORTS) {
    const file = post?.exports?.[kind];
    const b = el("button", { "data-export": kind, text: label, disabled: !file, title: file ? file.name : "run the posterior first (sample files are not kept in saved notebooks)" });
    b.addEventListener("click", () => file && download(file.name, file.text, file.mime));
    row.append(b);
  }
  for (const kind of ["model-csv", "model-ecsv"]) {
    const b = el("button", { "data-export": kind, text: `model light curve (${kind.endsWith("csv") && !kind.includes("ecsv") ? "CSV" : "ECSV"})`, disabled: !solutions().length });
    b.addEventListener("click", async () => {
      try {
        const r = await call<{ name: string; text: string; mime: string }>("export", { kind, notebook: doc, solution: solutions()[selected], n: 0 });
        download(r.name, r.text, r.mime);
      } catch (e) {
        alertBox((e as Error).message);
      }
    });
    row.append(b);
  }
  panelExports(row, physical.result?.exports, [["physical-csv", "physical quantities (CSV)"], ["physical-ecsv", "physical quantities (ECSV)"]], "compute the physical quantities first");
  panelExports(
    row,
    forecast.result?.exports,
    [
      ["forecast-csv", "forecast band (CSV)"],
      ["forecast-ecsv", "forecast band (ECSV)"],
      ["forecast-times-csv", "next peak and crossing times (CSV)"],
    ],
    "run the forecast first (its files are not kept in saved notebooks)",
  );
  const nbBtn = el("button", { "data-export": "notebook", text: "notebook file", disabled: !doc });
  nbBtn.addEventListener("click", () => void saveNotebook());
  row.append(nbBtn);
  out.append(row);
  const lcSvg = el("button", { class: "small", "data-figure": "light-curve-svg", text: "light curve SVG" });
  const lcPng = el("button", { class: "small", "data-figure": "light-curve-png", text: "light curve PNG" });
  lcSvg.addEventListener("click", () => {
    const f = lightCurveExport();
    if (f) exportSVG(f, "light-curve");
  });
  lcPng.addEventListener("click", () => {
    const f = lightCurveExport();
    if (f) void exportPNG(f, "light-curve");
  });
  out.append(el("div", { class: "exports" }, el("span", { text: "Figures: " }), lcSvg, lcPng));
}

const nn = (v: (number | null)[] | undefined) => (v ?? []).map((x) => (x === null ? NaN : x));

function plotInput(): PlotInput {
  const sols = solutions();
  const ds = datasets();
  return {
    yLabel: curves?.y_label ?? "magnitude",
    datasets: curves
      ? ds.map((d, k) => {
          const c = curves!.datasets[k];
          const masked = new Array<boolean>(c.t.length).fill(false);
          for (const i of d.masked ?? []) masked[i] = true;
          return {
            name: d.name,
            colour: PALETTE[k % PALETTE.length],
            t: c.t.map((t) => t - TIME_OFFSET),
            y: nn(c.y),
            e: nn(c.e),
            masked,
            resid: c.resid ? nn(c.resid) : undefined,
          };
        })
      : [],
    models: (curves?.models ?? [])
      .map((m, i) => ({
        label: m.label || sols[curveSolutions[i]]?.label || `model ${i + 1}`,
        colour: SOLUTION_COLOURS[curveSolutions[i] % SOLUTION_COLOURS.length],
        dash: curveSolutions[i] !== selected,
        t: m.t.map((t) => t - TIME_OFFSET),
        y: nn(m.y),
      }))
      .concat(curves ? forecastBands(forecast).models : []),
  };
}

function lightCurveExport(): SVGSVGElement | undefined {
  if (!curves) return undefined;
  return lightCurveFigure(plotInput(), lc.xRange());
}

function zoomToAnomaly(): void {
  const a = single()?.anomaly;
  if (a?.found) {
    const pad = Math.max((a.t2 - a.t1) * 1.5, 1);
    lc.setX(a.t1 - pad - TIME_OFFSET, a.t2 + pad - TIME_OFFSET);
  } else alertBox("Run the single-lens fit first: the anomaly is where the data leave the single-lens model.");
}

function renderPlots(): void {
  lc.render(plotInput());
  lc.setBands(curves ? forecastBands(forecast).bands : []);
  $("#plot-status").textContent = ""; // the empty plot says what to do (style.css)
}

// ---------- hook for the map view and the tests ----------

/** A dataset as the map view reads it: full JD, flux, 1σ flux error, mask. */
export interface HookDataset {
  name: string;
  t: number[];
  flux: number[];
  err: number[];
  masked: boolean[] | null;
  err_scale: number;
  err_floor: number;
  ld: number;
}

/** Model parameters in the map view's naming: t0 (full JD), u0, tE (d), rho, s, q, alpha (rad); optionally the parallax piEN, piEE. */
export type HookModel = Record<"t0" | "u0" | "tE" | "rho" | "s" | "q" | "alpha", number> & { piEN?: number; piEE?: number };

export interface LensbookHook {
  /** Current datasets, the selected solution's model, the notebook document and all solutions (copies). */
  current(): { datasets: HookDataset[]; selected?: HookModel; notebook: NotebookDoc | undefined; solutions: Solution[] };
  /** Runs Refine from this model (the map view's "use as starting point"). */
  useAsStart(p: Partial<HookModel>): Promise<void>;
  /** Called after every change of data or results; returns an unsubscribe function. */
  onChange(f: () => void): () => void;
  /** The panel beside the light curve where the map view mounts. */
  mapPanel: HTMLElement;
  /** The worker pool (the map view may run engine steps on it). */
  engine: EnginePool;
  /** Step states, for tests. */
  steps(): Steps;
  /** Intervals in which steps computed in the workers (performance.now() ms), for tests. */
  computeWindows: { step: StepId; start: number; end: number }[];
  /** Date.now() of the last successful autosave (0: none yet), for tests. */
  autosavedAt(): number;
  /** Timing of the last Cancel (performance.now() ms), for tests. */
  lastCancel: { clicked: number; stopped: number };
  /** The document as “Save notebook” would write it (before the engine re-encodes it). */
  document(): NotebookDoc | undefined;
  /** Map view: draws its dragged model (full JD, magnitudes on the plot's scale) over the light curve; undefined clears it. */
  showMapModel(m: { label: string; t: ArrayLike<number>; y: ArrayLike<number> } | undefined): void;
  /** Map view: calls f with the time (full JD) under the light-curve cursor, or undefined. */
  onCursor(f: (t: number | undefined) => void): () => void;
}

function hookDatasets(): HookDataset[] {
  return datasets().map((d) => {
    const n = d.t?.length ?? 0;
    let masked: boolean[] | null = null;
    if (d.masked?.length) {
      masked = new Array<boolean>(n).fill(false);
      for (const i of d.masked) masked[i] = true;
    }
    return { name: d.name, t: [...(d.t ?? [])], flux: [...(d.flux ?? [])], err: [...(d.err ?? [])], masked, err_scale: d.err_scale ?? 0, err_floor: d.err_floor ?? 0, ld: d.ld };
  });
}

function toHookModel(p: Params): HookModel {
  return { t0: p.T0, u0: p.U0, tE: p.TE, rho: p.Rho, s: p.S, q: p.Q, alpha: p.Alpha };
}

function fromHookModel(m: Partial<HookModel>): Params {
  const base = solutions()[selected]?.params;
  return {
    T0: m.t0 ?? base?.T0 ?? 0,
    U0: m.u0 ?? base?.U0 ?? 0,
    TE: m.tE ?? base?.TE ?? 0,
    Rho: m.rho ?? base?.Rho ?? 0,
    S: m.s ?? base?.S ?? 0,
    Q: m.q ?? base?.Q ?? 0,
    Alpha: m.alpha ?? base?.Alpha ?? 0,
    PiEN: m.piEN ?? base?.PiEN ?? 0,
    PiEE: m.piEE ?? base?.PiEE ?? 0,
    DsDt: base?.DsDt ?? 0,
    DAlphaDt: base?.DAlphaDt ?? 0,
  };
}

const hook: LensbookHook = {
  current: () => {
    const sols = solutions();
    const sel = sols[selected];
    return { datasets: hookDatasets(), selected: sel ? toHookModel(sel.params) : undefined, notebook: doc ? structuredClone(doc) : undefined, solutions: structuredClone(sols) };
  },
  useAsStart: (m) => runRefine(fromHookModel(m)),
  onChange: (f) => {
    listeners.add(f);
    return () => listeners.delete(f);
  },
  mapPanel: $("#map-panel"),
  engine: pool,
  steps: () => steps,
  autosavedAt: () => autosavedAt,
  computeWindows,
  lastCancel,
  document: () => fullDoc(),
  showMapModel: (m) => lc.setOverlay(m && { label: m.label, colour: "#c2185b", dash: false, t: Array.from(m.t, (t) => t - TIME_OFFSET), y: Array.from(m.y) }),
  onCursor: (f) => {
    lc.onCursor = (t) => f(t === undefined ? undefined : t + TIME_OFFSET);
    return () => (lc.onCursor = undefined);
  },
};
(window as unknown as { lensbook: LensbookHook }).lensbook = hook;

// ---------- map view, on demand ----------

/**
 * The magnification-map view (web/mapview.ts, its own bundle) runs an ebiten
 * program in a same-origin iframe, which shares this page's thread, and
 * downloads its own wasm module. It is loaded when the user opens it (or at
 * once with ?map=1), so the notebook starts fast and stays responsive while
 * the workers compute.
 */
function mapViewOnDemand(): void {
  const meta = document.querySelector<HTMLMetaElement>('meta[name="lensbook-mapview"]');
  if (!meta) return;
  const panel = $("#map-panel");
  const load = () => {
    clear(panel);
    const s = document.createElement("script");
    s.type = "module";
    s.src = meta.content;
    document.head.append(s);
  };
  if (query.get("map") === "1") {
    load();
    return;
  }
  const b = el("button", { id: "open-map", type: "button", text: "Open the magnification map" });
  b.addEventListener("click", load);
  panel.append(el("h3", { text: "Magnification map" }), el("p", { class: "hint", text: "Drag the source across the caustics of the selected solution and watch the light curve follow." }), b);
}

// ---------- boot ----------

function boot(): void {
  $("#demo").addEventListener("click", () => void loadDemo());
  $("#save").addEventListener("click", () => void saveNotebook());
  $("#link").addEventListener("click", () => void makeLink());
  $("#model-link").addEventListener("click", () => void makeLink(true));
  const open = $("#open-input") as HTMLInputElement;
  open.addEventListener("change", async () => {
    const f = open.files?.[0];
    open.value = "";
    if (f) await openNotebookText(await f.text());
  });
  $("#notice").addEventListener("click", () => ($("#notice").hidden = true));
  for (const b of document.querySelectorAll<HTMLInputElement>("input[name=drag]"))
    b.addEventListener("change", () => {
      if (b.checked) lc.mode = b.value as DragMode;
    });
  lc.onBox = maskBox;
  $("#zoom-reset").addEventListener("click", () => lc.resetZoom());
  $("#pan-left").addEventListener("click", () => lc.pan(-0.25));
  $("#pan-right").addEventListener("click", () => lc.pan(0.25));
  $("#zoom-anomaly").addEventListener("click", zoomToAnomaly);
  mapViewOnDemand();
  renderAll();
  renderPlots();
  pool
    .ready()
    .then(async (names) => {
      $("#engine").textContent = `engine ready · ${pool.size} worker${pool.size === 1 ? "" : "s"}`;
      $("#engine").title = "steps in this build: " + names.join(", ");
      doc = await call<NotebookDoc>("notebook-new", {});
      document.body.dataset.ready = "1";
      document.body.dataset.readyAt = String(performance.now());
      renderAll();
      if (!(await openLinkFromURL())) await offerRestore();
    })
    .catch((e) => {
      $("#engine").textContent = "engine failed to start";
      alertBox(String(e));
    });
}

boot();
