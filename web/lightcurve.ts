// Interactive light curve and residuals (uPlot): every dataset in its colour
// with error bars, magnitudes with bright values up, model curves per solution,
// zoom (drag) and pan (shift-drag or the arrow buttons), and a drag mode that
// masks or unmasks the points inside a box.

import uPlot from "uplot";
import "uplot/dist/uPlot.min.css";

export interface PlotDataset {
  name: string;
  colour: string;
  t: number[]; // display time (HJD′ = JD − 2450000)
  y: number[]; // magnitude
  e: number[]; // 1σ magnitude error
  masked: boolean[];
  resid?: number[]; // data − model (mag) for the selected solution
}

export interface PlotModel {
  label: string;
  colour: string;
  dash: boolean;
  t: number[];
  y: number[];
}

export interface PlotInput {
  datasets: PlotDataset[];
  models: PlotModel[];
  yLabel: string;
}

/** A posterior band (forecast): lower and upper model magnitude at each time, drawn under the points. */
export interface PlotBand {
  label: string;
  colour: string;
  t: number[]; // display time (HJD′)
  lo: number[];
  hi: number[];
}

export type DragMode = "zoom" | "mask" | "unmask";

/** Tick labels as plain decimals (no thousands separators), as many decimals as the tick step needs. */
const plainTicks = (_u: uPlot, splits: number[], _ax: number, _space: number, incr: number) => {
  let d = 0;
  while (d < 6 && Math.abs(incr * 10 ** d - Math.round(incr * 10 ** d)) > 1e-6 * incr * 10 ** d) d++;
  return splits.map((v) => (v == null ? "" : v.toFixed(d)));
};

export class LightCurvePlot {
  private main?: uPlot;
  private res?: uPlot;
  private input?: PlotInput;
  mode: DragMode = "zoom";
  onBox?: (mode: DragMode, t0: number, t1: number, y0: number, y1: number) => void;
  /** Map view: the time (HJD′) under the cursor, or undefined when it leaves the plot. */
  onCursor?: (t: number | undefined) => void;
  private overlay?: PlotModel; // map view's dragged model, drawn over the plot without re-rendering it
  private bands: PlotBand[] = []; // forecast bands, drawn under the points

  constructor(
    private mainEl: HTMLElement,
    private resEl: HTMLElement,
  ) {
    new ResizeObserver(() => this.resize()).observe(mainEl);
  }

  private width(): number {
    return Math.max(320, this.mainEl.clientWidth);
  }

  private lastWidth = 0;

  private resize(): void {
    const w = this.width();
    // the observer also fires when a rebuild changes the panel's height: only a new width needs a redraw
    if (w === this.lastWidth) return;
    this.lastWidth = w;
    this.main?.setSize({ width: w, height: 300 });
    this.res?.setSize({ width: w, height: 130 });
  }

  /** The current x range (display time), for zoom state and exports. */
  xRange(): [number, number] | undefined {
    this.flush();
    const s = this.main?.scales.x;
    return s && s.min != null && s.max != null ? [s.min, s.max] : undefined;
  }

  setX(t0: number, t1: number): void {
    this.flush();
    this.main?.setScale("x", { min: t0, max: t1 });
  }

  resetZoom(): void {
    this.flush();
    if (!this.input) return;
    // the data, and the forecast window when a band is shown
    const all = this.input.datasets.flatMap((d) => d.t).concat(this.bands.flatMap((b) => [b.t[0], b.t[b.t.length - 1]]));
    if (all.length === 0) return;
    let lo = Infinity;
    let hi = -Infinity;
    for (const v of all) {
      lo = Math.min(lo, v);
      hi = Math.max(hi, v);
    }
    const pad = (hi - lo) * 0.02 || 1;
    this.setX(lo - pad, hi + pad);
  }

  pan(fraction: number): void {
    const r = this.xRange();
    if (!r) return;
    const d = (r[1] - r[0]) * fraction;
    this.setX(r[0] + d, r[1] + d);
  }

  /** Draws m (the map view's model) over the light curve, or clears it; redraws without rebuilding the plot. */
  setOverlay(m: PlotModel | undefined): void {
    this.overlay = m;
    this.main?.redraw(false, false);
  }

