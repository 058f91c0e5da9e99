// Figures built from engine results: χ² map, caustics with trajectories,
// corner plot, and the exportable light curve. Drawing only.

import { caption, INK, MUTED, newFigure, Panel, ramp, SOLUTION_COLOURS, svg } from "./figures";
import { finiteRuns, type PlotInput } from "./lightcurve";

export interface Chi2Map {
  log_s: number[]; // node centres
  log_q: number[];
  chi2: (number | null)[][]; // [iq][is]; null where the node was not computed
}

export interface CausticsData {
  label: string;
  caustics: number[][][]; // polylines of [x, y] in θE
  trajectory: number[][]; // [x, y] along the fitted time range
  lenses: number[][]; // [x, y] of each lens body
}

export interface Corner {
  names: string[];
  labels: string[];
  samples: number[][]; // [parameter][sample], thinned by the engine
}

function extent(v: number[]): [number, number] {
  let lo = Infinity;
  let hi = -Infinity;
  for (const x of v)
    if (Number.isFinite(x)) {
      lo = Math.min(lo, x);
      hi = Math.max(hi, x);
    }
  if (!(hi > lo)) return [lo - 0.5, lo + 0.5];
  return [lo, hi];
}

function half(v: number[]): number {
  return v.length > 1 ? Math.abs(v[1] - v[0]) / 2 : 0.5;
}

export interface MapMark {
  s: number;
  q: number;
  label: string;
}

export function chi2MapFigure(m: Chi2Map, sols: MapMark[]): SVGSVGElement {
  const W = 520;
  const H = 380;
  const root = newFigure(W, H, "χ² over log s and log q");
  const hs = half(m.log_s);
  const hq = half(m.log_q);
  const [s0, s1] = extent(m.log_s);
  const [q0, q1] = extent(m.log_q);
  const p = new Panel(root, 64, 20, 360, 300, { lo: s0 - hs, hi: s1 + hs, label: "log₁₀ s" }, { lo: q0 - hq, hi: q1 + hq, label: "log₁₀ q" });
  let best = Infinity;
  let worst = -Infinity;
  for (const row of m.chi2)
    for (const c of row)
      if (c != null && Number.isFinite(c)) {
        best = Math.min(best, c);
        worst = Math.max(worst, c);
      }
  // colour by log10(1 + Δχ²) so the minimum valleys stay readable
  const top = Math.log10(1 + Math.max(1, worst - best));
  m.log_q.forEach((lq, iq) =>
    m.log_s.forEach((ls, is) => {
      const c = m.chi2[iq]?.[is];
      const x0 = p.x(ls - hs);
      const y0 = p.y(lq + hq);
      const fill = c == null || !Number.isFinite(c) ? "#ece8de" : ramp(Math.log10(1 + c - best) / top);
      p.plot.append(svg("rect", { x: x0.toFixed(2), y: y0.toFixed(2), width: (p.x(ls + hs) - x0 + 0.5).toFixed(2), height: (p.y(lq - hq) - y0 + 0.5).toFixed(2), fill }));
    }),
  );
  sols.forEach((s, i) => p.marker(Math.log10(s.s), Math.log10(s.q), SOLUTION_COLOURS[i % SOLUTION_COLOURS.length], s.label));
  // legend bar
  const lx = 450;
  for (let k = 0; k < 50; k++) root.append(svg("rect", { x: lx, y: 20 + k * 6, width: 14, height: 6.5, fill: ramp(k / 49) }));
  caption(root, lx + 18, 28, "Δχ² 0", 10);
  caption(root, lx + 18, 318, fmtShort(worst - best), 10);
  caption(root, lx - 6, 340, "log colour scale", 10);
  return root;
}

function fmtShort(x: number): string {
  if (!Number.isFinite(x)) return "—";
  return x >= 1e4 ? x.toExponential(1) : String(Math.round(x));
}

