"use strict";

document.addEventListener("DOMContentLoaded", () => {
  const form = document.getElementById("signin");
  const input = document.getElementById("token");
  const status = document.getElementById("signin-status");
  input.focus();
  form.addEventListener("submit", async (ev) => {
    ev.preventDefault();
    status.textContent = "Checking…";
    const resp = await fetch("/api/v1/session", {
      method: "POST", credentials: "same-origin",
      headers: { "Content-Type": "application/json" },
      body: JSON.stringify({ token: input.value.trim() }),
    });
    let data = null;
    try { data = await resp.json(); } catch (e) { /* not JSON */ }
    if (!resp.ok) {
      status.textContent = (data && data.error) ? "Not signed in: " + data.error : "Not signed in.";
      input.select();
      return;
    }
    const next = new URLSearchParams(location.search).get("next");
    const allowed = ["/label", "/board"];
    location.assign(allowed.includes(next) ? next : (data.admin ? "/board" : "/label"));
  });
});
