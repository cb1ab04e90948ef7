// Live physics previews of the scenario workspace. Every curve is computed by the
// API (POST /api/scenarios/{id}/preview) from the science package; this module only
// asks for the parts on show and draws them.

import { api, ApiError } from "./api.js";
import { h, fmt, unitLabel, tabs } from "./shell.js";
import { draw, axis, layout, band, loadPlotly } from "./plots.js";
import { faciesColour, withAlpha, UI } from "./palette.js";
import { COVARIATES, covariateLabel, covariateUnit, ATTRIBUTE_LABELS } from "./fields.js";

const VIEWS = {
  burial: { label: "Burial & temperature", parts: ["history"] },
  porosity: { label: "Porosity & cement", parts: ["history", "porosity"] },
  depth: { label: "Depth trends", parts: ["depth_trend"] },
  crossplot: { label: "Attribute cross-plot", parts: ["crossplot", "sweep"] },
};
const DASHES = ["solid", "dash", "dot"];
const LOCATION_LIMITS = {
  present_depth_m: [50, 8000], net_uplift_m: [0, 5000], gradient_c_per_km: [5, 120], overpressure_mpa: [0, 100],
};

/** HTML legend of facies colours. */
export function faciesLegend(names) {
  return names.map((n, j) => h("span", { style: { marginRight: "12px", whiteSpace: "nowrap" } },
    h("span", { class: "swatch", style: { background: faciesColour(j) } }), n));
}

export const metrics = (window.porecastMetrics = window.porecastMetrics || { preview: [] });

function middle(nodes) {
  const s = [...nodes].sort((a, b) => a - b);
  const n = s.length;
  return n % 2 ? s[(n - 1) / 2] : (s[n / 2 - 1] + s[n / 2]) / 2;
}

export class PreviewPanel {
  constructor({ container, scenarioId, onErrors }) {
    Object.assign(this, { container, scenarioId, onErrors });
    this.view = "burial";
    this.locations = null;
    this.sweepCovariate = "net_uplift_m";
    this.seq = 0;
    this.last = null;
    this.build();
  }

  build() {
    this.status = h("span", { class: "preview-status", "aria-live": "polite", "data-testid": "preview-status" });
    this.locBox = h("div", { class: "loc-rows" });
    const tablist = h("div", { role: "tablist", "aria-label": "Preview" },
      Object.entries(VIEWS).map(([name, v]) => h("button", { role: "tab", type: "button", id: `pv-tab-${name}`,
        "data-name": name, "aria-controls": "pv-body", "aria-selected": name === this.view ? "true" : "false",
        tabindex: name === this.view ? 0 : -1 }, v.label)));
    this.body = h("div", { id: "pv-body", role: "tabpanel", "aria-live": "off" });
    this.message = h("div", { class: "notice bad", hidden: true, role: "alert", "data-testid": "preview-error" });
    this.container.replaceChildren(
      h("header", {}, h("h2", {}, "Live preview"), h("span", { class: "small muted" }, "computed by the server's physics; nothing is saved"), this.status),
      this.locBox, tablist, this.message, this.body);
    this.tabs = tabs(tablist, (name) => { this.view = name; this.layoutView(); this.refresh(); });
    // The tab panel is shared; keep it visible whichever tab is on.
    tablist.querySelectorAll("[role=tab]").forEach((t) => t.addEventListener("click", () => { this.body.hidden = false; }));
    this.layoutView();
  }

  /** Default preview location: the middle node of each covariate of the document. */
  initLocations(doc) {
    if (this.locations) return;
    const covs = doc.burial.covariates;
    this.locations = [Object.fromEntries(COVARIATES.map((c) => [c, middle(covs[c].nodes)]))];
    this.renderLocations();
  }

