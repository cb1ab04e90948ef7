// Results of a run: facies maps with hover read-outs and prospect outlines, a section
// through the cube, logs beside predicted facies at a well, the blind-test matrix.

import { api, ApiError } from "./api.js";
import { startPage, setCrumbs, h, param, fmt, fmtTime, toast, errorText, cautionBox, unitLabel } from "./shell.js";
import { draw, axis, layout, loadPlotly } from "./plots.js";
import { faciesColours, categoricalScale, SCALES, UI } from "./palette.js";
import { Comments } from "./comments.js";
import { etaText, statusChip } from "./runs.js";

const runId = Number(param("run"));
await startPage([["Projects", "/projects.html"], [`Run #${runId}`]]);
document.getElementById("caution").append(cautionBox());

const run = await api.get(`/runs/${runId}`);
const scenario = await api.get(`/scenarios/${run.scenario_id}`);
const project = await api.get(`/projects/${scenario.project_id}`);
setCrumbs([["Projects", "/projects.html"], [project.name, `/project.html?id=${project.id}`],
  [scenario.name, `/scenario.html?id=${scenario.id}`], [`Run #${runId}`]]);
document.getElementById("run-title").textContent = `Run #${runId}: ${scenario.name}`;
document.getElementById("run-sub").replaceChildren(statusChip(run.status),
  ` ${run.kind}, revision ${run.revision}${run.seed !== undefined && run.seed !== null ? `, seed ${run.seed}` : ""}, started ${fmtTime(run.started_at || run.created_at)}`);
document.getElementById("back-scenario").href = `/scenario.html?id=${scenario.id}`;

if (run.status !== "succeeded") {
  document.getElementById("run-state").append(h("div", { class: `notice ${run.status === "failed" ? "bad" : "warn"}` },
    run.status === "failed" ? `This run failed: ${run.error || "no reason given"}` :
      `This run is ${run.status}${run.stage ? ` (${run.stage}, ${etaText(run.eta_seconds)})` : ""}; results appear when it has succeeded.`));
}

const doc = project.role === "viewer" ? null : (await api.get(`/scenarios/${scenario.id}/document`)).document;
const nameOf = (f) => (typeof f === "string" ? f : f.name);
const faciesList = (run.facies || (doc ? doc.geology.facies : [])).map(nameOf);
const colours = faciesColours(faciesList);
const layerSelect = document.getElementById("layer");
const layers = [["most_likely", "Most likely facies"],
  ...faciesList.map((f) => [`posterior:${f}`, `Probability of ${f}`]),
  ["mahalanobis", "QC: Mahalanobis distance of the winner"], ["entropy", "Uncertainty: entropy"]];
layerSelect.replaceChildren(...layers.map(([v, l]) => h("option", { value: v }, l)));

const prospects = await api.get(`/projects/${project.id}/prospects`).catch(() => []);
const comments = new Comments({ projectId: project.id, scenarioId: scenario.id, container: document.getElementById("pins"),
  canComment: project.role !== "viewer", filter: (c) => c.x !== null && c.x !== undefined, onChange: () => drawMap() });
let mapData = null;

function layerInfo(layer, data) {
  if (layer === "most_likely") return { name: "most likely facies", unit: "" };
  if (layer.startsWith("posterior:")) return { name: `P(${layer.slice(10)})`, unit: "fraction" };
  if (layer === "mahalanobis") return { name: "Mahalanobis distance", unit: data.unit || "" };
  return { name: "entropy", unit: data.unit || "" };
}

async function loadMap() {
  const layer = layerSelect.value;
  try {
    mapData = await api.get(`/runs/${runId}/map?layer=${encodeURIComponent(layer)}`);
  } catch (err) {
    mapData = null;
    document.getElementById("map-readout").textContent = `No map for this layer: ${errorText(err)}`;
    return false;
  }
  await drawMap();
  return true;
}

