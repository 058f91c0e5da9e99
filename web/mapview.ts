// Interactive magnification map. This one module has two roles:
//
//  - in the notebook page it builds the map panel (in <section id="map-panel">):
//    an iframe holding the map program, the colour legend, sliders and fields
//    for s, q and ρ, the live parameter and χ² readout, and the "Use as starting
//    point" button;
//  - inside that iframe (mapview.html, body[data-mapview-frame]) it loads the Go
//    program: the ebiten view (mapview.wasm) when WebGL2 works, otherwise the
//    2-D canvas fallback (mapcanvas.wasm), which draws Go-computed pixels with
//    putImageData and gets the same pointer, wheel and key input forwarded.
//
// The iframe is needed because ebiten takes over the document it runs in. The
// page and the frame talk with postMessage; the message types are defined in
// wasm/mapview/bridge (protocol version 1) and mirrored here. The page computes
// nothing: the model light curve and χ² come from the Go side (package fit's
// likelihood).

import "./mapview.css";

const PROTOCOL = 1;

/** Model parameters as the frame takes them; angles in radians. */
export interface MapModel {
  t0: number;
  u0: number;
  tE: number;
  rho: number;
  s: number;
  q: number;
  alpha: number;
  piEN?: number;
  piEE?: number;
  dsdt?: number;
  dalphadt?: number;
  ld?: number;
  ref?: "centre-of-mass" | "central-caustic";
  /** Parallax reference epoch t0,par (full JD; 0 or absent = t0). */
  tref?: number;
}

/** One dataset: times (full JD), fluxes and 1σ uncertainties. */
export interface MapData {
  name: string;
  t: ArrayLike<number>;
  flux: ArrayLike<number>;
  err: ArrayLike<number>;
  masked?: boolean[] | null;
  errScale?: number;
  errFloor?: number;
  ld?: number;
  zeroPoint?: number;
}

/** The state the frame reports after every model change. */
export interface MapState {
  model: MapModel;
  chi2: number | null;
  ndata: number;
  t: Float64Array; // plot times (full JD)
  a: Float64Array; // model magnification at t
  y?: Float64Array; // model magnitude at t on the first dataset's scale (its fs, fb and zero point)
  fits?: { name: string; chi2: number; fs: number; fb: number; n: number }[];
  error?: string;
  seq: number;
  stats: Record<string, number>;
}

/** What the map panel needs from the page it lives in. */
export interface MapHost {
  data(): MapData[];
  model(): MapModel | undefined;
  /** Seeds the Refine step with the dragged model. */
  useAsStart(m: MapModel): void | Promise<void>;
  /** Subscribes to data/result changes; returns an unsubscribe function. */
  onChange?(f: () => void): () => void;
  /** Shows the dragged model's light curve and χ² in the page's light-curve plot. */
  showModel?(s: MapState): void;
  /** Time range (full JD) of the plotted model curve; default: the data span. */
  timeRange?(): [number, number] | undefined;
  /** The event's sky position (ICRS, degrees), null when unknown; parallax needs it. */
  coords?(): { ra_deg: number; dec_deg: number } | null;
}

export type MapMode = "webgl" | "canvas";

/** Reports whether this browser can create a WebGL2 context (ebiten needs WebGL2). */
export function hasWebGL2(): boolean {
  try {
    const gl = document.createElement("canvas").getContext("webgl2");
    if (!gl) return false;
    gl.getExtension("WEBGL_lose_context")?.loseContext(); // free the context slot
    return true;
  } catch {
    return false;
  }
}

/**
 * Reports whether WebGL2 is drawn by a CPU renderer (SwiftShader, llvmpipe,
 * lavapipe, WARP). Then the GPU path brings no speed: in headless Chromium on a
 * 2-core machine ebiten presented at most ~15 frames per second through
 * SwiftShader while the Go rasteriser of the canvas program kept above 30.
 */
