// Comment threads anchored to a scenario section, a field or a map location.

import { api } from "./api.js";
import { h, fmtTime, fmt, SECTION_LABELS, errorText, toast } from "./shell.js";

export function anchorLabel(c) {
  if (c.x !== null && c.x !== undefined) return `map x ${fmt(c.x, { fixed: 0 })} m, y ${fmt(c.y, { fixed: 0 })} m`;
  if (c.field_path) return c.field_path;
  if (c.section) return SECTION_LABELS[c.section] || c.section;
  return "scenario";
}

export class Comments {
  constructor({ projectId, scenarioId, container, canComment, onChange, filter }) {
    Object.assign(this, { projectId, scenarioId, container, canComment, onChange });
    this.filter = filter || (() => true);
    this.all = [];
    this.draftAnchor = null;
    this.list = h("div", { class: "threads", "data-testid": "threads" });
    this.composer = h("div");
    this.showResolved = false;
    const toggle = h("input", { type: "checkbox", id: `cm-resolved-${Math.random().toString(36).slice(2, 7)}` });
    toggle.addEventListener("change", () => { this.showResolved = toggle.checked; this.render(); });
    container.replaceChildren(this.composer, h("div", { class: "small" }, toggle, " ",
      h("label", { for: toggle.id }, "show resolved threads")), this.list);
  }

  async load() {
    const q = this.scenarioId ? `?scenario_id=${this.scenarioId}` : "";
    this.all = await api.get(`/projects/${this.projectId}/comments${q}`);
    this.render();
    this.onChange && this.onChange(this);
  }

  threads() {
    const roots = this.all.filter((c) => c.parent_id === null);
    return roots.map((r) => ({ root: r, replies: this.all.filter((c) => c.thread_id === r.id && c.id !== r.id) }));
  }

  /** Unresolved thread counts: {bySection: {burial: n}, byField: {"burial.x": n}, map: n}. */
  counts() {
    const out = { bySection: {}, byField: {}, map: 0, total: 0 };
    for (const { root } of this.threads()) {
      if (root.resolved_at) continue;
      out.total += 1;
      if (root.section) out.bySection[root.section] = (out.bySection[root.section] || 0) + 1;
      if (root.field_path) out.byField[root.field_path] = (out.byField[root.field_path] || 0) + 1;
      if (root.x !== null && root.x !== undefined) out.map += 1;
    }
    return out;
  }

  setFilter(fn) {
    this.filter = fn;
    this.render();
  }

  /** Open the composer for a new thread at `anchor` ({section, field_path, x, y, grid_id, label}). */
  compose(anchor) {
    if (!this.canComment) { toast("Your role cannot comment in this project.", "bad"); return; }
    this.draftAnchor = anchor;
    const id = "cm-new-body";
    const text = h("textarea", { id, "aria-label": `New comment on ${anchor.label}`, maxlength: 10000 });
    const send = h("button", { type: "submit", class: "primary" }, "Post comment");
    const form = h("form", { class: "thread", "data-testid": "comment-composer" },
      h("div", { class: "anchor" }, `New comment on ${anchor.label}`),
      text, h("div", { class: "row", style: { display: "flex", gap: "6px", marginTop: "4px" } }, send,
        h("button", { type: "button", onclick: () => this.composer.replaceChildren() }, "Cancel")));
    form.addEventListener("submit", async (e) => {
      e.preventDefault();
      if (!text.value.trim()) { text.focus(); return; }
      send.disabled = true;
      const rest = { ...anchor };
      delete rest.label;
      try {
        await api.post(`/projects/${this.projectId}/comments`, { body: text.value, scenario_id: this.scenarioId || undefined, ...rest });
        this.composer.replaceChildren();
        await this.load();
        toast("Comment posted.");
      } catch (err) {
        toast(errorText(err), "bad");
        send.disabled = false;
      }
    });
    this.composer.replaceChildren(form);
    text.focus();
  }

  render() {
    const shown = this.threads().filter(({ root }) => this.filter(root) && (this.showResolved || !root.resolved_at));
    if (!shown.length) {
      this.list.replaceChildren(h("p", { class: "empty" }, "No open comments here."));
      return;
    }
    this.list.replaceChildren(...shown.map(({ root, replies }) => this.renderThread(root, replies)));
  }

  renderThread(root, replies) {
    const replyBox = h("textarea", { "aria-label": "Reply", placeholder: "Reply…", rows: 1 });
    const replyForm = h("form", { class: "row" }, replyBox, h("button", { type: "submit" }, "Reply"));
    replyForm.addEventListener("submit", async (e) => {
      e.preventDefault();
      if (!replyBox.value.trim()) return;
      try {
        await api.post(`/projects/${this.projectId}/comments`, { body: replyBox.value, parent_id: root.id });
        await this.load();
      } catch (err) { toast(errorText(err), "bad"); }
    });
    const resolve = h("button", { type: "button", class: "link small", onclick: async () => {
      try {
        await api.put(`/comments/${root.id}/resolved`, { resolved: !root.resolved_at });
        await this.load();
      } catch (err) { toast(errorText(err), "bad"); }
    } }, root.resolved_at ? "reopen" : "resolve");
    return h("div", { class: `thread ${root.resolved_at ? "resolved" : ""}`, "data-thread": root.id },
      h("div", { class: "anchor" }, anchorLabel(root)),
      h("div", {}, root.body),
      h("div", { class: "by" }, `${root.author || "someone"} · ${fmtTime(root.created_at)}`, root.resolved_at ? " · resolved" : "", " ", this.canComment ? resolve : null),
      replies.map((r) => h("div", { class: "reply" }, h("div", {}, r.body), h("div", { class: "by" }, `${r.author || "someone"} · ${fmtTime(r.created_at)}`))),
      this.canComment && !root.resolved_at ? replyForm : null);
  }
}