  renderLocations() {
    const rows = this.locations.map((loc, i) => h("div", { class: "loc-controls", "data-testid": `location-${i}` },
      h("span", { class: "small", style: { alignSelf: "center", minWidth: "96px" } }, `Location ${i + 1} `,
        h("span", { class: "faint", "aria-hidden": "true" }, ["———", "– – –", "·····"][i])),
      COVARIATES.map((c) => {
        const id = `loc-${i}-${c}`;
        const input = h("input", { id, class: "num", type: "number", step: "any", min: LOCATION_LIMITS[c][0], max: LOCATION_LIMITS[c][1], value: loc[c] });
        input.addEventListener("change", () => {
          const v = Number(input.value);
          if (Number.isFinite(v)) { loc[c] = v; this.refresh(); }
        });
        return h("label", { for: id }, h("span", {}, covariateLabel(c), h("span", { class: "u" }, unitLabel(covariateUnit(c)))), input);
      }),
      i > 0 ? h("button", { type: "button", class: "link", onclick: () => { this.locations.splice(i, 1); this.renderLocations(); this.refresh(); } }, "remove") : null));
    const add = this.locations.length < 3 ? h("button", { type: "button", class: "link small", onclick: () => {
      this.locations.push({ ...this.locations[this.locations.length - 1] });
      this.renderLocations(); this.refresh();
    } }, "Add a location to compare") : null;
    this.locBox.replaceChildren(...rows, ...(add ? [add] : []));
  }

  setView(name) {
    if (name === this.view) return;
    this.tabs.select(name);
  }

  layoutView() {
    this.body.hidden = false;
    const plot = (id, cls = "") => h("div", { class: `plot ${cls}`, id, "data-testid": id });
    if (this.view === "burial") {
      this.body.replaceChildren(h("div", { class: "plots2" }, plot("pv-depth"), plot("pv-temp")), plot("pv-pressure", "short"),
        h("div", { class: "readout", id: "pv-facts", "data-testid": "pv-facts" }));
    } else if (this.view === "porosity") {
      this.body.replaceChildren(h("div", { class: "plots2" }, plot("pv-phi", "tall"), plot("pv-cement", "tall")),
        h("div", { class: "readout", id: "pv-facts" }));
    } else if (this.view === "depth") {
      this.body.replaceChildren(h("div", { class: "plots3" }, plot("pv-vp", "tall"), plot("pv-vs", "tall"), plot("pv-rho", "tall")),
        h("div", { class: "readout small", id: "pv-legend" }),
        h("div", { class: "readout small" }, "Lines: median of the realisations; bands: 10th to 90th percentile. Other covariates at location 1."));
    } else {
      const sel = h("select", { id: "pv-sweep-cov", "aria-label": "Covariate moved by the slider" },
        COVARIATES.map((c) => h("option", { value: c, selected: c === this.sweepCovariate }, covariateLabel(c))));
      sel.addEventListener("change", () => { this.sweepCovariate = sel.value; this.refresh(); });
      this.slider = h("input", { type: "range", id: "pv-slider", min: 0, max: 8, step: 1, value: 0, "aria-label": "Covariate value" });
      this.sliderLabel = h("output", { for: "pv-slider", class: "num small", "data-testid": "slider-value" });
      this.slider.addEventListener("input", () => this.drawCrossplot());
      this.body.replaceChildren(plot("pv-cross", "tall"),
        h("div", { class: "slider-row" }, h("label", { for: "pv-sweep-cov", class: "small" }, "Move along"), sel, this.slider, this.sliderLabel),
        h("div", { class: "readout small" }, "Solid: facies clouds and 2σ ellipses at location 1. Dashed: the 2σ ellipses at the slider's value; the thin line is the path of each facies mean."));
    }
  }

  /** Ask the API for the parts of the current view, for an unsaved document. */
  async refresh(doc, { cause = "edit" } = {}) {
    if (doc) this.doc = doc;
    if (!this.doc || !this.locations) return;
    const seq = ++this.seq;
    const t0 = performance.now();
    this.status.textContent = "computing…";
    const body = {
      document: this.doc, locations: this.locations, realisations: 200, parts: VIEWS[this.view].parts,
      sweep: { covariate: this.sweepCovariate, steps: 9 },
    };
    let res;
    try {
      [res] = await Promise.all([api.post(`/scenarios/${this.scenarioId}/preview`, body), loadPlotly()]);
    } catch (err) {
      if (seq !== this.seq) return;
      this.status.textContent = "";
      if (err instanceof ApiError && err.status === 422) {
        const unplaced = this.onErrors ? this.onErrors(err.errors) : err.errors;
        this.message.hidden = false;
        this.message.textContent = unplaced && unplaced.length
          ? `Preview not computed: ${err.detail}`
          : "Preview paused: fix the fields marked in the form.";
      } else {
        this.message.hidden = false;
        this.message.textContent = `Preview failed: ${err.message}`;
      }
      return;
    }
    if (seq !== this.seq) return;
    this.message.hidden = true;
    this.onErrors && this.onErrors([]);
    const t1 = performance.now();
    this.last = res;
    await this.drawAll();
    const t2 = performance.now();
    const entry = { view: this.view, cause, startedAt: t0, requestMs: t1 - t0, totalMs: t2 - t0, serverMs: res.timing_ms };
    metrics.preview.push(entry);
    this.status.textContent = `updated in ${Math.round(t2 - t0)} ms`;
    this.container.dataset.previewSeq = String(metrics.preview.length);
  }

