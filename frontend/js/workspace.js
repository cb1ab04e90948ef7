// Scenario workspace: one panel per discipline section, live previews, runs,
// comments, revision history and fork. Saves are conditional (If-Match); a stale
// save shows the colleague's change and lets the user re-apply their own.

import { api, ApiError } from "./api.js";
import { startPage, setCrumbs, h, param, fmtTime, toast, errorText, tabs, diffTable, canEdit,
         SECTION_LABELS, SECTION_OWNERS, ROLE_LABELS, cautionBox } from "./shell.js";
import { SectionEditor, plain } from "./editor.js";
import { PreviewPanel, metrics } from "./previewpanel.js";
import { Comments } from "./comments.js";
import { RunsPanel } from "./runs.js";
import { clone, jsonDiff, applyDiff } from "./fields.js";

const SECTIONS = ["burial", "geology", "rockphysics"];
const PREVIEW_FOR = { burial: "burial", geology: "porosity", rockphysics: "crossplot" };
const sid = Number(param("id"));

await startPage([["Projects", "/projects.html"], ["Scenario"]]);

const state = { scenario: null, project: null, doc: null, meta: null, revisions: [], sec: {}, active: "burial" };

async function loadScenario() {
  state.scenario = await api.get(`/scenarios/${sid}`);
  return state.scenario;
}

const scenario = await loadScenario();
state.project = await api.get(`/projects/${scenario.project_id}`);
const role = state.project.role;
setCrumbs([["Projects", "/projects.html"], [state.project.name, `/project.html?id=${scenario.project_id}`], [scenario.name]]);
document.getElementById("sc-name").textContent = scenario.name;
document.getElementById("btn-compare").href = `/compare.html?project=${scenario.project_id}&a=${sid}`;

if (role === "viewer") {
  const note = document.getElementById("viewer-note");
  note.hidden = false;
  note.replaceChildren(h("div", { class: "notice" }, "Your role (viewer) sees summaries only: the scenario's inputs are not shown. ",
    h("a", { href: `/manager.html?project=${scenario.project_id}` }, "Open the manager view"), "."));
  document.getElementById("ws").hidden = true;
  document.getElementById("btn-fork").hidden = true;
  await new Promise(() => {}); // nothing more to load for a viewer: stop here
}

const full = await api.getFull(`/scenarios/${sid}/document`);
state.doc = full.data.document;
state.meta = Object.fromEntries(Object.entries(state.doc).filter(([k]) => !SECTIONS.includes(k)));
for (const s of SECTIONS) {
  state.sec[s] = { base: clone(state.doc[s]), etag: full.data.section_etags[s], editor: null, dirty: false };
}

// ---------------------------------------------------------------- layout of the section tabs

const tabList = document.getElementById("section-tabs");
const panels = document.getElementById("section-panels");
for (const s of SECTIONS) {
  tabList.append(h("button", { role: "tab", type: "button", id: `tab-${s}`, "data-name": s, "aria-controls": `panel-${s}`,
    "aria-selected": s === state.active ? "true" : "false", tabindex: s === state.active ? 0 : -1 },
    SECTION_LABELS[s], h("span", { class: "count zero", "data-count": s, "aria-label": "unresolved comments" }, "0"),
    h("span", { class: "dirty-dot", "data-dirty": s, hidden: true, "aria-label": "unsaved changes" }, " •")));
  const editable = canEdit(role, s);
  const st = state.sec[s];
  st.meta = h("div", { class: "section-meta", "data-testid": `meta-${s}` });
  st.banner = h("div", { "data-testid": `banner-${s}` });
  st.form = h("div", { id: `form-${s}` });
  st.message = h("input", { class: "msg", placeholder: "What changed and why (optional)", "aria-label": `Save message for ${SECTION_LABELS[s]}`, maxlength: 500 });
  st.saveBtn = h("button", { type: "button", class: "primary", "data-testid": `save-${s}`, disabled: true, onclick: () => save(s) }, "Save section");
  st.discardBtn = h("button", { type: "button", disabled: true, onclick: () => discard(s) }, "Discard changes");
  st.readyBtn = h("button", { type: "button", "data-testid": `ready-${s}`, onclick: () => toggleReady(s) }, "Mark ready");
  st.comments = h("div", { "data-testid": `comments-${s}` });
  const sectionComment = h("button", { type: "button", class: "link small", onclick: () => openComment({ section: s, label: SECTION_LABELS[s] }) }, "Comment on this section");
  panels.append(h("div", { role: "tabpanel", id: `panel-${s}`, "aria-labelledby": `tab-${s}`, hidden: s !== state.active },
    st.meta, st.banner, st.form,
    editable ? h("div", { class: "savebar" }, st.message, st.saveBtn, st.discardBtn, st.readyBtn) : h("div", { class: "savebar" }, st.readyBtn),
    h("h3", {}, "Comments on this section"), sectionComment, st.comments));
  st.readyBtn.hidden = !editable;
}

