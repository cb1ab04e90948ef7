// Results of a run: facies maps with hover read-outs and prospect outlines, a section
// through the cube, logs beside predicted facies at a well, the blind-test matrix, and the
// tornado charts and first-order indices of a sensitivity run.

import { api, ApiError } from "./api.js";
import { startPage, setCrumbs, h, param, fmt, fmtTime, fmtBytes, toast, errorText, cautionBox, unitLabel } from "./shell.js";
import { draw, axis, layout, loadPlotly } from "./plots.js";
import { faciesColours, categoricalScale, SCALES, SWING, UI } from "./palette.js";
import { Comments } from "./comments.js";
import { etaText, statusChip } from "./runs.js";
import { COVARIATES, SECTION_SPECS, covariateLabel, covariateUnit } from "./fields.js";

const runId = Number(param("run"));
await startPage([["Projects", "/projects.html"], [`Run #${runId}`]]);
document.getElementById("caution").append(cautionBox());

const run = await api.get(`/runs/${runId}`);
const scenario = await api.get(`/scenarios/${run.scenario_id}`);
const project = await api.get(`/projects/${scenario.project_id}`);
const result = run.result || {};
const succeeded = run.status === "succeeded";
/** "map", "cube" or null: what a classify run classified. */
const input = run.kind === "classify" ? (result.input || null) : null;
const KIND_LABELS = { classify: input === "cube" ? "cube classification" : "map classification",
  simulate: "forward model", calibrate: "blind test at a well", summarise: "risk summary",
  sensitivity: "sensitivity of prospect risk" };

setCrumbs([["Projects", "/projects.html"], [project.name, `/project.html?id=${project.id}`],
  [scenario.name, `/scenario.html?id=${scenario.id}`], [`Run #${runId}`]]);
document.getElementById("run-title").textContent = `Run #${runId}: ${scenario.name}`;
document.getElementById("run-sub").replaceChildren(statusChip(run.status),
  ` ${KIND_LABELS[run.kind] || run.kind}, revision ${run.revision}${run.seed !== undefined && run.seed !== null ? `, seed ${run.seed}` : ""}, started ${fmtTime(run.started_at || run.created_at)}`);
document.getElementById("back-scenario").href = `/scenario.html?id=${scenario.id}`;

const runState = document.getElementById("run-state");
if (!succeeded) {
  runState.append(h("div", { class: `notice ${run.status === "failed" ? "bad" : "warn"}` },
    run.status === "failed" ? `This run failed: ${run.error || "no reason given"}` :
      run.status === "cancelled" ? `This run was cancelled${run.error ? ` (${run.error})` : ""}; it has no results.` :
        `This run is ${run.status}${run.stage ? ` (${run.stage}${run.eta_seconds ? `, ${etaText(run.eta_seconds)}` : ""})` : ""}; results appear when it has succeeded. Reload the page then.`));
} else if (run.kind === "simulate" || run.kind === "summarise") {
  runState.append(h("div", { class: "notice" }, run.kind === "simulate"
    ? "A forward-model run keeps training samples only: there is no map, section or well view. Its files are listed below."
    : h("span", {}, "A risk summary is read on the ", h("a", { href: `/manager.html?project=${project.id}` }, "manager view"), "; its tables are listed below.")));
}

const doc = project.role === "viewer" ? null : (await api.get(`/scenarios/${scenario.id}/document`).catch(() => null))?.document || null;
const nameOf = (f) => (typeof f === "string" ? f : f.name);
// Facies in the scenario's order (their colours follow that order everywhere).
const faciesList = (result.facies || result.labels || (doc ? doc.geology.facies : [])).map(nameOf);
const colours = faciesColours(faciesList);
const colourOf = (name) => colours[name] || UI.line;
const swatch = (colour) => h("span", { class: "swatch", style: { background: colour } });

const layers = [["most_likely", "Most likely facies"],
  ...faciesList.map((f) => [`posterior:${f}`, `Probability of ${f}`]),
  ["mahalanobis", "QC: Mahalanobis distance of the winner"], ["entropy", "Uncertainty: entropy"]];
const layerOptions = () => layers.map(([v, l]) => h("option", { value: v }, l));

/** Display name and unit of a layer; `unit` is the API's unit of that layer. */
function layerInfo(layer, unit = "") {
  if (layer === "most_likely") return { name: "most likely facies", short: "Facies", unit: "" };
  if (layer.startsWith("posterior:")) return { name: `P(${layer.slice(10)})`, short: `P(${layer.slice(10)})`, unit: "fraction" };
  if (layer === "mahalanobis") return { name: "Mahalanobis distance", short: "Mahalanobis distance", unit: unit.startsWith("standard deviations") ? "std. dev." : unit };
  return { name: "entropy", short: "Entropy", unit: unit.startsWith("fraction of the largest") ? "fraction of max." : unit };
}
const scaleOf = (layer) => (layer.startsWith("posterior:") ? SCALES.probability : layer === "entropy" ? SCALES.entropy : SCALES.mahalanobis);
const colourbar = (info) => ({ title: { text: `${info.short}${info.unit ? ` (${unitLabel(info.unit)})` : ""}`, side: "right", font: { size: 10.5 } }, thickness: 12 });
const withU = (v, unit, opts) => `${fmt(v, opts)}${unit ? ` ${unitLabel(unit)}` : ""}`;

/** Why a view could not be shown; `what` names it ("the section of this layer"). */
function failureText(err, what) {
  if (err instanceof ApiError && err.status === 403) return `Your role in this project (${project.role}) shows run summaries only, not ${what}.`;
  if (err instanceof ApiError && err.status === 404) return `This run has no file for ${what}.`;
  return `Could not show ${what}: ${errorText(err)}`;
}

