// The project board: counts, labels per day, agreement, the reliability
// table, the latest verdict with its report, the next batch, and the
// actions (run a round, export). All text from the server goes in with
// textContent.
"use strict";

(() => {
  const { el, clear, api, session, signOut, fmt } = loop;
  const $ = (id) => document.getElementById(id);
  const SVG = "http://www.w3.org/2000/svg";

  function svg(tag, attrs, text) {
    const e = document.createElementNS(SVG, tag);
    for (const [k, v] of Object.entries(attrs || {})) e.setAttribute(k, String(v));
    if (text !== undefined) e.textContent = text;
    return e;
  }

  function table(headers, rows, numeric) {
    const t = el("table");
    const tr = el("tr");
    headers.forEach((h, i) => tr.append(el("th", { scope: "col", class: numeric && numeric[i] ? "num" : null }, h)));
    t.append(el("thead", {}, tr));
    const body = el("tbody");
    for (const r of rows) {
      const row = el("tr");
      r.forEach((c, i) => row.append(el("td", { class: numeric && numeric[i] ? "num" : null }, c === undefined || c === null ? "–" : String(c))));
      body.append(row);
    }
    t.append(body);
    return t;
  }

  function note(node, text) {
    clear(node).append(el("p", { class: "muted" }, text));
  }

  function iv(e) {
    if (!e || !e.defined) return "–";
    return fmt(e.value) + " [" + fmt(e.lo) + ", " + fmt(e.hi) + "]";
  }

  async function loadStatus() {
    const s = await api("GET", "/api/v1/status");
    $("title").textContent = "Project " + (s.codebook || "");
    const tiles = clear($("tiles"));
    const t = (n, label) => tiles.append(el("div", { class: "tile" }, el("div", { class: "n" }, String(n)), el("div", { class: "t" }, label)));
    t(s.items, "items");
    t(s.labels, "labels");
    t(s.labelled_items, "items with labels");
    t(s.annotators, "annotators");
    t(s.gold, "gold answers");
    t(s.pool.open_items, "items still wanting labels");
    t(s.pool.live_leases, "items in someone's hands");
    t(s.rounds, "rounds");
    showJob(s.round_job);
  }

  function showJob(j) {
    const st = $("round-status");
    const btn = $("run-round");
    btn.disabled = j.state === "running";
    if (j.state === "running") st.textContent = "A round is running…";
    else if (j.state === "done") st.textContent = "The last round finished in " + fmt(j.seconds, 1) + " s.";
    else if (j.state === "failed") st.textContent = "The last round failed: " + j.error;
    else st.textContent = "";
  }

  async function loadDays() {
    const d = await api("GET", "/api/v1/labels-per-day");
    const box = clear($("days"));
    const days = d.days.slice(-30);
    if (days.length === 0) { note(box, "No labels with a time yet."); return; }
    const W = 600, H = 200, pad = 28, bw = Math.min(48, (W - pad * 2) / days.length);
    const maxN = Math.max(...days.map((x) => x.labels));
    const g = svg("svg", { viewBox: "0 0 " + W + " " + H, role: "img", "aria-labelledby": "days-title days-desc" });
    g.append(svg("desc", { id: "days-desc" }, "Bar chart of labels per day over the last " + days.length + " days with labels; the table below has the numbers."));
    g.append(svg("line", { class: "axis", x1: pad, y1: H - pad, x2: W - pad, y2: H - pad }));
    days.forEach((x, i) => {
      const h = maxN ? (H - pad * 2) * x.labels / maxN : 0;
      const r = svg("rect", { class: "bar", x: pad + i * bw + 1, y: H - pad - h, width: Math.max(1, bw - 2), height: h });
      r.append(svg("title", {}, x.day + ": " + x.labels + " labels"));
      g.append(r);
    });
    g.append(svg("text", { x: pad, y: H - 8 }, days[0].day));
    g.append(svg("text", { x: W - pad, y: H - 8, "text-anchor": "end" }, days[days.length - 1].day));
    g.append(svg("text", { x: pad, y: pad - 8 }, "max " + maxN));
    box.append(g);
    const det = el("details", {}, el("summary", {}, "Numbers"));
    det.append(table(["day", "labels"], days.map((x) => [x.day, x.labels]), [false, true]));
    box.append(det);
  }

  async function loadAgreement() {
    const box = $("agreement");
    try {
      const a = await api("GET", "/api/v1/agreement");
      const rows = [["Fleiss' kappa", iv(a.fleiss_kappa)]];
      for (const m of ["nominal", "ordinal", "interval"]) {
        if (a.krippendorff_alpha && a.krippendorff_alpha[m]) rows.push(["Krippendorff's alpha (" + m + ")", iv(a.krippendorff_alpha[m])]);
      }
      clear(box).append(table(["statistic", "value [95% interval]"], rows),
        el("p", { class: "muted" }, a.items + " items, " + a.labels + " labels after cleaning."));
    } catch (e) {
      note(box, e.message);
    }
  }

  async function loadPeople() {
    const r = await api("GET", "/api/v1/annotators");
    const rows = r.annotators.map((p) => [
      p.annotator, p.labels, p.kappa ? iv(p.kappa) : "–",
      p.mean_seconds ? fmt(p.mean_seconds, 1) : "–", p.unsure,
      p.quiz ? (p.quiz.passed ? "passed" : (p.quiz.attempts ? "not passed" : "not taken")) : "–",
    ]);
    const box = clear($("people"));
    if (rows.length === 0) { note(box, "Nobody yet."); return; }
    box.append(table(["person", "labels", "kappa vs others", "seconds per label", "unsure", "quiz"], rows,
      [false, true, false, true, true, false]));
  }

  async function loadVerdict() {
    const box = $("verdict");
    let v;
    try {
      v = await api("GET", "/api/v1/verdict");
    } catch (e) {
      note(box, e.status === 409 ? "No verdict yet: run a round first." : e.message);
      return;
    }
    const d = v.decision || {};
    clear(box);
    box.append(el("p", { class: "decision " + (d.go ? "go" : "wait"), id: "decision" },
      d.go ? "GO: the machine may label items above the threshold" : "NOT YET: people should keep labelling"));
    const facts = [];
    if (d.go) {
      facts.push(["threshold", fmt(d.threshold, 3)]);
      facts.push(["share of the archive covered", fmt(100 * d.archive_coverage, 1) + " %"]);
      facts.push(["upper bound on disagreement", fmt(100 * d.bound, 2) + " %"]);
    } else if (d.labels_needed > 0) {
      facts.push(["labels still needed (estimate)", String(d.labels_needed)]);
    }
    if (facts.length) box.append(table(["figure", "value"], facts));
    box.append(el("p", { class: "muted" }, "The full report follows: agreement with intervals, confusion matrix, crowd ceiling, coverage and risk, calibration, stop rule and learning curve."));
    // The report has no scripts; the frame may not run any either.
    box.append(el("iframe", {
      class: "report", id: "report", title: "Verdict report with its plots",
      src: "/api/v1/verdict/report", sandbox: "allow-same-origin",
    }));
    box.append(el("p", {}, el("a", { href: "/api/v1/verdict/report", target: "_blank", rel: "noopener" }, "Open the report on its own page")));
  }

  async function loadBatch() {
    const r = await api("GET", "/api/v1/next-batch");
    const box = clear($("batch"));
    const b = Array.isArray(r.batch) ? r.batch : [];
    if (b.length === 0) { note(box, "No next batch yet: a round picks it."); return; }
    const counts = {};
    b.forEach((x) => { counts[x.reason] = (counts[x.reason] || 0) + 1; });
    box.append(el("p", { class: "muted" }, "Round " + r.round + ": " + b.length + " items — " +
      Object.entries(counts).map(([k, n]) => n + " " + k).join(", ") + "."));
    box.append(table(["item", "reason", "score"], b.slice(0, 25).map((x) => [x.item, x.reason, fmt(x.score, 3)]), [false, false, true]));
  }

  async function loadUnsure() {
    const r = await api("GET", "/api/v1/unsure");
    const box = clear($("unsure"));
    if (r.items.length === 0) { note(box, "Nobody has marked an item as hard to tell."); return; }
    box.append(table(["item", "people unsure"], r.items.slice(0, 25).map((x) => [x.item, x.people]), [false, true]));
  }

  async function loadAll() {
    const parts = [loadStatus, loadDays, loadAgreement, loadPeople, loadVerdict, loadBatch, loadUnsure];
    await Promise.all(parts.map((f) => f().catch((e) => console.error(e))));
  }

  async function runRound() {
    $("run-round").disabled = true;
    $("round-status").textContent = "Starting a round…";
    try {
      const r = await api("POST", "/api/v1/rounds");
      showJob(r.round_job);
    } catch (e) {
      $("round-status").textContent = "Could not start a round: " + e.message;
      $("run-round").disabled = false;
      return;
    }
    for (;;) {
      await new Promise((res) => setTimeout(res, 700));
      const r = await api("GET", "/api/v1/rounds");
      showJob(r.round_job);
      if (r.round_job.state !== "running") break;
    }
    await loadAll();
    $("run-round").focus();
  }

  document.addEventListener("DOMContentLoaded", async () => {
    $("signout").addEventListener("click", signOut);
    $("run-round").addEventListener("click", runRound);
    try {
      const s = await session();
      $("who").textContent = s.id;
      if (!s.admin) {
        clear($("main")).append(el("p", { class: "notice bad" }, "The board is for the project team; your token is an annotator's."),
          el("p", {}, el("a", { href: "/label" }, "Go to the labelling page")));
        return;
      }
      await loadAll();
      document.body.dataset.ready = "1";
    } catch (e) {
      console.error(e);
    }
  });
})();