// ---------------------------------------------------------------- previews and editors

const preview = new PreviewPanel({ container: document.getElementById("preview"), scenarioId: sid, onErrors: placeErrors });
document.getElementById("preview").append(cautionBox());

function currentDocument() {
  const doc = clone(state.meta);
  for (const s of SECTIONS) doc[s] = state.sec[s].editor ? state.sec[s].editor.draft : state.sec[s].base;
  return doc;
}

function placeErrors(errors) {
  const unplaced = [];
  for (const s of SECTIONS) {
    const st = state.sec[s];
    if (!st.editor) continue;
    const mine = errors.filter((e) => e.loc === s || e.loc.startsWith(`${s}.`));
    const left = st.editor.showErrors(mine);
    st.banner.replaceChildren(...left.map((e) => h("div", { class: "notice bad" }, plain(e.msg))));
    unplaced.push(...left);
  }
  const elsewhere = errors.filter((e) => !SECTIONS.some((s) => e.loc === s || e.loc.startsWith(`${s}.`)));
  state.sec[state.active].banner.append(...elsewhere.map((e) => h("div", { class: "notice bad" }, `${e.loc ? `${e.loc}: ` : ""}${plain(e.msg)}`)));
  return [...unplaced, ...elsewhere];
}

let pending = null;
function scheduleRefresh() {
  clearTimeout(pending);
  pending = setTimeout(() => preview.refresh(currentDocument()), 120);
}

function draftKey(s) { return `porecast-draft-${sid}-${s}`; }

function onEdit(s) {
  const st = state.sec[s];
  st.dirty = JSON.stringify(st.editor.draft) !== JSON.stringify(st.base);
  st.saveBtn.disabled = !st.dirty;
  st.discardBtn.disabled = !st.dirty;
  st.readyBtn.disabled = st.dirty;
  document.querySelector(`[data-dirty=${s}]`).hidden = !st.dirty;
  // Unsaved work survives a reload or a closed tab.
  if (st.dirty) localStorage.setItem(draftKey(s), JSON.stringify({ etag: st.etag, base: st.base, draft: st.editor.draft }));
  else localStorage.removeItem(draftKey(s));
  metrics.lastEditAt = performance.now();
  scheduleRefresh();
}

for (const s of SECTIONS) {
  const st = state.sec[s];
  st.editor = new SectionEditor({ section: s, container: st.form, data: st.base, editable: canEdit(role, s),
    onChange: () => onEdit(s), onComment: (path, label) => openComment({ section: s, field_path: path, label }) });
}
metrics.interactiveMs = performance.now();
document.body.dataset.ready = "1";

tabs(tabList, (name) => {
  state.active = name;
  preview.setView(PREVIEW_FOR[name]);
  comments.setFilter((c) => c.section === name || (!c.section && c.x === null));
});
preview.initLocations(state.doc);
preview.refresh(currentDocument(), { cause: "load" });

// ---------------------------------------------------------------- section meta: who changed it, ready flags

