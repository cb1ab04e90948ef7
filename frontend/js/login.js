import { api, ApiError } from "./api.js";

const form = document.getElementById("login");
const error = document.getElementById("login-error");

function target() {
  const next = new URLSearchParams(location.search).get("next");
  // Only same-site paths: never follow a full URL given in the query.
  return next && next.startsWith("/") && !next.startsWith("//") ? next : "/projects.html";
}

api.get("/auth/me", { noRedirect: true }).then(() => location.replace(target())).catch(() => {
  document.getElementById("username").focus();
});

form.addEventListener("submit", async (e) => {
  e.preventDefault();
  error.textContent = "";
  const username = form.username.value.trim();
  const password = form.password.value;
  if (!username || !password) {
    error.textContent = "Enter your user name and password.";
    return;
  }
  const button = form.querySelector("button");
  button.disabled = true;
  try {
    await api.post("/auth/login", { username, password }, { noRedirect: true });
    location.assign(target());
  } catch (err) {
    if (err instanceof ApiError && err.status === 429) {
      error.textContent = "Too many failed attempts. Wait a few minutes and try again.";
    } else if (err instanceof ApiError && err.status === 401) {
      error.textContent = "User name or password not recognised.";
    } else {
      error.textContent = `Sign-in failed: ${err.message}`;
    }
    form.password.select();
  } finally {
    button.disabled = false;
  }
});
