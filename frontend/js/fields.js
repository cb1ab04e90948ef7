// What each scenario section holds, as the workspace forms show it: labels, units
// and short help, keyed by the field paths of the scenario schema.

const COVARIATE_LABELS = {
  present_depth_m: ["Present depth of horizon", "m"],
  net_uplift_m: ["Net uplift (erosion)", "m"],
  gradient_c_per_km: ["Geothermal gradient", "degC/km"],
  overpressure_mpa: ["Overpressure", "MPa"],
};
export const COVARIATES = Object.keys(COVARIATE_LABELS);
export const covariateLabel = (c) => COVARIATE_LABELS[c][0];
export const covariateUnit = (c) => COVARIATE_LABELS[c][1];

export const ATTRIBUTE_LABELS = {
  intercept: ["Intercept (normal-incidence reflectivity)", ""],
  gradient: ["AVO gradient", ""],
  acoustic_impedance: ["Acoustic impedance", "(m/s)(g/cm3)"],
  vp_vs: ["Vp/Vs", ""],
};

export const DIST_KINDS = [
  ["constant", "Constant"],
  ["normal", "Normal"],
  ["truncated_normal", "Truncated normal"],
  ["uniform", "Uniform"],
  ["triangular", "Triangular"],
  ["lognormal", "Lognormal"],
];

export const DIST_PARAMS = {
  constant: [["value", "value"]],
  normal: [["mean", "mean"], ["sd", "sd"]],
  truncated_normal: [["mean", "mean"], ["sd", "sd"], ["low", "min"], ["high", "max"]],
  uniform: [["low", "min"], ["high", "max"]],
  triangular: [["low", "min"], ["mode", "mode"], ["high", "max"]],
  lognormal: [["median", "median"], ["sd_log", "sd of ln"]],
};

const dist = (path, label, unit, help) => ({ type: "dist", path, label, unit, help });
const num = (path, label, unit, help, extra = {}) => ({ type: "number", path, label, unit, help, ...extra });
const list = (path, label, unit, help, extra = {}) => ({ type: "list", path, label, unit, help, ...extra });
const select = (path, label, options, help) => ({ type: "select", path, label, options, help });

export const SECTION_SPECS = {
  burial: [
    { group: "Burial template (scaled per map location)", fields: [
      list("ages_ma", "Control ages", "Ma", "Oldest first; the last is the start of uplift (maximum burial)."),
      list("depth_fraction", "Fraction of maximum depth", "fraction", "One value per control age, ending at 1."),
      num("uplift_start_ma", "Uplift starts", "Ma"),
      num("uplift_end_ma", "Uplift ends", "Ma"),
      num("surface_temperature_c", "Sea-floor temperature", "degC"),
      list("gradient_factor", "Palaeo-gradient factor", "× present", "One per control age; leave empty for a constant gradient.", { optional: true }),
      list("overpressure_factor", "Overpressure factor", "× present", "One per control age; leave empty for the present value throughout.", { optional: true }),
      num("overburden_density", "Mean overburden density", "g/cm3"),
      num("water_density", "Pore-water density", "g/cm3"),
    ] },
    { group: "Map covariates: training nodes and their uncertainty", fields: COVARIATES.flatMap((c) => [
      list(`covariates.${c}.nodes`, `${covariateLabel(c)}: nodes`, covariateUnit(c), "Values at which training data are simulated, increasing."),
      dist(`covariates.${c}.uncertainty`, `${covariateLabel(c)}: uncertainty`, covariateUnit(c), "Added to the node value in each realisation."),
    ]) },
  ],
  geology: [
    { group: "Reservoir sand (every sand facies without its own properties)", fields: [
      dist("sand.quartz_fraction", "Detrital quartz", "fraction", "Fraction of the framework grains."),
      dist("sand.clay_fraction", "Clay", "fraction", "Fraction of grains; feldspar makes up the rest."),
      dist("sand.grain_size_mm", "Grain size", "mm"),
      dist("sand.coating_fraction", "Grain-coat coverage", "fraction", "Share of quartz surface under clay coats (slows cementation)."),
      dist("sand.porosity_surface", "Depositional porosity", "fraction", "Athy φ0; at most the critical porosity."),
      dist("sand.compaction_per_km", "Athy compaction coefficient", "1/km", "c in φ0·exp(−c·z)."),
    ] },
    { group: "Cap rock (shale)", fields: [
      dist("cap_rock.clay_fraction", "Clay", "fraction", "The rest is quartz."),
      dist("cap_rock.porosity_surface", "Depositional porosity", "fraction"),
      dist("cap_rock.compaction_per_km", "Athy compaction coefficient", "1/km"),
    ] },
    { group: "Compaction and cementation", fields: [
      num("cement_onset_c", "Quartz cement onset temperature", "degC", "Walderhaug (1996); 70 °C is common practice."),
      select("compaction_mode", "Compaction driven by", [["depth", "maximum burial depth"], ["stress", "maximum effective stress"]]),
    ] },
    { group: "Facies and prior proportions", fields: [{ type: "facies", path: "facies", label: "Facies" }] },
  ],
  rockphysics: [
    { group: "Dry rock", fields: [
      select("sand_model", "Sand model", [
        ["burial_aware", "Burial-aware: friable, stiffened by its cement"],
        ["friable", "Friable sand (modified lower Hashin–Shtrikman)"],
        ["contact_cement", "Contact cement (Dvorkin & Nur 1996)"],
        ["constant_cement", "Constant cement (Avseth et al. 2000)"]]),
      num("critical_porosity", "Sand critical porosity", "fraction"),
      num("shale_critical_porosity", "Shale critical porosity", "fraction"),
      dist("coordination_number", "Sand coordination number", "", "Grain contacts per grain (Hertz–Mindlin)."),
      num("shale_coordination_number", "Shale coordination number", ""),
      select("cement_scheme", "Cement placement", [[1, "at grain contacts (scheme 1)"], [2, "evenly on grain surfaces (scheme 2)"]]),
      num("constant_cement_porosity", "Porosity of cemented end member", "fraction", "Constant-cement model only."),
    ] },
    { group: "Pore fluids (Batzle & Wang 1992)", fields: [
      dist("fluids.brine_salinity_ppm", "Brine salinity", "ppm"),
      dist("fluids.oil_api", "Oil gravity", "API"),
      dist("fluids.gor", "Gas–oil ratio", "m3/m3"),
      dist("fluids.gas_gravity", "Gas specific gravity", "", "Air = 1."),
      dist("fluids.hydrocarbon_saturation", "Hydrocarbon saturation", "fraction", "In hydrocarbon facies."),
      select("fluids.mixing", "Fluid mixing", [["uniform", "uniform (Wood)"], ["patchy", "patchy"]]),
    ] },
    { group: "Seismic attributes and noise", fields: [{ type: "attributes", path: "seismic", label: "Attributes" }] },
  ],
};