export function softwareWebGL(): boolean {
  try {
    const gl = document.createElement("canvas").getContext("webgl2");
    if (!gl) return false;
    const ext = gl.getExtension("WEBGL_debug_renderer_info");
    const name = String(gl.getParameter(ext ? ext.UNMASKED_RENDERER_WEBGL : gl.RENDERER));
    gl.getExtension("WEBGL_lose_context")?.loseContext();
    return /swiftshader|llvmpipe|lavapipe|softpipe|software|warp/i.test(name);
  } catch {
    return false;
  }
}

const SOFTWARE_TEXT =
  "WebGL2 is drawn by a software renderer here (no GPU): drawing with the 2-D canvas instead, which is faster on the CPU (same map, computed in Go).";

const MODE_TEXT: Record<MapMode, string> = {
  webgl: "Drawing with WebGL2 (GPU or software WebGL).",
  canvas: "WebGL2 is not available here: drawing with the 2-D canvas fallback (same map and controls, computed in Go).",
};

function h<K extends keyof HTMLElementTagNameMap>(tag: K, attrs: Record<string, string> = {}, ...kids: (Node | string)[]): HTMLElementTagNameMap[K] {
  const e = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs)) {
    if (k === "class") e.className = v;
    else if (k === "text") e.textContent = v;
    else e.setAttribute(k, v);
  }
  e.append(...kids);
  return e;
}

const DEG = 180 / Math.PI;

interface Slider {
  range: HTMLInputElement;
  num: HTMLInputElement;
  row: HTMLElement;
}

/** The map panel of the notebook page. */
export class MapView {
  mode: MapMode;
  frame: HTMLIFrameElement;
  private base: string;
  private modeText: HTMLElement;
  latest?: MapState;
  private ready = false;
  private pending: unknown[] = [];
  private model?: MapModel;
  private sliders: Record<"s" | "q" | "rho", Slider>;
  private out: Record<string, HTMLElement> = {};
  private status: HTMLElement;
  private legend: HTMLCanvasElement;
  private ticks: HTMLElement;
  private unsub?: () => void;
  private stateListeners = new Set<(s: MapState) => void>();

  constructor(
    readonly panel: HTMLElement,
    readonly host: MapHost,
    opts: { base?: string; mode?: MapMode } = {},
  ) {
    const gl = hasWebGL2();
    const soft = gl && softwareWebGL();
    this.mode = opts.mode ?? (gl && !soft ? "webgl" : "canvas");
    const base = opts.base ?? new URL(".", import.meta.url).href;
    this.base = base;
    ensureStyles(base);
    panel.classList.add("mv-panel");
    const text = this.mode === "canvas" && soft ? SOFTWARE_TEXT : MODE_TEXT[this.mode];
    const modeText = h("p", { class: "mv-mode", role: "status", "data-mode": this.mode, "data-software-webgl": String(soft), text });
    this.modeText = modeText;
    this.frame = this.makeFrame();
    this.legend = h("canvas", { class: "mv-legend-bar", width: "16", height: "256", role: "img", "aria-label": "Colour scale: magnification A, logarithmic" });
    this.ticks = h("div", { class: "mv-legend-ticks" });
    const legend = h("figure", { class: "mv-legend" }, h("figcaption", { text: "A (log)" }), h("div", { class: "mv-legend-body" }, this.legend, this.ticks));
    const mk = (key: "s" | "q" | "rho", label: string, lo: number, hi: number, help: string): Slider => {
      const id = `mv-${key}`;
      const range = h("input", { type: "range", id: id + "-range", min: String(lo), max: String(hi), step: "0.001", "aria-label": `${label} (logarithmic slider)` });
      const num = h("input", { type: "number", id, step: "any", min: "0", "aria-describedby": id + "-help" });
      const row = h("div", { class: "mv-row" }, h("label", { for: id, text: label }), range, num, h("span", { id: id + "-help", class: "mv-help", text: help }));
      return { range, num, row };
    };
    this.sliders = {
      s: mk("s", "s", -0.7, 0.7, "separation (θE)"),
      q: mk("q", "q", -6, 0, "mass ratio m2/m1"),
      rho: mk("rho", "ρ", -4, -0.5, "source radius (θE); 0 = point source"),
    };
    const controls = h("div", { class: "mv-controls" });
    for (const k of ["s", "q", "rho"] as const) {
      const sl = this.sliders[k];
      controls.append(sl.row);
      sl.range.addEventListener("input", () => {
        sl.num.value = fmtNum(10 ** Number(sl.range.value));
        this.sendLens();
      });
      sl.num.addEventListener("change", () => {
        const v = Number(sl.num.value);
        if (v > 0) sl.range.value = String(Math.log10(v));
        this.sendLens();
      });
    }
    const dl = h("dl", { class: "mv-readout" });
    for (const [k, label] of [
      ["t0", "t0 (HJD′)"],
      ["u0", "u0"],
      ["alpha", "α (°)"],
      ["chi2", "χ²"],
    ]) {
      this.out[k] = h("dd", { "data-k": k, text: "–" });
      dl.append(h("dt", { text: label }), this.out[k]);
    }
    const use = h("button", { type: "button", class: "mv-use", text: "Use as starting point" });
    use.title = "Start the Refine step from the model on the map";
    use.addEventListener("click", () => {
      if (this.latest) void this.host.useAsStart({ ...this.latest.model });
    });
    const fitBtn = h("button", { type: "button", class: "mv-fit", text: "Show whole pattern" });
    fitBtn.addEventListener("click", () => this.post({ type: "fit" }));
    this.status = h("p", { class: "mv-status", "aria-live": "polite" });
    panel.replaceChildren(
      h("h2", { text: "Magnification map" }),
      modeText,
      h("div", { class: "mv-body" }, this.frame, legend),
      controls,
      dl,
      h("div", { class: "mv-buttons" }, use, fitBtn),
      this.status,
    );
    window.addEventListener("message", (e) => this.onMessage(e));
    this.unsub = host.onChange?.(() => this.refresh());
    this.refresh();
  }