export function causticsFigure(cs: CausticsData[]): SVGSVGElement {
  const n = cs.length;
  const size = 240;
  const W = Math.max(1, n) * (size + 40) + 30;
  const H = size + 70;
  const root = newFigure(W, H, "Caustics and source trajectories");
  cs.forEach((c, i) => {
    const xs = c.caustics.flat().map((p) => p[0]).concat(c.lenses.map((p) => p[0]));
    const ys = c.caustics.flat().map((p) => p[1]).concat(c.lenses.map((p) => p[1]));
    let [x0, x1] = extent(xs);
    let [y0, y1] = extent(ys);
    const span = Math.max(x1 - x0, y1 - y0, 0.05) * 1.3;
    const cx = (x0 + x1) / 2;
    const cy = (y0 + y1) / 2;
    [x0, x1, y0, y1] = [cx - span / 2, cx + span / 2, cy - span / 2, cy + span / 2];
    const p = new Panel(root, 50 + i * (size + 40), 24, size, size, { lo: x0, hi: x1, label: "x (θE)" }, { lo: y0, hi: y1, label: i === 0 ? "y (θE)" : "" });
    const colour = SOLUTION_COLOURS[i % SOLUTION_COLOURS.length];
    for (const line of c.caustics) p.polyline(line.map((q) => q[0]), line.map((q) => q[1]), "#b3412c", 1.3);
    p.polyline(c.trajectory.map((q) => q[0]), c.trajectory.map((q) => q[1]), INK, 1.2, "5 3");
    // direction arrow at the end of the trajectory
    const tr = c.trajectory;
    if (tr.length > 2) {
      const a = tr[Math.floor(tr.length * 0.55)];
      const b = tr[Math.floor(tr.length * 0.55) + 1];
      const ang = (Math.atan2(-(p.y(b[1]) - p.y(a[1])), p.x(b[0]) - p.x(a[0])) * 180) / Math.PI;
      p.plot.append(svg("path", { d: "M0 0 L-9 -4 L-9 4 Z", fill: INK, transform: `translate(${p.x(a[0]).toFixed(1)} ${p.y(a[1]).toFixed(1)}) rotate(${(-ang).toFixed(1)})` }));
    }
    for (const l of c.lenses) p.plot.append(svg("circle", { cx: p.x(l[0]), cy: p.y(l[1]), r: 3, fill: MUTED }));
    caption(root, 50 + i * (size + 40), 16, c.label, 11);
    void colour;
  });
  return root;
}

