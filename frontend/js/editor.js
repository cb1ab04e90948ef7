// Section forms of the scenario workspace. The editor keeps a draft copy of one
// section, reports every change, and places validation messages next to fields.

import { api } from "./api.js";
import { h, fmt, unitLabel } from "./shell.js";
import { SECTION_SPECS, DIST_KINDS, DIST_PARAMS, ATTRIBUTE_LABELS, clone, getPath, setPath,
         convertDist, asDist } from "./fields.js";
import { faciesColour } from "./palette.js";

// ---------------------------------------------------------------- densities (batched)

let queue = [];
let timer = null;

/** Density curve of a distribution from the API; requests made together share a call. */
export function requestDensity(key, dist) {
  return new Promise((resolve) => {
    queue.push({ key, dist, resolve });
    if (!timer) timer = setTimeout(flush, 0);
  });
}

async function flush() {
  const batch = queue;
  queue = [];
  timer = null;
  for (let i = 0; i < batch.length; i += 100) {
    const part = batch.slice(i, i + 100);
    try {
      const res = await api.post("/distributions/density", {
        items: part.map((q) => ({ key: q.key, dist: q.dist })), points: 41 });
      const byKey = Object.fromEntries(res.map((r) => [r.key, r]));
      part.forEach((q) => q.resolve(byKey[q.key] || null));
    } catch {
      part.forEach((q) => q.resolve(null));
    }
  }
}

function sparkline(svg, info) {
  svg.replaceChildren();
  const ns = "http://www.w3.org/2000/svg";
  if (!info || (info.errors && info.errors.length)) return;
  const W = 92, H = 24;
  if (info.density === null) {
    const l = document.createElementNS(ns, "line");
    l.setAttribute("class", "c");
    l.setAttribute("x1", W / 2); l.setAttribute("x2", W / 2); l.setAttribute("y1", 2); l.setAttribute("y2", H);
    svg.append(l);
    return;
  }
  const ys = info.density.map((v) => v || 0);
  const top = Math.max(...ys) || 1;
  const pts = ys.map((y, i) => `${(i / (ys.length - 1)) * W},${H - (y / top) * (H - 2)}`).join(" ");
  const p = document.createElementNS(ns, "polyline");
  p.setAttribute("points", pts);
  svg.append(p);
}

function summaryText(info, unit) {
  if (!info || (info.errors && info.errors.length)) return "";
  const u = unit && unit !== "fraction" ? ` ${unitLabel(unit)}` : "";
  if (info.density === null) return `fixed at ${fmt(info.mean)}${u}`;
  return `mean ${fmt(info.mean, { digits: 3 })} · 10–90 %: ${fmt(info.q10, { digits: 3 })}–${fmt(info.q90, { digits: 3 })}${u}`;
}

// ---------------------------------------------------------------- value parsing

function parseNumber(text, optional = false) {
  const t = String(text).trim();
  if (t === "") return optional ? null : "";
  const v = Number(t);
  return Number.isFinite(v) ? v : t; // the API names what is wrong with a non-number
}

function parseList(text, optional) {
  const t = String(text).trim();
  if (t === "") return optional ? null : [];
  return t.split(/[\s,;]+/).filter(Boolean).map((x) => parseNumber(x));
}

const listText = (v) => (Array.isArray(v) ? v.join(", ") : v === null || v === undefined ? "" : String(v));
const numText = (v) => (v === null || v === undefined ? "" : String(v));

let uid = 0;
const nextId = (p) => `f${++uid}-${p.replace(/[^A-Za-z0-9]+/g, "-")}`;

// ---------------------------------------------------------------- the editor

export class SectionEditor {
  /**
   * @param {object} o
   * @param {string} o.section  burial | geology | rockphysics
   * @param {HTMLElement} o.container
   * @param {object} o.data  stored section JSON (copied)
   * @param {boolean} o.editable
   * @param {(draft: object, path: string) => void} o.onChange
   * @param {(fullPath: string, label: string) => void} o.onComment
   */
  constructor({ section, container, data, editable, onChange, onComment }) {
    Object.assign(this, { section, container, editable, onChange, onComment });
    this.draft = clone(data);
    this.commentCounts = {};
    this.render();
  }

  full(path) { return `${this.section}.${path}`; }

  setData(data) {
    this.draft = clone(data);
    this.render();
  }

  changed(path) {
    this.onChange && this.onChange(this.draft, path);
  }

  render() {
    const root = h("div", { class: "section-form" });
    for (const group of SECTION_SPECS[this.section]) {
      root.append(h("h3", {}, group.group));
      const grid = h("div", { class: "fields" });
      for (const f of group.fields) this.renderField(grid, f);
      root.append(grid);
    }
    this.container.replaceChildren(root);
    this.applyCommentCounts();
  }