  private makeFrame(): HTMLIFrameElement {
    return h("iframe", {
      class: "mv-frame",
      title:
        "Magnification map. Drag the white trajectory to move it (u0, t0), drag the orange handle to turn it (α), " +
        "scroll to zoom, drag elsewhere to pan. Keys: arrows nudge u0 and t0, shift+arrows turn α.",
      src: new URL(`mapview.html?mode=${this.mode}`, this.base).href,
    });
  }

  /**
   * Switches to the 2-D canvas program after the WebGL2 one failed at run
   * time (a context that could be created when probed but not by ebiten, or
   * one lost later), and tells the user.
   */
  private fallBack(reason: string): void {
    this.mode = "canvas";
    this.ready = false;
    const old = this.frame;
    this.frame = this.makeFrame();
    old.replaceWith(this.frame);
    this.modeText.dataset.mode = "canvas";
    this.modeText.textContent = `WebGL2 failed here (${reason}): drawing with the 2-D canvas fallback (same map and controls, computed in Go).`;
    this.refresh();
  }

  /** Re-reads the model and data from the host and sends them to the frame. */
  refresh(): void {
    const m = this.host.model();
    const data = this.host.data();
    if (!m) {
      this.status.textContent = data.length ? "" : "Add data (or load the demo event) to drag a model across the map.";
      if (!data.length) return;
    }
    this.model = m ?? defaultModel(data);
    this.setSliders(this.model);
    const tr = this.host.timeRange?.();
    this.post({
      type: "init",
      model: this.model,
      data: data.map((d) => ({
        name: d.name,
        t: Float64Array.from(d.t),
        flux: Float64Array.from(d.flux),
        err: Float64Array.from(d.err),
        masked: d.masked ?? null,
        errScale: d.errScale ?? 0,
        errFloor: d.errFloor ?? 0,
        ld: d.ld ?? 0,
        zeroPoint: d.zeroPoint ?? 0,
      })),
      tmin: tr?.[0] ?? 0,
      tmax: tr?.[1] ?? 0,
      ...(this.host.coords ? { coords: this.host.coords() } : {}),
    });
  }

  /** Sets the time under the cursor in the light-curve plot (full JD), or clears it. */
  setCursorTime(t: number | undefined): void {
    this.post({ type: "cursor", t: t ?? null });
  }