export function cornerFigure(c: Corner): SVGSVGElement {
  const n = c.names.length;
  const cell = n > 5 ? 90 : 120;
  const pad = 72;
  const W = pad + n * cell + 20;
  const H = pad + n * cell + 10;
  const root = newFigure(W, H, "Posterior corner plot");
  const ext = c.samples.map((s) => extent(s));
  for (let i = 0; i < n; i++) {
    for (let j = 0; j <= i; j++) {
      const left = pad + j * cell;
      const top = 10 + i * cell;
      const lastRow = i === n - 1;
      if (i === j) {
        const bins = 30;
        const [lo, hi] = ext[i];
        const h = new Array(bins).fill(0);
        for (const v of c.samples[i]) h[Math.min(bins - 1, Math.max(0, Math.floor(((v - lo) / (hi - lo)) * bins)))]++;
        const mx = Math.max(...h, 1);
        const p = new Panel(root, left, top, cell - 6, cell - 6, { lo, hi, label: c.labels[i] }, { lo: 0, hi: mx * 1.1, label: "" }, { xTicks: lastRow, xLabel: lastRow, yTicks: false, yLabel: false });
        let d = `M${p.x(lo)} ${p.y(0)}`;
        h.forEach((v, k) => {
          const a = lo + ((hi - lo) * k) / bins;
          const b = lo + ((hi - lo) * (k + 1)) / bins;
          d += `L${p.x(a).toFixed(1)} ${p.y(v).toFixed(1)}L${p.x(b).toFixed(1)} ${p.y(v).toFixed(1)}`;
        });
        p.plot.append(svg("path", { d, fill: "#c9d6e3", stroke: "#2f6690", "stroke-width": 1 }));
      } else {
        const p = new Panel(root, left, top, cell - 6, cell - 6, { lo: ext[j][0], hi: ext[j][1], label: c.labels[j] }, { lo: ext[i][0], hi: ext[i][1], label: c.labels[i] }, { xTicks: lastRow, xLabel: lastRow, yTicks: j === 0, yLabel: j === 0 });
        // 2-D histogram shading
        const bins = 24;
        const g: number[][] = Array.from({ length: bins }, () => new Array(bins).fill(0));
        const xs = c.samples[j];
        const ys = c.samples[i];
        for (let k = 0; k < xs.length; k++) {
          const a = Math.min(bins - 1, Math.max(0, Math.floor(((xs[k] - ext[j][0]) / (ext[j][1] - ext[j][0])) * bins)));
          const b = Math.min(bins - 1, Math.max(0, Math.floor(((ys[k] - ext[i][0]) / (ext[i][1] - ext[i][0])) * bins)));
          g[b][a]++;
        }
        let mx = 1;
        for (const row of g) for (const v of row) mx = Math.max(mx, v);
        const dx = (ext[j][1] - ext[j][0]) / bins;
        const dy = (ext[i][1] - ext[i][0]) / bins;
        // One path per shade (LEVELS of them) instead of one element per cell:
        // a 7-parameter corner plot would otherwise be some 10⁴ SVG nodes.
        const LEVELS = 32;
        const byLevel: string[][] = Array.from({ length: LEVELS + 1 }, () => []);
        g.forEach((row, b) =>
          row.forEach((v, a) => {
            if (v === 0) return;
            const x0 = p.x(ext[j][0] + a * dx);
            const y0 = p.y(ext[i][0] + (b + 1) * dy);
            const w = p.x(ext[j][0] + (a + 1) * dx) - x0 + 0.3;
            const h = p.y(ext[i][0] + b * dy) - y0 + 0.3;
            byLevel[Math.round((v / mx) * LEVELS)].push(`M${x0.toFixed(1)} ${y0.toFixed(1)}h${w.toFixed(1)}v${h.toFixed(1)}h${(-w).toFixed(1)}z`);
          }),
        );
        byLevel.forEach((cells, k) => {
          if (cells.length) p.plot.append(svg("path", { d: cells.join(""), fill: ramp(1 - k / LEVELS) }));
        });
      }
    }
  }
  return root;
}

/** Static light curve (data with error bars, model curves, residuals) for export. */
export function lightCurveFigure(input: PlotInput, range?: [number, number]): SVGSVGElement {
  const W = 760;
  const H = 520;
  const root = newFigure(W, H, "Light curve");
  let [t0, t1] = range ?? extent(input.datasets.flatMap((d) => d.t));
  if (!range) {
    const pad = (t1 - t0) * 0.02;
    t0 -= pad;
    t1 += pad;
  }
  const inRange = (d: { t: number[] }, v: number[]) => v.filter((_, i) => d.t[i] >= t0 && d.t[i] <= t1);
  const ys = input.datasets.flatMap((d) => inRange(d, d.y.map((y, i) => (d.masked[i] ? NaN : y))));
  const [y0, y1] = extent(ys);
  const py = (y1 - y0) * 0.08;
  const hasRes = input.datasets.some((d) => d.resid);
  const mainH = hasRes ? 330 : 440;
  const p = new Panel(root, 70, 30, 640, mainH, { lo: t0, hi: t1, label: hasRes ? "" : "HJD′ = JD − 2450000" }, { lo: y0 - py, hi: y1 + py, label: input.yLabel, invert: true }, { xTicks: !hasRes, xLabel: !hasRes });
  input.datasets.forEach((d) => {
    const keep = d.t.map((t, i) => !d.masked[i] && t >= t0 && t <= t1);
    p.points(d.t.filter((_, i) => keep[i]), d.y.filter((_, i) => keep[i]), d.colour, 1.8, d.e.filter((_, i) => keep[i]));
  });
  input.models.forEach((m) => p.polyline(m.t, m.y, m.colour, 1.6, m.dash ? "6 4" : ""));
  if (hasRes) {
    const rs = input.datasets.flatMap((d) => (d.resid ? inRange(d, d.resid) : []));
    const [r0, r1] = extent(rs);
    const r = Math.max(Math.abs(r0), Math.abs(r1)) * 1.1;
    const q = new Panel(root, 70, 40 + mainH, 640, 120, { lo: t0, hi: t1, label: "HJD′ = JD − 2450000" }, { lo: -r, hi: r, label: "residual", invert: true });
    q.polyline([t0, t1], [0, 0], INK, 1);
    input.datasets.forEach((d) => {
      if (!d.resid) return;
      const keep = d.t.map((t, i) => !d.masked[i] && t >= t0 && t <= t1);
      q.points(d.t.filter((_, i) => keep[i]), d.resid.filter((_, i) => keep[i]), d.colour, 1.6);
    });
  }
  let lx = 70;
  for (const d of input.datasets) {
    root.append(svg("circle", { cx: lx + 4, cy: 16, r: 4, fill: d.colour }));
    caption(root, lx + 12, 20, d.name, 11);
    lx += 20 + d.name.length * 7;
  }
  return root;
}