// ---------------------------------------------------------------- map of a map classification

const layerSelect = document.getElementById("layer");
layerSelect.replaceChildren(...layerOptions());
const prospects = input === "map" ? await api.get(`/projects/${project.id}/prospects`).catch(() => []) : [];
const comments = new Comments({ projectId: project.id, scenarioId: scenario.id, container: document.getElementById("pins"),
  canComment: project.role !== "viewer", filter: (c) => c.x !== null && c.x !== undefined, onChange: () => drawMap() });
let mapData = null;

async function loadMap() {
  const layer = layerSelect.value;
  try {
    mapData = await api.get(`/runs/${runId}/map?layer=${encodeURIComponent(layer)}`);
  } catch (err) {
    mapData = null;
    document.getElementById("map-readout").textContent = failureText(err, "the map of this layer");
    return false;
  }
  await drawMap();
  return true;
}

async function drawMap() {
  if (!mapData) return;
  await loadPlotly();
  const layer = layerSelect.value;
  const info = layerInfo(layer, mapData.unit);
  const names = (mapData.facies || faciesList).map(nameOf);
  const traces = [];
  let hm;
  if (layer === "most_likely") {
    const cols = names.map(colourOf);
    const labels = mapData.z.map((row) => row.map((v) => (v === null || v < 0 ? "no data" : names[v])));
    hm = { type: "heatmap", x: mapData.x, y: mapData.y, z: mapData.z, zmin: -0.5, zmax: names.length - 0.5,
      colorscale: categoricalScale(cols), showscale: false, text: labels,
      hovertemplate: "x %{x:.0f} m<br>y %{y:.0f} m<br>%{text}<extra></extra>" };
    document.getElementById("map-legend").replaceChildren(...names.map((n) => h("span", { style: { marginRight: "12px" } },
      swatch(colourOf(n)), n)));
  } else {
    hm = { type: "heatmap", x: mapData.x, y: mapData.y, z: mapData.z, colorscale: scaleOf(layer),
      zmin: layer.startsWith("posterior:") ? 0 : undefined, zmax: layer.startsWith("posterior:") ? 1 : undefined,
      colorbar: colourbar(info),
      hovertemplate: `x %{x:.0f} m<br>y %{y:.0f} m<br>${info.name} %{z:.3f}<extra>${info.unit ? unitLabel(info.unit) : ""}</extra>` };
    document.getElementById("map-legend").textContent = "";
  }
  traces.push(hm);
  if (document.getElementById("show-outlines").checked) {
    for (const p of prospects) {
      const ring = [...p.outline, p.outline[0]];
      traces.push({ x: ring.map((v) => v[0]), y: ring.map((v) => v[1]), mode: "lines", line: { color: UI.outline, width: 2 },
        name: p.name, hovertemplate: `${p.name}<br>area ${fmt(p.area_m2 / 1e6, { digits: 3 })} km²<extra></extra>` });
      const cx = p.outline.reduce((s, v) => s + v[0], 0) / p.outline.length;
      const cy = p.outline.reduce((s, v) => s + v[1], 0) / p.outline.length;
      traces.push({ x: [cx], y: [cy], mode: "text", text: [p.name], textfont: { size: 11, color: UI.outline }, hoverinfo: "skip" });
    }
  }
  if (document.getElementById("show-pins").checked) {
    const pins = comments.threads().map((t) => t.root).filter((c) => c.x !== null && c.x !== undefined && !c.resolved_at);
    traces.push({ x: pins.map((c) => c.x), y: pins.map((c) => c.y), mode: "markers", marker: { symbol: "diamond", size: 11, color: UI.pin, line: { color: "#fff", width: 1.5 } },
      text: pins.map((c) => `${c.author}: ${c.body.slice(0, 80)}`), hovertemplate: "%{text}<extra>comment</extra>", name: "comments" });
  }
  const el = document.getElementById("map");
  await draw(el, traces, layout({ xaxis: axis("x", "m", { tickformat: ".0f" }), yaxis: axis("y", "m", { scaleanchor: "x", tickformat: ".0f" }), margin: { l: 70, r: 10, t: 8, b: 40 } }));
  if (!el.dataset.bound) {
    el.dataset.bound = "1";
    el.on("plotly_hover", (ev) => {
      const pt = ev.points.find((p) => p.data.type === "heatmap");
      if (!pt) return;
      const v = pt.z;
      const lay = layerSelect.value;
      const i = layerInfo(lay, mapData.unit);
      const text = lay === "most_likely" ? (v === null || v < 0 ? "no data" : (mapData.facies || faciesList).map(nameOf)[v]) : withU(v, i.unit, { digits: 3 });
      document.getElementById("map-readout").textContent = `x ${fmt(pt.x, { fixed: 0 })} m, y ${fmt(pt.y, { fixed: 0 })} m: ${i.name} ${text}`;
    });
    el.on("plotly_click", (ev) => {
      const pt = ev.points[0];
      if (!pt) return;
      comments.compose({ x: Number(pt.x), y: Number(pt.y), label: `map x ${fmt(pt.x, { fixed: 0 })} m, y ${fmt(pt.y, { fixed: 0 })} m (run #${runId})` });
    });
  }
}

layerSelect.addEventListener("change", loadMap);
document.getElementById("show-outlines").addEventListener("change", drawMap);
document.getElementById("show-pins").addEventListener("change", drawMap);

// ---------------------------------------------------------------- section through a cube

