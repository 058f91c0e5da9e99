// Small DOM helpers. Every user-supplied string goes in as text (textContent
// or attribute values), never as HTML: dataset names and file names come from
// other people's files and links.

type Child = Node | string | null | undefined | false;

export function el<K extends keyof HTMLElementTagNameMap>(
  tag: K,
  attrs: Record<string, string | number | boolean | undefined> = {},
  ...children: Child[]
): HTMLElementTagNameMap[K] {
  const e = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs)) {
    if (v === undefined || v === false) continue;
    if (k === "class") e.className = String(v);
    else if (k === "text") e.textContent = String(v);
    else e.setAttribute(k, v === true ? "" : String(v));
  }
  for (const c of children) if (c !== null && c !== undefined && c !== false) e.append(c);
  return e;
}

export function clear(e: Element): void {
  while (e.firstChild) e.removeChild(e.firstChild);
}

export function $(sel: string): HTMLElement {
  const e = document.querySelector(sel);
  if (!e) throw new Error("missing element " + sel);
  return e as HTMLElement;
}

/** Offers a download of text or binary content under a file name. */
export function download(name: string, data: string | Blob, type = "text/plain;charset=utf-8"): void {
  const blob = typeof data === "string" ? new Blob([data], { type }) : data;
  const url = URL.createObjectURL(blob);
  const a = el("a", { href: url, download: name });
  document.body.append(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(url), 10_000);
}

/** Formats a number with n significant digits, without exponent for ordinary magnitudes. */
export function fmt(x: number, n = 5): string {
  if (!Number.isFinite(x)) return String(x);
  const a = Math.abs(x);
  if (a !== 0 && (a < 1e-3 || a >= 1e7)) return x.toExponential(n - 1);
  return Number(x.toPrecision(n)).toString();
}

/**
 * Formats a value and its 1σ errors as they are quoted (common practice): the
 * smaller error rounded to two significant digits, the value and the errors to
 * that decimal place, as fit.FormatUncertain does for the LaTeX table. Without a
 * usable error the value gets six significant digits and the errors come back
 * empty.
 */
export function fmtUncertain(x: number, ...errs: (number | null | undefined)[]): { value: string; errs: string[] } {
  const ok = errs.filter((e): e is number => e !== null && e !== undefined && e > 0 && Number.isFinite(e));
  if (!Number.isFinite(x) || ok.length === 0 || ok.length !== errs.length) return { value: fmt(x, 6), errs: errs.map(() => "") };
  const e = Number(Math.min(...ok).toPrecision(2)); // 0.0996 → 0.10 sets the place
  const dec = 1 - Math.floor(Math.log10(e));
  if (dec > 10 || Math.abs(x) >= 1e7) {
    // far from unity: matching mantissas
    const k = Math.max(0, Math.floor(Math.log10(Math.abs(x))) + dec);
    return { value: x.toExponential(k), errs: ok.map((v) => v.toExponential(1)) };
  }
  const at = (v: number) => (dec < 0 ? String(Math.round(v / 10 ** -dec) * 10 ** -dec) : fixed(v, dec));
  return { value: at(x), errs: ok.map(at) };
}

/** x with dec decimals (0 ≤ dec ≤ 20), never "-0.00". */
export function fixed(x: number, dec: number): string {
  const t = x.toFixed(dec);
  return /^-[0.]*$/.test(t) ? t.slice(1) : t;
}

export function fmtDuration(ms: number): string {
  if (!Number.isFinite(ms) || ms < 0) return "—";
  const s = Math.round(ms / 1000);
  if (s < 60) return s + " s";
  return Math.floor(s / 60) + " min " + (s % 60) + " s";
}