export interface BandSeries {
  label: string;
  colour: string;
  t: number[]; // display time (HJD′)
  lo: number[];
  mid: number[];
  hi: number[];
}

/**
 * The forecast as a figure: the data near the window, each mode's posterior
 * band (15.87–84.13 % of the model magnitude at each time) with its median,
 * the forecast start, and the 68 % interval of the next peak shaded.
 */
export function forecastFigure(input: PlotInput, bands: BandSeries[], window: [number, number], now: number, peaks: { lo: number; hi: number; colour: string }[]): SVGSVGElement {
  const W = 560;
  const H = 300;
  const root = newFigure(W, H, "Light-curve forecast with posterior band");
  const [t0, t1] = window;
  const ys: number[] = [];
  for (const b of bands)
    for (let i = 0; i < b.t.length; i++)
      if (b.t[i] >= t0 && b.t[i] <= t1) ys.push(b.lo[i], b.hi[i]);
  for (const d of input.datasets)
    for (let i = 0; i < d.t.length; i++) if (!d.masked[i] && d.t[i] >= t0 && d.t[i] <= t1) ys.push(d.y[i]);
  let [y0, y1] = extent(ys);
  const py = Math.max((y1 - y0) * 0.08, 0.01);
  y0 -= py;
  y1 += py;
  const p = new Panel(root, 64, 26, W - 84, H - 76, { lo: t0, hi: t1, label: "HJD′ = JD − 2450000" }, { lo: y0, hi: y1, label: input.yLabel, invert: true });
  for (const k of peaks) {
    if (!(Number.isFinite(k.lo) && Number.isFinite(k.hi))) continue;
    const a = p.x(Math.max(t0, k.lo));
    const b = p.x(Math.min(t1, k.hi));
    if (b > a) p.plot.append(svg("rect", { x: a.toFixed(2), y: p.top, width: Math.max(1, b - a).toFixed(2), height: p.h, fill: k.colour, "fill-opacity": 0.12 }));
  }
  for (const b of bands) {
    let d = "";
    for (const [i, j] of finiteRuns(b.t.length, b.lo, b.hi)) {
      for (let k = i; k < j; k++) d += (k === i ? "M" : "L") + p.x(b.t[k]).toFixed(2) + " " + p.y(b.hi[k]).toFixed(2);
      for (let k = j - 1; k >= i; k--) d += "L" + p.x(b.t[k]).toFixed(2) + " " + p.y(b.lo[k]).toFixed(2);
      d += "Z";
    }
    if (d) p.plot.append(svg("path", { d, fill: b.colour, "fill-opacity": 0.25, stroke: b.colour, "stroke-opacity": 0.6, "stroke-width": 0.8 }));
    p.polyline(b.t, b.mid, b.colour, 1.4);
  }
  input.datasets.forEach((d) => {
    const keep = d.t.map((t, i) => !d.masked[i] && t >= t0 && t <= t1);
    p.points(d.t.filter((_, i) => keep[i]), d.y.filter((_, i) => keep[i]), d.colour, 1.8, d.e.filter((_, i) => keep[i]));
  });
  if (now >= t0 && now <= t1) {
    p.polyline([now, now], [y0, y1], MUTED, 1, "3 3");
    const t = svg("text", { x: (p.x(now) + 4).toFixed(1), y: p.top + 12, "font-family": "system-ui, sans-serif", "font-size": 10, fill: MUTED });
    t.textContent = "forecast from here";
    p.plot.append(t);
  }
  let lx = 64;
  for (const b of bands) {
    root.append(svg("rect", { x: lx, y: 9, width: 14, height: 9, fill: b.colour, "fill-opacity": 0.35, stroke: b.colour }));
    caption(root, lx + 18, 18, b.label + " (68 % band, median)", 11);
    lx += 40 + (b.label.length + 20) * 6;
  }
  return root;
}