const secLayer = document.getElementById("sec-layer");
secLayer.replaceChildren(...layerOptions());
const lineSelect = document.getElementById("line");
const sectionEl = document.getElementById("section");
const sectionReadout = document.getElementById("section-readout");
let cube = null; // geometry of the first attribute cube (line numbers, coordinates), if readable
let section = null;
let sectionSeq = 0;
let wantedLine = null; // the line last asked for (quick clicks step on from it, not from the drawn one)

async function loadCubeGeometry() {
  const first = Object.values((run.parameters || {}).attribute_grids || {})[0];
  if (first === undefined) return;
  try { cube = (await api.get(`/grids/${first}`)).geometry; } catch { cube = null; /* the section still draws, by trace index */ }
}

/** SEG-Y numbers of the lines (axis 0) and of the traces along them (axis 1), if known. */
function lineNumbers() {
  if (!cube || !cube.sorting || !cube.inlines || !cube.crosslines) return null;
  return cube.sorting === "inline" ? { line: "inline", lines: cube.inlines, trace: "crossline", traces: cube.crosslines }
    : { line: "crossline", lines: cube.crosslines, trace: "inline", traces: cube.inlines };
}
function lineName(i, n) {
  const nums = lineNumbers();
  return nums ? `${nums.line} ${nums.lines[i]}` : `line ${i + 1} of ${n}`;
}
function traceName(k) {
  const nums = lineNumbers();
  return nums && nums.traces[k] !== undefined ? `${nums.trace} ${nums.traces[k]}` : `trace ${k + 1}`;
}
/** Horizontal axis of a section: map x (m) for an unrotated georeferenced cube, distance along the line for a rotated one, else the trace. */
function sectionX(s) {
  if (cube && cube.georeferenced === false) return { title: axis("Trace along the line", ""), x: s.x.map((_, i) => i * s.stride[0] + 1), unit: "", name: "trace" };
  const rot = cube ? Number(cube.rotation_deg || 0) : 0;
  if (Math.abs(rot) < 1e-9) return { title: axis("x", "m", { tickformat: ".0f" }), x: s.x, unit: "m", name: "x" };
  const x0 = s.x[0];
  return { title: axis(`Distance along the line (line azimuth ${fmt(90 - rot, { digits: 4 })}°)`, "m", { tickformat: ".0f" }), x: s.x.map((v) => v - x0), unit: "m", name: "distance" };
}

function fillLines(n, current) {
  if (lineSelect.options.length !== n) {
    lineSelect.replaceChildren(...Array.from({ length: n }, (_, i) => h("option", { value: i }, lineName(i, n))));
  }
  lineSelect.value = String(current);
  document.getElementById("line-prev").disabled = current <= 0;
  document.getElementById("line-next").disabled = current >= n - 1;
}

async function loadSection(line) {
  const layer = secLayer.value;
  const seq = ++sectionSeq;
  const note = document.getElementById("section-note");
  const q = new URLSearchParams({ layer });
  if (line !== undefined && line !== null) { q.set("line", String(line)); wantedLine = line; }
  let s;
  try {
    s = await api.get(`/runs/${runId}/section?${q}`);
  } catch (err) {
    if (seq !== sectionSeq) return;
    section = null;
    note.textContent = "";
    sectionReadout.textContent = "";
    document.getElementById("section-legend").replaceChildren();
    if (err instanceof ApiError && err.status === 403) {
      document.querySelector("#section-panel > header .right").hidden = true; // no choice to make
    }
    if (window.Plotly && sectionEl.classList.contains("js-plotly-plot")) window.Plotly.purge(sectionEl);
    sectionEl.classList.add("plot-empty");
    sectionEl.replaceChildren(h("p", { class: "empty" }, failureText(err, "the section of this layer")));
    delete sectionEl.dataset.line;
    delete sectionEl.dataset.layer;
    delete sectionEl.dataset.bound; // purged with its handlers
    return;
  }
  if (seq !== sectionSeq) return; // a later choice is on its way
  section = s;
  wantedLine = s.line;
  await drawSection();
}

