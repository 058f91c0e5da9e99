// Static figures drawn as SVG: the χ² map, caustics with trajectories, the
// corner plot, and the export version of the light curve. The same SVG is shown
// on the page and exported (as .svg, or rasterised to .png), so what the user
// sees is what they save. Only numbers computed by the engine are drawn here.

import { download, el, fixed } from "./dom";

const NS = "http://www.w3.org/2000/svg";

/** Our dataset palette: muted, distinguishable, readable on the paper background. */
export const PALETTE = ["#2f6690", "#c0622f", "#4d8b55", "#8a559f", "#b0862a", "#3a8f92", "#a8465e", "#5d6470"];
export const INK = "#1d2733";
export const MUTED = "#6b7580";
export const SOLUTION_COLOURS = ["#1d2733", "#b3412c", "#2f6690", "#4d8b55", "#8a559f", "#b0862a"];

/** Colour ramp for maps, low (good) to high: deep blue-green to pale sand. */
const RAMP = [
  [23, 59, 87],
  [47, 111, 143],
  [106, 163, 154],
  [201, 214, 163],
  [246, 240, 218],
];

export function ramp(f: number): string {
  if (!Number.isFinite(f)) return "#ffffff";
  f = Math.min(1, Math.max(0, f)) * (RAMP.length - 1);
  const i = Math.min(RAMP.length - 2, Math.floor(f));
  const w = f - i;
  const c = RAMP[i].map((v, k) => Math.round(v + (RAMP[i + 1][k] - v) * w));
  return `rgb(${c[0]},${c[1]},${c[2]})`;
}

export function svg<K extends keyof SVGElementTagNameMap>(tag: K, attrs: Record<string, string | number> = {}): SVGElementTagNameMap[K] {
  const e = document.createElementNS(NS, tag);
  for (const [k, v] of Object.entries(attrs)) e.setAttribute(k, String(v));
  return e;
}

/** Round tick values covering [lo, hi], about n of them. */
export function ticks(lo: number, hi: number, n = 5): number[] {
  if (!(hi > lo)) return [lo];
  const step = tickStep(lo, hi, n);
  const out: number[] = [];
  for (let v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) out.push(Math.abs(v) < step * 1e-9 ? 0 : v);
  return out;
}

/** The tick spacing of ticks(): 1, 2, 2.5 or 5 times a power of ten. */
function tickStep(lo: number, hi: number, n: number): number {
  const raw = (hi - lo) / n;
  const p = Math.pow(10, Math.floor(Math.log10(raw)));
  return [1, 2, 2.5, 5, 10].map((m) => m * p).find((s) => s >= raw) ?? raw;
}

/**
 * Tick labels of one axis: as many decimals as the spacing needs, so that
 * neighbouring ticks never print alike (2460480.2996 and 2460480.2998 did as
 * "2.5e+6"), and an offset taken out when the values need more than five
 * significant digits beyond the spacing: the ticks then read as differences
 * and the axis label carries "− offset".
 */
function tickLabels(lo: number, hi: number, n: number): { ticks: number[]; label: (v: number) => string; offsetText: string } {
  if (!(hi > lo)) return { ticks: [lo], label: (v) => String(Number(v.toPrecision(6))), offsetText: "" };
  const step = tickStep(lo, hi, n);
  let offset = 0;
  let offsetText = "";
  const mid = (lo + hi) / 2;
  if (Math.abs(mid) / step >= 1e5) {
    const big = Math.pow(10, Math.ceil(Math.log10(hi - lo)));
    offset = Math.round(mid / big) * big;
    offsetText = offset.toFixed(Math.max(0, -Math.round(Math.log10(big))));
  }
  const ts = ticks(lo - offset, hi - offset, n);
  const e = Math.floor(Math.log10(step) + 1e-9);
  const extra = Math.abs(step / Math.pow(10, e) - 2.5) < 1e-6 ? 1 : 0;
  const largest = Math.max(...ts.map(Math.abs));
  if (largest >= 1e6 || (largest > 0 && largest < 1e-4)) {
    const k = Math.max(0, Math.floor(Math.log10(largest)) - e + extra);
    return { ticks: ts.map((t) => t + offset), label: (v) => (v === offset ? "0" : (v - offset).toExponential(k)), offsetText };
  }
  const dec = Math.min(20, Math.max(0, extra - e));
  return { ticks: ts.map((t) => t + offset), label: (v) => fixed(v - offset, dec), offsetText };
}

// Estimated width of a tick-label character at the figures' 11 px font.
const CHAR_PX = 6.2;

export interface Axis {
  lo: number;
  hi: number;
  label: string;
  invert?: boolean; // magnitudes: bright up
}

