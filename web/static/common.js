// Shared helpers of the pages. Everything shown on a page is built with
// DOM calls and textContent: text from the server is never parsed as HTML.
"use strict";

const loop = (() => {
  let csrf = "";

  // el(tag, {attr: value, onclick: fn}, child, …): a new element. String
  // children become text nodes.
  function el(tag, attrs, ...children) {
    const e = document.createElement(tag);
    for (const [k, v] of Object.entries(attrs || {})) {
      if (v === undefined || v === null || v === false) continue;
      if (k.startsWith("on")) e.addEventListener(k.slice(2), v);
      else if (k === "text") e.textContent = v;
      else e.setAttribute(k, v === true ? "" : String(v));
    }
    for (const c of children) {
      if (c === null || c === undefined) continue;
      e.append(typeof c === "string" || typeof c === "number" ? document.createTextNode(String(c)) : c);
    }
    return e;
  }

  function clear(node) {
    while (node.firstChild) node.removeChild(node.firstChild);
    return node;
  }

  class HTTPError extends Error {
    constructor(status, body) {
      super((body && body.error) || ("HTTP " + status));
      this.status = status;
      this.code = body && body.code;
    }
  }

  // api(method, path, body): JSON request with the session's CSRF header.
  async function api(method, path, body, extraHeaders) {
    const headers = { "X-CSRF-Token": csrf };
    if (body !== undefined) headers["Content-Type"] = "application/json";
    Object.assign(headers, extraHeaders || {});
    const resp = await fetch(path, {
      method, headers, credentials: "same-origin",
      body: body === undefined ? undefined : JSON.stringify(body),
    });
    let data = null;
    const ct = resp.headers.get("Content-Type") || "";
    if (ct.startsWith("application/json")) data = await resp.json();
    if (resp.status === 401) {
      location.assign("/signin?next=" + encodeURIComponent(location.pathname));
      throw new HTTPError(401, data);
    }
    if (!resp.ok) throw new HTTPError(resp.status, data);
    return data;
  }

  // session() loads who is signed in (or sends them to the sign-in page).
  async function session() {
    const s = await api("GET", "/api/v1/session");
    csrf = s.csrf;
    return s;
  }

  async function signOut() {
    try { await api("DELETE", "/api/v1/session"); } catch (e) { /* signed out anyway */ }
    location.assign("/signin");
  }

  // Numbers, the same way on every page: counts with thousands separators
  // (int), statistics — kappa, alpha, probabilities, thresholds — with three
  // decimals (stat), percentages with one (pct), seconds with one (fmt(x, 1)).
  const intFmt = new Intl.NumberFormat("en", { maximumFractionDigits: 0 });
  const fixed = (d) => new Intl.NumberFormat("en", { minimumFractionDigits: d, maximumFractionDigits: d });
  const fixedFmt = [0, 1, 2, 3, 4].map(fixed);

  function missing(x) { return x === null || x === undefined || Number.isNaN(Number(x)); }

  function fmt(x, digits) {
    if (missing(x)) return "–";
    const d = digits === undefined ? 3 : digits;
    return (fixedFmt[d] || fixed(d)).format(Number(x));
  }

  function int(x) { return missing(x) ? "–" : intFmt.format(Math.round(Number(x))); }
  function stat(x) { return fmt(x, 3); }
  function pct(share) { return missing(share) ? "–" : fmt(100 * share, 1) + "%"; }

  // newKey returns a fresh idempotency key.
  function newKey() {
    if (window.crypto && crypto.randomUUID) return crypto.randomUUID();
    const b = new Uint8Array(16);
    crypto.getRandomValues(b);
    return Array.from(b, (x) => x.toString(16).padStart(2, "0")).join("");
  }

  return { el, clear, api, session, signOut, fmt, int, stat, pct, newKey, HTTPError };
})();
