import { api } from "./api.js";
import { startPage, h, fmtTime, ROLE_LABELS, errorText } from "./shell.js";

await startPage([["Projects"]]);

async function load() {
  const list = await api.get("/projects");
  const box = document.getElementById("projects");
  if (!list.length) {
    box.replaceChildren(h("p", { class: "empty" }, "You are not a member of any project yet."));
    return;
  }
  box.replaceChildren(h("table", {},
    h("thead", {}, h("tr", {}, h("th", {}, "Project"), h("th", {}, "Your role"), h("th", {}, "Created"))),
    h("tbody", {}, list.map((p) => h("tr", {},
      h("td", {}, h("a", { href: `/project.html?id=${p.id}` }, p.name),
        p.description ? h("div", { class: "small muted" }, p.description) : null),
      h("td", {}, ROLE_LABELS[p.role] || p.role),
      h("td", { class: "num" }, fmtTime(p.created_at)))))));
}

document.getElementById("new-project").addEventListener("submit", async (e) => {
  e.preventDefault();
  const err = document.getElementById("new-error");
  err.textContent = "";
  try {
    const p = await api.post("/projects", {
      name: document.getElementById("p-name").value.trim(),
      description: document.getElementById("p-desc").value,
    });
    location.assign(`/project.html?id=${p.id}`);
  } catch (ex) {
    err.textContent = errorText(ex);
  }
});

await load();