async function drawSection() {
  const s = section;
  const info = layerInfo(s.layer, s.unit);
  const names = (s.facies || faciesList).map(nameOf);
  const sx = sectionX(s);
  const time = (s.y_unit || "ms") === "ms";
  const yName = time ? "Two-way time" : "Depth";
  const yUnit = s.y_unit || (time ? "ms" : "m");
  const xFmt = sx.unit ? `${sx.name} %{x:.0f} ${sx.unit}` : "trace %{x}";
  const n = s.n_lines;
  fillLines(n, s.line);
  document.getElementById("section-where").textContent = `${lineName(s.line, n)}${lineNumbers() ? ` (line ${s.line + 1} of ${n})` : ""}`;
  let hm;
  const legend = document.getElementById("section-legend");
  if (s.kind === "most_likely") {
    const labels = s.z.map((row) => row.map((v) => (v === null || v < 0 ? "no data" : names[v])));
    hm = { type: "heatmap", x: sx.x, y: s.y, z: s.z, zmin: -0.5, zmax: names.length - 0.5,
      colorscale: categoricalScale(names.map(colourOf)), showscale: false, text: labels,
      hovertemplate: `${xFmt}<br>%{y:.0f} ${yUnit}<br>%{text}<extra></extra>` };
    const counts = names.map(() => 0);
    let total = 0;
    for (const row of s.z) for (const v of row) if (v !== null && v >= 0) { counts[v] += 1; total += 1; }
    legend.replaceChildren(h("span", { class: "muted" }, "Share of this section: "), ...names.map((nm, j) => h("span", { style: { marginRight: "12px" }, "data-facies": nm },
      swatch(colourOf(nm)), `${nm} ${total ? fmt((100 * counts[j]) / total, { digits: 3 }) : "–"} %`)));
  } else {
    hm = { type: "heatmap", x: sx.x, y: s.y, z: s.z, colorscale: scaleOf(s.layer),
      zmin: s.kind === "posterior" ? 0 : undefined, zmax: s.kind === "posterior" ? 1 : undefined, colorbar: colourbar(info),
      hovertemplate: `${xFmt}<br>%{y:.0f} ${yUnit}<br>${info.name} %{z:.3f}${info.unit ? ` ${unitLabel(info.unit)}` : ""}<extra></extra>` };
    legend.replaceChildren();
  }
  legend.hidden = s.kind !== "most_likely";
  if (!sectionEl.classList.contains("js-plotly-plot")) sectionEl.replaceChildren(); // an empty-state message
  sectionEl.classList.remove("plot-empty");
  await draw(sectionEl, [hm], layout({ xaxis: sx.title, yaxis: axis(yName, yUnit, { autorange: "reversed", tickformat: ".0f" }),
    margin: { l: 64, r: 10, t: 30, b: 44 } }));
  document.getElementById("section-note").textContent = `${s.shape[1]} traces × ${s.shape[2]} samples per line, ${s.stride[1] > 1 ? `every ${s.stride[1]}th sample` : "every sample"}${s.stride[0] > 1 ? ` of every ${s.stride[0]}th trace` : ""} shown.` +
    (s.kind === "most_likely" ? " Facies keep their colours on every map and section of the scenario." : "");
  sectionEl.dataset.line = String(s.line);
  sectionEl.dataset.layer = s.layer;
  sectionReadout.textContent = "Point at the section for values.";
  if (!sectionEl.dataset.bound) {
    sectionEl.dataset.bound = "1";
    sectionEl.on("plotly_hover", (ev) => {
      const pt = ev.points.find((p) => p.data.type === "heatmap");
      if (!pt || !section) return;
      const cur = section;
      const [row, col] = Array.isArray(pt.pointNumber) ? pt.pointNumber : [pt.pointIndex?.[0], pt.pointIndex?.[1]];
      const i = layerInfo(cur.layer, cur.unit);
      const v = pt.z;
      const curNames = (cur.facies || faciesList).map(nameOf);
      const value = cur.kind === "most_likely" ? (v === null || v < 0 ? "no data" : curNames[v]) : withU(v, i.unit, { digits: 3 });
      const xs = sectionX(cur);
      const where = xs.unit ? `${xs.name} ${fmt(pt.x, { fixed: 0 })} ${xs.unit}` : `trace ${pt.x}`;
      const t = cur.y_unit || "ms";
      sectionReadout.textContent = `${lineName(cur.line, cur.n_lines)}, ${traceName(col * cur.stride[0])}, ${where}, ` +
        `${t === "ms" ? "time" : "depth"} ${fmt(pt.y, { fixed: 0 })} ${t}: ${i.name} ${value}`;
      sectionReadout.dataset.row = String(row);
      sectionReadout.dataset.col = String(col);
    });
  }
}

secLayer.addEventListener("change", () => loadSection(wantedLine));
lineSelect.addEventListener("change", () => loadSection(Number(lineSelect.value)));
function stepLine(by) {
  if (!section || wantedLine === null) return;
  const next = wantedLine + by;
  if (next < 0 || next >= section.n_lines) return;
  lineSelect.value = String(next);
  loadSection(next);
}
document.getElementById("line-prev").addEventListener("click", () => stepLine(-1));
document.getElementById("line-next").addEventListener("click", () => stepLine(1));

// ---------------------------------------------------------------- wells: logs beside predicted facies

const wellSelect = document.getElementById("well");
const calibrations = [];
const UNCLASSIFIED = "unclassified";

function parseCsv(text) {
  const [head, ...lines] = text.trim().split(/\r?\n/);
  const cols = head.split(",");
  const out = Object.fromEntries(cols.map((c) => [c, []]));
  for (const line of lines) {
    const cells = line.split(",");
    cols.forEach((c, i) => {
      const v = cells[i];
      const n = Number(v);
      out[c].push(v === "" || v === undefined ? null : Number.isFinite(n) && !/facies/.test(c) ? n : v);
    });
  }
  return out;
}

const artefact = (name) => (run.artefacts || []).find((a) => a.name === name);
async function fetchArtefact(name, as) {
  const res = await fetch(artefact(name).url, { credentials: "same-origin" });
  if (!res.ok) throw new ApiError(res.status, await res.json().catch(() => ({ detail: `HTTP ${res.status}` })));
  return as === "json" ? res.json() : res.text();
}
let wellProblem = null;
if (run.kind === "calibrate" && succeeded) {
  if (!artefact("calibration.json")) wellProblem = "This run kept no blind-test file (calibration.json).";
  else {
    try {
      const cal = await fetchArtefact("calibration.json", "json");
      if (artefact("well_facies.csv")) {
        const t = parseCsv(await fetchArtefact("well_facies.csv", "text"));
        cal.logs = { depth_m: t.depth_m, vp: t.vp_m_s, vs: t.vs_m_s, density: t.density_g_cm3, vshale: t.vshale, sw: t.sw,
          facies_cutoff: t.facies_cutoff, facies_predicted: t.facies_predicted };
      }
      calibrations.push(cal);
    } catch (err) { wellProblem = failureText(err, "the blind-test files"); }
  }
}
wellSelect.replaceChildren(...(calibrations.length ? calibrations.map((w, i) => h("option", { value: i }, w.well))
  : [h("option", { value: "" }, "no well")]));
wellSelect.disabled = calibrations.length < 2;
wellSelect.addEventListener("change", () => drawWell(calibrations[Number(wellSelect.value)]));

