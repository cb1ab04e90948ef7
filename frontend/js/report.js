// A self-contained HTML report of the manager view: data, table, charts and the
// cautions in one file, with plotly.js inlined from this server (no network needed).

import { CAUTION, fmtTime, SECTION_LABELS } from "./shell.js";
import { charts, chartLayouts, pivot, CONVENTION } from "./risk.js";

const esc = (s) => String(s).replace(/[&<>"']/g, (c) => ({ "&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;", "'": "&#39;" }[c]));
// Inside an inline <script>, "</script" and "<!--" must not appear literally.
const scriptSafe = (js) => js.replace(/<\/script/gi, "<\\/script").replace(/<!--/g, "<\\!--");

export async function buildReport({ project, scenarios, rows, chartRows = rows, note }) {
  const plotly = await fetch("/vendor/plotly.min.js", { credentials: "same-origin" }).then((r) => {
    if (!r.ok) throw new Error("plotly.js is not available on this server");
    return r.text();
  });
  const { scenarios: names, prospects, cell } = pivot(rows);
  const num = (v, d = 3) => (v === null || v === undefined ? "–" : Number(v).toPrecision(d));
  const table = rows.length ? `<table><thead><tr><th rowspan="2">Prospect</th>${names.map((n) => `<th colspan="4">${esc(n)}</th>`).join("")}</tr>
<tr>${names.map(() => "<th>P(hc)</th><th>P90 km²</th><th>P50 km²</th><th>P10 km²</th>").join("")}</tr></thead><tbody>
${prospects.map((p) => `<tr><th>${esc(p)}</th>${names.map((n) => { const c = cell(n, p); return c ? `<td>${c.p_hc === null ? "–" : `${(100 * c.p_hc).toPrecision(3)} %`}</td><td>${num(c.p90)}</td><td>${num(c.p50)}</td><td>${num(c.p10)}</td>` : "<td>–</td><td>–</td><td>–</td><td>–</td>"; }).join("")}</tr>`).join("\n")}
</tbody></table>` : `<p><em>${esc(note || "No risk numbers yet.")}</em></p>`;
  const scen = `<table><thead><tr><th>Scenario</th><th>Revision</th><th>Readiness</th><th>Last change</th></tr></thead><tbody>
${scenarios.map((s) => `<tr><td>${esc(s.name)}</td><td>${s.head_revision}</td><td>${s.sections.map((x) => `${esc(SECTION_LABELS[x.section])}: ${x.ready ? "ready" : "not ready"}`).join("; ")}</td><td>${esc(fmtTime(s.last.when))}${s.last.who ? ` by ${esc(s.last.who)}` : ""}</td></tr>`).join("\n")}
</tbody></table>`;
  const data = JSON.stringify({ charts: chartRows.length ? charts(chartRows) : null, layouts: chartLayouts });
  const generated = new Date().toISOString();
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>${esc(project.name)}: prospects across scenarios</title>
<meta name="generator" content="Porecast">
<style>
body{font-family:system-ui,"DejaVu Sans",sans-serif;font-size:13px;color:#1e262b;margin:24px;max-width:1100px}
h1{font-size:18px}h2{font-size:14px;margin-top:22px}table{border-collapse:collapse;width:100%}
th,td{border-bottom:1px solid #dfe3dd;padding:3px 6px;text-align:left;font-variant-numeric:tabular-nums}
th{background:#f1f3ef;font-size:12px}.caution{border:1px solid #d5b27f;background:#fbf4e8;padding:8px 10px}
.plot{height:360px}.meta{color:#4d585f}
</style></head><body>
<h1>${esc(project.name)}: prospects across scenarios</h1>
<p class="meta">Porecast report generated ${esc(generated)} (UTC).</p>
<p class="caution"><strong>Caution.</strong> ${esc(CAUTION)}</p>
<h2>Probability of hydrocarbon and hydrocarbon area per prospect</h2>
<p class="meta">${esc(CONVENTION)} Areas in km².</p>
${table}
${chartRows.length ? '<div class="plot" id="area"></div><div class="plot" id="phc"></div>' : ""}
<h2>Scenarios: readiness and last change</h2>
${scen}
<script>${scriptSafe(plotly)}</script>
<script>
(function(){var d=${scriptSafe(data)};if(!d.charts)return;
function lay(k){var l=d.layouts[k];return{title:{text:l.title,font:{size:12}},barmode:l.barmode,yaxis:{title:{text:l.yaxis}},margin:{l:60,r:10,t:30,b:40},legend:{orientation:"h"}};}
Plotly.newPlot("area",d.charts.area,lay("area"),{displaylogo:false,staticPlot:false});
Plotly.newPlot("phc",d.charts.phc,lay("phc"),{displaylogo:false});})();
</script>
</body></html>`;
}