  labelCell(f, id) {
    const btn = h("button", { type: "button", class: "comment-btn", "data-comment-path": this.full(f.path),
      title: `Comment on ${f.label}`, "aria-label": `Comment on ${f.label}`,
      onclick: () => this.onComment && this.onComment(this.full(f.path), f.label) }, "comment");
    return h("div", { class: "fl" },
      h("label", { for: id }, f.label), f.unit ? h("span", { class: "u" }, unitLabel(f.unit)) : null, " ", btn);
  }

  valueCell(f, ...content) {
    return h("div", { class: "fv", "data-path": this.full(f.path), "data-unit": f.unit || "" }, ...content,
      f.help ? h("div", { class: "help" }, f.help) : null,
      h("div", { class: "field-error", role: "alert", "aria-live": "polite" }));
  }

  renderField(grid, f) {
    const value = getPath(this.draft, f.path);
    const id = nextId(f.path);
    const ro = !this.editable;
    if (f.type === "number") {
      const input = h("input", { id, class: "num", inputmode: "decimal", value: numText(value), readonly: ro,
        "data-input-path": this.full(f.path) });
      input.addEventListener("input", () => { setPath(this.draft, f.path, parseNumber(input.value, f.optional)); this.changed(f.path); });
      grid.append(this.labelCell(f, id), this.valueCell(f, h("div", { class: "row" }, input)));
    } else if (f.type === "list") {
      const input = h("input", { id, class: "list", value: listText(value), readonly: ro,
        "data-input-path": this.full(f.path), "aria-describedby": `${id}-h` });
      input.addEventListener("input", () => { setPath(this.draft, f.path, parseList(input.value, f.optional)); this.changed(f.path); });
      grid.append(this.labelCell(f, id), this.valueCell(f, input));
    } else if (f.type === "select") {
      const sel = h("select", { id, disabled: ro, "data-input-path": this.full(f.path) },
        f.options.map(([v, label]) => h("option", { value: String(v), selected: String(v) === String(value) }, label)));
      sel.addEventListener("change", () => {
        const opt = f.options.find(([v]) => String(v) === sel.value);
        setPath(this.draft, f.path, opt ? opt[0] : sel.value);
        this.changed(f.path);
      });
      grid.append(this.labelCell(f, id), this.valueCell(f, h("div", { class: "row" }, sel)));
    } else if (f.type === "dist") {
      const cell = this.valueCell(f);
      grid.append(this.labelCell(f, id), cell);
      this.renderDist(cell, f, id);
    } else if (f.type === "facies") {
      grid.append(h("div", { class: "group-title" }, this.renderFacies(f)));
    } else if (f.type === "attributes") {
      grid.append(h("div", { class: "group-title" }, this.renderAttributes(f)));
    }
  }

  renderDist(cell, f, id) {
    const box = h("div", { class: "dist" });
    cell.insertBefore(box, cell.firstChild);
    const draw = () => {
      const d = asDist(getPath(this.draft, f.path));
      const sel = h("select", { id, disabled: !this.editable, "data-input-path": `${this.full(f.path)}.kind` },
        DIST_KINDS.map(([k, label]) => h("option", { value: k, selected: k === d.kind }, label)));
      sel.addEventListener("change", () => {
        setPath(this.draft, f.path, convertDist(d, sel.value));
        draw();
        this.changed(f.path);
      });
      const svg = document.createElementNS("http://www.w3.org/2000/svg", "svg");
      svg.setAttribute("class", "spark");
      svg.setAttribute("viewBox", "0 0 92 26");
      svg.setAttribute("role", "img");
      svg.setAttribute("aria-label", `Density of ${f.label}`);
      const sum = h("span", { class: "dist-sum", "data-testid": "dist-summary" });
      const refresh = () => {
        const current = asDist(getPath(this.draft, f.path));
        requestDensity(this.full(f.path), current).then((info) => {
          sparkline(svg, info);
          sum.textContent = summaryText(info, f.unit);
        });
      };
      const params = DIST_PARAMS[d.kind].map(([key, label]) => {
        const input = h("input", { class: "num", inputmode: "decimal", value: numText(d[key]), readonly: !this.editable,
          "aria-label": `${f.label}: ${label}${f.unit ? ` (${unitLabel(f.unit)})` : ""}`,
          "data-input-path": `${this.full(f.path)}.${key}` });
        let t = null;
        input.addEventListener("input", () => {
          const cur = asDist(getPath(this.draft, f.path));
          cur[key] = parseNumber(input.value);
          setPath(this.draft, f.path, cur);
          this.changed(`${f.path}.${key}`);
          clearTimeout(t);
          t = setTimeout(refresh, 150);
        });
        return h("span", { class: "p" }, h("span", { class: "faint" }, label), input);
      });
      box.replaceChildren(sel, ...params, svg, sum);
      refresh();
    };
    draw();
  }