  /** Shows the forecast bands (none: clears them); redraws without rebuilding the plot. */
  setBands(bands: PlotBand[]): void {
    this.bands = bands;
    this.main?.redraw(false, false);
  }

  /** Fills each band between its lower and upper curve, clipped to the plot area. */
  private drawBands(u: uPlot): void {
    if (this.bands.length === 0) return;
    const ctx = u.ctx;
    ctx.save();
    ctx.beginPath();
    ctx.rect(u.bbox.left, u.bbox.top, u.bbox.width, u.bbox.height);
    ctx.clip();
    for (const b of this.bands) {
      // one closed polygon per run of finite values: along the upper edge, back along the lower one
      for (const [i, j] of finiteRuns(b.t.length, b.lo, b.hi)) {
        ctx.beginPath();
        for (let k = i; k < j; k++) {
          const x = u.valToPos(b.t[k], "x", true);
          const y = u.valToPos(b.hi[k], "y", true);
          if (k === i) ctx.moveTo(x, y);
          else ctx.lineTo(x, y);
        }
        for (let k = j - 1; k >= i; k--) ctx.lineTo(u.valToPos(b.t[k], "x", true), u.valToPos(b.lo[k], "y", true));
        ctx.closePath();
        ctx.globalAlpha = 0.28;
        ctx.fillStyle = b.colour;
        ctx.fill();
        ctx.globalAlpha = 0.7;
        ctx.strokeStyle = b.colour;
        ctx.lineWidth = devicePixelRatio;
        ctx.stroke();
      }
    }
    ctx.restore();
  }

  private drawOverlay(u: uPlot): void {
    const m = this.overlay;
    if (!m || m.t.length === 0) return;
    const ctx = u.ctx;
    ctx.save();
    ctx.beginPath();
    ctx.rect(u.bbox.left, u.bbox.top, u.bbox.width, u.bbox.height);
    ctx.clip();
    ctx.strokeStyle = m.colour;
    ctx.lineWidth = 2 * devicePixelRatio;
    ctx.beginPath();
    let pen = false;
    for (let i = 0; i < m.t.length; i++) {
      if (!Number.isFinite(m.y[i])) {
        pen = false;
        continue;
      }
      const x = u.valToPos(m.t[i], "x", true);
      const y = u.valToPos(m.y[i], "y", true);
      if (pen) ctx.lineTo(x, y);
      else ctx.moveTo(x, y);
      pen = true;
    }
    ctx.stroke();
    ctx.restore();
  }

  /**
   * Shows input. The uPlot instances are kept and refilled with setData while
   * the set of series stays the same (a new solution selected, new model
   * curves, a changed mask; model curves added or removed with addSeries and
   * delSeries); they are rebuilt only when datasets are added, removed or
   * renamed, the y quantity changes, or the residual panel appears or goes. The work
   * runs in the next animation frame, so a caller that also rebuilds other
   * outputs does not add its time to the same page-thread task; several calls
   * before that frame draw once.
   */
  render(input: PlotInput): void {
    this.pending = input;
    if (this.frame === undefined) this.frame = requestAnimationFrame(() => this.flush());
  }

  private pending?: PlotInput;
  private frame?: number;
  private shape = ""; // series layout the current instances were built for
  private aligned = new AlignCache();
  private resAligned = new AlignCache();

  /** Applies a pending render now (also before anything reads the plot's state). */
  private flush(): void {
    if (this.frame !== undefined) cancelAnimationFrame(this.frame);
    this.frame = undefined;
    const input = this.pending;
    this.pending = undefined;
    if (input) this.apply(input);
  }