  async drawAll() {
    const r = this.last;
    if (!r) return;
    if (this.view === "burial" && r.history) await this.drawHistory(r);
    if (this.view === "porosity" && r.porosity) await this.drawPorosity(r);
    if (this.view === "depth" && r.depth_trend) await this.drawDepth(r);
    if (this.view === "crossplot" && r.crossplot) {
      const sw = r.sweep;
      if (sw) {
        this.slider.max = String(sw.values.length - 1);
        if (Number(this.slider.value) > sw.values.length - 1) this.slider.value = "0";
      }
      await this.drawCrossplot();
    }
  }

  async drawHistory(r) {
    const ageAxis = axis("Age", "Ma", { autorange: "reversed" });
    const dTraces = [], tTraces = [], pTraces = [];
    r.history.forEach((hst, i) => {
      const dash = DASHES[i];
      const name = `location ${i + 1}`;
      dTraces.push({ x: hst.ages_ma, y: hst.depth_m, mode: "lines+markers", marker: { size: 4 }, line: { color: UI.ink, dash, width: 1.6 }, name,
        hovertemplate: "%{x:.1f} Ma<br>%{y:.0f} m<extra>" + name + "</extra>" });
      tTraces.push({ x: hst.ages_ma, y: hst.temperature_c, mode: "lines+markers", marker: { size: 4 }, line: { color: UI.rust, dash, width: 1.6 }, name,
        hovertemplate: "%{x:.1f} Ma<br>%{y:.1f} °C<extra>" + name + "</extra>" });
      pTraces.push({ x: hst.ages_ma, y: hst.pore_pressure_mpa, mode: "lines", line: { color: UI.pressure, dash, width: 1.4 }, name: `pore pressure, ${name}`,
        hovertemplate: "%{x:.1f} Ma<br>%{y:.1f} MPa<extra>pore pressure</extra>" });
      pTraces.push({ x: hst.ages_ma, y: hst.effective_stress_mpa, mode: "lines", line: { color: UI.inkFaint, dash, width: 1.4 }, name: `effective stress, ${name}`,
        hovertemplate: "%{x:.1f} Ma<br>%{y:.1f} MPa<extra>effective stress</extra>" });
      if (hst.onset_age_ma !== null) {
        tTraces.push({ x: [hst.onset_age_ma], y: [hst.cement_onset_c], mode: "markers", marker: { symbol: "diamond", size: 8, color: UI.onset },
          name: "onset", hovertemplate: `cement onset at %{x:.1f} Ma (${hst.cement_onset_c} °C)<extra>${name}</extra>` });
      }
    });
    const onset = r.history[0].cement_onset_c;
    const onsetLine = { type: "line", xref: "paper", x0: 0, x1: 1, y0: onset, y1: onset, line: { color: UI.onset, width: 1, dash: "dot" } };
    await Promise.all([
      draw(document.getElementById("pv-depth"), dTraces, layout({ title: "Burial depth", xaxis: ageAxis, yaxis: axis("Depth", "m", { autorange: "reversed" }) })),
      draw(document.getElementById("pv-temp"), tTraces, layout({ title: "Temperature", xaxis: ageAxis, yaxis: axis("Temperature", "degC"), shapes: [onsetLine],
        annotations: [{ xref: "paper", x: 0.02, y: onset, yanchor: "bottom", showarrow: false, text: `cement onset ${onset} °C`, font: { size: 10, color: UI.onset } }] })),
      draw(document.getElementById("pv-pressure"), pTraces, layout({ title: "Pore pressure and effective stress", xaxis: ageAxis, yaxis: axis("Pressure", "MPa"), showlegend: true })),
    ]);
    const facts = document.getElementById("pv-facts");
    facts.replaceChildren(...r.history.map((hst, i) => h("div", { class: "tabular" },
      `Location ${i + 1}: maximum burial ${fmt(hst.max_depth_m, { digits: 5 })} m, maximum temperature ${fmt(hst.max_temperature_c, { digits: 4 })} °C, `,
      hst.onset_age_ma === null ? `never reaches the cement onset (${hst.cement_onset_c} °C)`
        : `cement onset reached at ${fmt(hst.onset_age_ma, { digits: 3 })} Ma, ${fmt(hst.time_above_onset_myr, { digits: 3 })} Myr above it`,
      `; present pore pressure ${fmt(hst.pore_pressure_mpa[hst.pore_pressure_mpa.length - 1], { digits: 4 })} MPa.`)));
  }