export interface Histogram {
  label: string;
  colour: string;
  values: number[]; // display time (HJD′); non-finite values are left out
}

/**
 * Small histograms of event times over the posterior draws (next peak, next
 * crossing) on one axis. Times within two days of each other are shown in
 * hours from their median (HJD′ tick labels could not tell them apart).
 */
export function timeHistogramFigure(hs: Histogram[]): SVGSVGElement {
  const W = 420;
  const H = 190;
  const root = newFigure(W, H, "Posterior of the next peak and caustic-crossing times");
  const finite = hs.flatMap((h) => h.values.filter((v) => Number.isFinite(v))).sort((a, b) => a - b);
  const [flo, fhi] = extent(finite);
  const hours = fhi - flo < 2;
  const ref = hours ? Math.round(finite[Math.floor(finite.length / 2)] * 1000) / 1000 : 0;
  const tx = (v: number) => (hours ? (v - ref) * 24 : v);
  const xLabel = hours ? `hours from HJD′ ${ref.toFixed(3)}` : "HJD′ = JD − 2450000";
  let [lo, hi] = [tx(flo), tx(fhi)];
  if (!(hi > lo)) [lo, hi] = [lo - 0.5, hi + 0.5];
  const pad = (hi - lo) * 0.05;
  lo -= pad;
  hi += pad;
  const bins = 30;
  const counts = hs.map((h) => {
    const c = new Array<number>(bins).fill(0);
    for (const v of h.values) if (Number.isFinite(v)) c[Math.min(bins - 1, Math.max(0, Math.floor(((tx(v) - lo) / (hi - lo)) * bins)))]++;
    return c;
  });
  const top = Math.max(1, ...counts.flat());
  const p = new Panel(root, 60, 24, W - 80, H - 70, { lo, hi, label: xLabel }, { lo: 0, hi: top * 1.1, label: "draws" });
  counts.forEach((c, k) => {
    let d = `M${p.x(lo).toFixed(1)} ${p.y(0).toFixed(1)}`;
    c.forEach((v, i) => {
      const a = lo + ((hi - lo) * i) / bins;
      const b = lo + ((hi - lo) * (i + 1)) / bins;
      d += `L${p.x(a).toFixed(1)} ${p.y(v).toFixed(1)}L${p.x(b).toFixed(1)} ${p.y(v).toFixed(1)}`;
    });
    d += `L${p.x(hi).toFixed(1)} ${p.y(0).toFixed(1)}`;
    p.plot.append(svg("path", { d, fill: hs[k].colour, "fill-opacity": 0.3, stroke: hs[k].colour, "stroke-width": 1.2 }));
  });
  let lx = 60;
  hs.forEach((h) => {
    root.append(svg("rect", { x: lx, y: 8, width: 12, height: 9, fill: h.colour, "fill-opacity": 0.4, stroke: h.colour }));
    caption(root, lx + 16, 17, h.label, 11);
    lx += 30 + h.label.length * 6.5;
  });
  return root;
}