async function loadRevisions() {
  state.revisions = await api.get(`/scenarios/${sid}/revisions`);
  renderRevisions();
}

function renderMeta() {
  const sc = state.scenario;
  document.getElementById("sc-sub").textContent = `revision ${sc.head_revision} · seed ${state.meta.seed} · ${state.meta.realisations} realisations per facies and node`;
  const ready = sc.sections.filter((x) => x.ready).length;
  document.getElementById("sc-ready").textContent = `${ready} of 3 sections ready for runs`;
  for (const row of sc.sections) {
    const s = row.section;
    const st = state.sec[s];
    const rev = state.revisions.find((r) => r.number === row.revision);
    const editable = canEdit(role, s);
    st.meta.replaceChildren(
      h("span", {}, `Owned by the ${ROLE_LABELS[SECTION_OWNERS[s]].toLowerCase()}`),
      h("span", { class: "faint" }, "·"),
      h("span", { "data-testid": `changed-${s}` }, rev ? `last changed by ${rev.author || "someone"} on ${fmtTime(rev.created_at)} (revision ${rev.number})` : `revision ${row.revision}`),
      h("span", { class: `chip ${row.ready ? "ok" : ""}` }, row.ready ? "ready for runs" : "not marked ready"),
      ...(editable ? [] : [h("span", { class: "chip warn", "data-testid": `readonly-${s}` }, `read-only for your role (${ROLE_LABELS[role]})`)]));
    st.readyBtn.textContent = row.ready ? "Withdraw ready" : "Mark ready";
    st.ready = row.ready;
    st.serverRevision = row.revision;
  }
}

async function toggleReady(s) {
  const st = state.sec[s];
  try {
    const r = await api.put(`/scenarios/${sid}/sections/${s}/ready`, { ready: !st.ready }, { ifMatch: st.etag });
    st.etag = r.etag;
    await loadScenario();
    renderMeta();
    toast(`${SECTION_LABELS[s]} ${st.ready ? "marked ready" : "no longer marked ready"}.`);
  } catch (err) {
    if (err instanceof ApiError && err.status === 412) await resolveConflict(s);
    else toast(errorText(err), "bad");
  }
}

// ---------------------------------------------------------------- save and conflicts

async function save(s) {
  const st = state.sec[s];
  st.saveBtn.disabled = true;
  try {
    const r = await api.put(`/scenarios/${sid}/sections/${s}`, { data: st.editor.draft, message: st.message.value }, { ifMatch: st.etag });
    st.etag = r.etag;
    st.base = clone(r.data.data);
    st.editor.setData(st.base);
    st.message.value = "";
    onEdit(s);
    st.banner.replaceChildren();
    await Promise.all([loadScenario(), loadRevisions()]);
    renderMeta();
    toast(`${SECTION_LABELS[s]} saved as revision ${r.data.revision}.`);
  } catch (err) {
    if (err instanceof ApiError && err.status === 412) await resolveConflict(s);
    else if (err instanceof ApiError && err.status === 422) {
      placeErrors(err.errors);
      toast("Not saved: fix the fields marked in red.", "bad");
    } else toast(`Not saved: ${errorText(err)}`, "bad");
    st.saveBtn.disabled = !st.dirty;
  }
}

function discard(s) {
  const st = state.sec[s];
  st.editor.setData(st.base);
  onEdit(s);
  st.banner.replaceChildren();
}

