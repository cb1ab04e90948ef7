// Runs of a scenario: start with one click, follow progress, cancel, read failures.

import { api, ApiError } from "./api.js";
import { h, fmtTime, fmtBytes, errorText, toast, SECTION_LABELS } from "./shell.js";
import { ATTRIBUTE_LABELS, COVARIATES, covariateLabel } from "./fields.js";

export const RUN_KINDS = [
  ["classify", "Simulate and classify maps"],
  ["simulate", "Simulate training data only"],
  ["calibrate", "Blind test at the wells"],
  ["summarise", "Risk summary of prospects"],
  ["sensitivity", "Sensitivity of prospect risk (tornado)"],
];
const FINAL = new Set(["succeeded", "failed", "cancelled"]);

export function etaText(seconds) {
  if (seconds === null || seconds === undefined || !Number.isFinite(seconds)) return "";
  if (seconds < 60) return `about ${Math.max(1, Math.round(seconds))} s left`;
  return `about ${Math.round(seconds / 60)} min left`;
}

export function statusChip(status) {
  const cls = { succeeded: "ok", failed: "bad", cancelled: "warn", running: "info", queued: "" }[status] || "";
  return h("span", { class: `chip ${cls}`, "data-testid": "run-status" }, status);
}

export class RunsPanel {
  /** `getDocument()` gives the saved document (runs use saved revisions only). */
  constructor({ container, scenario, role, getDocument }) {
    Object.assign(this, { container, scenario, role, getDocument });
    this.timers = {};
    this.available = true;
    this.grids = [];
    this.wells = [];
    this.prospects = [];
    this.loaded = false; // the project's maps, wells and prospects are in
    this.build();
  }

  /** Grid whose name or attribute is `name`, for the default choice. */
  match(name, kind) {
    const ok = this.grids.filter((g) => !kind || g.kind === kind);
    return ok.find((g) => g.name === name) || ok.find((g) => name in (g.stats || {})) || null;
  }

  renderInputs() {
    const kind = this.kind.value;
    const doc = this.getDocument();
    const rows = [];
    this.inputs = {};
    const gridSelect = (id, label, wanted, only = null) => {
      const def = this.match(wanted, only);
      const sel = h("select", { id, "aria-label": label }, h("option", { value: "" }, "choose…"),
        this.grids.filter((g) => !only || g.kind === only).map((g) => h("option", { value: g.id, selected: def && def.id === g.id }, `${g.name} (${g.kind})`)));
      rows.push(h("label", { for: id, class: "small" }, label), sel);
      return sel;
    };
    if ((kind === "classify" || kind === "sensitivity") && doc) {
      const what = kind === "classify" ? "map or cube" : "map";
      this.inputs.attributes = Object.fromEntries(doc.rockphysics.seismic.attributes.map((a) =>
        [a, gridSelect(`run-attr-${a}`, `${ATTRIBUTE_LABELS[a][0]}: ${what}`, a, kind === "sensitivity" ? "map" : null)]));
      const varying = COVARIATES.filter((c) => doc.burial.covariates[c].nodes.length > 1);
      this.inputs.covariates = Object.fromEntries(varying.map((c) => [c, gridSelect(`run-cov-${c}`, `${covariateLabel(c)}: map`, c, "map")]));
    }
    if (kind === "sensitivity") this.sensitivityInputs(rows, doc);
    if (kind === "calibrate") {
      const sel = h("select", { id: "run-well", "aria-label": "Well for the blind test" },
        this.wells.map((w) => h("option", { value: w.id }, w.name)));
      rows.push(h("label", { for: "run-well", class: "small" }, "Well"), sel);
      this.inputs.well = sel;
    }
    this.inputBox.replaceChildren(...rows);
    this.inputBox.hidden = rows.length === 0;
  }