const TRACKS = [["vp", "Vp", "m/s"], ["vs", "Vs", "m/s"], ["density", "Density", "g/cm3"], ["vshale", "Vshale", "fraction"], ["sw", "Sw", "fraction"]];

async function drawTracks(w) {
  const z = w.logs.depth_m;
  const names = w.confusion.labels;
  const hasUnclassified = w.logs.facies_predicted.includes(UNCLASSIFIED);
  const all = hasUnclassified ? [...names, UNCLASSIFIED] : names;
  const cols = all.map(colourOf);
  const n = TRACKS.length + 2;
  const gap = 0.03;
  const width = (1 - gap * (n - 1)) / n;
  const dom = (i) => [i * (width + gap), i * (width + gap) + width];
  const traces = TRACKS.map(([k, label, unit], i) => ({ x: w.logs[k], y: z, mode: "lines", line: { color: UI.ink, width: 1 }, xaxis: `x${i + 1}`, yaxis: "y",
    name: label, hovertemplate: `%{y:.1f} m<br>${label} %{x:.4g} ${unitLabel(unit)}<extra></extra>` }));
  const strip = (list, i, title) => ({ type: "heatmap", z: list.map((f) => [all.indexOf(f) >= 0 ? all.indexOf(f) : null]), y: z, x: [0],
    xaxis: `x${i}`, yaxis: "y", zmin: -0.5, zmax: all.length - 0.5, colorscale: categoricalScale(cols), showscale: false,
    text: list.map((f) => [f]), name: title, hovertemplate: `%{y:.1f} m<br>${title}: %{text}<extra></extra>` });
  traces.push(strip(w.logs.facies_cutoff, TRACKS.length + 1, "facies from logs"), strip(w.logs.facies_predicted, TRACKS.length + 2, "predicted facies"));
  const lay = layout({ yaxis: axis("Depth", "m", { autorange: "reversed", tickformat: ".0f" }), margin: { l: 60, r: 8, t: 56, b: 12 } });
  TRACKS.forEach(([, label, unit], i) => {
    lay[`xaxis${i + 1}`] = axis(label, unit, { domain: dom(i), side: "top", anchor: "y", tickangle: 0,
      ...(unit === "fraction" ? { range: [-0.05, 1.05], tickvals: [0, 0.5, 1], tickformat: ".1f" } : { nticks: 3 }) });
  });
  [["Facies from logs", TRACKS.length + 1], ["Predicted facies", TRACKS.length + 2]].forEach(([title, i]) => {
    lay[`xaxis${i}`] = axis(title, "", { domain: dom(i - 1), side: "top", anchor: "y", showticklabels: false, ticks: "", showgrid: false, zeroline: false, fixedrange: true });
  });
  await draw(document.getElementById("tracks"), traces, lay);
  document.getElementById("well-legend").replaceChildren(...all.map((nm) => h("span", { style: { marginRight: "12px" } }, swatch(colourOf(nm)), nm)),
    h("span", { class: "faint" }, `Predicted facies on attributes blocked over ${fmt(w.cutoffs ? w.cutoffs.block_m : null)} m.`));
}

function confusionTable(w) {
  const c = w.confusion;
  const names = c.labels;
  const m = c.matrix;
  const rowTotals = m.map((row) => row.reduce((a, b) => a + b, 0));
  const colTotals = names.map((_, j) => m.reduce((a, row) => a + row[j], 0));
  const pct = (v) => (v === null || v === undefined ? "–" : `${fmt(100 * v, { digits: 3 })} %`);
  const head = (nm) => h("th", { class: "num", scope: "col" }, swatch(colourOf(nm)), nm);
  return h("table", { class: "confusion", "data-testid": "confusion" },
    h("caption", { class: "small muted" }, "Log samples, counted: rows are the facies from the log cut-offs, columns the facies the scenario predicts from the blocked attributes."),
    h("thead", {}, h("tr", {}, h("th", { scope: "col" }, "From logs ↓ / predicted →"), names.map(head),
      h("th", { class: "num", scope: "col" }, "Total"), h("th", { class: "num", scope: "col" }, "Recall"))),
    h("tbody", {}, m.map((row, i) => h("tr", { "data-facies": names[i] },
      h("th", { scope: "row" }, swatch(colourOf(names[i])), names[i]),
      row.map((v, j) => h("td", { class: `num${i === j ? " diag" : ""}`, "data-row": i, "data-col": j }, v)),
      h("td", { class: "num total" }, rowTotals[i]),
      h("td", { class: "num" }, rowTotals[i] ? pct(c.recall && c.recall[i]) : "–")))),
    h("tfoot", {}, h("tr", {}, h("th", { scope: "row" }, "Total"), colTotals.map((v) => h("td", { class: "num total" }, v)),
      h("td", { class: "num total" }, c.n_samples), h("td", {})),
    h("tr", {}, h("th", { scope: "row" }, "Precision"), names.map((_, j) => h("td", { class: "num" }, colTotals[j] ? pct(c.precision && c.precision[j]) : "–")), h("td", {}), h("td", {}))));
}

function covariateList(w) {
  const assumed = new Set((w.assumed || []).map((t) => t.split(" ")[0]));
  return h("ul", { class: "small plain" }, COVARIATES.filter((k) => w.covariates && k in w.covariates).map((k) =>
    h("li", {}, `${covariateLabel(k)}: ${withU(w.covariates[k], covariateUnit(k), { digits: 4 })}`,
      assumed.has(k) ? h("span", { class: "faint" }, " (assumed)") : null)));
}