  async drawPorosity(r) {
    const ageAxis = axis("Age", "Ma", { autorange: "reversed" });
    const phi = [], cem = [];
    const colours = ["#2c5d6b", "#5b7f3a", "#7a4f8a"];
    r.porosity.forEach((loc, i) => {
      const dash = DASHES[i];
      loc.sands.forEach((s, k) => {
        const c = colours[k % colours.length];
        const name = `${s.name}${r.porosity.length > 1 ? `, location ${i + 1}` : ""}`;
        const [b1, l1] = band(s.ages_ma, s.porosity.q10, s.porosity.q50, s.porosity.q90, { colour: c, fill: withAlpha(c, i ? 0.08 : 0.18), name,
          hover: "%{x:.1f} Ma<br>porosity %{y:.3f}<extra>" + name + "</extra>" });
        l1.line.dash = dash;
        phi.push(b1, l1);
        const [b2, l2] = band(s.ages_ma, s.cement.q10, s.cement.q50, s.cement.q90, { colour: c, fill: withAlpha(c, i ? 0.08 : 0.18), name,
          hover: "%{x:.1f} Ma<br>quartz cement %{y:.3f}<extra>" + name + "</extra>" });
        l2.line.dash = dash;
        cem.push(b2, l2);
      });
      const cap = loc.cap_rock;
      const [b3, l3] = band(cap.ages_ma, cap.porosity.q10, cap.porosity.q50, cap.porosity.q90, { colour: UI.inkFaint, fill: withAlpha("#78838a", 0.12), name: "cap-rock shale",
        hover: "%{x:.1f} Ma<br>porosity %{y:.3f}<extra>cap-rock shale</extra>" });
      l3.line.dash = dash;
      phi.push(b3, l3);
    });
    const onsetAges = (r.history || []).map((x) => x.onset_age_ma).filter((x) => x !== null);
    const shapes = onsetAges.map((a) => ({ type: "line", yref: "paper", y0: 0, y1: 1, x0: a, x1: a, line: { color: UI.onset, width: 1, dash: "dot" } }));
    await Promise.all([
      draw(document.getElementById("pv-phi"), phi, layout({ title: "Porosity", xaxis: ageAxis, yaxis: axis("Porosity", "fraction", { rangemode: "tozero" }), shapes,
        showlegend: true, legend: { orientation: "h", y: -0.3, font: { size: 10 } } })),
      draw(document.getElementById("pv-cement"), cem, layout({ title: "Quartz cement", xaxis: ageAxis, yaxis: axis("Cement", "fraction", { rangemode: "tozero" }), shapes })),
    ]);
    const s = r.porosity[0].sands[0];
    const facts = document.getElementById("pv-facts");
    if (s) {
      const n = s.ages_ma.length - 1;
      facts.textContent = `Location 1, ${s.name} (${s.facies.join(", ") || "no facies"}): present porosity ${fmt(s.porosity.q50[n], { digits: 3 })} ` +
        `(10–90 %: ${fmt(s.porosity.q10[n], { digits: 3 })}–${fmt(s.porosity.q90[n], { digits: 3 })}), quartz cement ${fmt(s.cement.q50[n], { digits: 3 })} of bulk volume. ` +
        `Dotted line: onset of cementation (${r.porosity[0].cement_onset_c} °C). Bands: 10th to 90th percentile over ${r.realisations} realisations.`;
    }
  }