  /** Inputs of a sensitivity run: prospects, realisations, swing quantiles, the other inputs. */
  sensitivityInputs(rows, doc) {
    const inputs = this.inputs;
    const row = (id, label, el, help) => {
      rows.push(h("label", { for: id, class: "small" }, label), help ? h("div", { class: "row" }, el, h("span", { class: "help" }, help)) : el);
      return el;
    };
    inputs.prospects = row("run-prospects", "Prospects", h("select", { id: "run-prospects", multiple: true, size: Math.min(4, Math.max(2, this.prospects.length)),
      "aria-label": "Prospects of the sensitivity run" }, this.prospects.map((p) => h("option", { value: p.id, selected: true }, p.name))),
    this.prospects.length ? "all (or none) selected: every prospect of the project" : "the project has no prospect outline yet");
    const number = (id, label, value, attrs, help) => row(id, label, h("input", { id, type: "number", value, ...attrs, "aria-label": label }), help);
    inputs.realisations = number("run-realisations", "Realisations per facies and node", "", { min: 10, max: 2000000, step: 10,
      placeholder: doc ? String(doc.realisations ?? "") : "" }, "empty: the scenario's; each of the 2 × inputs + 1 evaluations runs them all");
    inputs.low = number("run-low-q", "Low swing: quantile of each input", "0.1", { min: 0.001, max: 0.999, step: 0.05 }, "0 < low < high < 1");
    inputs.high = number("run-high-q", "High swing: quantile of each input", "0.9", { min: 0.001, max: 0.999, step: 0.05 });
    inputs.fix = row("run-fix-others", "Inputs not being swung", h("select", { id: "run-fix-others", "aria-label": "Inputs not being swung" },
      h("option", { value: "" }, "uncertain, as in the scenario"), h("option", { value: "mean" }, "fixed at their mean"),
      h("option", { value: "median" }, "fixed at their median")));
  }

  params() {
    const kind = this.kind.value;
    const val = (sel) => (sel && sel.value ? Number(sel.value) : null);
    const pick = (m) => Object.fromEntries(Object.entries(m || {}).map(([k, sel]) => [k, val(sel)]).filter(([, v]) => v !== null));
    if (kind === "classify") {
      return { attribute_grids: pick(this.inputs.attributes), covariate_grids: pick(this.inputs.covariates),
        prospect_ids: this.prospects.map((p) => p.id) };
    }
    if (kind === "sensitivity") {
      const i = this.inputs;
      const chosen = i.prospects ? [...i.prospects.selectedOptions].map((o) => Number(o.value)) : [];
      const out = { attribute_grids: pick(i.attributes), covariate_grids: pick(i.covariates),
        // all selected: every prospect of the project (the server resolves the list)
        prospect_ids: chosen.length === this.prospects.length ? [] : chosen };
      const num = (el) => (el && el.value.trim() !== "" ? Number(el.value) : null);
      if (num(i.realisations) !== null) out.realisations = num(i.realisations);
      if (num(i.low) !== null) out.low_quantile = num(i.low);
      if (num(i.high) !== null) out.high_quantile = num(i.high);
      if (i.fix && i.fix.value) out.fix_others = i.fix.value;
      return out;
    }
    if (kind === "calibrate") return { well_id: val(this.inputs.well) };
    return {};
  }

  build() {
    const canRun = this.role !== "viewer" && this.role !== "reviewer";
    // Both wait for the project's maps, wells and prospects (load): a run's inputs are chosen among them.
    this.kind = h("select", { id: "run-kind", "aria-label": "What to run", disabled: true, title: "Loading the project's maps, wells and prospects…" },
      RUN_KINDS.map(([k, l]) => h("option", { value: k }, l)));
    this.canRun = canRun;
    this.startBtn = h("button", { type: "button", class: "primary", id: "run-start", disabled: true, onclick: () => this.start() }, "Start run");
    this.kind.addEventListener("change", () => this.renderInputs());
    this.inputBox = h("div", { class: "fields", style: { gridTemplateColumns: "minmax(150px, 260px) minmax(200px, 360px)", marginBottom: "6px" }, hidden: true });
    this.note = h("div", { class: "small", role: "status", "aria-live": "polite", "data-testid": "run-note" });
    this.active = h("div", { "data-testid": "run-active" });
    this.list = h("div");
    this.container.replaceChildren(
      h("header", {}, h("h2", {}, "Runs"), h("div", { class: "right" }, this.kind, this.startBtn)),
      this.inputBox, this.note, this.active, this.list);
  }

  async load() {
    const pid = this.scenario.project_id;
    [this.grids, this.wells, this.prospects] = await Promise.all([api.get(`/projects/${pid}/grids`),
      api.get(`/projects/${pid}/wells`), api.get(`/projects/${pid}/prospects`)]).catch(() => [[], [], []]);
    if (!this.loaded) {
      // once: later reloads (after a start, at a run's end) keep what the user has typed
      this.loaded = true;
      this.kind.disabled = false;
      this.kind.removeAttribute("title");
      this.startBtn.disabled = !(this.canRun && this.available);
      this.renderInputs();
    }
    try {
      const runs = await api.get(`/projects/${this.scenario.project_id}/runs`);
      const mine = runs.filter((r) => r.scenario_id === this.scenario.id);
      this.renderList(mine);
      const live = mine.find((r) => !FINAL.has(r.status));
      if (live) this.follow(live.id);
    } catch (err) {
      if (err instanceof ApiError && (err.status === 404 || err.status === 405)) {
        this.available = false;
        this.startBtn.disabled = true;
        this.note.replaceChildren(h("span", { class: "muted" }, "Runs are not available on this server yet."));
      } else this.note.textContent = errorText(err);
    }
  }