async function drawWell(w) {
  const box = document.getElementById("confusion");
  const tracks = document.getElementById("tracks");
  if (!w) {
    tracks.replaceChildren(h("p", { class: "empty" }, wellProblem || "No blind test in this run."));
    box.replaceChildren();
    return;
  }
  if (w.logs) await drawTracks(w);
  else tracks.replaceChildren(h("p", { class: "empty" }, "This run kept no well logs (well_facies.csv), only the confusion matrix."));
  const c = w.confusion;
  const cut = w.cutoffs || {};
  const hc = (run.parameters || {}).hydrocarbon_facies || (doc ? (doc.geology.facies.find((f) => f.hydrocarbon) || {}).name : null);
  box.replaceChildren(confusionTable(w),
    h("p", { class: "small", "data-testid": "accuracy" }, `Accuracy ${c.accuracy === null ? "–" : `${fmt(100 * c.accuracy, { digits: 3 })} %`} over ${c.n_samples} log samples.`,
      w.grouped_confusion && w.grouped_confusion.accuracy !== null ? ` Cut-offs cannot tell oil from gas: scored as shale, brine sand and hydrocarbon sand, ${fmt(100 * w.grouped_confusion.accuracy, { digits: 3 })} %.` : ""),
    h("p", { class: "small muted" }, `Facies from logs by cut-offs: shale where Vshale > ${fmt(cut.vshale)} (frac.); otherwise hydrocarbon sand${hc ? ` (${hc})` : ""} where Sw < ${fmt(cut.sw)} (frac.), brine sand elsewhere. Attributes blocked over ${fmt(cut.block_m)} m.`),
    h("h3", {}, "Covariates at the well"), covariateList(w),
    ...(w.notes || []).map((t) => h("p", { class: "small faint" }, t)));
}

// ---------------------------------------------------------------- sensitivity: tornado charts, first-order indices

const OUTCOMES = {
  probability_hc: { name: "Probability of hydrocarbon", short: "P(hc)" },
  expected_area_km2: { name: "Expected hydrocarbon area", short: "expected hc area" },
};
/** Bars per chart at most; smaller swings are counted below the chart. */
const MAX_BARS = 12;

/** Field specs of the workspace forms by full scenario path (labels and units of the inputs). */
const INPUT_SPECS = Object.fromEntries(Object.entries(SECTION_SPECS).flatMap(([section, groups]) =>
  groups.flatMap((g) => (g.fields || []).filter((f) => f.type === "dist").map((f) => [`${section}.${f.path}`, f]))));
const INPUT_GROUPS = [["geology.sand.", "Reservoir sand"], ["geology.cap_rock.", "Cap rock"]];
const lowerFirst = (text) => (/^[A-Z][a-z]/.test(text) && !/^Athy\b/.test(text) ? text[0].toLowerCase() + text.slice(1) : text);

/** Plain-word label and unit of an uncertain input path of a sensitivity run. */
function inputInfo(path, facies = []) {
  let m = /^burial: (\w+)$/.exec(path); // first-order indices: a realisation's own burial value
  if (m && COVARIATES.includes(m[1])) return { label: covariateLabel(m[1]), unit: covariateUnit(m[1]) };
  m = /^burial\.covariates\.(\w+)\.uncertainty$/.exec(path);
  if (m && COVARIATES.includes(m[1])) return { label: `${covariateLabel(m[1])}: uncertainty`, unit: covariateUnit(m[1]) };
  m = /^geology\.facies\.(\d+)\.sand\.(\w+)$/.exec(path);
  if (m && INPUT_SPECS[`geology.sand.${m[2]}`]) {
    const f = INPUT_SPECS[`geology.sand.${m[2]}`];
    return { label: `${facies[Number(m[1])] || `facies ${Number(m[1]) + 1}`}: ${lowerFirst(f.label)}`, unit: f.unit };
  }
  const spec = INPUT_SPECS[path];
  if (spec) {
    const group = INPUT_GROUPS.find(([prefix]) => path.startsWith(prefix));
    return { label: group ? `${group[1]}: ${lowerFirst(spec.label)}` : spec.label, unit: spec.unit };
  }
  const last = path.split(".").filter((p) => p !== "uncertainty").pop() || path;
  return { label: last.replace(/_/g, " "), unit: "" };
}

/** "10th", "90th", "2.5th" percentile of a quantile. */
function percentile(q) {
  const p = Number((100 * q).toPrecision(4));
  const suffix = Number.isInteger(p) && ![11, 12, 13].includes(p % 100) ? ({ 1: "st", 2: "nd", 3: "rd" }[p % 10] || "th") : "th";
  return `${p}${suffix}`;
}

/** The swings a chart shows: inputs that move the outcome at all, largest first, at most MAX_BARS. */
function shownSwings(t) {
  const moving = t.swings.filter((s) => s.outcome_low !== t.base || s.outcome_high !== t.base);
  return { shown: moving.slice(0, MAX_BARS), hiddenMoving: moving.slice(MAX_BARS), still: t.swings.length - moving.length };
}

