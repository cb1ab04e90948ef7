// Manager view: per prospect the probability of hydrocarbon and P90/P50/P10 area under
// each scenario, readiness and last change, and a self-contained HTML report.

import { api, ApiError } from "./api.js";
import { startPage, setCrumbs, h, param, fmt, fmtTime, cautionBox, errorText, toast, SECTION_LABELS } from "./shell.js";
import { draw, axis, layout } from "./plots.js";
import { riskRows, pivot, charts, chartLayouts, CONVENTION } from "./risk.js";
import { buildReport } from "./report.js";

const pid = Number(param("project"));
await startPage([["Projects", "/projects.html"], ["Manager view"]]);
const project = await api.get(`/projects/${pid}`);
setCrumbs([["Projects", "/projects.html"], [project.name, `/project.html?id=${pid}`], ["Manager view"]]);
document.getElementById("caution").append(cautionBox());
document.getElementById("mg-sub").textContent = project.name;
document.getElementById("convention").textContent = CONVENTION;

const [scenarios, activity] = await Promise.all([api.get(`/projects/${pid}/scenarios`), api.get(`/projects/${pid}/activity?limit=200`)]);
let raw = null, rows = [], riskNote = "";
try {
  raw = await api.get(`/projects/${pid}/risk-summary`);
  rows = riskRows(raw);
} catch (err) {
  riskNote = err instanceof ApiError && err.status === 404 ? "No risk summary yet: run a risk summary (kind summarise) for the scenarios." : `Risk summary not available: ${errorText(err)}`;
}

function lastChange(s) {
  const fromSummary = raw && Array.isArray(raw.scenarios) ? raw.scenarios.find((x) => x.id === s.id) : null;
  if (fromSummary && fromSummary.last_change && fromSummary.last_change.at) {
    const lc = fromSummary.last_change;
    return { when: lc.at, who: lc.author, what: `revision ${lc.revision}: ${lc.kind}${lc.section ? ` of ${SECTION_LABELS[lc.section]}` : ""}${lc.message ? ` (“${lc.message}”)` : ""}` };
  }
  const a = activity.find((x) => x.object_type === "scenario" && x.object_id === s.id);
  return { when: s.updated_at, who: a ? a.actor : null, what: a ? a.summary : "" };
}

function runOf(s) {
  const x = raw && Array.isArray(raw.scenarios) ? raw.scenarios.find((y) => y.id === s.id) : null;
  return x ? x.run : null;
}

function riskTable() {
  if (!rows.length) return h("p", { class: "empty", "data-testid": "risk-empty" }, riskNote || "No prospect has risk numbers yet.");
  const { scenarios: names, prospects, cell } = pivot(rows);
  const pct = (v) => (v === null ? "–" : `${fmt(100 * v, { digits: 3 })} %`);
  const area = (v) => (v === null ? "–" : fmt(v, { digits: 3 }));
  return h("table", { "data-testid": "risk-table" },
    h("thead", {},
      h("tr", {}, h("th", { rowspan: 2 }, "Prospect"), names.map((n) => h("th", { colspan: 4, style: { textAlign: "center", borderLeft: "1px solid #c9cfc8" } }, n))),
      h("tr", {}, names.map(() => [h("th", { class: "num", style: { borderLeft: "1px solid #c9cfc8" } }, "P(hc)"), h("th", { class: "num" }, "P90 km²"), h("th", { class: "num" }, "P50 km²"), h("th", { class: "num" }, "P10 km²")]))),
    h("tbody", {}, prospects.map((p) => h("tr", {}, h("th", {}, p), names.map((n) => {
      const c = cell(n, p);
      return [h("td", { class: "num", style: { borderLeft: "1px solid #dfe3dd" }, title: c && c.note ? c.note : null }, c ? pct(c.p_hc) : "–"), h("td", { class: "num" }, c ? area(c.p90) : "–"),
        h("td", { class: "num" }, c ? area(c.p50) : "–"), h("td", { class: "num" }, c ? area(c.p10) : "–")];
    })))));
}

function scenarioTable() {
  return h("table", { "data-testid": "scenario-table" },
    h("thead", {}, h("tr", {}, h("th", {}, "Scenario"), h("th", { class: "num" }, "Rev."), h("th", {}, "Readiness"), h("th", {}, "Last change"), h("th", {}, "Risk numbers from"))),
    h("tbody", {}, scenarios.map((s) => {
      const lc = lastChange(s);
      const r = runOf(s);
      return h("tr", {}, h("td", {}, h("a", { href: `/scenario.html?id=${s.id}` }, s.name)), h("td", { class: "num" }, s.head_revision),
        h("td", {}, s.sections.map((x) => h("span", { class: `chip ${x.ready ? "ok" : ""}`, style: { marginRight: "4px" } }, `${SECTION_LABELS[x.section]} ${x.ready ? "ready" : "not ready"}`)),
          s.runnable ? h("span", { class: "chip ok" }, "runnable") : null),
        h("td", { class: "small" }, `${fmtTime(lc.when)}${lc.who ? ` by ${lc.who}` : ""}`, lc.what ? h("div", { class: "faint" }, lc.what) : null),
        h("td", { class: "small" }, r ? [h("a", { href: `/results.html?run=${r.id}` }, `run #${r.id}`), ` (revision ${r.revision}, seed ${r.seed})`,
          r.stale ? h("span", { class: "chip warn", style: { marginLeft: "4px" } }, "older revision") : null] : h("span", { class: "faint" }, "no map classification yet")));
    })));
}

document.getElementById("risk-table").replaceChildren(riskTable());
document.getElementById("scenario-table").replaceChildren(scenarioTable());
const chartRows = rows.filter((r) => r.p50 !== null || r.p_hc !== null);
if (chartRows.length) {
  const c = charts(chartRows);
  const lay = (k) => layout({ title: chartLayouts[k].title, barmode: "group", showlegend: true, xaxis: axis("Prospect", ""), yaxis: axis(chartLayouts[k].yaxis, ""),
    legend: { orientation: "h", y: -0.2 } });
  await Promise.all([draw(document.getElementById("chart-area"), c.area, lay("area")), draw(document.getElementById("chart-phc"), c.phc, lay("phc"))]);
} else {
  document.getElementById("chart-area").closest(".grid2").hidden = true;
}

document.getElementById("export").addEventListener("click", async () => {
  try {
    const html = await buildReport({ project, scenarios: scenarios.map((s) => ({ ...s, last: lastChange(s) })), rows, chartRows, note: riskNote });
    const url = URL.createObjectURL(new Blob([html], { type: "text/html" }));
    const a = h("a", { href: url, download: `porecast-report-${project.name.replace(/[^A-Za-z0-9]+/g, "-")}.html` });
    document.body.append(a);
    a.click();
    a.remove();
    setTimeout(() => URL.revokeObjectURL(url), 10000);
  } catch (err) { toast(`Export failed: ${errorText(err)}`, "bad"); }
});
