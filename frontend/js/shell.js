// Page shell: header with breadcrumbs, the signed-in user, DOM and number helpers.

import { api, ApiError } from "./api.js";

export const CAUTION =
  "Scenario predictions are screening estimates for exploration decisions and carry large " +
  "uncertainty. They do not replace professional judgement. Pore pressure and temperature " +
  "outputs are not for well design, drilling or well control: those need dedicated analysis " +
  "under local regulations and licensed practice.";

export const ROLE_LABELS = {
  owner: "Owner",
  basin_modeller: "Basin modeller",
  geologist: "Geologist",
  geophysicist: "Geophysicist",
  reviewer: "Reviewer",
  viewer: "Viewer",
};

export const SECTION_LABELS = {
  burial: "Burial & thermal",
  geology: "Geology",
  rockphysics: "Rock physics & seismic",
};

export const SECTION_OWNERS = {
  burial: "basin_modeller",
  geology: "geologist",
  rockphysics: "geophysicist",
};

/** Whether a project role may edit a section (owners edit every section). */
export function canEdit(role, section) {
  return role === "owner" || SECTION_OWNERS[section] === role;
}

/** Build a DOM element: h("td", {class: "num"}, "1.0", child, ...). */
export function h(tag, attrs = {}, ...children) {
  const el = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs || {})) {
    if (v === undefined || v === null || v === false) continue;
    if (k === "class") el.className = v;
    else if (k === "dataset") Object.assign(el.dataset, v);
    else if (k.startsWith("on") && typeof v === "function") el.addEventListener(k.slice(2), v);
    else if (k === "style" && typeof v === "object") Object.assign(el.style, v);
    else if (v === true) el.setAttribute(k, "");
    else el.setAttribute(k, v);
  }
  for (const c of children.flat(Infinity)) {
    if (c === undefined || c === null || c === false) continue;
    el.append(c instanceof Node ? c : document.createTextNode(String(c)));
  }
  return el;
}

/** Display form of a unit name used by the API. */
export function unitLabel(unit) {
  const map = { degC: "°C", "degC/km": "°C/km", "g/cm3": "g/cm³", m2: "m²", km2: "km²",
                fraction: "frac.", "1/km": "1/km", "m3/m3": "m³/m³",
                "(m/s)(g/cm3)": "m/s·g/cm³" };
  return unit in map ? map[unit] : unit;
}

/** A number to `digits` significant digits (or fixed decimals with {fixed}). */
export function fmt(value, { digits = 4, fixed } = {}) {
  if (value === null || value === undefined || Number.isNaN(value)) return "–";
  if (typeof value !== "number") return String(value);
  if (fixed !== undefined) return value.toFixed(fixed);
  if (value === 0) return "0";
  const a = Math.abs(value);
  if (a >= 1e5 || a < 1e-3) return value.toExponential(Math.max(0, digits - 1));
  return Number(value.toPrecision(digits)).toString();
}

/** A value with its unit as DOM: 1234 <span class=u>m</span>. */
export function withUnit(value, unit, opts) {
  return h("span", { class: "num" }, fmt(value, opts), unit ? h("span", { class: "u" }, unitLabel(unit)) : null);
}

export function fmtTime(iso) {
  if (!iso) return "–";
  const d = new Date(iso);
  const pad = (n) => String(n).padStart(2, "0");
  return `${d.getFullYear()}-${pad(d.getMonth() + 1)}-${pad(d.getDate())} ` +
         `${pad(d.getHours())}:${pad(d.getMinutes())}`;
}

export function fmtBytes(n) {
  if (n < 1024) return `${n} B`;
  if (n < 1024 * 1024) return `${(n / 1024).toFixed(1)} KiB`;
  return `${(n / 1024 / 1024).toFixed(1)} MiB`;
}

export function param(name) {
  return new URLSearchParams(location.search).get(name);
}

export function toast(message, kind = "") {
  let box = document.getElementById("toasts");
  if (!box) {
    box = h("div", { id: "toasts", role: "status", "aria-live": "polite" });
    document.body.append(box);
  }
  const t = h("div", { class: `toast ${kind}` }, message);
  box.append(t);
  setTimeout(() => t.remove(), kind === "bad" ? 7000 : 3500);
}