async function drawMap() {
  if (!mapData) return;
  await loadPlotly();
  const layer = layerSelect.value;
  const info = layerInfo(layer, mapData);
  const names = (mapData.facies || faciesList).map(nameOf);
  const traces = [];
  let hm;
  if (layer === "most_likely") {
    const cols = names.map((n) => colours[n] || UI.inkFaint);
    const labels = mapData.z.map((row) => row.map((v) => (v === null || v < 0 ? "no data" : names[v])));
    hm = { type: "heatmap", x: mapData.x, y: mapData.y, z: mapData.z, zmin: -0.5, zmax: names.length - 0.5,
      colorscale: categoricalScale(cols), showscale: false, text: labels,
      hovertemplate: "x %{x:.0f} m<br>y %{y:.0f} m<br>%{text}<extra></extra>" };
    document.getElementById("map-legend").replaceChildren(...names.map((n) => h("span", { style: { marginRight: "12px" } },
      h("span", { class: "swatch", style: { background: colours[n] } }), n)));
  } else {
    const scale = layer.startsWith("posterior:") ? SCALES.probability : layer === "entropy" ? SCALES.entropy : SCALES.mahalanobis;
    hm = { type: "heatmap", x: mapData.x, y: mapData.y, z: mapData.z, colorscale: scale,
      zmin: layer.startsWith("posterior:") ? 0 : undefined, zmax: layer.startsWith("posterior:") ? 1 : undefined,
      colorbar: { title: { text: `${info.name}${info.unit ? ` (${unitLabel(info.unit)})` : ""}`, side: "right", font: { size: 10.5 } }, thickness: 12 },
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
      const i = layerInfo(lay, mapData);
      const text = lay === "most_likely" ? (v === null || v < 0 ? "no data" : (mapData.facies || faciesList).map(nameOf)[v]) : `${fmt(v, { digits: 3 })}${i.unit ? ` ${unitLabel(i.unit)}` : ""}`;
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

async function loadSection() {
  const line = Number(document.getElementById("line").value) || 0;
  const note = document.getElementById("section-note");
  try {
    const s = await api.get(`/runs/${runId}/section?line=${line}`);
    const names = (s.facies || faciesList).map(nameOf);
    const cat = s.kind === "most_likely";
    await draw(document.getElementById("section"), [{ type: "heatmap", x: s.x, y: s.y, z: s.z,
      ...(cat ? { zmin: -0.5, zmax: names.length - 0.5, colorscale: categoricalScale(names.map((n) => colours[n] || UI.inkFaint)), showscale: false,
        text: s.z.map((row) => row.map((v) => (v === null || v < 0 ? "no data" : names[v]))), hovertemplate: "trace %{x}<br>%{y} " + (s.y_unit || "") + "<br>%{text}<extra></extra>" }
        : { colorscale: SCALES.probability, hovertemplate: "trace %{x}<br>%{y}<br>%{z:.3f}<extra></extra>" }) }],
    layout({ xaxis: axis(s.x_label || "Trace along the line", s.x_unit || ""), yaxis: axis(s.y_label || "Sample", s.y_unit || "", { autorange: "reversed" }) }));
    note.textContent = `Line ${line}${s.n_lines ? ` of ${s.n_lines}` : ""}.`;
  } catch (err) {
    note.textContent = err instanceof ApiError && err.status === 404 ? "This run has no cube section." : `No section: ${errorText(err)}`;
    document.getElementById("section").replaceChildren();
  }
}
document.getElementById("show-line").addEventListener("click", loadSection);

// ---------------------------------------------------------------- wells: logs beside predicted facies

const wellSelect = document.getElementById("well");
const calibrations = [];

function parseCsv(text) {
  const [head, ...lines] = text.trim().split(/\r?\n/);
  const cols = head.split(",");
  const out = Object.fromEntries(cols.map((c) => [c, []]));
  for (const line of lines) {
    const cells = line.split(",");
    cols.forEach((c, i) => {
      const v = cells[i];
      const n = Number(v);
      out[c].push(v === "" ? null : Number.isFinite(n) && !/facies/.test(c) ? n : v);
    });
  }
  return out;
}

const artefact = (name) => (run.artefacts || []).find((a) => a.name === name);
if (artefact("calibration.json")) {
  try {
    const cal = await fetch(artefact("calibration.json").url, { credentials: "same-origin" }).then((r) => r.json());
    if (artefact("well_facies.csv")) {
      const t = parseCsv(await fetch(artefact("well_facies.csv").url, { credentials: "same-origin" }).then((r) => r.text()));
      cal.logs = { depth_m: t.depth_m, vp: t.vp_m_s, vs: t.vs_m_s, density: t.density_g_cm3, vshale: t.vshale, sw: t.sw,
        facies_cutoff: t.facies_cutoff, facies_predicted: t.facies_predicted };
    }
    calibrations.push(cal);
  } catch (err) { toast(`The blind test could not be read: ${errorText(err)}`, "bad"); }
}
wellSelect.replaceChildren(...(calibrations.length ? calibrations.map((w, i) => h("option", { value: i }, w.well))
  : [h("option", { value: "" }, "no blind test in this run")]));
wellSelect.addEventListener("change", () => drawWell(calibrations[Number(wellSelect.value)]));

async function drawWell(w) {
  const box = document.getElementById("confusion");
  if (!w) { box.replaceChildren(h("p", { class: "empty" }, "Run a blind test at the wells (kind calibrate) to see logs beside predicted facies.")); return; }
  if (!w.logs) { box.replaceChildren(h("p", { class: "empty" }, "This run kept no well logs.")); return; }
  const z = w.logs.depth_m;
  const names = w.confusion.labels;
  const idx = (list) => list.map((f) => names.indexOf(f));
  const cols = names.map((n) => colours[n] || UI.inkFaint);
  const tracks = [["vp", "Vp", "m/s"], ["vs", "Vs", "m/s"], ["density", "Density", "g/cm3"], ["vshale", "Vshale", "fraction"], ["sw", "Sw", "fraction"]];
  const traces = tracks.map(([k, label, unit], i) => ({ x: w.logs[k], y: z, mode: "lines", line: { color: UI.ink, width: 1 }, xaxis: `x${i + 1}`, yaxis: "y",
    hovertemplate: `%{y:.1f} m<br>${label} %{x:.3g} ${unitLabel(unit)}<extra></extra>` }));
  const strip = (list, i, title) => ({ type: "heatmap", z: idx(list).map((v) => [v]), y: z, x: [title], xaxis: `x${i}`, yaxis: "y",
    zmin: -0.5, zmax: names.length - 0.5, colorscale: categoricalScale(cols), showscale: false,
    text: list.map((f) => [f]), hovertemplate: `%{y:.1f} m<br>${title}: %{text}<extra></extra>` });
  traces.push(strip(w.logs.facies_cutoff, 6, "from logs"), strip(w.logs.facies_predicted, 7, "predicted"));
  const n = 7, gap = 0.012, width = (1 - gap * (n - 1)) / n;
  const lay = layout({ yaxis: axis("Depth", "m", { autorange: "reversed" }), margin: { l: 56, r: 8, t: 28, b: 40 } });
  tracks.forEach(([, label, unit], i) => { lay[`xaxis${i + 1}`] = axis(label, unit, { domain: [i * (width + gap), i * (width + gap) + width], side: "top" }); });
  for (let i = 6; i <= 7; i++) lay[`xaxis${i}`] = { domain: [(i - 1) * (width + gap), (i - 1) * (width + gap) + width], side: "top", tickfont: { size: 10 } };
  await draw(document.getElementById("tracks"), traces, lay);
  const m = w.confusion.matrix;
  box.replaceChildren(
    h("table", { "data-testid": "confusion" }, h("thead", {}, h("tr", {}, h("th", {}, "From logs ↓ / predicted →"), names.map((nm) => h("th", { class: "num" }, nm)), h("th", { class: "num" }, "Recall"))),
      h("tbody", {}, m.map((row, i) => h("tr", {}, h("th", {}, h("span", { class: "swatch", style: { background: cols[i] } }), names[i]),
        row.map((v, j) => h("td", { class: "num", style: i === j ? { fontWeight: "600" } : {} }, v)),
        h("td", { class: "num" }, w.confusion.recall && w.confusion.recall[i] !== null ? `${fmt(100 * w.confusion.recall[i], { digits: 3 })} %` : "–"))))),
    h("p", { class: "small muted" }, `Accuracy ${fmt(100 * w.confusion.accuracy, { digits: 3 })} % over ${w.confusion.n_samples} blocked samples. Facies from logs by cut-offs (Vshale ${w.cutoffs ? w.cutoffs.vshale : "–"}, Sw ${w.cutoffs ? w.cutoffs.sw : "–"}).`),
    ...(w.notes || []).map((t) => h("p", { class: "small faint" }, t)));
}

// Show the panels this kind of run has results for: a map classification has maps,
// a cube classification sections, a blind test its well.
const mapPanel = document.getElementById("map-title").closest(".panel");
const sectionPanel = document.getElementById("sec-title").closest(".panel");
document.getElementById("map-title").closest(".workspace").hidden = run.kind !== "classify";
document.getElementById("well-title").closest(".panel").hidden = run.kind !== "calibrate";
await comments.load().catch((e) => toast(errorText(e), "bad"));
if (run.kind === "classify" && run.status === "succeeded") {
  const hasMap = await loadMap();
  if (hasMap) sectionPanel.hidden = true;
  else { mapPanel.hidden = true; await loadSection(); }
} else if (run.kind === "calibrate") {
  await drawWell(calibrations[0]);
}