  private apply(input: PlotInput): void {
    const keep = this.xRange();
    this.input = input;
    if (input.datasets.length === 0) {
      this.destroy();
      return;
    }
    const withResid = input.datasets.filter((d) => d.resid);
    const shape = JSON.stringify([input.yLabel, input.datasets.map((d) => [d.name, d.colour, !!d.resid]), ]);

    const data = this.aligned.align([
      ...input.datasets.map((d) => ({ x: d.t, y: d.y, masked: d.masked })),
      ...input.models.map((m) => ({ x: m.t, y: m.y })),
    ]);
    const rdata = withResid.length ? this.resAligned.align(withResid.map((d) => ({ x: d.t, y: d.resid!, masked: d.masked }))) : undefined;

    if (this.main && shape === this.shape) {
      // same series: refill, restyle the model curves (solid = selected), keep the zoom
      const main = this.main;
      // legend rows: one per series but the x one (legend.live is off)
      const rows = main.root.querySelectorAll<HTMLElement>(".u-legend .u-series");
      input.models.forEach((m, i) => {
        const k = input.datasets.length + 1 + i;
        const sr = main.series[k];
        if (!sr) return; // added below with its own style
        sr.dash = m.dash ? [6, 4] : undefined;
        sr.stroke = () => m.colour;
        sr.label = m.label;
        const row = rows[k - 1];
        const marker = row?.querySelector<HTMLElement>(".u-marker");
        if (marker) marker.style.border = `2px ${m.dash ? "dashed" : "solid"} ${m.colour}`;
        const label = row?.querySelector<HTMLElement>(".u-label");
        if (label && label.textContent !== m.label) label.textContent = m.label;
      });
      main.batch(() => {
        // model curves added or removed (a step finished): add or drop series, no rebuild
        const first = input.datasets.length + 1;
        while (main.series.length > first + input.models.length) main.delSeries(main.series.length - 1);
        for (let i = main.series.length - first; i < input.models.length; i++) main.addSeries(modelSeries(input.models[i]), main.series.length);
        main.setData(data, true);
        if (keep) main.setScale("x", { min: keep[0], max: keep[1] });
      });
      if (this.resPending && rdata) this.resPending = { withResid, rdata };
      if (this.res && rdata) {
        // the residual panel in the next frame: two shorter page-thread tasks instead of one long one
        const res = this.res;
        requestAnimationFrame(() => {
          if (this.res !== res) return;
          res.batch(() => {
            res.setData(rdata, true);
            const x = main.scales.x;
            if (x.min != null && x.max != null) res.setScale("x", { min: x.min, max: x.max });
          });
        });
      }
      return;
    }
    this.destroy();
    this.shape = shape;
    this.build(input, data);
    if (keep) this.main?.setScale("x", { min: keep[0], max: keep[1] });
    if (rdata) {
      // the residual panel in the next frame (two shorter tasks)
      const main = this.main;
      this.resPending = { withResid, rdata };
      requestAnimationFrame(() => {
        const p = this.resPending;
        this.resPending = undefined;
        if (this.main !== main || !main || !p) return;
        const res = this.buildResiduals(p.withResid, p.rdata);
        const x = main.scales.x;
        if (x.min != null && x.max != null) res.setScale("x", { min: x.min, max: x.max });
      });
    }
  }

  private resPending?: { withResid: PlotDataset[]; rdata: uPlot.AlignedData };

  private destroy(): void {
    this.resPending = undefined;
    this.main?.destroy();
    this.res?.destroy();
    this.main = this.res = undefined;
    this.shape = "";
  }