/** A colleague saved the section since we read it: show both changes, offer to re-apply ours. */
async function resolveConflict(s) {
  const st = state.sec[s];
  const current = await api.getFull(`/scenarios/${sid}/sections/${s}`);
  const theirs = current.data.data;
  const mine = jsonDiff(st.base, st.editor.draft);
  const theirChange = jsonDiff(st.base, theirs);
  await loadRevisions();
  const by = state.revisions.filter((r) => r.section === s && r.number > (st.serverRevision || 0) && r.number <= current.data.revision);
  const overlap = mine.filter((m) => theirChange.some((t) => t.path === m.path || t.path.startsWith(`${m.path}.`) || m.path.startsWith(`${t.path}.`)));
  const dlg = document.getElementById("conflict");
  const prefix = (list) => list.map((d) => ({ ...d, path: `${s}.${d.path}` }));
  const who = by.length ? by.map((r) => `${r.author || "someone"} (revision ${r.number}, ${fmtTime(r.created_at)}${r.message ? `: “${r.message}”` : ""})`).join("; ") : "a colleague";
  const reapply = h("button", { type: "button", class: "primary", "data-testid": "reapply" }, "Re-apply my changes on their version");
  const takeTheirs = h("button", { type: "button" }, "Take their version, drop mine");
  const keep = h("button", { type: "button" }, "Close and keep editing");
  dlg.replaceChildren(
    h("h2", { id: "conflict-title" }, `${SECTION_LABELS[s]} was changed while you were editing`),
    h("p", {}, `Your save was refused so that nothing is overwritten. Saved since you opened it by ${who}:`),
    diffTable(prefix(theirChange), { empty: "Their save changed no field of this section (only its state)." }),
    h("h3", {}, "Your unsaved changes"),
    diffTable(prefix(mine), { empty: "You have no unsaved changes." }),
    ...(overlap.length ? [h("p", { class: "notice warn" }, `You both changed ${overlap.map((o) => `${s}.${o.path}`).join(", ")}. Re-applying keeps your values there.`)] : []),
    h("div", { class: "savebar" }, reapply, takeTheirs, keep));
  reapply.addEventListener("click", () => {
    const merged = applyDiff(theirs, mine);
    st.base = clone(theirs);
    st.etag = current.etag;
    st.serverRevision = current.data.revision;
    st.editor.setData(merged);
    onEdit(s);
    st.banner.replaceChildren(h("div", { class: "notice", "data-testid": "reapplied" },
      `Your changes are applied on top of revision ${current.data.revision}. Check them and save again.`));
    dlg.close();
    st.saveBtn.focus();
  });
  takeTheirs.addEventListener("click", () => {
    localStorage.setItem(`${draftKey(s)}-dropped`, JSON.stringify(st.editor.draft));
    st.base = clone(theirs);
    st.etag = current.etag;
    st.serverRevision = current.data.revision;
    st.editor.setData(theirs);
    onEdit(s);
    dlg.close();
  });
  keep.addEventListener("click", () => dlg.close());
  dlg.showModal();
  reapply.focus();
  await loadScenario();
  renderMeta();
}

/** Unsaved drafts kept in this browser from an earlier visit. */
function restoreDrafts() {
  for (const s of SECTIONS) {
    const raw = localStorage.getItem(draftKey(s));
    if (!raw || !canEdit(role, s)) continue;
    let kept;
    try { kept = JSON.parse(raw); } catch { continue; }
    const st = state.sec[s];
    const mine = jsonDiff(kept.base, kept.draft);
    if (!mine.length) continue;
    const merged = kept.etag === st.etag ? kept.draft : applyDiff(st.base, mine);
    st.editor.setData(merged);
    onEdit(s);
    st.banner.replaceChildren(h("div", { class: "notice warn" },
      `Unsaved changes from your last visit were restored (${mine.length} field${mine.length > 1 ? "s" : ""})${kept.etag === st.etag ? "" : " on top of the newer saved version"}. `,
      h("button", { type: "button", class: "link", onclick: () => discard(s) }, "Discard them")));
  }
}

// ---------------------------------------------------------------- comments

const comments = new Comments({ projectId: scenario.project_id, scenarioId: sid, container: h("div"),
  canComment: role !== "viewer", onChange: updateCounts,
  filter: (c) => c.section === state.active });

