// The project board: counts, labels per day, agreement, the reliability
// table, who may sign in (add, new token, revoke, grant a check attempt),
// the latest verdict with its report, the next batch, and the actions (run
// a round with the stored settings after showing them, export). All text
// from the server goes in with textContent.
"use strict";

(() => {
  const { el, clear, api, session, signOut, fmt, int, stat, pct } = loop;
  const $ = (id) => document.getElementById(id);
  const SVG = "http://www.w3.org/2000/svg";
  const board = { scale: "nominal", rows: 25 };

  function svg(tag, attrs, text) {
    const e = document.createElementNS(SVG, tag);
    for (const [k, v] of Object.entries(attrs || {})) e.setAttribute(k, String(v));
    if (text !== undefined) e.textContent = text;
    return e;
  }

  function cell(c) {
    if (c === undefined || c === null) return "–";
    return c instanceof Node ? c : String(c);
  }

  function table(headers, rows, numeric) {
    const t = el("table");
    const tr = el("tr");
    headers.forEach((h, i) => tr.append(el("th", { scope: "col", class: numeric && numeric[i] ? "num" : null }, h)));
    t.append(el("thead", {}, tr));
    const body = el("tbody");
    for (const r of rows) {
      const row = el("tr");
      r.forEach((c, i) => row.append(el("td", { class: numeric && numeric[i] ? "num" : null }, cell(c))));
      body.append(row);
    }
    t.append(body);
    return t;
  }

  // sortable builds a table whose column headers sort it (click or Enter on
  // a header's button; again reverses). cols: {title, num, key(row) → sort
  // value, show(row) → text or node, cls}. Missing values sort last.
  function sortable(id, cols, rows, first) {
    const st = { col: first.col, dir: first.dir };
    const box = clear($(id));
    const t = el("table", { id: id + "-table" });
    const head = el("tr");
    const body = el("tbody");
    const ths = cols.map((c, i) => {
      const b = el("button", { type: "button", class: "sort" }, c.title);
      const th = el("th", { scope: "col", class: c.num ? "num" : null }, b);
      b.addEventListener("click", () => {
        st.dir = st.col === i ? -st.dir : (c.num ? -1 : 1);
        st.col = i;
        draw();
      });
      head.append(th);
      return th;
    });
    t.append(el("thead", {}, head), body);
    box.append(t);
    function draw() {
      const c = cols[st.col];
      const sorted = rows.slice().sort((a, b) => {
        const x = c.key(a), y = c.key(b);
        const mx = x === null || x === undefined, my = y === null || y === undefined;
        if (mx || my) return mx === my ? 0 : (mx ? 1 : -1);
        return (x < y ? -1 : x > y ? 1 : 0) * st.dir;
      });
      ths.forEach((th, i) => {
        if (i === st.col) th.setAttribute("aria-sort", st.dir > 0 ? "ascending" : "descending");
        else th.removeAttribute("aria-sort");
      });
      clear(body);
      for (const r of sorted) {
        const tr = el("tr");
        cols.forEach((cc) => tr.append(el("td", { class: [cc.num ? "num" : "", cc.cls || ""].join(" ").trim() || null }, cell(cc.show(r)))));
        body.append(tr);
      }
    }
    draw();
  }

  function note(node, text) {
    clear(node).append(el("p", { class: "muted" }, text));
  }

  // iv shows an estimate with its interval; an interval of no width (every
  // bootstrap replicate gave the same value: too few items) is not shown
  // as one.
  function iv(e) {
    if (!e || !e.defined) return "–";
    if (!(e.hi - e.lo > 1e-9)) return stat(e.value) + " (no interval: every resample gave this)";
    return stat(e.value) + " [" + stat(e.lo) + ", " + stat(e.hi) + "]";
  }

  async function loadStatus() {
    const s = await api("GET", "/api/v1/status");
    board.scale = s.scale || "nominal";
    $("title").textContent = "Project " + (s.codebook || "");
    const tiles = clear($("tiles"));
    const t = (n, label, id) => tiles.append(el("div", { class: "tile", id: id },
      el("div", { class: "n" }, int(n)), el("div", { class: "t" }, label)));
    t(s.items, "items", "tile-items");
    t(s.labels, "labels", "tile-labels");
    t(s.labelled_items, "items with labels", "tile-labelled");
    t(s.labellers, "annotators with labels", "tile-annotators");
    t(s.gold, "gold answers", "tile-gold");
    t(s.pool.open_items, "items still wanting labels", "tile-open");
    t(s.pool.live_leases, "items in someone's hands", "tile-leases");
    t(s.rounds, "rounds", "tile-rounds");
    showJob(s.round_job);
  }

  function showJob(j) {
    const st = $("round-status");
    const btn = $("run-round");
    btn.disabled = j.state === "running";
    const res = j.result || {};
    if (j.state === "running") st.textContent = "A round is running…";
    else if (j.state === "done" && res.unchanged) st.textContent = "No round was run: no labels are new since the last round, so it would have changed nothing.";
    else if (j.state === "done") st.textContent = "Round " + int(res.round) + " finished in " + fmt(j.seconds, 1) + " s. " + (res.headline || "");
    else if (j.state === "failed") st.textContent = "The last round failed: " + j.error;
    else st.textContent = "";
  }

  // ---- labels per day: a time axis with every day, ticks and a y axis ----

  const DAY = 86400000;
  const MONTHS = ["Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec"];
  const dayName = (t) => { const d = new Date(t); return d.getUTCDate() + " " + MONTHS[d.getUTCMonth()]; };

  // niceStep returns a round step (1, 2 or 5 × 10^k) giving at most n
  // intervals up to max.
  function niceStep(max, n) {
    const raw = Math.max(1, max / n);
    const p = Math.pow(10, Math.floor(Math.log10(raw)));
    for (const m of [1, 2, 5, 10]) if (m * p >= raw) return m * p;
    return 10 * p;
  }

  async function loadDays() {
    const d = await api("GET", "/api/v1/labels-per-day");
    const box = clear($("days"));
    if (d.days.length === 0) { note(box, "No labels with a time yet."); return; }
    const byDay = new Map(d.days.map((x) => [Date.parse(x.day + "T00:00:00Z"), x.labels]));
    const last = Date.parse(d.days[d.days.length - 1].day + "T00:00:00Z");
    const first = Math.max(Date.parse(d.days[0].day + "T00:00:00Z"), last - 119 * DAY);
    const n = Math.round((last - first) / DAY) + 1;
    const series = [];
    for (let i = 0; i < n; i++) series.push({ t: first + i * DAY, labels: byDay.get(first + i * DAY) || 0 });
    const maxN = Math.max(...series.map((x) => x.labels));
    // Drawn at the box's own width, so that its text is at its real size.
    const W = Math.max(300, Math.round(box.clientWidth || 600)), H = 230, L = 48, R = 14, T = 26, B = 30;
    const pw = W - L - R, ph = H - T - B, slot = pw / n;
    const yStep = niceStep(maxN, 4), yMax = Math.max(yStep, Math.ceil(maxN / yStep) * yStep);
    const y = (v) => T + ph - ph * v / yMax;
    const g = svg("svg", { viewBox: "0 0 " + W + " " + H, role: "img", "aria-labelledby": "days-title days-desc" });
    g.append(svg("desc", { id: "days-desc" }, "Bar chart of labels per day from " + dayName(first) + " to " + dayName(last) +
      " (days without labels at zero); the table below has the numbers."));
    for (let v = 0; v <= yMax + 1e-9; v += yStep) {
      g.append(svg("line", { class: v === 0 ? "axis" : "grid", x1: L, y1: y(v), x2: W - R, y2: y(v) }));
      g.append(svg("text", { x: L - 6, y: y(v) + 4, "text-anchor": "end" }, int(v)));
    }
    g.append(svg("line", { class: "axis", x1: L, y1: T, x2: L, y2: T + ph }));
    series.forEach((x, i) => {
      if (!x.labels) return;
      const h = ph * x.labels / yMax;
      const r = svg("rect", { class: "bar", x: L + i * slot + Math.min(1, slot * 0.1), y: T + ph - h, width: Math.max(1, slot - Math.min(2, slot * 0.2)), height: h });
      r.append(svg("title", {}, dayName(x.t) + ": " + int(x.labels) + " labels"));
      g.append(r);
    });
    const maxTicks = Math.max(2, Math.floor(pw / 70));
    const xStep = [1, 2, 7, 14, 28, 56, 112].find((s) => n / s <= maxTicks) || 112;
    for (let i = 0; i < n; i += xStep) {
      const cx = L + (i + 0.5) * slot;
      g.append(svg("line", { class: "tick", x1: cx, y1: T + ph, x2: cx, y2: T + ph + 5 }));
      g.append(svg("text", { x: cx, y: H - 10, "text-anchor": "middle" }, dayName(series[i].t)));
    }
    g.append(svg("text", { x: 4, y: 11 }, "labels per day"));
    box.append(g);
    const det = el("details", {}, el("summary", {}, "Numbers"));
    det.append(table(["day", "labels"], d.days.slice(-60).map((x) => [x.day, int(x.labels)]), [false, true]));
    if (d.without_time) det.append(el("p", { class: "muted" }, int(d.without_time) + " labels have no time and are not in the chart."));
    box.append(det);
  }

  async function loadAgreement() {
    const box = $("agreement");
    try {
      const a = await api("GET", "/api/v1/agreement");
      const rows = [["Fleiss' kappa", iv(a.fleiss_kappa)]];
      // Alpha with an ordered metric only where the classes have an order.
      const metrics = board.scale === "ordinal" ? ["nominal", "ordinal", "interval"] : ["nominal"];
      for (const m of metrics) {
        if (a.krippendorff_alpha && a.krippendorff_alpha[m]) rows.push(["Krippendorff's alpha (" + m + ")", iv(a.krippendorff_alpha[m])]);
      }
      clear(box).append(table(["statistic", "value [95% interval]"], rows, [false, true]),
        el("p", { class: "muted" }, int(a.items) + " items, " + int(a.labels) + " labels by " + int(a.annotators) + " people after cleaning."));
    } catch (e) {
      note(box, e.message);
    }
  }

  // checkWords says where a person stands in the practice gate; admins
  // need not take it.
  function checkWords(c, admin) {
    if (!c) return "–";
    if (admin && c.attempts === 0 && c.state !== "passed") return "not needed (admin)";
    switch (c.state) {
      case "off": return "no check";
      case "passed": return "passed" + (c.attempts > 1 ? " (attempt " + c.attempts + ")" : "");
      case "practice": return "practising";
      case "check": return "taking the check";
      case "failed": return "not passed (" + c.attempts + (c.attempts === 1 ? " attempt" : " attempts") + (c.of ? "; last " + c.right + " of " + c.of : "") + ")";
      case "locked": return "no attempts left (" + (c.of ? "last " + c.right + " of " + c.of : c.attempts + " attempts") + ")";
    }
    return c.state;
  }

  async function loadPeople() {
    const r = await api("GET", "/api/v1/annotators");
    if (r.annotators.length === 0) { note(clear($("people")), "Nobody yet."); return; }
    sortable("people", [
      { title: "person", key: (p) => p.annotator, show: (p) => p.annotator },
      { title: "labels", num: true, key: (p) => p.labels, show: (p) => int(p.labels) },
      { title: "kappa vs others", num: true, key: (p) => p.kappa ? p.kappa.value : null, show: (p) => iv(p.kappa) },
      { title: "reliability", num: true, key: (p) => p.reliability, show: (p) => p.reliability === undefined ? "–" : stat(p.reliability) },
      { title: "seconds per label", num: true, key: (p) => p.mean_seconds || null, show: (p) => p.mean_seconds ? fmt(p.mean_seconds, 1) : "–" },
      { title: "unsure", num: true, key: (p) => p.unsure, show: (p) => int(p.unsure) },
      { title: "check", key: (p) => p.check ? p.check.state : null, show: (p) => checkWords(p.check, false) },
      { title: "cleaning", cls: "why", key: (p) => p.dropped || p.flagged || (p.dropped_labels ? "labels" : null), show: (p) =>
        p.dropped ? "dropped — " + p.dropped :
          p.flagged ? "flagged — " + p.flagged :
            p.dropped_labels ? int(p.dropped_labels) + " labels dropped" : (p.labels ? "kept" : "–") },
    ], r.annotators, { col: 2, dir: 1 });
  }

  // ---- who may sign in ----

  // confirmInline replaces a button by "Really …? Yes / No" in place.
  function confirmInline(btn, question, action) {
    const td = btn.parentNode;
    const keep = Array.from(td.childNodes);
    const yes = el("button", { type: "button", class: "danger" }, "Yes, " + btn.textContent.toLowerCase());
    const no = el("button", { type: "button" }, "No");
    const back = () => { clear(td); keep.forEach((n) => td.append(n)); btn.focus(); };
    yes.addEventListener("click", async () => { yes.disabled = no.disabled = true; await action(); });
    no.addEventListener("click", back);
    clear(td).append(el("span", { class: "small" }, question + " "), yes, " ", no);
    no.focus();
  }

  function showToken(id, token, what) {
    const box = clear($("new-token"));
    const input = el("input", { type: "text", class: "token", id: "token-shown", readonly: true, value: token, "aria-label": "Token of " + id });
    box.append(el("div", { class: "notice good" },
      el("p", {}, what + " Give " + id + " this token; it is shown only now (the project keeps its hash, not the token):"),
      input,
      el("p", { class: "muted small" }, "They sign in at " + location.origin + "/signin.")));
    input.focus();
    input.select();
  }

  async function loadManage() {
    const r = await api("GET", "/api/v1/people");
    const box = clear($("manage"));
    if (r.people.length === 0) { note(box, "Nobody yet."); return; }
    const rows = r.people.map((p) => {
      const acts = el("td", { class: "acts" });
      const newTok = el("button", { type: "button" }, "New token");
      newTok.addEventListener("click", async () => {
        try {
          const t = await api("POST", "/api/v1/people/" + encodeURIComponent(p.id) + "/tokens");
          showToken(p.id, t.token, "New token for " + p.id + ".");
          await loadManage();
        } catch (e) { $("manage-status").textContent = "No new token: " + e.message; }
      });
      acts.append(newTok, " ");
      if (p.tokens.length > 0) {
        const rev = el("button", { type: "button", class: "danger", "data-revoke": p.id }, "Revoke");
        rev.addEventListener("click", () => confirmInline(rev, "Revoke every token of " + p.id + "? They are signed out at once.", async () => {
          try {
            const res = await api("DELETE", "/api/v1/people/" + encodeURIComponent(p.id) + "/tokens");
            $("manage-status").textContent = "Revoked " + res.revoked + (res.revoked === 1 ? " token" : " tokens") + " of " + p.id + ".";
          } catch (e) { $("manage-status").textContent = "Not revoked: " + e.message; }
          await loadManage();
        }));
        acts.append(rev, " ");
      }
      if (p.check && p.check.state === "locked") {
        const grant = el("button", { type: "button" }, "Allow another check");
        grant.addEventListener("click", async () => {
          try {
            await api("POST", "/api/v1/people/" + encodeURIComponent(p.id) + "/check");
            $("manage-status").textContent = p.id + " may take the check once more.";
          } catch (e) { $("manage-status").textContent = "Not allowed: " + e.message; }
          await loadManage();
        });
        acts.append(grant);
      }
      const tokens = p.tokens.length === 0 ? "none (revoked)" : p.tokens.map((t) => t.id).join(", ");
      return { p, acts, tokens };
    });
    const t = el("table", { id: "manage-table" });
    const head = el("tr");
    ["person", "role", "check", "token ids", "added", ""].forEach((h) => head.append(el("th", { scope: "col" }, h)));
    const body = el("tbody");
    for (const x of rows) {
      const tr = el("tr", { "data-person": x.p.id });
      x.acts.setAttribute("data-label", "");
      tr.append(el("td", { "data-label": "person" }, x.p.id), el("td", { "data-label": "role" }, x.p.admin ? "admin" : "annotator"),
        el("td", { "data-label": "check" }, checkWords(x.p.check, x.p.admin)),
        el("td", { class: "small", "data-label": "token ids" }, x.tokens), el("td", { "data-label": "added" }, (x.p.created || "").slice(0, 10)), x.acts);
      body.append(tr);
    }
    t.append(el("thead", {}, head), body);
    box.append(t);
  }

  async function addPerson(ev) {
    ev.preventDefault();
    const id = $("new-id").value.trim();
    const status = $("manage-status");
    if (!$("new-id").checkValidity() || id === "") {
      status.textContent = "An id is 1 to 64 letters, digits, '.', '_', '@' or '-', starting with a letter or digit.";
      $("new-id").focus();
      return;
    }
    try {
      const r = await api("POST", "/api/v1/people", { id, admin: $("new-admin").checked });
      status.textContent = "Added " + r.id + (r.admin ? " (admin)." : ".");
      $("new-id").value = "";
      $("new-admin").checked = false;
      await loadManage();
      showToken(r.id, r.token, "Added " + r.id + ".");
    } catch (e) {
      status.textContent = "Not added: " + e.message;
    }
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
      facts.push(["threshold", stat(d.threshold)]);
      facts.push(["share of the archive covered", pct(d.archive_coverage)]);
      facts.push(["upper bound on disagreement", pct(d.bound)]);
    } else if (d.labels_needed > 0) {
      facts.push(["labels still needed (estimate)", int(d.labels_needed)]);
    }
    if (facts.length) box.append(table(["figure", "value"], facts, [false, true]));
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
    const shown = Math.min(board.rows, b.length);
    box.append(el("p", { class: "muted", id: "batch-summary" }, "Round " + int(r.round) + ": showing " + int(shown) + " of " + int(b.length) + " items (" +
      Object.entries(counts).map(([k, n]) => int(n) + " " + k).join(", ") + ")."));
    // Random picks (held-out top-up, audit) have no score.
    const score = (x) => (x.reason === "held-out" || x.reason === "audit") && !x.score ? "–" : stat(x.score);
    box.append(table(["item", "reason", "score"], b.slice(0, shown).map((x) => [x.item, x.reason, score(x)]), [false, false, true]));
  }

  async function loadUnsure() {
    const r = await api("GET", "/api/v1/unsure");
    const box = clear($("unsure"));
    if (r.items.length === 0) { note(box, "Nobody has marked an item as hard to tell."); return; }
    const shown = Math.min(board.rows, r.items.length);
    box.append(el("p", { class: "muted" }, "Showing " + int(shown) + " of " + int(r.items.length) + " items, most marked first."));
    box.append(table(["item", "people unsure"], r.items.slice(0, shown).map((x) => [x.item, int(x.people)]), [false, true]));
  }

  async function loadAll() {
    await loadStatus().catch((e) => console.error(e));
    const parts = [loadDays, loadAgreement, loadPeople, loadManage, loadVerdict, loadBatch, loadUnsure];
    await Promise.all(parts.map((f) => f().catch((e) => console.error(e))));
  }

  // askRound shows the settings the round will use (the project's stored
  // ones, as `loop round` uses) and asks to confirm; with nothing new since
  // the last round it says so and offers no round.
  async function askRound() {
    const box = $("round-confirm");
    const btn = $("run-round");
    btn.disabled = true;
    let s;
    try {
      s = await api("GET", "/api/v1/settings");
    } catch (e) {
      $("round-status").textContent = "Could not read the settings: " + e.message;
      btn.disabled = false;
      return;
    }
    clear(box);
    box.hidden = false;
    const close = () => { clear(box); box.hidden = true; btn.disabled = false; btn.focus(); };
    const p = s.pending;
    if (!p.fresh) {
      const cancel = el("button", { type: "button", id: "round-close" }, "Close");
      cancel.addEventListener("click", close);
      box.append(el("div", { class: "notice", id: "round-nothing" },
        el("p", {}, "Nothing to run: no labels are new since round " + int(p.round) + ", which used all " + int(p.labels) +
          " labels and " + int(p.gold) + " gold answers. A round now would change nothing. Add labels first (the labelling page, an import, or `loop labels add`)."),
        cancel));
      cancel.focus();
      return;
    }
    const news = p.round === 0 ? "the first round, on " + int(p.labels) + " labels and " + int(p.gold) + " gold answers" :
      "round " + int(p.round + 1) + ", with " + int(p.new_labels) + (p.new_labels === 1 ? " label" : " labels") + " new since round " + int(p.round) +
        (p.gold_changed ? " and a changed number of gold answers (" + int(p.gold) + ")" : "");
    const stored = s.settings.filter((x) => x.source !== "default");
    const rows = (list) => table(["setting", "value", "from"], list.map((x) => [el("span", { title: x.doc }, x.key), x.value, x.source]), [false, false, false]);
    const run = el("button", { type: "button", class: "primary", id: "round-go" }, "Run the round");
    const cancel = el("button", { type: "button", id: "round-cancel" }, "Cancel");
    run.addEventListener("click", async () => { clear(box); box.hidden = true; await runRound(); });
    cancel.addEventListener("click", close);
    const all = el("details", {}, el("summary", {}, "All " + int(s.settings.length) + " settings"), el("div", { class: "tablewrap" }, rows(s.settings)));
    box.append(el("div", { class: "notice", id: "round-ask" },
      el("p", {}, "Run " + news + "? It uses the project's stored settings, the same as `loop round`; change them with `loop config DIR set KEY VALUE`."),
      stored.length ? el("div", { class: "tablewrap", id: "round-settings" }, rows(stored)) :
        el("p", { id: "round-settings" }, "Every setting has its built-in default."),
      all,
      el("div", { class: "actions" }, run, cancel)));
    run.focus();
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
    $("run-round").addEventListener("click", askRound);
    $("add-person").addEventListener("submit", addPerson);
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
