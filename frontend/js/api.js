// Thin client of the Porecast HTTP API: JSON in and out, the CSRF header on
// every unsafe request (signed double-submit cookie), errors as ApiError.

const CSRF_COOKIE = "porecast_csrf";
const SAFE = new Set(["GET", "HEAD", "OPTIONS"]);

export class ApiError extends Error {
  constructor(status, body) {
    super((body && body.detail) || `HTTP ${status}`);
    this.status = status;
    this.detail = (body && body.detail) || `HTTP ${status}`;
    this.errors = (body && Array.isArray(body.errors)) ? body.errors : [];
    this.currentEtag = body ? body.current_etag : null;
    this.body = body;
  }
}

function cookie(name) {
  const hit = document.cookie.split(";").map((c) => c.trim()).find((c) => c.startsWith(name + "="));
  return hit ? decodeURIComponent(hit.slice(name.length + 1)) : "";
}

/**
 * Call the API. Returns {data, etag, status}. Throws ApiError on a non-2xx answer.
 * A 401 sends the browser to the sign-in page (unless `noRedirect`).
 */
export async function request(method, path, { json, ifMatch, noRedirect, signal } = {}) {
  const headers = { Accept: "application/json" };
  if (json !== undefined) headers["Content-Type"] = "application/json";
  if (!SAFE.has(method)) headers["X-CSRF-Token"] = cookie(CSRF_COOKIE);
  if (ifMatch) headers["If-Match"] = ifMatch;
  const res = await fetch(path.startsWith("/") ? path : `/api/${path}`, {
    method, headers, credentials: "same-origin", signal,
    body: json === undefined ? undefined : JSON.stringify(json),
  });
  let body = null;
  const type = res.headers.get("content-type") || "";
  if (res.status !== 204) body = type.includes("json") ? await res.json() : await res.text();
  if (!res.ok) {
    if (res.status === 401 && !noRedirect) {
      const next = encodeURIComponent(location.pathname + location.search);
      location.assign(`/index.html?next=${next}`);
    }
    throw new ApiError(res.status, typeof body === "object" ? body : { detail: body });
  }
  return { data: body, etag: res.headers.get("ETag"), status: res.status };
}

export const api = {
  get: (p, o) => request("GET", `/api${p}`, o).then((r) => r.data),
  getFull: (p, o) => request("GET", `/api${p}`, o),
  post: (p, json, o = {}) => request("POST", `/api${p}`, { ...o, json }).then((r) => r.data),
  postFull: (p, json, o = {}) => request("POST", `/api${p}`, { ...o, json }),
  put: (p, json, o = {}) => request("PUT", `/api${p}`, { ...o, json }),
  patch: (p, json, o = {}) => request("PATCH", `/api${p}`, { ...o, json }),
  del: (p, o = {}) => request("DELETE", `/api${p}`, o),
};
