// The forecast panel of the Report step: a future time window (from the last
// data point for 30 days unless set), the model light curve of posterior
// draws with its band (drawn here and in the light-curve plot), and when the
// next peak and the next caustic crossing come — what an observer needs to
// schedule follow-up. The engine ("forecast" step, fit.ModeResult.Forecast)
// computes; this file draws.

import { el, fmt } from "./dom";
import { figureBox } from "./figures";
import type { PlotBand, PlotInput, PlotModel } from "./lightcurve";
import { drawsOf, numInput, progressRow, runPanel, statusLine, type PanelHost, type PanelState } from "./panel";
import { forecastFigure, timeHistogramFigure, type BandSeries } from "./plots";
import type { ForecastOut, ForecastSettings, TimeDist } from "./protocol";

const TIME_OFFSET = 2450000; // HJD′ = JD − 2450000, as everywhere on the page
/** Band colours per mode, apart from the dataset palette. */
export const FORECAST_COLOURS = ["#7b4ea3", "#1f8a70", "#b5472f"];

/** The panel's inputs as typed: the start in HJD′ (0 = the last data point). */
export type ForecastInputs = Omit<ForecastSettings, "seed">;
export type ForecastPanel = PanelState<ForecastInputs, ForecastOut>;

export function newForecast(): ForecastPanel {
  return { settings: { from: 0, days: 30, draws: 200, points: 1000 }, status: "empty", stale: false };
}

/** The page host plus what the forecast panel draws with. */
export interface ForecastHost extends PanelHost {
  /** Last data time (full JD), for the default start. */
  lastTime(): number | undefined;
  /** The light-curve plot's input (data as plotted), for the figure. */
  plotInput(): PlotInput;
  /** Sets the light-curve plot's time range (HJD′). */
  showWindow(t0: number, t1: number): void;
}

const nn = (v: (number | null)[] | undefined) => (v ?? []).map((x) => (x === null ? NaN : x));

/** The bands to draw in the light-curve plot: one per mode of the last forecast. */
export function forecastBands(st: ForecastPanel): { bands: PlotBand[]; models: PlotModel[] } {
  const r = st.result;
  if (!r) return { bands: [], models: [] };
  const bands: PlotBand[] = [];
  const models: PlotModel[] = [];
  r.modes.forEach((m, k) => {
    const colour = FORECAST_COLOURS[k % FORECAST_COLOURS.length];
    const t = m.t.map((x) => x - TIME_OFFSET);
    bands.push({ label: `forecast ${m.label}`, colour, t, lo: nn(m.mag_lower), hi: nn(m.mag_upper) });
    models.push({ label: `forecast median (${m.label})`, colour, dash: true, t, y: nn(m.mag) });
  });
  return { bands, models };
}

/** Calendar date and time of a full JD read as UTC ("2024-06-23 19:12"). */
export function calendar(jd: number): string {
  const d = new Date((jd - 2440587.5) * 86400000); // JD 2440587.5 = 1970-01-01 00:00 UTC
  return Number.isFinite(d.getTime()) ? d.toISOString().slice(0, 16).replace("T", " ") : "—";
}

function distRow(event: string, key: string, d: TimeDist, draws: number, searched: boolean, why: string): HTMLElement {
  const tr = el("tr", { "data-event": key });
  tr.append(el("td", { text: event }));
  if (!searched) {
    tr.append(el("td", { colspan: 6, class: "hint", text: why }));
    return tr;
  }
  const n = Math.round((d.fraction ?? 0) * draws);
  if (d.median === null || n === 0) {
    tr.append(el("td", { colspan: 5, "data-key": "none", text: "none in the window" }), el("td", { "data-key": "fraction", "data-value": "0", text: `0 of ${draws} draws` }));
    return tr;
  }
  // HJD′ to 4 decimals (about 9 s): what a schedule needs
  const cell = (v: number | null, k: string) => el("td", { "data-key": k, "data-value": v === null ? "" : String(v), text: v === null ? "—" : (v - TIME_OFFSET).toFixed(4) });
  const width = d.lower !== null && d.upper !== null ? (d.upper - d.lower) * 24 : NaN;
  tr.append(
    cell(d.median, "median"),
    el("td", { text: calendar(d.median) }),
    cell(d.lower, "lower"),
    cell(d.upper, "upper"),
    el("td", { text: Number.isFinite(width) ? (width < 1 ? `${fmt(width * 60, 2)} min` : `${fmt(width, 3)} h`) : "—" }),
    el("td", { "data-key": "fraction", "data-value": String(d.fraction), text: `${n} of ${draws} draws (${fmt(100 * (d.fraction ?? 0), 3)} %)` }),
  );
  return tr;
}