  /** Calls f with every state the frame reports; returns an unsubscribe function. */
  onState(f: (s: MapState) => void): () => void {
    this.stateListeners.add(f);
    return () => this.stateListeners.delete(f);
  }

  dispose(): void {
    this.unsub?.();
    this.panel.replaceChildren();
  }

  private setSliders(m: MapModel): void {
    for (const k of ["s", "q", "rho"] as const) {
      const v = m[k];
      this.sliders[k].num.value = fmtNum(v);
      if (v > 0) this.sliders[k].range.value = String(Math.log10(v));
    }
  }

  private sendLens(): void {
    const s = Number(this.sliders.s.num.value);
    const q = Number(this.sliders.q.num.value);
    const rho = Number(this.sliders.rho.num.value);
    if (!(s > 0) || !(q > 0) || !(rho >= 0)) {
      this.status.textContent = "s and q must be > 0 and ρ ≥ 0.";
      return;
    }
    this.status.textContent = "";
    this.post({ type: "lens", s, q, rho });
  }

  private post(msg: Record<string, unknown>): void {
    msg.v = PROTOCOL;
    if (!this.ready) {
      // keep only the latest message of each type until the frame is ready
      this.pending = this.pending.filter((p) => (p as { type: string }).type !== msg.type);
      this.pending.push(msg);
      return;
    }
    this.frame.contentWindow?.postMessage(msg, location.origin === "null" ? "*" : location.origin);
  }

  private onMessage(e: MessageEvent): void {
    if (e.source !== this.frame.contentWindow) return;
    const d = e.data as { type?: string; v?: number };
    if (!d || typeof d.type !== "string") return;
    switch (d.type) {
      case "ready": {
        const r = d as unknown as { ramp: number[]; lo: number; hi: number; ticks: number[] };
        this.drawLegend(r.ramp, r.lo, r.hi, r.ticks);
        this.ready = true;
        this.panel.dataset.ready = "1";
        const p = this.pending;
        this.pending = [];
        for (const m of p) this.post(m as Record<string, unknown>);
        break;
      }
      case "state": {
        const s = d as unknown as MapState;
        this.latest = s;
        this.out.t0.textContent = (s.model.t0 - 2450000).toFixed(4);
        this.out.u0.textContent = s.model.u0.toFixed(5);
        this.out.alpha.textContent = (s.model.alpha * DEG).toFixed(2);
        this.out.chi2.textContent = s.chi2 === null ? "–" : s.chi2.toFixed(1);
        this.status.textContent = s.error ?? "";
        this.panel.dataset.seq = String(s.seq);
        this.host.showModel?.(s);
        for (const f of this.stateListeners) f(s);
        break;
      }
      case "invalid":
        this.status.textContent = (d as unknown as { message: string }).message;
        break;
      case "error": {
        const msg = (d as unknown as { message: string }).message;
        if (this.mode === "webgl") {
          this.fallBack(msg);
          break;
        }
        this.status.textContent = "Map view failed: " + msg;
        this.panel.dataset.error = "1";
        break;
      }
    }
  }

  private drawLegend(ramp: number[], lo: number, hi: number, ticks: number[]): void {
    const c = this.legend;
    const g = c.getContext("2d")!;
    const img = g.createImageData(c.width, c.height);
    for (let y = 0; y < c.height; y++) {
      const i = Math.round(((c.height - 1 - y) / (c.height - 1)) * 255);
      for (let x = 0; x < c.width; x++) {
        const o = 4 * (y * c.width + x);
        img.data[o] = ramp[3 * i];
        img.data[o + 1] = ramp[3 * i + 1];
        img.data[o + 2] = ramp[3 * i + 2];
        img.data[o + 3] = 255;
      }
    }
    g.putImageData(img, 0, 0);
    this.ticks.replaceChildren(
      ...ticks.map((a) => {
        const s = h("span", { text: String(a) });
        s.style.bottom = `${((Math.log10(a) - lo) / (hi - lo)) * 100}%`;
        return s;
      }),
    );
  }
}

function fmtNum(v: number): string {
  return v === 0 ? "0" : Number(v.toPrecision(4)).toString();
}