export function errorText(err) {
  if (err instanceof ApiError) {
    const first = err.errors && err.errors[0];
    return first && first.loc ? `${err.detail}` : err.detail;
  }
  return String(err && err.message ? err.message : err);
}

/**
 * Render the header and check the session. `crumbs` is a list of [label, href]
 * (the last without href is the current page). Returns the signed-in user.
 */
export async function startPage(crumbs = []) {
  const header = h("header", { class: "topbar" },
    h("a", { class: "mark", href: "/projects.html" }, "Porecast"),
    h("nav", { class: "crumbs", "aria-label": "Breadcrumb" }),
    h("div", { class: "who" }));
  document.body.prepend(h("a", { class: "skip", href: "#main" }, "Skip to content"), header);
  setCrumbs(crumbs);
  let user;
  try {
    user = await api.get("/auth/me");
  } catch (err) {
    if (err instanceof ApiError && err.status === 401) return new Promise(() => {});
    throw err;
  }
  const who = header.querySelector(".who");
  who.append(h("span", { "data-testid": "user" }, user.username),
    h("button", { type: "button", onclick: signOut }, "Sign out"));
  return user;
}

// A failure nobody caught is shown on the page rather than only in the console.
window.addEventListener("unhandledrejection", (e) => {
  toast(`Something went wrong: ${errorText(e.reason)}`, "bad");
});

export function setCrumbs(crumbs) {
  const nav = document.querySelector(".crumbs");
  if (!nav) return;
  nav.replaceChildren();
  crumbs.forEach(([label, href], i) => {
    if (i) nav.append(h("span", { class: "sep", "aria-hidden": "true" }, "›"));
    nav.append(href ? h("a", { href }, label) : h("span", { class: "here", "aria-current": "page" }, label));
  });
  const last = crumbs[crumbs.length - 1];
  document.title = last ? `${last[0]} · Porecast` : "Porecast";
}

async function signOut() {
  try { await api.post("/auth/logout"); } catch { /* the session may be gone already */ }
  location.assign("/index.html");
}

export function cautionBox() {
  return h("p", { class: "caution", role: "note", "data-testid": "caution" },
    h("strong", {}, "Caution. "), CAUTION);
}

/** Key/arrow navigation for a role=tablist; onSelect(name) on activation. */
export function tabs(list, onSelect) {
  const items = [...list.querySelectorAll("[role=tab]")];
  const select = (tab, focus = true) => {
    items.forEach((t) => {
      const on = t === tab;
      t.setAttribute("aria-selected", on ? "true" : "false");
      t.tabIndex = on ? 0 : -1;
      const panel = document.getElementById(t.getAttribute("aria-controls"));
      if (panel) panel.hidden = !on;
    });
    if (focus) tab.focus();
    onSelect && onSelect(tab.dataset.name);
  };
  items.forEach((t, i) => {
    t.addEventListener("click", () => select(t));
    t.addEventListener("keydown", (e) => {
      let j = null;
      if (e.key === "ArrowRight") j = (i + 1) % items.length;
      if (e.key === "ArrowLeft") j = (i - 1 + items.length) % items.length;
      if (e.key === "Home") j = 0;
      if (e.key === "End") j = items.length - 1;
      if (j !== null) { e.preventDefault(); select(items[j]); }
    });
  });
  return { select: (name, focus = false) => select(items.find((t) => t.dataset.name === name), focus) };
}

/** Field-by-field diff table of [{path, op, old, new}]. */
export function diffTable(entries, { empty = "No differences." } = {}) {
  if (!entries.length) return h("p", { class: "empty" }, empty);
  const show = (v) => (v === null || v === undefined) ? "–" : (typeof v === "object" ? JSON.stringify(v) : String(v));
  return h("table", { class: "diff" },
    h("thead", {}, h("tr", {}, h("th", {}, "Field"), h("th", {}, "Change"), h("th", {}, "Before"), h("th", {}, "After"))),
    h("tbody", {}, entries.map((d) => h("tr", {},
      h("td", { class: "path" }, d.path),
      h("td", {}, { change: "changed", add: "added", remove: "removed" }[d.op] || d.op),
      h("td", { class: "old mono" }, show(d.old)),
      h("td", { class: "new mono" }, show(d.new))))));
}
