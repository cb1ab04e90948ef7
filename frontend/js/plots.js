// Plot helpers over plotly.js (served by the app from the plotly Python package).

import { UI } from "./palette.js";
import { unitLabel } from "./shell.js";

let loading = null;

/** Load /vendor/plotly.min.js once; resolves to window.Plotly. */
export function loadPlotly() {
  if (window.Plotly) return Promise.resolve(window.Plotly);
  if (!loading) {
    loading = new Promise((resolve, reject) => {
      const s = document.createElement("script");
      s.src = "/vendor/plotly.min.js";
      s.onload = () => resolve(window.Plotly);
      s.onerror = () => reject(new Error("plotly.js could not be loaded from /vendor/plotly.min.js"));
      document.head.append(s);
    });
  }
  return loading;
}

export function axisTitle(name, unit) {
  return unit ? `${name} (${unitLabel(unit)})` : name;
}

export function axis(name, unit, extra = {}) {
  return {
    title: { text: axisTitle(name, unit), font: { size: 11, color: UI.inkSoft }, standoff: 4 },
    gridcolor: UI.grid, zerolinecolor: UI.line, linecolor: UI.line, ticks: "outside",
    ticklen: 3, tickcolor: UI.line, tickfont: { size: 10.5 }, automargin: true, ...extra,
  };
}

export function layout(extra = {}) {
  return {
    margin: { l: 50, r: 12, t: extra.title ? 24 : 8, b: 34 },
    paper_bgcolor: "rgba(0,0,0,0)",
    plot_bgcolor: "#ffffff",
    font: { family: "system-ui, 'DejaVu Sans', sans-serif", size: 11, color: UI.ink },
    showlegend: false,
    hovermode: "closest",
    hoverlabel: { font: { size: 11 } },
    legend: { font: { size: 10.5 }, orientation: "h", y: -0.22, x: 0 },
    ...extra,
    title: extra.title ? { text: extra.title, font: { size: 11.5, color: UI.inkSoft }, x: 0.01, y: 0.98 } : undefined,
  };
}

export const CONFIG = {
  displaylogo: false,
  responsive: true,
  modeBarButtonsToRemove: ["select2d", "lasso2d", "autoScale2d", "toggleSpikelines"],
};

/** Draw (or redraw in place) a plot. */
export async function draw(el, traces, lay, config = {}) {
  const Plotly = await loadPlotly();
  return Plotly.react(el, traces, lay, { ...CONFIG, ...config });
}

/** A filled band between lower and upper y (or x) values plus a middle line. */
export function band(xs, lo, mid, hi, { colour, fill, name, horizontal = false, hover } = {}) {
  const pick = (a, b) => (horizontal ? { x: b, y: a } : { x: a, y: b });
  const back = [...xs].reverse();
  const lowerUpper = horizontal
    ? { x: [...lo, ...[...hi].reverse()], y: [...xs, ...back] }
    : { x: [...xs, ...back], y: [...lo, ...[...hi].reverse()] };
  return [
    { ...lowerUpper, type: "scatter", mode: "lines", fill: "toself", fillcolor: fill,
      line: { width: 0 }, hoverinfo: "skip", showlegend: false, name },
    { ...pick(xs, mid), type: "scatter", mode: "lines", line: { color: colour, width: 1.6 },
      name, hovertemplate: hover },
  ];
}