  renderList(runs) {
    if (!runs.length) { this.list.replaceChildren(h("p", { class: "empty" }, "No runs of this scenario yet.")); return; }
    this.list.replaceChildren(h("table", {},
      h("thead", {}, h("tr", {}, h("th", {}, "Run"), h("th", {}, "Kind"), h("th", {}, "Rev."), h("th", {}, "Seed"), h("th", {}, "Status"), h("th", {}, "Started"))),
      h("tbody", {}, runs.slice(0, 10).map((r) => h("tr", {},
        h("td", {}, h("a", { href: `/results.html?run=${r.id}` }, `#${r.id}`)),
        h("td", {}, r.kind), h("td", { class: "num" }, r.revision), h("td", { class: "num" }, r.seed ?? "–"),
        h("td", {}, statusChip(r.status)), h("td", { class: "num" }, fmtTime(r.started_at || r.created_at)))))));
  }

  async start(override = false) {
    const body = { kind: this.kind.value, params: this.params() };
    if (override) body.override_readiness = true;
    this.startBtn.disabled = true;
    this.note.textContent = "";
    try {
      const run = await api.post(`/scenarios/${this.scenario.id}/runs`, body);
      toast(`Run #${run.id} queued.`);
      this.follow(run.id);
      this.load();
    } catch (err) {
      if (err instanceof ApiError && err.status === 409 && err.errors.length) {
        const names = err.errors.map((e) => SECTION_LABELS[e.loc] || e.loc).join(", ");
        this.note.replaceChildren(h("span", { class: "field-error" }, `Not every section is marked ready (${names}). `),
          this.role === "owner" ? h("button", { type: "button", class: "link", onclick: () => this.start(true) }, "Run anyway (owner override)") : null);
      } else {
        this.note.replaceChildren(h("span", { class: "field-error" }, `The run could not start: ${errorText(err)}`));
      }
    } finally {
      this.startBtn.disabled = !(this.canRun && this.available);
    }
  }

  follow(runId) {
    clearTimeout(this.timers[runId]);
    const tick = async () => {
      let run;
      try { run = await api.get(`/runs/${runId}`); } catch (err) { this.note.textContent = errorText(err); return; }
      this.renderActive(run);
      if (!FINAL.has(run.status)) this.timers[runId] = setTimeout(tick, 700);
      else this.load();
    };
    tick();
  }

  renderActive(run) {
    const total = run.progress_total || 0;
    const pct = total ? Math.min(100, Math.round((100 * (run.progress_current || 0)) / total)) : (run.status === "succeeded" ? 100 : 0);
    const bar = h("div", { class: "progress", role: "progressbar", "aria-valuemin": 0, "aria-valuemax": 100, "aria-valuenow": pct,
      "aria-label": `Run ${run.id} progress` }, h("div", { style: { width: `${pct}%` } }));
    const live = !FINAL.has(run.status);
    this.active.replaceChildren(h("div", { class: "panel", style: { margin: "6px 0", background: "#fff" }, "data-run": run.id },
      h("div", { class: "run-line" }, h("strong", {}, `Run #${run.id}`), statusChip(run.status),
        h("span", { class: "muted" }, `${run.kind}, revision ${run.revision}${run.seed !== undefined ? `, seed ${run.seed}` : ""}`),
        live ? h("button", { type: "button", class: "danger", style: { marginLeft: "auto" }, onclick: () => this.cancel(run.id) }, "Cancel") : null),
      bar,
      h("div", { class: "run-line small" },
        h("span", { "data-testid": "run-stage" }, run.stage ? `Stage: ${run.stage}` : live ? "Waiting for a worker…" : ""),
        total ? h("span", { class: "num" }, `${pct} %`) : null,
        live ? h("span", { class: "muted", "data-testid": "run-eta" }, etaText(run.eta_seconds)) : null),
      run.status === "failed" ? h("div", { class: "notice bad", "data-testid": "run-error" }, `Failed: ${run.error || "no reason given"}`) : null,
      run.status === "succeeded" ? h("div", { class: "run-line" },
        h("a", { class: "button primary", href: `/results.html?run=${run.id}`, "data-testid": "open-results" }, "Open results"),
        (run.artefacts || []).map((a) => h("a", { href: a.url, class: "small" }, `${a.name} (${fmtBytes(a.size_bytes)})`))) : null));
  }

  async cancel(runId) {
    try {
      await api.post(`/runs/${runId}/cancel`, {});
      toast(`Cancel requested for run #${runId}.`);
    } catch (err) { toast(errorText(err), "bad"); }
  }
}