/** A panel with axes; x()/y() map data to SVG coordinates. */
export class Panel {
  readonly g: SVGGElement;
  constructor(
    root: SVGSVGElement,
    readonly left: number,
    readonly top: number,
    readonly w: number,
    readonly h: number,
    readonly xa: Axis,
    readonly ya: Axis,
    opts: { xTicks?: boolean; yTicks?: boolean; xLabel?: boolean; yLabel?: boolean } = {},
  ) {
    this.g = svg("g");
    root.append(this.g);
    const clipId = "clip" + Math.random().toString(36).slice(2);
    const clip = svg("clipPath", { id: clipId });
    clip.append(svg("rect", { x: left, y: top, width: w, height: h }));
    root.append(clip);
    const frame = svg("rect", { x: left, y: top, width: w, height: h, fill: "none", stroke: MUTED, "stroke-width": 1 });
    this.plot = svg("g", { "clip-path": `url(#${clipId})` });
    this.g.append(this.plot, frame);
    const font = { "font-family": "system-ui, sans-serif", "font-size": 11, fill: INK };
    // as many ticks (up to five) as leave the labels room: across, each label's
    // estimated width plus a gap; up, a line each. Small panels (a corner
    // plot's cells) get fewer ticks instead of overprinted labels.
    const pick = (lo: number, hi: number, room: number, across: boolean) => {
      for (let n = 5; n >= 2; n--) {
        const t = tickLabels(lo, hi, n);
        const need = across ? t.ticks.reduce((a, v) => a + t.label(v).length * CHAR_PX + 8, 0) : t.ticks.length * 16;
        if (need <= room) return t;
      }
      return tickLabels(lo, hi, 1);
    };
    const xt = pick(xa.lo, xa.hi, w, true);
    const yt = pick(Math.min(ya.lo, ya.hi), Math.max(ya.lo, ya.hi), h, false);
    // an axis whose ticks read as differences needs its label to say from what
    const withOffset = (label: string, t: { offsetText: string }) => (t.offsetText ? `${label} − ${t.offsetText}` : label);
    if (opts.xTicks !== false)
      for (const t of xt.ticks) {
        const x = this.x(t);
        this.g.append(svg("line", { x1: x, x2: x, y1: top + h, y2: top + h + 4, stroke: MUTED }));
        const tx = svg("text", { ...font, x, y: top + h + 16, "text-anchor": "middle" });
        tx.textContent = xt.label(t);
        this.g.append(tx);
      }
    if (opts.yTicks !== false)
      for (const t of yt.ticks) {
        const y = this.y(t);
        this.g.append(svg("line", { x1: left - 4, x2: left, y1: y, y2: y, stroke: MUTED }));
        const ty = svg("text", { ...font, x: left - 6, y: y + 4, "text-anchor": "end" });
        ty.textContent = yt.label(t);
        this.g.append(ty);
      }
    if (opts.xLabel !== false && xa.label) {
      const l = svg("text", { ...font, x: left + w / 2, y: top + h + 32, "text-anchor": "middle" });
      l.textContent = withOffset(xa.label, xt);
      this.g.append(l);
    }
    if (opts.yLabel !== false && ya.label) {
      const cy = top + h / 2;
      // left of the widest tick label (44 px in most figures), inside the figure
      const widest = opts.yTicks !== false ? Math.max(0, ...yt.ticks.map((t) => yt.label(t).length)) * CHAR_PX : 0;
      const lx = Math.max(8, Math.min(left - 44, left - 16 - widest));
      const l = svg("text", { ...font, x: lx, y: cy, "text-anchor": "middle", transform: `rotate(-90 ${lx} ${cy})` });
      l.textContent = withOffset(ya.label, yt);
      this.g.append(l);
    }
  }
  readonly plot: SVGGElement;

  x(v: number): number {
    return this.left + ((v - this.xa.lo) / (this.xa.hi - this.xa.lo)) * this.w;
  }
  y(v: number): number {
    const f = (v - this.ya.lo) / (this.ya.hi - this.ya.lo);
    return this.ya.invert ? this.top + f * this.h : this.top + this.h - f * this.h;
  }

  /**
   * A path through the points. Vertices closer than 0.25 px to the last one
   * drawn are skipped (invisible at any zoom of the figure, and dense model
   * curves and caustics otherwise make path strings of many thousand
   * vertices); coordinates are rounded to 0.01 px.
   */
  polyline(xs: ArrayLike<number>, ys: ArrayLike<number>, stroke: string, width = 1.5, dash = ""): void {
    const parts: string[] = [];
    let pen = false;
    let lx = NaN;
    let ly = NaN;
    const last = xs.length - 1;
    for (let i = 0; i < xs.length; i++) {
      if (!Number.isFinite(xs[i]) || !Number.isFinite(ys[i])) {
        pen = false;
        continue;
      }
      const x = this.x(xs[i]);
      const y = this.y(ys[i]);
      const end = i === last || !Number.isFinite(xs[i + 1]) || !Number.isFinite(ys[i + 1]);
      if (pen && !end && Math.abs(x - lx) < 0.25 && Math.abs(y - ly) < 0.25) continue;
      parts.push((pen ? "L" : "M") + Math.round(x * 100) / 100 + " " + Math.round(y * 100) / 100);
      lx = x;
      ly = y;
      pen = true;
    }
    const d = parts.join("");
    if (!d) return;
    const p = svg("path", { d, fill: "none", stroke, "stroke-width": width, "stroke-linejoin": "round" });
    if (dash) p.setAttribute("stroke-dasharray", dash);
    this.plot.append(p);
  }