function updateCounts(cm) {
  const counts = cm.counts();
  for (const s of SECTIONS) {
    const n = counts.bySection[s] || 0;
    const badge = document.querySelector(`[data-count=${s}]`);
    badge.textContent = String(n);
    badge.classList.toggle("zero", n === 0);
    badge.setAttribute("aria-label", `${n} unresolved comment${n === 1 ? "" : "s"}`);
    state.sec[s].editor.setCommentCounts(counts.byField);
  }
  const box = state.sec[state.active].comments;
  if (cm.container.parentNode !== box) box.replaceChildren(cm.container);
}

function openComment(anchor) {
  const box = state.sec[state.active].comments;
  box.replaceChildren(comments.container);
  comments.compose(anchor);
}

tabList.addEventListener("click", () => updateCounts(comments));
tabList.addEventListener("keyup", () => updateCounts(comments));

// ---------------------------------------------------------------- history, fork

function renderRevisions() {
  const box = document.getElementById("revisions");
  box.replaceChildren(h("table", {},
    h("thead", {}, h("tr", {}, h("th", { class: "num" }, "Rev."), h("th", {}, "Change"), h("th", {}, "By"), h("th", {}, "When"))),
    h("tbody", {}, state.revisions.map((r) => h("tr", {},
      h("td", { class: "num" }, h("button", { type: "button", class: "link", "data-rev": r.number, onclick: () => showRevision(r.number) }, `r${r.number}`)),
      h("td", {}, `${r.kind}${r.section ? ` · ${SECTION_LABELS[r.section]}` : ""}`, r.message ? h("div", { class: "small muted" }, r.message) : null,
        h("div", { class: "small faint" }, `${r.changes} field${r.changes === 1 ? "" : "s"}`)),
      h("td", {}, r.author || "–"), h("td", { class: "num small" }, fmtTime(r.created_at)))))));
}

async function showRevision(n) {
  const r = await api.get(`/scenarios/${sid}/revisions/${n}`);
  const box = document.getElementById("revision-detail");
  const canRevert = role !== "reviewer" && role !== "viewer" && n !== state.scenario.head_revision;
  const revert = h("button", { type: "button", onclick: async () => {
    try {
      await api.post(`/scenarios/${sid}/revisions/${n}/revert`, {}, { ifMatch: state.scenario.etag });
      toast(`Revision ${n} brought back as a new revision; reloading.`);
      setTimeout(() => location.reload(), 600);
    } catch (err) { toast(errorText(err), "bad"); }
  } }, "Bring back this revision");
  box.replaceChildren(h("h3", {}, `Revision ${r.number}: ${r.kind}${r.section ? `, ${SECTION_LABELS[r.section]}` : ""}`),
    h("p", { class: "small muted" }, `${r.author || "someone"}, ${fmtTime(r.created_at)}${r.message ? ` — “${r.message}”` : ""}`),
    diffTable(r.diff, { empty: "This revision changed no field (it created or copied the scenario)." }),
    ...(canRevert ? [h("div", { class: "savebar" }, revert)] : []));
}

const forkDialog = document.getElementById("fork-dialog");
document.getElementById("btn-fork").hidden = role === "reviewer";
document.getElementById("btn-fork").addEventListener("click", () => {
  document.getElementById("fork-name").value = `${state.scenario.name} (fork)`;
  forkDialog.showModal();
});
document.getElementById("fork-form").addEventListener("submit", async (e) => {
  if (e.submitter && e.submitter.value !== "fork") return;
  e.preventDefault();
  try {
    const f = await api.post(`/scenarios/${sid}/fork`, { name: document.getElementById("fork-name").value.trim() });
    location.assign(`/scenario.html?id=${f.id}`);
  } catch (err) {
    document.getElementById("fork-error").textContent = errorText(err);
  }
});

// ---------------------------------------------------------------- runs

const runs = new RunsPanel({ container: document.getElementById("runs"), scenario, role,
  getDocument: () => { const d = clone(state.meta); for (const s of SECTIONS) d[s] = state.sec[s].base; return d; } });

await loadRevisions();
renderMeta();
restoreDrafts();
await Promise.all([comments.load(), runs.load()]);
updateCounts(comments);