function tornadoFigure(t, outcome, prospect, doc) {
  const info = OUTCOMES[outcome];
  const unit = t.unit;
  const u = unitLabel(unit);
  const { shown } = shownSwings(t);
  const labels = shown.map((s) => inputInfo(s.path, doc.facies).label);
  const side = (which, colour) => {
    const key = `outcome_${which}`;
    const valueKey = `${which}_value`;
    const pct = percentile(which === "low" ? doc.low_quantile : doc.high_quantile);
    return {
      type: "bar", orientation: "h", name: `input at its ${which} value (${pct} percentile)`,
      y: labels, x: shown.map((s) => s[key] - t.base), base: t.base, marker: { color: colour },
      customdata: shown.map((s) => [s[valueKey], s[key]]),
      hovertext: shown.map((s, i) => {
        const iu = inputInfo(s.path, doc.facies).unit;
        const delta = s[key] - t.base;
        return `${labels[i]} at its ${which} value (${pct} percentile): ${withU(s[valueKey], iu, { digits: 4 })}<br>` +
          `${info.short} of ${prospect}: ${withU(s[key], unit, { digits: 4 })} ` +
          `(${delta >= 0 ? "+" : "−"}${fmt(Math.abs(delta), { digits: 3 })} from the base ${fmt(t.base, { digits: 4 })})`;
      }),
      hovertemplate: "%{hovertext}<extra></extra>",
    };
  };
  const traces = [side("low", SWING.low), side("high", SWING.high)];
  const lay = layout({
    barmode: "group", bargap: 0.28, bargroupgap: 0.04,
    xaxis: axis(info.name, unit, { zeroline: false, exponentformat: "power" }),
    yaxis: axis("", "", { autorange: "reversed", automargin: true, ticks: "", tickfont: { size: 10.5 } }),
    margin: { l: 10, r: 16, t: 26, b: 40 },
    shapes: [{ type: "line", xref: "x", yref: "paper", x0: t.base, x1: t.base, y0: 0, y1: 1,
      line: { color: SWING.base, width: 1.5, dash: "dot" } }],
    annotations: [{ xref: "x", yref: "paper", x: t.base, y: 1, yanchor: "bottom", showarrow: false,
      text: `base ${fmt(t.base, { digits: 3 })}${u ? ` ${u}` : ""}`, font: { size: 10.5, color: SWING.base } }],
  });
  return { traces, lay, height: 84 + 30 * shown.length };
}

function swingNote(t) {
  const { hiddenMoving, still } = shownSwings(t);
  const parts = [];
  if (hiddenMoving.length) {
    const largest = Math.max(...hiddenMoving.map((s) => Math.abs(s.outcome_high - s.outcome_low)));
    parts.push(`${hiddenMoving.length} more input${hiddenMoving.length > 1 ? "s" : ""} with smaller swings (at most ${withU(largest, t.unit, { digits: 2 })}) not drawn`);
  }
  if (still) parts.push(`${still} input${still > 1 ? "s" : ""} leave${still > 1 ? "" : "s"} it unchanged`);
  return parts.length ? `${parts.join("; ")}.` : "";
}

async function drawTornadoes(doc) {
  const box = document.getElementById("tornadoes");
  box.replaceChildren();
  const names = (doc.prospects || []).map((p) => p.name).filter((n) => n in doc.tornado);
  for (const name of Object.keys(doc.tornado)) if (!names.includes(name)) names.push(name);
  let k = 0;
  for (const prospect of names) {
    const charts = [];
    const pending = []; // [element, figure] drawn once the cells are on the page
    for (const outcome of Object.keys(OUTCOMES)) {
      const t = doc.tornado[prospect][outcome];
      if (!t) continue;
      const info = OUTCOMES[outcome];
      const head = h("h4", { class: "tornado-title" }, `${info.name} (${unitLabel(t.unit)})`);
      const cell = h("div", { class: "tornado-cell" }, head);
      if (!shownSwings(t).shown.length) {
        cell.append(h("p", { class: "empty", "data-testid": "tornado-flat", "data-prospect": prospect, "data-outcome": outcome },
          `No input moves it: ${withU(t.base, t.unit, { digits: 4 })} in every case.`));
        charts.push(cell);
        continue;
      }
      const fig = tornadoFigure(t, outcome, prospect, doc);
      const el = h("div", { class: "plot", id: `tornado-${k++}`, "data-testid": "tornado", "data-prospect": prospect,
        "data-outcome": outcome, style: { height: `${fig.height}px` } });
      cell.append(el, h("div", { class: "readout small faint" }, swingNote(t)));
      charts.push(cell);
      pending.push([el, fig]);
    }
    box.append(h("section", { class: "tornado-prospect", "data-prospect": prospect }, h("h3", {}, `Prospect ${prospect}`),
      h("div", { class: "grid2" }, charts)));
    for (const [el, fig] of pending) await draw(el, fig.traces, fig.lay);
  }
}

/** Three decimals, without a sign on a value that rounds to zero. */
const fix3 = (v) => (Math.abs(v) < 0.0005 ? "0.000" : fmt(v, { fixed: 3 }));

function indicesTables(doc) {
  const level = doc.indices_confidence ? `${fmt(100 * doc.indices_confidence, { digits: 3 })} %` : "";
  document.getElementById("idx-explain").textContent =
    "A first-order index is the share of the variance of a hydrocarbon facies' P(hydrocarbon), over all its realisations " +
    "in the base run, that one input explains on its own (0: none of it, 1: all of it; values near 0 can come out slightly " +
    `negative from sampling noise). Largest first, ± one standard error, with the ${level ? `${level} ` : ""}interval; the burial ` +
    "inputs are each realisation's own depth, uplift and gradient.";
  const entries = Object.entries(doc.indices || {});
  const tables = entries.map(([facies, e]) => {
    const title = h("h4", { class: "tornado-title" }, swatch(colourOf(facies)), facies);
    if (!e.indices) return h("div", { "data-facies": facies }, title, h("p", { class: "empty" }, `No indices: ${e.note || "no reason given"}.`));
    const rows = Object.entries(e.indices).sort((a, b) => b[1].value - a[1].value);
    return h("div", { "data-facies": facies }, title,
      h("table", { class: "indices", "data-testid": "indices-table", "data-facies": facies },
        h("caption", { class: "small muted" }, `${e.n_samples} realisations of ${facies}, mean P(hydrocarbon) ${withU(e.mean_probability_hc, "fraction", { digits: 3 })}`),
        h("thead", {}, h("tr", {}, h("th", { scope: "col" }, "Input"), h("th", { class: "num", scope: "col" }, "Index (frac.)"),
          h("th", { class: "num", scope: "col" }, `${level || "Confidence"} interval`), h("th", { scope: "col", class: "idx-bar-col" }, h("span", { class: "sr-only" }, "bar")))),
        h("tbody", {}, rows.map(([path, v]) => h("tr", { "data-path": path },
          h("td", {}, inputInfo(path, doc.facies).label),
          h("td", { class: "num" }, `${fix3(v.value)} ± ${fix3(v.standard_error)}`),
          h("td", { class: "num" }, `${fix3(v.ci_low)} to ${fix3(v.ci_high)}`),
          h("td", { class: "idx-bar-col" }, h("span", { class: "idx-bar", style: { width: `${Math.max(0, Math.min(1, v.value)) * 100}%` } })))))));
  });
  document.getElementById("indices").replaceChildren(...(tables.length ? tables : [h("p", { class: "empty" }, "This run has no hydrocarbon facies to index.")]));
}