  points(xs: ArrayLike<number>, ys: ArrayLike<number>, fill: string, r = 2, errs?: ArrayLike<number>): void {
    let bars = "";
    for (let i = 0; i < xs.length; i++) {
      if (!Number.isFinite(xs[i]) || !Number.isFinite(ys[i])) continue;
      const x = this.x(xs[i]);
      if (errs && Number.isFinite(errs[i])) {
        bars += `M${x.toFixed(2)} ${this.y(ys[i] - errs[i]).toFixed(2)}V${this.y(ys[i] + errs[i]).toFixed(2)}`;
      }
      this.plot.append(svg("circle", { cx: x.toFixed(2), cy: this.y(ys[i]).toFixed(2), r, fill }));
    }
    if (bars) this.plot.prepend(svg("path", { d: bars, stroke: fill, "stroke-opacity": 0.45, "stroke-width": 1 }));
  }

  marker(x: number, y: number, colour: string, label = ""): void {
    const cx = this.x(x);
    const cy = this.y(y);
    this.plot.append(svg("circle", { cx, cy, r: 6, fill: "none", stroke: "#ffffff", "stroke-width": 3 }));
    this.plot.append(svg("circle", { cx, cy, r: 6, fill: "none", stroke: colour, "stroke-width": 2 }));
    if (label) {
      const t = svg("text", { x: cx + 8, y: cy - 8, "font-family": "system-ui, sans-serif", "font-size": 11, fill: colour, "font-weight": 600 });
      t.textContent = label;
      this.plot.append(t);
    }
  }
}

export function newFigure(w: number, h: number, title: string): SVGSVGElement {
  const root = svg("svg", { xmlns: NS, width: w, height: h, viewBox: `0 0 ${w} ${h}`, role: "img" });
  root.append(svg("rect", { x: 0, y: 0, width: w, height: h, fill: "#fcfbf7" }));
  const t = svg("title");
  t.textContent = title;
  root.append(t);
  return root;
}

export function caption(root: SVGSVGElement, x: number, y: number, text: string, size = 12, anchor = "start"): void {
  const t = svg("text", { x, y, "font-family": "system-ui, sans-serif", "font-size": size, fill: INK, "text-anchor": anchor });
  t.textContent = text;
  root.append(t);
}

export function serialise(root: SVGSVGElement): string {
  return '<?xml version="1.0" encoding="UTF-8"?>\n' + new XMLSerializer().serializeToString(root);
}

export function exportSVG(root: SVGSVGElement, name: string): void {
  download(name + ".svg", serialise(root), "image/svg+xml");
}

/** Rasterises an SVG figure at 2× and downloads it as PNG. */
export async function exportPNG(root: SVGSVGElement, name: string): Promise<void> {
  const w = Number(root.getAttribute("width"));
  const h = Number(root.getAttribute("height"));
  const url = URL.createObjectURL(new Blob([serialise(root)], { type: "image/svg+xml" }));
  try {
    const img = new Image();
    img.src = url;
    await img.decode();
    const c = document.createElement("canvas");
    c.width = w * 2;
    c.height = h * 2;
    const ctx = c.getContext("2d")!;
    ctx.scale(2, 2);
    ctx.drawImage(img, 0, 0, w, h);
    const blob = await new Promise<Blob>((res, rej) => c.toBlob((b) => (b ? res(b) : rej(new Error("PNG encoding failed"))), "image/png"));
    download(name + ".png", blob);
  } finally {
    URL.revokeObjectURL(url);
  }
}

/** A figure with its SVG and PNG export buttons. */
export function figureBox(fig: SVGSVGElement, name: string): HTMLElement {
  const svgBtn = el("button", { class: "small", "data-figure": name + "-svg", text: "SVG" });
  svgBtn.addEventListener("click", () => exportSVG(fig, name));
  const pngBtn = el("button", { class: "small", "data-figure": name + "-png", text: "PNG" });
  pngBtn.addEventListener("click", () => void exportPNG(fig, name));
  return el("figure", {}, fig, el("figcaption", {}, "Export: ", svgBtn, pngBtn));
}