  async drawDepth(r) {
    const d = r.depth_trend;
    const depthAxis = axis("Present depth", "m", { autorange: "reversed" });
    const traces = { vp: [], vs: [], density: [] };
    d.facies.forEach((f, j) => {
      const c = faciesColour(j);
      for (const key of ["vp", "vs", "density"]) {
        const unit = key === "density" ? "g/cm³" : "m/s";
        const [b, l] = band(d.depth_m, f[key].q10, f[key].q50, f[key].q90, { colour: c, fill: withAlpha(c, 0.15), name: f.name, horizontal: true,
          hover: `%{y:.0f} m<br>%{x:.${key === "density" ? 3 : 0}f} ${unit}<extra>${f.name}</extra>` });
        traces[key].push(b, l);
      }
    });
    const lay = (title, name, unit) => layout({ title, xaxis: axis(name, unit), yaxis: depthAxis });
    document.getElementById("pv-legend").replaceChildren(...faciesLegend(d.facies.map((f) => f.name)));
    await Promise.all([
      draw(document.getElementById("pv-vp"), traces.vp, lay("Vp", "Vp", "m/s")),
      draw(document.getElementById("pv-vs"), traces.vs, lay("Vs", "Vs", "m/s")),
      draw(document.getElementById("pv-rho"), traces.density, lay("Density", "Density", "g/cm3")),
    ]);
  }

  async drawCrossplot() {
    const r = this.last;
    if (!r || !r.crossplot) return;
    const cp = r.crossplot, sw = r.sweep;
    const k = Number(this.slider.value);
    const traces = [];
    const xl = ATTRIBUTE_LABELS[cp.x][0], yl = ATTRIBUTE_LABELS[cp.y][0];
    const xu = unitLabel(cp.x_unit), yu = unitLabel(cp.y_unit);
    cp.facies.forEach((f, j) => {
      const c = faciesColour(j);
      // At most 150 points per facies are drawn (SVG stays quick); the ellipse uses all.
      traces.push({ x: f.x.slice(0, 150), y: f.y.slice(0, 150), mode: "markers", type: "scatter", marker: { size: 3, color: withAlpha(c, 0.4) }, name: f.name,
        hovertemplate: `${cp.x} %{x:.4g} ${xu}<br>${cp.y} %{y:.4g} ${yu}<extra>${f.name}</extra>`, showlegend: false });
      traces.push({ x: f.ellipse.x, y: f.ellipse.y, mode: "lines", line: { color: c, width: 2 }, name: f.name, hoverinfo: "skip", showlegend: true });
    });
    if (sw) {
      sw.facies.forEach((f, j) => {
        const c = faciesColour(j);
        // The path of the facies mean along the covariate; the slider's frame is the big dot.
        traces.push({ x: f.means.map((m) => m[0]), y: f.means.map((m) => m[1]), mode: "lines+markers", line: { color: c, width: 1 },
          marker: { size: f.means.map((_, i) => (i === k ? 9 : 3)), color: c, line: { color: "#fff", width: f.means.map((_, i) => (i === k ? 1 : 0)) } },
          customdata: sw.values, hovertemplate: `${covariateLabel(sw.covariate)} %{customdata} ${unitLabel(sw.unit)}<br>mean %{x:.4g}, %{y:.4g}<extra>${f.name}</extra>`, showlegend: false });
        const e = f.ellipses[k];
        traces.push({ x: e.x, y: e.y, mode: "lines", line: { color: c, width: 2, dash: "dash" }, hoverinfo: "skip", showlegend: false });
      });
      this.sliderLabel.textContent = `${covariateLabel(sw.covariate)}: ${fmt(sw.values[k])} ${unitLabel(sw.unit)}`;
      this.slider.setAttribute("aria-valuetext", this.sliderLabel.textContent);
    }
    // Fixed axes over the clouds and every slider frame, so the ellipses move, not the axes.
    const xs = [], ys = [];
    cp.facies.forEach((f) => { xs.push(...f.ellipse.x, ...f.x.slice(0, 150)); ys.push(...f.ellipse.y, ...f.y.slice(0, 150)); });
    if (sw) sw.facies.forEach((f) => f.ellipses.forEach((e) => { xs.push(...e.x); ys.push(...e.y); }));
    const span = (v) => {
      const fin = v.filter((a) => a !== null && Number.isFinite(a));
      const lo = Math.min(...fin), hi = Math.max(...fin), pad = 0.04 * (hi - lo || 1);
      return [lo - pad, hi + pad];
    };
    const noise = cp.noise.x && cp.noise.y ? "with seismic noise" : "noise-free where not a scenario attribute";
    await draw(document.getElementById("pv-cross"), traces, layout({
      title: `${xl} against ${yl} at location 1 (${r.realisations} realisations per facies, ${noise})`,
      xaxis: axis(xl, cp.x_unit, { range: span(xs) }), yaxis: axis(yl, cp.y_unit, { range: span(ys) }), showlegend: true,
      legend: { orientation: "h", y: -0.2, font: { size: 10.5 } } }));
  }
}
