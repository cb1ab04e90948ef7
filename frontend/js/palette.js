// The one place Porecast chooses colours (see frontend/README.md, "Colours").
//
// Facies colours come from the eight-colour set of Okabe & Ito (2008), "Color
// Universal Design (CUD): how to make figures and presentations that are friendly
// to colorblind people" (J*FLY), also recommended by Wong (2011), "Points of view:
// Color blindness", Nature Methods 8, 441. Facies take them in the order below,
// by their position in the scenario's facies list, so a facies keeps its colour
// on every map, cross-plot and chart of a scenario. The order puts the most
// distinct pairs first (blue / orange / bluish green / reddish purple).
//
// Continuous maps use plotly's built-in "Cividis" scale (Nunez, Anderton & Renslow
// 2018, PLOS ONE 13(7): e0199239, designed to read the same with colour-vision
// deficiency) for probabilities, and "Viridis" (van der Walt & Smith, matplotlib
// 2015) for QC distance and entropy.

export const OKABE_ITO = Object.freeze({
  black: "#000000",
  orange: "#E69F00",
  skyBlue: "#56B4E9",
  bluishGreen: "#009E73",
  yellow: "#F0E442",
  blue: "#0072B2",
  vermillion: "#D55E00",
  reddishPurple: "#CC79A7",
});

export const FACIES_SEQUENCE = Object.freeze([
  OKABE_ITO.blue,
  OKABE_ITO.orange,
  OKABE_ITO.bluishGreen,
  OKABE_ITO.reddishPurple,
  OKABE_ITO.skyBlue,
  OKABE_ITO.vermillion,
  OKABE_ITO.yellow,
  OKABE_ITO.black,
]);

/** Colour of the facies at position `index` of the scenario's facies list. */
export function faciesColour(index) {
  return FACIES_SEQUENCE[((index % FACIES_SEQUENCE.length) + FACIES_SEQUENCE.length)
    % FACIES_SEQUENCE.length];
}

/** Map facies name -> colour for a list of names (or {name} objects), in list order. */
export function faciesColours(facies) {
  const out = {};
  facies.forEach((f, i) => { out[typeof f === "string" ? f : f.name] = faciesColour(i); });
  return out;
}

/** A colour with transparency, for bands and clouds. */
export function withAlpha(hex, alpha) {
  const v = parseInt(hex.slice(1), 16);
  return `rgba(${(v >> 16) & 255}, ${(v >> 8) & 255}, ${v & 255}, ${alpha})`;
}

/** Discrete plotly colour scale for a categorical map with values 0 .. n-1. */
export function categoricalScale(colours) {
  const n = colours.length;
  if (n === 1) return [[0, colours[0]], [1, colours[0]]];
  const scale = [];
  colours.forEach((c, i) => {
    scale.push([i / n, c]);
    scale.push([(i + 1) / n, c]);
  });
  return scale;
}

export const SCALES = Object.freeze({
  probability: "Cividis",
  entropy: "Viridis",
  mahalanobis: "Viridis",
  seismic: "Greys",
});

// Interface colours (mirrored as CSS custom properties in css/porecast.css).
export const UI = Object.freeze({
  ink: "#1e262b",
  inkSoft: "#4d585f",
  inkFaint: "#78838a",
  grid: "#e3e6e1",
  line: "#c9cfc8",
  accent: "#2c5d6b",
  rust: "#8e4f16",
  onset: "#8e4f16",
  pressure: "#2c5d6b",
  outline: "#1e262b",
  pin: "#9c2f2c",
});

// Tornado charts of a sensitivity run: the bar of an input at its low value and at its
// high value. Blue and vermillion of the Okabe & Ito set above (a pair that stays apart
// for every common colour-vision deficiency), the same pair as the tornado.html report
// of backend/porecast/services/sensitivity.py (SWING_COLOURS); the base case is a line
// in the interface ink.
export const SWING = Object.freeze({
  low: OKABE_ITO.blue,
  high: OKABE_ITO.vermillion,
  base: UI.ink,
});

// Scenario colours in manager charts (a second set, so that scenarios are never
// mistaken for facies): Paul Tol's "bright" qualitative scheme, also CVD-safe
// (P. Tol, "Colour Schemes", SRON technical note SRON/EPS/TN/09-002, issue 3.2, 2021).
export const SCENARIO_SEQUENCE = Object.freeze([
  "#4477AA", "#EE6677", "#228833", "#CCBB44", "#66CCEE", "#AA3377", "#BBBBBB",
]);

export function scenarioColour(index) {
  return SCENARIO_SEQUENCE[index % SCENARIO_SEQUENCE.length];
}
