// The physical-quantities panel of the Report step: the astronomer's inputs
// (θ* directly, or the source's dereddened colour and magnitude for the
// colour–surface-brightness relation; the source distance) and, for every
// posterior mode, θE, μrel and — when the fit has a parallax — the lens mass,
// distance, planet mass and projected separation, with the assumptions beside
// them. The engine ("physical" step, fit.DeriveQuantities) computes; this
// file draws.

import { el, fmt } from "./dom";
import { drawsOf, numInput, progressRow, runPanel, statusLine, type PanelHost, type PanelState } from "./panel";
import type { PhysicalOut, PhysicalSettings, QuantityOut } from "./protocol";

export type PhysicalInputs = Omit<PhysicalSettings, "seed">;
export type PhysicalPanel = PanelState<PhysicalInputs, PhysicalOut>;

export function newPhysical(): PhysicalPanel {
  return {
    settings: { theta_source: "theta", theta_star: 0, theta_star_err: 0, vk0: 0, vk0_err: 0, k0: 0, k0_err: 0, class: "", ds: 0, ds_err: 0 },
    status: "empty",
    stale: false,
  };
}

/** Display name and unit of each quantity of fit.DeriveQuantities. */
const LABELS: Record<string, [string, string]> = {
  thetaStar: ["θ* (angular source radius, as drawn)", "µas"],
  thetaE: ["θE (angular Einstein radius)", "mas"],
  muRel: ["μrel (relative proper motion)", "mas/yr"],
  piE: ["πE = |πE| (microlens parallax)", ""],
  M: ["M (total lens mass)", "M☉"],
  piRel: ["πrel (relative parallax)", "mas"],
  M1: ["M₁ (host mass)", "M☉"],
  M2: ["M₂ (companion mass)", "M☉"],
  M2_jup: ["M₂ (companion mass)", "M_Jup"],
  M2_earth: ["M₂ (companion mass)", "M⊕"],
  DS: ["D_S (source distance, as drawn)", "kpc"],
  DL: ["D_L (lens distance)", "kpc"],
  aPerp: ["a⊥ (projected separation)", "AU"],
  beta: ["β = (KE/PE)⊥ (orbital-motion energy ratio)", ""],
};

const UNITS: Record<string, string> = { uas: "µas", Msun: "M☉", Mjup: "M_Jup", Mearth: "M⊕" };

function quantityRow(q: QuantityOut): HTMLElement {
  const [label, unit] = LABELS[q.name] ?? [q.name, UNITS[q.unit] ?? q.unit];
  const cell = (v: number | null, key: string) => el("td", { "data-value": v === null ? "" : String(v), "data-key": key, text: v === null ? "—" : fmt(v, 4) });
  const tr = el("tr", { "data-quantity": q.name }, el("td", { text: label }), cell(q.median, "median"), cell(q.lower, "lower"), cell(q.upper, "upper"), el("td", { text: unit }));
  if (q.non_finite > 0) tr.append(el("td", { class: "warn", text: `${q.non_finite} draws not finite` }));
  return tr;
}