  private build(input: PlotInput, data: uPlot.AlignedData): void {
    const series: uPlot.Series[] = [{ label: "HJD′" }];
    for (const d of input.datasets)
      series.push({
        label: d.name,
        stroke: d.colour,
        fill: d.colour,
        paths: () => null,
        points: { show: true, size: 5, stroke: d.colour, fill: d.colour },
        value: (_u, v) => (v == null ? "—" : v.toFixed(3)),
      });
    for (const m of input.models) series.push(modelSeries(m));

    // Error bars and masked points, from the current input (setData keeps this hook).
    const errorBars = (u: uPlot) => {
      const cur = this.input;
      if (!cur) return;
      const ctx = u.ctx;
      ctx.save();
      ctx.beginPath();
      ctx.rect(u.bbox.left, u.bbox.top, u.bbox.width, u.bbox.height);
      ctx.clip();
      const [xmin, xmax] = [u.scales.x.min!, u.scales.x.max!];
      const r = 3 * devicePixelRatio;
      cur.datasets.forEach((d, k) => {
        if (!u.series[k + 1]?.show) return;
        ctx.strokeStyle = d.colour;
        ctx.globalAlpha = 0.4;
        ctx.lineWidth = 1;
        ctx.beginPath();
        for (let i = 0; i < d.t.length; i++) {
          if (d.masked[i] || d.t[i] < xmin || d.t[i] > xmax) continue;
          const x = u.valToPos(d.t[i], "x", true);
          ctx.moveTo(x, u.valToPos(d.y[i] - d.e[i], "y", true));
          ctx.lineTo(x, u.valToPos(d.y[i] + d.e[i], "y", true));
        }
        ctx.stroke();
        // masked points: hollow grey rings
        ctx.globalAlpha = 0.8;
        ctx.strokeStyle = "#9aa1a8";
        ctx.beginPath();
        for (let i = 0; i < d.t.length; i++) {
          if (!d.masked[i] || d.t[i] < xmin || d.t[i] > xmax) continue;
          const x = u.valToPos(d.t[i], "x", true);
          const y = u.valToPos(d.y[i], "y", true);
          ctx.moveTo(x + r, y);
          ctx.arc(x, y, r, 0, 2 * Math.PI);
        }
        ctx.stroke();
      });
      ctx.restore();
    };

    const sync = uPlot.sync("lensbook-lc");
    const w = this.width();
    this.lastWidth = w;
    this.main = new uPlot(
      {
        width: w,
        height: 300,
        series,
        scales: { x: { time: false }, y: { dir: -1 } },
        axes: [
          { label: "HJD′ = JD − 2450000", stroke: "#3b4652", grid: { stroke: "#e6e2d8" }, values: plainTicks, space: 90 },
          { label: input.yLabel, stroke: "#3b4652", grid: { stroke: "#e6e2d8" }, size: 60 },
        ],
        cursor: { sync: { key: sync.key, setSeries: false }, drag: { x: true, y: true, uni: 30 } },
        legend: { live: false },
        hooks: {
          drawAxes: [(u) => this.drawBands(u)],
          draw: [errorBars, (u) => this.drawOverlay(u)],
          setCursor: [(u) => this.onCursor?.(u.cursor.left != null && u.cursor.left >= 0 ? u.posToVal(u.cursor.left, "x") : undefined)],
          setSelect: [
            (u) => {
              if (this.mode === "zoom" || u.select.width < 2) return;
              const t0 = u.posToVal(u.select.left, "x");
              const t1 = u.posToVal(u.select.left + u.select.width, "x");
              const ya = u.posToVal(u.select.top, "y");
              const yb = u.posToVal(u.select.top + u.select.height, "y");
              u.setSelect({ left: 0, top: 0, width: 0, height: 0 }, false);
              this.onBox?.(this.mode, t0, t1, Math.min(ya, yb), Math.max(ya, yb));
            },
          ],
          setScale: [
            (u, key) => {
              if (key !== "x" || !this.res) return;
              const { min, max } = u.scales.x;
              const r = this.res.scales.x;
              if (min != null && max != null && (r.min !== min || r.max !== max)) this.res.setScale("x", { min, max });
            },
          ],
        },
      },
      data,
      this.mainEl,
    );
    // In mask modes a drag selects a box instead of zooming.
    const main = this.main;
    main.over.addEventListener("mousedown", () => {
      (main.cursor.drag as { setScale: boolean }).setScale = this.mode === "zoom";
    });

  }