export function renderForecast(host: ForecastHost, st: ForecastPanel): HTMLElement {
  const s = st.settings as unknown as Record<string, unknown>;
  const box = el("section", { class: "panel" + (st.stale ? " stale" : ""), id: "forecast-panel", "aria-label": "Forecast" });
  box.append(
    el("h3", { text: "Forecast" }),
    el("p", { class: "hint", text: "The model light curve of posterior draws over a future window, and when the next peak and the next caustic crossing come: for scheduling follow-up." }),
  );
  const last = host.lastTime();
  const form = el("div", { class: "settings forecast-inputs" });
  form.append(
    numInput("from (HJD′)", s, "from", { placeholder: last !== undefined ? `${fmt(last - TIME_OFFSET, 8)} (last point)` : "last data point", size: 18 }),
    numInput("days", s, "days", { min: 0.01, placeholder: "30" }),
    numInput("posterior draws", s, "draws", { min: 1, step: 1, placeholder: "200" }),
    numInput("times in the window", s, "points", { min: 3, step: 1, placeholder: "1000" }),
  );
  box.append(form);
  const draws = drawsOf(host.posterior());
  const run = el("button", { class: "primary", id: "run-forecast", text: "Run forecast", disabled: st.status === "running" || draws.length === 0 });
  run.addEventListener("click", () => {
    const set = st.settings;
    const settings: ForecastSettings = { from: set.from ? set.from + (set.from > 2e6 ? 0 : TIME_OFFSET) : 0, days: set.days, draws: Math.round(set.draws), points: Math.round(set.points), seed: host.seed() };
    void runPanel(host, st, "forecast", { notebook: host.notebook(), modes: draws, settings }, "forecast-panel").then(() => {
      const r = st.result;
      if (r && st.status === "done") showForecast(host, r);
    });
  });
  box.append(run);
  if (draws.length === 0) box.append(el("span", { class: "hint", text: " Run the posterior first: the forecast draws from it." }));
  if (st.status === "running") box.append(progressRow(st, "forecast"));
  box.append(...statusLine(st));
  const r = st.result;
  if (!r) return box;
  const out = el("div", { class: "outputs" });
  const w0 = r.settings.from;
  const w1 = r.settings.from + r.settings.days;
  out.append(
    el("p", { class: "caution", text: `Research estimates: the window HJD′ ${fmt(w0 - TIME_OFFSET, 8)} to ${fmt(w1 - TIME_OFFSET, 8)} (${fmt(r.settings.days, 4)} days), ${r.settings.draws} posterior draws, ${r.settings.points} times. The model's future is only as good as the model: an unmodelled anomaly will not be forecast.` }),
  );
  const show = el("button", { class: "small", id: "forecast-show", text: "Show in the light curve" });
  show.addEventListener("click", () => showForecast(host, r));
  out.append(show);
  r.modes.forEach((m, k) => {
    const colour = FORECAST_COLOURS[k % FORECAST_COLOURS.length];
    out.append(el("h4", { text: `${m.label} · ${m.draws} posterior draws` }));
    const tbl = el("table", { class: "results forecast-table", "data-mode": k });
    tbl.append(el("tr", {}, ...["next", "median (HJD′)", "calendar date (JD as UTC)", "16 %", "84 %", "16–84 % width", "draws with it"].map((h) => el("th", { text: h }))));
    tbl.append(distRow("peak", "peak", m.peak, m.draws, true, ""));
    tbl.append(distRow("caustic crossing", "crossing", m.crossing, m.draws, m.crossings, "not searched: a single lens has no caustic"));
    out.append(tbl, el("p", { class: "hint", text: "16 % and 84 %: the 15.87 % and 84.13 % quantiles over the draws that have the event. Calendar dates read the dataset times as UTC; HJD and BJD differ from it by minutes." }));
    const hs = [{ label: "next peak", colour, values: nn(m.next_peak).map((t) => t - TIME_OFFSET) }];
    if (m.crossings && nn(m.next_crossing).some((t) => Number.isFinite(t))) hs.push({ label: "next caustic crossing", colour: "#b3412c", values: nn(m.next_crossing).map((t) => t - TIME_OFFSET) });
    const figs = el("div", { class: "forecast-figures" });
    const band: BandSeries = { label: m.label, colour, t: m.t.map((x) => x - TIME_OFFSET), lo: nn(m.mag_lower), mid: nn(m.mag), hi: nn(m.mag_upper) };
    const span = w1 - w0;
    const peak = m.peak.lower !== null && m.peak.upper !== null ? [{ lo: m.peak.lower - TIME_OFFSET, hi: m.peak.upper - TIME_OFFSET, colour }] : [];
    figs.append(figureBox(forecastFigure(host.plotInput(), [band], [w0 - TIME_OFFSET - 0.5 * span, w1 - TIME_OFFSET], w0 - TIME_OFFSET, peak), `forecast-${k + 1}`));
    if (hs.some((h) => h.values.some((v) => Number.isFinite(v)))) figs.append(figureBox(timeHistogramFigure(hs), `forecast-times-${k + 1}`));
    else figs.append(el("p", { class: "hint", text: "No draw has a peak or crossing in the window: nothing to histogram." }));
    out.append(figs);
    const method = el("ul", { class: "hint method" });
    for (const x of m.method ?? []) method.append(el("li", { text: x }));
    out.append(method);
    for (const w of m.warnings ?? []) out.append(el("p", { class: "warn", text: w }));
  });
  box.append(out);
  return box;
}

/** Shows the window (with as much time before it) in the light-curve plot. */
export function showForecast(host: ForecastHost, r: ForecastOut): void {
  const a = r.settings.from - TIME_OFFSET;
  const b = a + r.settings.days;
  const pad = 0.03 * (b - a);
  host.showWindow(a - (b - a) - pad, b + pad);
}