/** A starting model when the notebook has no solution yet: peak of the data, a moderate binary. */
function defaultModel(data: MapData[]): MapModel {
  let t0 = 0;
  let best = -Infinity;
  for (const d of data)
    for (let i = 0; i < d.t.length; i++)
      if (d.flux[i] > best) {
        best = d.flux[i];
        t0 = d.t[i];
      }
  return { t0, u0: 0.1, tE: 20, rho: 0.001, s: 1, q: 0.01, alpha: Math.PI / 4, ref: "central-caustic" };
}

function ensureStyles(base: string): void {
  if (document.querySelector("link[data-mapview]")) return;
  const l = h("link", { rel: "stylesheet", href: new URL("mapview.css", base).href, "data-mapview": "" });
  document.head.append(l);
}

// ---------- inside the iframe ----------

interface MapViewAPI {
  key(k: string, shift: boolean): boolean;
  resize(w: number, h: number, dpr: number): void;
  pointerDown(x: number, y: number): void;
  pointerMove(x: number, y: number): void;
  pointerUp(x: number, y: number): void;
  wheel(x: number, y: number, dy: number): void;
  frame(): { w: number; h: number; pixels: Uint8ClampedArray<ArrayBuffer> } | null;
  stats(): unknown;
}

declare class Go {
  importObject: WebAssembly.Imports;
  run(i: WebAssembly.Instance): Promise<void>;
}

async function runFrame(): Promise<void> {
  const mode: MapMode = new URLSearchParams(location.search).get("mode") === "canvas" ? "canvas" : "webgl";
  const w = window as unknown as { lensMapView?: MapViewAPI; Go: typeof Go };
  const post = (m: Record<string, unknown>) => parent.postMessage({ v: PROTOCOL, ...m }, location.origin === "null" ? "*" : location.origin);
  let canvas: HTMLCanvasElement | undefined;
  if (mode === "canvas") {
    document.documentElement.style.height = "100%";
    Object.assign(document.body.style, { margin: "0", height: "100%", overflow: "hidden", background: "#14141c" });
    canvas = h("canvas", { tabindex: "0", role: "application", "aria-label": "Magnification map (2-D canvas)" });
    Object.assign(canvas.style, { width: "100%", height: "100%", display: "block", touchAction: "none" });
    document.body.append(canvas);
  }
  try {
    const go = new w.Go();
    const file = mode === "canvas" ? "mapcanvas.wasm" : "mapview.wasm";
    const r = await WebAssembly.instantiateStreaming(fetch(file), go.importObject);
    void go.run(r.instance);
  } catch (err) {
    post({ type: "error", message: String(err) });
    return;
  }
  const api = w.lensMapView!;
  window.addEventListener("keydown", (e) => {
    if (e.altKey || e.ctrlKey || e.metaKey) return;
    if (api.key(e.key, e.shiftKey)) e.preventDefault();
  });
  if (!canvas) {
    // ebiten handles pointer input itself; give its canvas a name once it exists.
    const name = () => {
      const c = document.querySelector("canvas");
      if (!c) return void setTimeout(name, 100);
      c.setAttribute("role", "application");
      c.setAttribute("aria-label", "Magnification map (WebGL2)");
    };
    name();
    return;
  }
  const cv = canvas;
  const g = cv.getContext("2d")!;
  const dpr = () => window.devicePixelRatio || 1;
  const resize = () => {
    const s = dpr();
    cv.width = Math.max(1, Math.round(cv.clientWidth * s));
    cv.height = Math.max(1, Math.round(cv.clientHeight * s));
    api.resize(cv.width, cv.height, s);
  };
  new ResizeObserver(resize).observe(cv);
  resize();
  const at = (e: PointerEvent | WheelEvent): [number, number] => {
    const r = cv.getBoundingClientRect();
    return [(e.clientX - r.left) * dpr(), (e.clientY - r.top) * dpr()];
  };
  cv.addEventListener("pointerdown", (e) => {
    if (e.button !== 0) return;
    try {
      cv.setPointerCapture(e.pointerId);
    } catch {
      // synthetic events (tests, assistive tools) have no capturable pointer
    }
    cv.focus();
    api.pointerDown(...at(e));
  });
  cv.addEventListener("pointermove", (e) => api.pointerMove(...at(e)));
  cv.addEventListener("pointerup", (e) => api.pointerUp(...at(e)));
  cv.addEventListener("pointercancel", (e) => api.pointerUp(...at(e)));
  cv.addEventListener(
    "wheel",
    (e) => {
      e.preventDefault();
      const k = e.deltaMode === 1 ? 33 : e.deltaMode === 2 ? 400 : 1; // lines, pages → pixels
      api.wheel(...at(e), e.deltaY * k);
    },
    { passive: false },
  );
  const loop = () => {
    const f = api.frame();
    if (f) g.putImageData(new ImageData(f.pixels, f.w, f.h), 0, 0);
    requestAnimationFrame(loop);
  };
  requestAnimationFrame(loop);
}