export function renderPhysical(host: PanelHost, st: PhysicalPanel): HTMLElement {
  const s = st.settings as unknown as Record<string, unknown>;
  const box = el("section", { class: "panel" + (st.stale ? " stale" : ""), id: "physical-panel", "aria-label": "Physical quantities" });
  box.append(
    el("h3", { text: "Physical quantities" }),
    el("p", { class: "hint", text: "From the posterior draws of each mode: θE = θ*/ρ and μrel = θE/tE; with a fitted microlens parallax also the lens mass, and with a source distance the lens distance and the projected separation. Your inputs' uncertainties are drawn per posterior draw." }),
  );
  const form = el("div", { class: "settings physical-inputs" });
  const radio = (value: "theta" | "colour", text: string) => {
    const r = el("input", { type: "radio", name: "theta-source", value, checked: st.settings.theta_source === value });
    r.addEventListener("change", () => {
      if (!r.checked) return;
      st.settings.theta_source = value;
      host.update();
    });
    return el("label", {}, r, " " + text);
  };
  form.append(el("span", { text: "θ* from:" }), radio("theta", "its angular radius"), radio("colour", "the colour–surface-brightness relation (Kervella et al. 2004)"), el("br"));
  if (st.settings.theta_source === "theta") {
    form.append(numInput("θ* (µas)", s, "theta_star", { min: 0 }), numInput("±", s, "theta_star_err", { min: 0 }));
  } else {
    const cls = el("select", { name: "class", "aria-label": "source luminosity class" });
    for (const [v, t] of [
      ["", "unknown"],
      ["dwarf", "dwarf"],
      ["subgiant", "subgiant"],
      ["giant", "giant"],
    ])
      cls.append(el("option", { value: v, text: t, selected: st.settings.class === v }));
    cls.addEventListener("change", () => (st.settings.class = cls.value));
    form.append(
      numInput("(V−K)₀", s, "vk0"),
      numInput("±", s, "vk0_err", { min: 0 }),
      numInput("K₀", s, "k0"),
      numInput("±", s, "k0_err", { min: 0 }),
      el("label", {}, "source is a ", cls),
      el("span", { class: "hint", text: "dereddened Johnson magnitudes" }),
    );
  }
  form.append(el("br"), numInput("source distance D_S (kpc)", s, "ds", { min: 0 }), numInput("±", s, "ds_err", { min: 0 }), el("span", { class: "hint", text: "blank: no lens distance or projected separation" }));
  box.append(form);
  const post = host.posterior();
  const draws = drawsOf(post);
  const run = el("button", { class: "primary", id: "run-physical", text: "Compute", disabled: st.status === "running" || draws.length === 0 });
  run.addEventListener("click", () => void runPanel(host, st, "physical", { notebook: host.notebook(), modes: draws, settings: { ...st.settings, seed: host.seed() } }, "physical-panel"));
  box.append(run);
  if (draws.length === 0) box.append(el("span", { class: "hint", text: " Run the posterior first: the numbers come from its draws." }));
  if (st.status === "running") box.append(progressRow(st, "physical"));
  box.append(...statusLine(st));
  const r = st.result;
  if (!r) return box;
  const out = el("div", { class: "outputs" });
  out.append(el("p", { class: "caution", text: "Research estimates: these numbers follow from the model, the posterior draws and the assumptions listed beside them, not from any measurement of the lens itself. Check them before you publish or schedule on them." }));
  r.modes.forEach((m, k) => {
    out.append(el("h4", { text: `${m.label} · ${m.draws} posterior draws` }));
    if (m.error) {
      out.append(el("p", { class: "warn", "data-physical-error": k, text: m.error }));
      return;
    }
    const tbl = el("table", { class: "results physical-table", "data-mode": k });
    tbl.append(el("tr", {}, ...["quantity", "median", "16 %", "84 %", "unit"].map((h) => el("th", { text: h }))));
    for (const q of m.quantities ?? []) tbl.append(quantityRow(q));
    const side = el("div", { class: "assumptions" }, el("h5", { text: "Assumptions" }));
    const ul = el("ul", { class: "assumption-list" });
    for (const a of m.assumptions ?? []) ul.append(el("li", { text: a }));
    side.append(ul);
    if (m.warnings?.length) {
      side.append(el("h5", { text: "Warnings" }));
      const wl = el("ul", { class: "warning-list" });
      for (const w of m.warnings) wl.append(el("li", { class: "warn", text: w }));
      side.append(wl);
    }
    out.append(el("div", { class: "physical" }, el("div", {}, tbl, el("p", { class: "hint", text: "16 % and 84 %: the 15.87 % and 84.13 % quantiles over the draws (±1σ for a Gaussian)." })), side));
  });
  box.append(out);
  return box;
}
