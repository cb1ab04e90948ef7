import { api, ApiError } from "./api.js";
import { startPage, h, fmtTime, fmtBytes, param, ROLE_LABELS, SECTION_LABELS, errorText,
         toast, setCrumbs, withUnit } from "./shell.js";

const pid = Number(param("id"));
await startPage([["Projects", "/projects.html"], ["Project"]]);

const project = await api.get(`/projects/${pid}`);
setCrumbs([["Projects", "/projects.html"], [project.name]]);
document.getElementById("project-name").textContent = project.name;
document.getElementById("project-role").textContent = `Your role: ${ROLE_LABELS[project.role]}`;
document.getElementById("project-desc").textContent = project.description || "";
document.getElementById("link-manager").href = `/manager.html?project=${pid}`;
document.getElementById("link-compare").href = `/compare.html?project=${pid}`;
const detail = project.role !== "viewer";

function table(head, rows, empty) {
  if (!rows.length) return h("p", { class: "empty" }, empty);
  return h("table", {}, h("thead", {}, h("tr", {}, head.map((c) =>
    Array.isArray(c) ? h("th", { class: c[1] }, c[0]) : h("th", {}, c)))), h("tbody", {}, rows));
}

function readiness(s) {
  return h("span", { class: "inline" }, s.sections.map((sec) => h("span", {
    class: `chip ${sec.ready ? "ok" : ""}`,
    title: `${SECTION_LABELS[sec.section]}: ${sec.ready ? "ready" : "not ready"}; ${sec.unresolved_comments} open comment(s)`,
  }, `${SECTION_LABELS[sec.section].split(" ")[0]} ${sec.ready ? "✓" : "·"}`)));
}

async function loadScenarios() {
  const list = await api.get(`/projects/${pid}/scenarios`);
  document.getElementById("scenarios").replaceChildren(table(
    ["Scenario", ["Rev.", "num"], "Readiness", "Last change"],
    list.map((s) => h("tr", {},
      h("td", {}, h("a", { href: `/scenario.html?id=${s.id}` }, s.name),
        s.forked_from_scenario_id ? h("div", { class: "small faint" }, `fork of #${s.forked_from_scenario_id} r${s.forked_from_revision}`) : null),
      h("td", { class: "num" }, s.head_revision),
      h("td", {}, readiness(s)),
      h("td", { class: "num" }, fmtTime(s.updated_at)))),
    "No scenarios yet."));
}

document.getElementById("new-scenario").addEventListener("submit", async (e) => {
  e.preventDefault();
  const name = document.getElementById("sc-name").value.trim() || "New scenario";
  try {
    const s = await api.post(`/projects/${pid}/scenarios`, { name });
    location.assign(`/scenario.html?id=${s.id}`);
  } catch (err) { toast(errorText(err), "bad"); }
});

async function loadActivity() {
  const list = await api.get(`/projects/${pid}/activity?limit=30`);
  document.getElementById("activity").replaceChildren(list.length
    ? h("ul", { class: "small", style: { margin: 0, paddingLeft: "16px" } }, list.map((a) => h("li", {},
      h("span", { class: "faint num" }, fmtTime(a.created_at)), " ", a.summary)))
    : h("p", { class: "empty" }, "Nothing has happened yet."));
}

async function loadRuns() {
  const box = document.getElementById("runs");
  try {
    const runs = await api.get(`/projects/${pid}/runs`);
    box.replaceChildren(table(["Run", "Scenario", "Kind", "Status", "Started"],
      runs.slice(0, 12).map((r) => h("tr", {},
        h("td", {}, h("a", { href: `/results.html?run=${r.id}` }, `#${r.id}`)),
        h("td", {}, h("a", { href: `/scenario.html?id=${r.scenario_id}` }, `#${r.scenario_id}`), ` r${r.revision}`),
        h("td", {}, r.kind),
        h("td", {}, h("span", { class: `chip ${r.status === "succeeded" ? "ok" : r.status === "failed" ? "bad" : "info"}` }, r.status)),
        h("td", { class: "num" }, fmtTime(r.created_at || r.started_at)))), "No runs yet."));
  } catch (err) {
    box.replaceChildren(h("p", { class: "empty" },
      err instanceof ApiError && err.status === 404 ? "Runs are not available on this server." : errorText(err)));
  }
}

async function loadWells() {
  if (!detail) return document.getElementById("wells").replaceChildren(h("p", { class: "empty" }, "Your role sees summaries only."));
  const list = await api.get(`/projects/${pid}/wells`);
  document.getElementById("wells").replaceChildren(table(["Well", ["Top", "num"], ["Base", "num"], "Curves"],
    list.map((w) => h("tr", {},
      h("td", {}, w.name),
      h("td", { class: "num" }, withUnit(w.depth_min, "m", { digits: 5 })),
      h("td", { class: "num" }, withUnit(w.depth_max, "m", { digits: 5 })),
      h("td", { class: "small" }, w.curves.map((c) => `${c.name}${c.unit ? ` (${c.unit})` : ""}`).join(", ")))),
    "No wells uploaded."));
}

async function loadGrids() {
  if (!detail) return document.getElementById("grids").replaceChildren(h("p", { class: "empty" }, "Your role sees summaries only."));
  const list = await api.get(`/projects/${pid}/grids`);
  document.getElementById("grids").replaceChildren(table(["Name", "Kind", "Format", "Attributes", ["Size", "num"]],
    list.map((g) => h("tr", {},
      h("td", {}, g.name), h("td", {}, g.kind === "cube" ? "cube" : "map"), h("td", {}, g.source_format),
      h("td", { class: "small" }, Object.keys(g.stats || {}).join(", ")),
      h("td", { class: "num" }, fmtBytes(g.size_bytes)))), "No maps or cubes uploaded."));
}

async function loadProspects() {
  const list = await api.get(`/projects/${pid}/prospects`);
  document.getElementById("prospects").replaceChildren(table(["Prospect", ["Area", "num"], ["Vertices", "num"], "Updated"],
    list.map((p) => h("tr", {},
      h("td", {}, p.name), h("td", { class: "num" }, withUnit(p.area_m2 / 1e6, "km2", { digits: 3 })),
      h("td", { class: "num" }, p.outline.length), h("td", { class: "num" }, fmtTime(p.updated_at)))),
    "No prospects drawn."));
}

async function loadMembers() {
  const list = await api.get(`/projects/${pid}/members`);
  document.getElementById("members").replaceChildren(table(["Member", "Role", "Since"],
    list.map((m) => h("tr", {}, h("td", {}, m.username), h("td", {}, ROLE_LABELS[m.role]),
      h("td", { class: "num" }, fmtTime(m.since)))), "No members."));
}

await Promise.all([loadScenarios(), loadActivity(), loadRuns(), loadWells(), loadGrids(),
  loadProspects(), loadMembers()].map((p) => p.catch((e) => toast(errorText(e), "bad"))));