  private buildResiduals(withResid: PlotDataset[], rdata: uPlot.AlignedData): uPlot {
    const sync = uPlot.sync("lensbook-lc");
    const w = this.width();
    {
      const rseries: uPlot.Series[] = [{ label: "HJD′" }];
      for (const d of withResid)
        rseries.push({ label: d.name, stroke: d.colour, paths: () => null, points: { show: true, size: 4, fill: d.colour } });
      this.res = new uPlot(
        {
          width: w,
          height: 130,
          series: rseries,
          scales: { x: { time: false }, y: { dir: -1 } },
          axes: [
            { stroke: "#3b4652", grid: { stroke: "#e6e2d8" }, values: plainTicks, space: 90 },
            { label: "residual (mag)", stroke: "#3b4652", grid: { stroke: "#e6e2d8" }, size: 60 },
          ],
          legend: { show: false },
          cursor: { sync: { key: sync.key }, drag: { x: false, y: false } },
          hooks: {
            drawAxes: [
              (u) => {
                const y = u.valToPos(0, "y", true);
                u.ctx.save();
                u.ctx.strokeStyle = "#1d2733";
                u.ctx.beginPath();
                u.ctx.moveTo(u.bbox.left, y);
                u.ctx.lineTo(u.bbox.left + u.bbox.width, y);
                u.ctx.stroke();
                u.ctx.restore();
              },
            ],
          },
        },
        rdata,
        this.resEl,
      );
      return this.res;
    }
  }

  /** PNG of the interactive plot as shown (main panel, and residuals if present). */
  canvases(): HTMLCanvasElement[] {
    this.flush();
    return [this.main?.ctx.canvas, this.res?.ctx.canvas].filter((c): c is HTMLCanvasElement => !!c);
  }
}

function modelSeries(m: PlotModel): uPlot.Series {
  return {
    label: m.label,
    stroke: m.colour,
    width: 1.6,
    dash: m.dash ? [6, 4] : undefined,
    spanGaps: true,
    points: { show: false },
    value: (_u, v) => (v == null ? "—" : v.toFixed(3)),
  };
}

interface Column {
  x: number[];
  y: number[];
  masked?: boolean[]; // masked points are left out (null)
}

/**
 * uPlot wants every series on one shared x array. AlignCache keeps the joined
 * x array and each column's positions in it while the columns' x values stay
 * the same (they do when only a solution or a mask changes), so a redraw only
 * places y values: O(series × points) with no sort.
 */
class AlignCache {
  private xs: number[][] = [];
  private joined: number[] = [];
  private pos: Int32Array[] = [];

  align(cols: Column[]): uPlot.AlignedData {
    if (!this.same(cols)) this.rebuild(cols);
    const n = this.joined.length;
    const out: (number | null)[][] = cols.map((c, k) => {
      const col = new Array<number | null>(n).fill(null);
      const p = this.pos[k];
      for (let i = 0; i < c.x.length; i++) {
        const v = c.y[i];
        col[p[i]] = c.masked?.[i] || !Number.isFinite(v) ? null : v;
      }
      return col;
    });
    return [this.joined, ...out] as uPlot.AlignedData;
  }

  private same(cols: Column[]): boolean {
    if (cols.length !== this.xs.length) return false;
    for (let k = 0; k < cols.length; k++) {
      const a = cols[k].x;
      const b = this.xs[k];
      if (a === b) continue;
      if (a.length !== b.length) return false;
      for (let i = 0; i < a.length; i++) if (a[i] !== b[i]) return false;
    }
    return true;
  }

  private rebuild(cols: Column[]): void {
    const all = new Set<number>();
    for (const c of cols) for (const v of c.x) all.add(v);
    this.joined = Float64Array.from(all).sort() as unknown as number[];
    this.joined = Array.from(this.joined);
    const index = new Map<number, number>();
    this.joined.forEach((v, i) => index.set(v, i));
    this.pos = cols.map((c) => Int32Array.from(c.x, (v) => index.get(v)!));
    this.xs = cols.map((c) => c.x);
  }
}

/** The runs [i, j) of at least two consecutive indices below n where both lo
 * and hi are finite: a band is drawn as one polygon per run, gaps left open. */
export function finiteRuns(n: number, lo: ArrayLike<number>, hi: ArrayLike<number>): Array<[number, number]> {
  const runs: Array<[number, number]> = [];
  let i = 0;
  while (i < n) {
    while (i < n && !(Number.isFinite(lo[i]) && Number.isFinite(hi[i]))) i++;
    let j = i;
    while (j < n && Number.isFinite(lo[j]) && Number.isFinite(hi[j])) j++;
    if (j - i >= 2) runs.push([i, j]);
    i = j;
  }
  return runs;
}