function sensitivityLegend(doc) {
  const others = doc.fix_others ? `the other inputs fixed at their ${doc.fix_others}` : "the other inputs uncertain as in the scenario";
  document.getElementById("sens-what").textContent = `${doc.inputs.length} uncertain inputs, each at its ${percentile(doc.low_quantile)} and ` +
    `${percentile(doc.high_quantile)} percentile with ${others}; ${doc.n_evaluations} runs of the whole chain, ` +
    `${doc.realisations ? `${doc.realisations} realisations` : "the scenario's realisations"} per facies and node.`;
  const base = doc.fix_others ? `every input at its ${doc.fix_others}` : "every input uncertain as in the scenario";
  document.getElementById("sens-legend").replaceChildren(
    h("span", {}, swatch(SWING.low), `input at its low value (${percentile(doc.low_quantile)} percentile)`),
    h("span", {}, swatch(SWING.high), `input at its high value (${percentile(doc.high_quantile)} percentile)`),
    h("span", {}, h("span", { class: "base-mark", style: { borderColor: SWING.base } }), `base: ${base}`),
    h("span", { class: "faint" }, "Point at a bar for the input's value and the outcome."));
}

/** What a role without the files sees: the run's own summary (base values, largest swings). */
function sensitivitySummary(err) {
  const res = run.result || {};
  const rows = (res.prospects || []).flatMap((p) => Object.entries(p.outcomes || {}).map(([outcome, o]) => h("tr", {},
    h("td", {}, p.name), h("td", {}, OUTCOMES[outcome] ? OUTCOMES[outcome].name : outcome),
    h("td", { class: "num" }, withU(o.base, o.unit, { digits: 3 })),
    h("td", {}, o.largest ? inputInfo(o.largest.path, res.facies).label : h("span", { class: "faint" }, "no input moves it")),
    h("td", { class: "num" }, o.largest ? `${withU(o.largest.outcome_low, o.unit, { digits: 3 })} to ${withU(o.largest.outcome_high, o.unit, { digits: 3 })}` : "–"))));
  document.getElementById("tornadoes").replaceChildren(h("p", { class: "empty" }, failureText(err, "the tornado charts")),
    rows.length ? h("table", { "data-testid": "sens-summary" }, h("thead", {}, h("tr", {}, h("th", {}, "Prospect"), h("th", {}, "Outcome"),
      h("th", { class: "num" }, "Base"), h("th", {}, "Input with the largest swing"), h("th", { class: "num" }, "Outcome at its low / high value"))),
    h("tbody", {}, rows)) : null);
  for (const id of ["sens-legend", "idx-title", "idx-explain"]) document.getElementById(id).hidden = true;
}

async function showSensitivity() {
  if (!artefact("sensitivity.json")) {
    document.getElementById("tornadoes").replaceChildren(h("p", { class: "empty" }, "This run kept no sensitivity.json."));
    return;
  }
  let doc;
  try { doc = await fetchArtefact("sensitivity.json", "json"); } catch (err) { sensitivitySummary(err); return; }
  sensitivityLegend(doc);
  indicesTables(doc);
  await drawTornadoes(doc);
}

// ---------------------------------------------------------------- files

function drawFiles() {
  const files = run.artefacts || [];
  const canDownload = project.role !== "viewer";
  const parts = [files.length
    ? h("ul", { class: "files" }, files.map((a) => h("li", {}, canDownload ? h("a", { href: a.url }, a.name) : a.name, " ",
      h("span", { class: "faint num" }, fmtBytes(a.size_bytes)))))
    : h("p", { class: "empty" }, succeeded ? "This run wrote no files." : "Files appear here when the run has succeeded.")];
  if (files.length && !canDownload) parts.push(h("p", { class: "small faint" }, `Your role in this project (${project.role}) cannot download run files.`));
  document.getElementById("files").replaceChildren(...parts);
}

// ---------------------------------------------------------------- which panels this run has

drawFiles();
document.getElementById("map-views").hidden = !(succeeded && input === "map");
document.getElementById("section-panel").hidden = !(succeeded && input === "cube");
document.getElementById("well-panel").hidden = !(succeeded && run.kind === "calibrate");
document.getElementById("sensitivity-panel").hidden = !(succeeded && run.kind === "sensitivity");
if (succeeded && input === "map") {
  await comments.load().catch((e) => toast(errorText(e), "bad"));
  await loadMap();
} else if (succeeded && input === "cube") {
  await loadCubeGeometry();
  await loadSection(null);
} else if (succeeded && run.kind === "calibrate") {
  await drawWell(calibrations[0]);
} else if (succeeded && run.kind === "sensitivity") {
  await showSensitivity();
}
document.body.dataset.ready = "1";