  renderFacies(f) {
    const wrap = h("div", { "data-path": this.full(f.path), class: "fv" });
    const draw = () => {
      const facies = getPath(this.draft, f.path) || [];
      const total = facies.reduce((s, x) => s + (Number(x.proportion) || 0), 0);
      const ro = !this.editable;
      const rows = facies.map((fa, i) => {
        const p = (k) => `${f.path}.${i}.${k}`;
        const bind = (el, key, parse) => {
          el.addEventListener(el.tagName === "SELECT" || el.type === "checkbox" ? "change" : "input", () => {
            const val = el.type === "checkbox" ? el.checked : parse ? parse(el.value) : el.value;
            setPath(this.draft, p(key), val);
            this.changed(p(key));
            if (key === "proportion" || key === "rock") draw();
          });
          return el;
        };
        const idBase = nextId(p("name"));
        return h("tr", { "data-path": this.full(`${f.path}.${i}`) },
          h("td", {}, h("span", { class: "swatch", style: { background: faciesColour(i) } })),
          h("td", {}, bind(h("input", { type: "text", id: idBase, value: fa.name, readonly: ro, "aria-label": `Facies ${i + 1} name`, "data-input-path": this.full(p("name")) }), "name")),
          h("td", {}, bind(h("select", { disabled: ro, "aria-label": `Facies ${i + 1} rock` },
            ["sand", "shale"].map((r) => h("option", { value: r, selected: fa.rock === r }, r))), "rock")),
          h("td", {}, bind(h("select", { disabled: ro, "aria-label": `Facies ${i + 1} pore fluid` },
            ["brine", "oil", "gas"].map((r) => h("option", { value: r, selected: fa.fluid === r }, r))), "fluid")),
          h("td", {}, bind(h("input", { type: "text", class: "num", inputmode: "decimal", value: numText(fa.proportion), readonly: ro,
            "aria-label": `Facies ${i + 1} prior proportion`, "data-input-path": this.full(p("proportion")) }), "proportion", (v) => parseNumber(v))),
          h("td", {}, bind(h("input", { type: "checkbox", checked: !!fa.hydrocarbon, disabled: ro, "aria-label": `Facies ${i + 1} counts as hydrocarbon` }), "hydrocarbon")),
          h("td", {}, fa.sand ? h("span", { class: "chip info", title: "This facies has its own sand properties" }, "own sand") : null,
            ro ? null : h("button", { type: "button", class: "link", "aria-label": `Remove facies ${fa.name}`,
              onclick: () => { facies.splice(i, 1); this.changed(f.path); draw(); } }, "remove")),
          h("td", { class: "field-error", "data-path": this.full(`${f.path}.${i}`) }));
      });
      wrap.replaceChildren(
        h("table", { class: "facies-table" },
          h("thead", {}, h("tr", {}, h("th", {}, ""), h("th", {}, "Facies"), h("th", {}, "Rock"), h("th", {}, "Pore fluid"),
            h("th", {}, "Prior", h("span", { class: "u" }, "frac.")), h("th", {}, "Hydrocarbon"), h("th", {}, ""), h("th", {}, ""))),
          h("tbody", {}, rows)),
        h("div", { class: "row small" },
          h("span", { class: Math.abs(total - 1) > 1e-3 ? "field-error" : "muted" }, `Sum of prior proportions: ${fmt(total, { fixed: 3 })} (must be 1)`),
          ro ? null : h("button", { type: "button", onclick: () => {
            facies.push({ name: `facies ${facies.length + 1}`, rock: "sand", fluid: "brine", proportion: 0 });
            setPath(this.draft, f.path, facies); this.changed(f.path); draw();
          } }, "Add facies"),
          h("button", { type: "button", class: "comment-btn", "data-comment-path": this.full(f.path),
            onclick: () => this.onComment && this.onComment(this.full(f.path), "Facies") }, "comment")),
        h("div", { class: "field-error", role: "alert" }));
    };
    draw();
    return wrap;
  }

