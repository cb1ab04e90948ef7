// Risk numbers of prospects across scenarios: reading the API's summary into rows,
// and the table and chart definitions shared by the manager page and the report.

import { scenarioColour } from "./palette.js";

export const CONVENTION = "P90 is the low case (90 % probability that the hydrocarbon area is at least that large), P10 the high case; P50 is the median.";

const km2 = (row, key) => {
  if (row[`${key}_km2`] !== undefined && row[`${key}_km2`] !== null) return row[`${key}_km2`];
  if (row[`${key}_m2`] !== undefined && row[`${key}_m2`] !== null) return row[`${key}_m2`] / 1e6;
  return null;
};

/** Rows {scenario_id, scenario, prospect, p_hc, p90, p50, p10, expected} (areas km2) from the API answer. */
export function riskRows(raw) {
  let rows = [];
  if (Array.isArray(raw)) rows = raw;
  else if (raw && Array.isArray(raw.rows)) rows = raw.rows;
  else if (raw && Array.isArray(raw.scenarios)) {
    for (const s of raw.scenarios) {
      for (const p of s.prospects || []) rows.push({ scenario_id: s.scenario_id ?? s.id, scenario: s.name ?? s.scenario, run_id: s.run_id, ...p });
    }
  }
  return rows.map((r) => ({
    scenario_id: r.scenario_id ?? null,
    scenario: r.scenario_name ?? r.scenario ?? `scenario ${r.scenario_id}`,
    run_id: r.run_id ?? null,
    prospect: r.prospect_name ?? r.prospect ?? r.name ?? `prospect ${r.prospect_id}`,
    p_hc: r.probability_hc ?? r.p_hc ?? null,
    p90: km2(r, "p90_area"), p50: km2(r, "p50_area"), p10: km2(r, "p10_area"),
    expected: km2(r, "expected_area"),
    note: r.note ?? null,
  }));
}

export function pivot(rows) {
  const scenarios = [...new Set(rows.map((r) => r.scenario))];
  const prospects = [...new Set(rows.map((r) => r.prospect))];
  const cell = (s, p) => rows.find((r) => r.scenario === s && r.prospect === p) || null;
  return { scenarios, prospects, cell };
}

/** Plotly traces: P50 area bars with P90..P10 whiskers, and P(hc) bars, per scenario. */
export function charts(rows) {
  const { scenarios, prospects, cell } = pivot(rows);
  const area = scenarios.map((s, i) => {
    const cells = prospects.map((p) => cell(s, p));
    return { type: "bar", name: s, x: prospects, y: cells.map((c) => (c ? c.p50 : null)), marker: { color: scenarioColour(i) },
      error_y: { type: "data", symmetric: false, array: cells.map((c) => (c && c.p10 !== null ? c.p10 - c.p50 : null)),
        arrayminus: cells.map((c) => (c && c.p90 !== null ? c.p50 - c.p90 : null)), color: "#333", thickness: 1.2, width: 4 },
      customdata: cells.map((c) => (c ? [c.p90, c.p10] : [null, null])),
      hovertemplate: `${s}<br>%{x}<br>P50 %{y:.3f} km²<br>P90 %{customdata[0]:.3f} km², P10 %{customdata[1]:.3f} km²<extra></extra>` };
  });
  const phc = scenarios.map((s, i) => ({ type: "bar", name: s, x: prospects, y: prospects.map((p) => { const c = cell(s, p); return c && c.p_hc !== null ? 100 * c.p_hc : null; }),
    marker: { color: scenarioColour(i) }, hovertemplate: `${s}<br>%{x}<br>P(hydrocarbon) %{y:.1f} %<extra></extra>` }));
  return { area, phc };
}

export const chartLayouts = {
  area: { title: "Hydrocarbon area: P50, whiskers P90 (low) to P10 (high)", barmode: "group", yaxis: "Area (km²)" },
  phc: { title: "Probability of hydrocarbon in the outline", barmode: "group", yaxis: "Probability (%)" },
};