// ---------- wiring ----------

interface LensbookHook {
  current(): {
    datasets: { name: string; t: number[]; flux: number[]; err: number[]; masked: boolean[] | null; err_scale: number; err_floor: number; ld: number }[];
    selected?: Record<string, number>;
    notebook?: { datasets?: { zero_point?: number }[]; event?: { coords?: { ra_deg: number; dec_deg: number }; tref?: number } };
  };
  useAsStart(p: Record<string, number>): Promise<void>;
  onChange(f: () => void): () => void;
  mapPanel: HTMLElement;
  /** Draws the map's model (full JD, magnitudes on the plot's scale) over the light curve; undefined clears it. */
  showMapModel?(m: { label: string; t: ArrayLike<number>; y: ArrayLike<number>; chi2: number | null } | undefined): void;
  /** Calls f with the time (full JD) under the light-curve cursor, or undefined; returns an unsubscribe function. */
  onCursor?(f: (t: number | undefined) => void): () => void;
}

/** Mounts the panel on the notebook page through its window.lensbook hook. */
export function mountOnNotebook(hook: LensbookHook, opts: { mode?: MapMode } = {}): MapView {
  const host: MapHost = {
    data: () => {
      const c = hook.current();
      return c.datasets.map((d, k) => ({
        name: d.name,
        t: d.t,
        flux: d.flux,
        err: d.err,
        masked: d.masked,
        errScale: d.err_scale,
        errFloor: d.err_floor,
        ld: d.ld,
        zeroPoint: c.notebook?.datasets?.[k]?.zero_point ?? 0,
      }));
    },
    model: () => {
      const p = hook.current().selected;
      if (!p) return undefined;
      const tref = hook.current().notebook?.event?.tref ?? 0;
      return { t0: p.t0, u0: p.u0, tE: p.tE, rho: p.rho ?? 0, s: p.s, q: p.q, alpha: p.alpha, piEN: p.piEN, piEE: p.piEE, ref: "central-caustic", tref };
    },
    coords: () => {
      const c = hook.current().notebook?.event?.coords;
      return c ? { ra_deg: c.ra_deg, dec_deg: c.dec_deg } : null;
    },
    useAsStart: (m) => hook.useAsStart({ t0: m.t0, u0: m.u0, tE: m.tE, rho: m.rho, s: m.s, q: m.q, alpha: m.alpha }),
    onChange: (f) => hook.onChange(f),
    showModel: (s) => {
      if (s.y) hook.showMapModel?.({ label: `map model (χ² ${s.chi2 === null ? "–" : s.chi2.toFixed(1)})`, t: s.t, y: s.y, chi2: s.chi2 });
    },
  };
  const mv = new MapView(hook.mapPanel, host, opts);
  hook.onCursor?.((t) => mv.setCursorTime(t));
  return mv;
}

if (document.body?.hasAttribute("data-mapview-frame")) {
  void runFrame();
} else {
  const w = window as unknown as { lensbook?: LensbookHook; lensMapPanel?: MapView };
  const forced = new URLSearchParams(location.search).get("map");
  if (w.lensbook) w.lensMapPanel = mountOnNotebook(w.lensbook, { mode: forced === "canvas" || forced === "webgl" ? forced : undefined });
}