  renderAttributes(f) {
    const wrap = h("div", { "data-path": this.full(f.path), class: "fv" });
    const draw = () => {
      const seis = getPath(this.draft, f.path);
      const ro = !this.editable;
      const rows = Object.entries(ATTRIBUTE_LABELS).map(([name, [label, unit]]) => {
        const on = seis.attributes.includes(name);
        const id = nextId(`attr-${name}`);
        const box = h("input", { type: "checkbox", id, checked: on, disabled: ro, "data-input-path": this.full(`${f.path}.attributes.${name}`) });
        box.addEventListener("change", () => {
          const keep = Object.keys(ATTRIBUTE_LABELS).filter((a) => (a === name ? box.checked : seis.attributes.includes(a)));
          seis.attributes = keep;
          if (!box.checked) delete seis.noise_sd[name];
          this.changed(`${f.path}.attributes`);
          draw();
        });
        const noise = h("input", { class: "num", inputmode: "decimal", readonly: ro || !on, value: numText(seis.noise_sd[name] ?? (on ? 0 : "")),
          "aria-label": `Noise standard deviation of ${label}`, "data-input-path": this.full(`${f.path}.noise_sd.${name}`) });
        noise.addEventListener("input", () => { seis.noise_sd[name] = parseNumber(noise.value); this.changed(`${f.path}.noise_sd.${name}`); });
        return h("tr", { "data-path": this.full(`${f.path}.noise_sd.${name}`) },
          h("td", {}, box, " ", h("label", { for: id }, label)),
          h("td", {}, on ? noise : h("span", { class: "faint" }, "–"), unit ? h("span", { class: "u" }, unitLabel(unit)) : null),
          h("td", { class: "field-error" }));
      });
      const corrId = nextId("corr");
      const corr = h("input", { id: corrId, class: "num", inputmode: "decimal", value: numText(seis.noise_correlation), readonly: ro,
        "data-input-path": this.full(`${f.path}.noise_correlation`) });
      corr.addEventListener("input", () => { seis.noise_correlation = parseNumber(corr.value); this.changed(`${f.path}.noise_correlation`); });
      wrap.replaceChildren(
        h("table", {}, h("thead", {}, h("tr", {}, h("th", {}, "Attribute used for training"), h("th", {}, "Noise sd"), h("th", {}, ""))), h("tbody", {}, rows)),
        h("div", { class: "row", "data-path": this.full(`${f.path}.noise_correlation`) },
          h("label", { for: corrId }, "Correlation of intercept and gradient noise"), corr, h("span", { class: "field-error" })),
        h("div", { class: "field-error", role: "alert" }));
    };
    draw();
    return wrap;
  }

  /** Show API validation errors [{loc, msg}] (full paths) next to their fields. */
  showErrors(errors) {
    this.container.querySelectorAll(".has-error").forEach((e) => e.classList.remove("has-error"));
    this.container.querySelectorAll(".field-error").forEach((e) => { if (!e.closest(".row.small")) e.textContent = ""; });
    const unplaced = [];
    const targets = [...this.container.querySelectorAll("[data-path]")];
    for (const e of errors) {
      if (!e.loc.startsWith(this.section)) continue;
      let best = null;
      for (const t of targets) {
        const p = t.dataset.path;
        if ((e.loc === p || e.loc.startsWith(`${p}.`)) && (!best || p.length > best.dataset.path.length)) best = t;
      }
      const slot = best && (best.classList.contains("field-error") ? best : best.querySelector(":scope > .field-error, :scope > td.field-error, :scope .field-error"));
      if (slot) {
        best.classList.add("has-error");
        const text = plain(e.msg, best.dataset.unit || "");
        slot.textContent = slot.textContent ? `${slot.textContent} ${text}` : text;
      } else unplaced.push(e);
    }
    return unplaced;
  }

  setCommentCounts(counts) {
    this.commentCounts = counts;
    this.applyCommentCounts();
  }

  applyCommentCounts() {
    this.container.querySelectorAll("[data-comment-path]").forEach((b) => {
      const n = this.commentCounts[b.dataset.commentPath] || 0;
      b.textContent = n ? `${n} comment${n > 1 ? "s" : ""}` : "comment";
      b.classList.toggle("has", n > 0);
    });
  }
}

const REWORDS = [
  [/^Input should be less than or equal to (\S+)/, (m, u) => `Must be at most ${m[1]}${u}`],
  [/^Input should be greater than or equal to (\S+)/, (m, u) => `Must be at least ${m[1]}${u}`],
  [/^Input should be less than (\S+)/, (m, u) => `Must be below ${m[1]}${u}`],
  [/^Input should be greater than (\S+)/, (m, u) => `Must be above ${m[1]}${u}`],
  [/^Input should be a valid (number|integer).*/, () => "Enter a number"],
  [/^Input should be a valid list.*/, () => "Enter numbers separated by commas"],
  [/^Field required/, () => "Required"],
];

/** Make a validation message read as a plain sentence (with the field's unit if known). */
export function plain(msg, unit = "") {
  let m = String(msg || "").replace(/^Value error, /, "");
  const u = unit && unit !== "fraction" ? ` ${unitLabel(unit)}` : "";
  for (const [re, fn] of REWORDS) {
    const hit = m.match(re);
    if (hit) { m = fn(hit, u) + m.slice(hit[0].length).replace(/\(got ([^)]*)\)/, "(you entered $1)"); break; }
  }
  m = m.trim();
  return m.charAt(0).toUpperCase() + m.slice(1) + (/[.)]$/.test(m) ? "" : ".");
}