// ---------------------------------------------------------------- JSON helpers

export function clone(v) {
  return v === undefined ? undefined : JSON.parse(JSON.stringify(v));
}

export function getPath(obj, path) {
  if (!path) return obj;
  return path.split(".").reduce((o, k) => (o === null || o === undefined ? undefined : o[k]), obj);
}

export function setPath(obj, path, value) {
  const keys = path.split(".");
  let o = obj;
  keys.slice(0, -1).forEach((k, i) => {
    if (o[k] === null || typeof o[k] !== "object") o[k] = /^\d+$/.test(keys[i + 1]) ? [] : {};
    o = o[k];
  });
  o[keys[keys.length - 1]] = value;
}

function same(a, b) {
  return JSON.stringify(a) === JSON.stringify(b);
}

/**
 * Field-by-field differences [{path, op, old, new}] between two JSON values.
 * Objects key by key; lists index by index when their lengths match, else whole.
 */
export function jsonDiff(a, b, prefix = "") {
  const out = [];
  const join = (k) => (prefix ? `${prefix}.${k}` : String(k));
  const isObj = (v) => v !== null && typeof v === "object" && !Array.isArray(v);
  if (isObj(a) && isObj(b)) {
    for (const k of Object.keys(a)) {
      if (!(k in b)) out.push({ path: join(k), op: "remove", old: a[k], new: null });
      else out.push(...jsonDiff(a[k], b[k], join(k)));
    }
    for (const k of Object.keys(b)) if (!(k in a)) out.push({ path: join(k), op: "add", old: null, new: b[k] });
    return out;
  }
  if (Array.isArray(a) && Array.isArray(b) && a.length === b.length) {
    a.forEach((v, i) => out.push(...jsonDiff(v, b[i], join(i))));
    return out;
  }
  if (!same(a, b)) out.push({ path: prefix, op: "change", old: a, new: b });
  return out;
}

/** Apply diff entries (paths relative to `target`) onto a copy of `target`. */
export function applyDiff(target, entries) {
  const out = clone(target);
  for (const d of entries) {
    if (d.op === "remove") {
      const keys = d.path.split(".");
      const parent = getPath(out, keys.slice(0, -1).join("."));
      if (parent && typeof parent === "object") delete parent[keys[keys.length - 1]];
    } else if (d.path === "") {
      return clone(d.new);
    } else {
      setPath(out, d.path, clone(d.new));
    }
  }
  return out;
}

/** Suggest parameters when the shape of a distribution changes. */
export function convertDist(old, kind) {
  const p = old && typeof old === "object" ? old : { kind: "constant", value: Number(old) || 0 };
  const centre = p.value ?? p.mean ?? p.mode ?? p.median ??
    (p.low !== undefined && p.high !== undefined ? (p.low + p.high) / 2 : 0);
  let spread = p.sd ?? (p.low !== undefined && p.high !== undefined ? (p.high - p.low) / 4 : null);
  if (p.kind === "lognormal") spread = p.median * p.sd_log;
  if (!spread) spread = Math.abs(centre) * 0.1 || 1;
  const r = (v) => Number(v.toPrecision(6));
  switch (kind) {
    case "constant": return { kind, value: r(centre) };
    case "normal": return { kind, mean: r(centre), sd: r(spread) };
    case "truncated_normal": return { kind, mean: r(centre), sd: r(spread), low: r(centre - 2 * spread), high: r(centre + 2 * spread) };
    case "uniform": return { kind, low: r(centre - 2 * spread), high: r(centre + 2 * spread) };
    case "triangular": return { kind, low: r(centre - 2 * spread), mode: r(centre), high: r(centre + 2 * spread) };
    case "lognormal": {
      const median = centre > 0 ? centre : 1;
      return { kind, median: r(median), sd_log: r(Math.min(2, spread / median)) };
    }
    default: return p;
  }
}

/** A distribution in normal form ({kind, ...}); a bare number is a constant. */
export function asDist(v) {
  if (v && typeof v === "object") return v;
  return { kind: "constant", value: typeof v === "number" ? v : 0 };
}
