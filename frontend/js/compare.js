// Two scenarios side by side: field-by-field differences and their physics previews.

import { api } from "./api.js";
import { startPage, setCrumbs, h, param, fmtTime, SECTION_LABELS, errorText, toast, unitLabel } from "./shell.js";
import { draw, axis, layout } from "./plots.js";
import { faciesColour, UI } from "./palette.js";
import { COVARIATES, covariateLabel, covariateUnit, ATTRIBUTE_LABELS } from "./fields.js";

const pid = Number(param("project"));
await startPage([["Projects", "/projects.html"], ["Compare"]]);
const project = await api.get(`/projects/${pid}`);
setCrumbs([["Projects", "/projects.html"], [project.name, `/project.html?id=${pid}`], ["Compare scenarios"]]);
const scenarios = await api.get(`/projects/${pid}/scenarios`);
const selA = document.getElementById("sc-a"), selB = document.getElementById("sc-b");
for (const sel of [selA, selB]) sel.replaceChildren(...scenarios.map((s) => h("option", { value: s.id }, `${s.name} (r${s.head_revision})`)));
const a0 = Number(param("a")) || (scenarios[0] && scenarios[0].id);
const b0 = Number(param("b")) || (scenarios.find((s) => s.id !== a0) || {}).id;
if (a0) selA.value = String(a0);
if (b0) selB.value = String(b0);

function show(v) {
  if (v === null || v === undefined) return "–";
  if (typeof v === "object" && v.kind) return Object.entries(v).filter(([k]) => k !== "kind").map(([k, x]) => `${k} ${x}`).join(", ") + ` (${v.kind.replace("_", " ")})`;
  return typeof v === "object" ? JSON.stringify(v) : String(v);
}

/** Group leaf differences under the distribution they belong to, for readability. */
function group(diffs, docA, docB) {
  const out = new Map();
  const get = (doc, path) => path.split(".").reduce((o, k) => (o == null ? undefined : o[k]), doc);
  for (const d of diffs) {
    const parts = d.path.split(".");
    let path = d.path;
    for (let i = parts.length - 1; i > 0; i--) {
      const p = parts.slice(0, i).join(".");
      const va = get(docA, p), vb = get(docB, p);
      if ((va && va.kind) || (vb && vb.kind)) { path = p; break; }
    }
    if (!out.has(path)) out.set(path, { path, a: get(docA, path), b: get(docB, path) });
  }
  return [...out.values()];
}

async function compare() {
  const a = Number(selA.value), b = Number(selB.value);
  history.replaceState(null, "", `?project=${pid}&a=${a}&b=${b}`);
  const [sa, sb, da, db, cmp] = await Promise.all([api.get(`/scenarios/${a}`), api.get(`/scenarios/${b}`),
    api.get(`/scenarios/${a}/document`), api.get(`/scenarios/${b}/document`), api.get(`/scenarios/${a}/compare?other_scenario_id=${b}`)]);
  const head = (s, tag) => h("section", { class: "panel" }, h("header", {}, h("h2", {}, `${tag}: `, h("a", { href: `/scenario.html?id=${s.id}` }, s.name))),
    h("div", { class: "small" }, `revision ${s.head_revision}, last change ${fmtTime(s.updated_at)}; `,
      s.sections.map((x) => h("span", { class: `chip ${x.ready ? "ok" : ""}`, style: { marginRight: "4px" } }, `${SECTION_LABELS[x.section]} ${x.ready ? "ready" : "not ready"}`))));
  document.getElementById("heads").replaceChildren(head(sa, "A"), head(sb, "B"));
  const rows = group(cmp.differences, da.document, db.document);
  document.getElementById("diff-count").textContent = `${rows.length} input${rows.length === 1 ? "" : "s"} differ`;
  const bySection = {};
  for (const r of rows) (bySection[r.path.split(".")[0]] ||= []).push(r);
  document.getElementById("diff").replaceChildren(...(rows.length ? Object.entries(bySection).map(([sec, list]) => h("div", {},
    h("h3", {}, SECTION_LABELS[sec] || "Scenario"),
    h("table", { class: "diff", "data-testid": "compare-table" }, h("thead", {}, h("tr", {}, h("th", {}, "Field"), h("th", {}, `A: ${sa.name}`), h("th", {}, `B: ${sb.name}`))),
      h("tbody", {}, list.map((r) => h("tr", {}, h("td", { class: "path" }, r.path), h("td", { class: "mono" }, show(r.a)), h("td", { class: "mono" }, show(r.b)))))))) :
    [h("p", { class: "empty" }, "The two scenarios have the same inputs.")]));
  // One location for both: the middle nodes of A.
  const covs = da.document.burial.covariates;
  const loc = Object.fromEntries(COVARIATES.map((c) => { const n = [...covs[c].nodes].sort((x, y) => x - y); return [c, n[Math.floor((n.length - 1) / 2)]]; }));
  document.getElementById("pv-loc").textContent = COVARIATES.map((c) => `${covariateLabel(c)} ${loc[c]} ${unitLabel(covariateUnit(c))}`).join(", ");
  const body = { locations: [loc], parts: ["history", "crossplot"], realisations: 200 };
  const [pa, pb] = await Promise.all([api.post(`/scenarios/${a}/preview`, body), api.post(`/scenarios/${b}/preview`, body)]);
  const temp = [[pa, "solid", "A"], [pb, "dash", "B"]].map(([p, dash, tag]) => ({ x: p.history[0].ages_ma, y: p.history[0].temperature_c, mode: "lines+markers",
    marker: { size: 4 }, line: { color: UI.rust, dash }, name: tag, hovertemplate: `${tag}: %{x:.1f} Ma, %{y:.1f} °C<extra></extra>` }));
  await draw(document.getElementById("cmp-temp"), temp, layout({ title: "Temperature of the horizon", xaxis: axis("Age", "Ma", { autorange: "reversed" }), yaxis: axis("Temperature", "degC"), showlegend: true }));
  const cross = [];
  for (const [p, dash, tag] of [[pa, "solid", "A"], [pb, "dash", "B"]]) {
    p.crossplot.facies.forEach((f, j) => cross.push({ x: f.ellipse.x, y: f.ellipse.y, mode: "lines", line: { color: faciesColour(j), dash, width: 2 },
      name: `${tag}: ${f.name}`, hovertemplate: `${tag}: ${f.name}<extra></extra>` }));
  }
  const cp = pa.crossplot;
  await draw(document.getElementById("cmp-cross"), cross, layout({ title: "Facies ellipses", xaxis: axis(ATTRIBUTE_LABELS[cp.x][0], cp.x_unit),
    yaxis: axis(ATTRIBUTE_LABELS[cp.y][0], cp.y_unit), showlegend: true, legend: { font: { size: 10 } } }));
}

document.getElementById("pick").addEventListener("submit", (e) => { e.preventDefault(); compare().catch((err) => toast(errorText(err), "bad")); });
if (a0 && b0) await compare().catch((err) => toast(errorText(err), "bad"));
