// The labelling page: one item at a time. Before real work, a person may
// have to go through a short practice (the expert's answer is shown after
// each) and a check (no answers shown); then items come as leases and each
// answer is sent with an idempotency key, retried with the same key if the
// network fails, so it is never stored twice. The latest answer can be
// changed for a few minutes (B). A session goal counts answers given in
// this browser tab.
"use strict";

(() => {
  const { el, clear, api, session, signOut, int } = loop;
  const $ = (id) => document.getElementById(id);
  const state = {
    codebook: null,
    mode: "work",          // "practice", "check", "failed", "locked", "work", "empty", "feedback", "change"
    item: null,            // ItemView shown
    lease: null,           // LeaseView (work only)
    shownAt: 0,
    busy: false,
    zoom: 1,               // 1 = the whole image fits the box
    last: null,            // {item, key, at}: the latest answer given here
    resume: null,          // what to go back to after changing the last answer
    changeSeconds: 0,
    changeTimer: 0,
  };

  function setStatus(text) { $("status").textContent = text; }

  function className(key) {
    const c = state.codebook.classes.find((x) => x.key === key);
    return c ? (c.name || c.key) : key;
  }

  function setProgress(p) {
    if (!p) return;
    $("p-labelled").textContent = int(p.labelled);
    $("p-today").textContent = int(p.today);
    $("p-open").textContent = int(p.open_pool);
  }

  // ---- the session goal ----

  const goalKey = "loop-goal", countKey = "loop-session-count";

  function goal() { return Number(localStorage.getItem(goalKey)) || 20; }
  function sessionCount() { return Number(sessionStorage.getItem(countKey)) || 0; }

  function showGoal() {
    const g = goal(), n = sessionCount();
    $("goal").value = String(g);
    $("goal-bar").max = g;
    $("goal-bar").value = Math.min(n, g);
    $("goal-text").textContent = int(n) + " of " + int(g) + " this session";
  }

  function countAnswer() {
    const n = sessionCount() + 1;
    sessionStorage.setItem(countKey, String(n));
    showGoal();
    return n === goal();
  }

  // ---- codebook and item ----

  function renderCodebook(cb) {
    $("question").textContent = cb.question;
    $("instructions").textContent = cb.instructions || "";
    $("howto-text").textContent = cb.instructions || "";
    $("howto-short").textContent = cb.instructions || "What each answer means";
    for (const id of ["classes", "howto-classes"]) {
      const dl = clear($(id));
      cb.classes.forEach((c, i) => {
        dl.append(el("dt", {}, (i < 9 ? (i + 1) + " · " : "") + (c.name || c.key)));
        if (c.description) dl.append(el("dd", {}, c.description));
      });
    }
    const answers = clear($("answers"));
    cb.classes.forEach((c, i) => {
      const b = el("button", {
        type: "button", "data-key": c.key,
        "aria-keyshortcuts": i < 9 ? String(i + 1) : null,
        onclick: () => answer(c.key),
      });
      if (i < 9) b.append(el("kbd", {}, String(i + 1)));
      b.append(document.createTextNode(c.name || c.key));
      answers.append(b);
    });
  }

  function showItem(item) {
    state.item = item;
    state.shownAt = performance.now();
    clear($("feedback"));
    const text = $("item-text"), box = $("zoombox");
    const image = !!item && item.kind === "image";
    $("task").classList.toggle("image", image);
    $("zoomtools").hidden = !image;
    box.hidden = !image;
    text.hidden = image;
    $("answers").hidden = !item;
    if (!item) {
      text.textContent = "";
      $("item-id").textContent = "";
      setAnswering(false);
      return;
    }
    if (image) {
      text.textContent = "";
      state.zoom = 1;
      const img = $("img");
      delete img.dataset.fitted;
      img.alt = "Image of item " + item.id;
      img.onload = () => {
        img.classList.toggle("small", img.naturalWidth < 200);
        applyZoom(false);
        img.dataset.fitted = "1";
      };
      if (img.getAttribute("src") === item.image && img.complete) img.onload();
      else img.src = item.image;
    } else {
      text.textContent = item.text; // always text, never markup
    }
    $("item-id").textContent = "Item " + item.id;
    setAnswering(true);
  }

  function setAnswering(on) {
    for (const b of $("answers").querySelectorAll("button")) {
      b.disabled = !on;
      b.classList.toggle("was", state.mode === "change" && state.last && b.dataset.key === state.last.key);
      b.setAttribute("aria-pressed", String(state.mode === "change" && !!state.last && b.dataset.key === state.last.key));
    }
    const work = state.mode === "work";
    $("skip").disabled = !(on && work);
    $("unsure").disabled = !(on && work);
  }

  function canChange() {
    return !!state.last && (Date.now() - state.last.at) / 1000 < state.changeSeconds;
  }

  function setMode(mode, text) {
    state.mode = mode;
    $("mode").textContent = text || "";
    const work = mode === "work";
    $("skip").hidden = !work;
    $("unsure").hidden = !work;
    $("change").hidden = !((work || mode === "empty") && canChange());
    $("keep").hidden = mode !== "change";
  }

  // ---- zoom ----

  // The image is sized in pixels: at zoom 1 it fits the box whole; at
  // higher zoom it is larger and the box scrolls. Zooming keeps the point
  // at the centre of the box where it is.
  function applyZoom(keepCentre) {
    const box = $("zoombox"), img = $("img");
    if (box.hidden || !img.naturalWidth) return;
    let fx = 0.5, fy = 0.5;
    if (keepCentre && img.offsetWidth) {
      fx = (box.scrollLeft + box.clientWidth / 2 - img.offsetLeft) / img.offsetWidth;
      fy = (box.scrollTop + box.clientHeight / 2 - img.offsetTop) / img.offsetHeight;
    }
    const s = Math.min(box.clientWidth / img.naturalWidth, box.clientHeight / img.naturalHeight);
    img.style.width = Math.max(1, Math.floor(img.naturalWidth * s * state.zoom)) + "px";
    img.style.height = Math.max(1, Math.floor(img.naturalHeight * s * state.zoom)) + "px";
    box.classList.toggle("zoomed", state.zoom !== 1);
    box.scrollLeft = fx * img.offsetWidth + img.offsetLeft - box.clientWidth / 2;
    box.scrollTop = fy * img.offsetHeight + img.offsetTop - box.clientHeight / 2;
    img.dataset.zoom = String(state.zoom);
  }

  function zoom(f) {
    if ($("zoombox").hidden) return;
    state.zoom = f === 0 ? 1 : Math.min(8, Math.max(1, state.zoom * f));
    applyZoom(true);
  }

  // ---- practice and check ----

  function showPractice(t) {
    if (t.state === "practice") {
      setMode("practice", "Practice " + (t.practice_done + 1) + " of " + t.practice_items + " — you will see the expert's answer after each");
      showItem(t.item);
      return true;
    }
    if (t.state === "check") {
      setMode("check", "Check " + (t.check_done + 1) + " of " + t.check_items + " — answers are not shown; real work starts once you pass");
      showItem(t.item);
      return true;
    }
    if (t.state === "failed" || t.state === "locked") {
      setMode(t.state, "Check not passed");
      showItem(null);
      const fb = clear($("feedback"));
      const need = "At least " + t.check_needed + " of the " + t.check_items + " check answers must match the experts' answers.";
      if (t.state === "failed") {
        const left = t.attempts_left < 0 ? "" : " You have " + t.attempts_left + (t.attempts_left === 1 ? " attempt" : " attempts") + " left.";
        fb.append(el("div", { class: "notice bad" },
          el("p", {}, "You did not pass the check. " + need + left),
          el("p", { class: "muted" }, "The next attempt shows other items. Read the answers' descriptions again first."),
          el("button", { type: "button", class: "primary", id: "again", onclick: retry }, "Practise again")));
        $("again").focus();
      } else {
        fb.append(el("div", { class: "notice bad", id: "locked" },
          el("p", {}, "You did not pass the check, and you have used all your attempts. " + need),
          el("p", {}, "The project team can give you another attempt: ask them, then reload this page.")));
      }
      return true;
    }
    return false;
  }

  async function retry() {
    try {
      const t = await api("POST", "/api/v1/practice/retry");
      showPractice(t);
      setStatus("");
    } catch (e) {
      setStatus("Could not start again: " + e.message);
    }
  }

  async function answerPractice(key) {
    const res = await api("POST", "/api/v1/practice/answers", { item: state.item.id, label: key });
    if (state.mode === "practice" && res.expected) {
      setMode("feedback", $("mode").textContent);
      setAnswering(false);
      const fb = clear($("feedback"));
      const exp = res.expected.name || res.expected.key;
      const box = el("div", { class: "notice " + (res.correct ? "good" : "bad") },
        el("p", {}, res.correct ? "Yes — the expert's answer is " + exp + "." : "The expert's answer is " + exp + "."));
      if (res.expected.description) box.append(el("p", { class: "muted" }, res.expected.description));
      const cont = el("button", { type: "button", class: "primary", id: "continue" }, "Continue ", el("kbd", {}, "Enter"));
      cont.addEventListener("click", () => next(res.next));
      box.append(cont);
      fb.append(box);
      cont.focus();
      return;
    }
    next(res.next);
  }

  async function next(practice) {
    const wasCheck = state.mode === "check";
    if (practice && showPractice(practice)) return;
    if (practice && practice.state === "passed" && wasCheck) {
      setStatus("Check passed. Real work starts now.");
    }
    await fetchWork();
  }

  // ---- real work ----

  async function fetchWork() {
    setMode("work", "");
    let nr;
    try {
      nr = await api("GET", "/api/v1/next");
    } catch (e) {
      if (e.code === "practice_required") {
        showPractice(await api("GET", "/api/v1/practice"));
        return;
      }
      setStatus("Could not fetch the next item: " + e.message);
      return;
    }
    takeNext(nr);
  }

  function takeNext(nr) {
    setProgress(nr.progress);
    if (!nr.item) {
      state.lease = null;
      setMode("empty", "");
      showItem(null);
      $("item-text").textContent = nr.message || "Nothing is waiting for you right now.";
      return;
    }
    state.lease = nr.lease;
    setMode("work", "");
    showItem(nr.item);
  }

  // send posts a label, retrying with the same idempotency key when the
  // network fails or the server is briefly unavailable.
  async function send(body, key) {
    for (let attempt = 0; ; attempt++) {
      try {
        return await api("POST", "/api/v1/labels", body, { "Idempotency-Key": key });
      } catch (e) {
        const retryable = !(e instanceof loop.HTTPError) || e.status >= 500;
        if (!retryable || attempt >= 4) throw e;
        setStatus("Connection trouble; trying again…");
        await new Promise((r) => setTimeout(r, 500 * (attempt + 1)));
      }
    }
  }

  function rememberLast(item, key) {
    state.last = { item, key, at: Date.now() };
    clearTimeout(state.changeTimer);
    state.changeTimer = setTimeout(() => { if (state.mode !== "change") $("change").hidden = true; }, state.changeSeconds * 1000);
  }

  async function answer(key) {
    if (state.busy || !state.item) return;
    if (!["work", "practice", "check", "change"].includes(state.mode)) return;
    state.busy = true;
    setAnswering(false);
    const chosen = $("answers").querySelector('button[data-key="' + CSS.escape(key) + '"]');
    if (chosen) chosen.classList.add("chosen");
    try {
      if (state.mode === "practice" || state.mode === "check") {
        await answerPractice(key);
        return;
      }
      if (state.mode === "change") {
        await changeLast(key);
        return;
      }
      const seconds = Math.round((performance.now() - state.shownAt) / 100) / 10;
      const item = state.item;
      const res = await send({ lease: state.lease.id, item: item.id, label: key, seconds, next: true }, loop.newKey());
      rememberLast(item, key);
      const reached = countAnswer();
      setStatus("Saved: " + className(key) + " for item " + item.id + "." +
        (reached ? " You reached your goal of " + int(goal()) + " — thank you! Keep going or take a break." : ""));
      takeNext(res.next);
    } catch (e) {
      if (e.code === "lease_expired" || e.code === "lease_unknown") {
        setStatus("That item was handed back to the pool (it was open too long). Here is a new one.");
        await fetchWork();
      } else {
        setStatus("Not saved: " + e.message);
        setAnswering(true);
      }
    } finally {
      if (chosen) chosen.classList.remove("chosen");
      state.busy = false;
    }
  }

  // ---- changing the latest answer ----

  function startChange() {
    if (state.busy || !canChange() || !["work", "empty"].includes(state.mode)) return;
    state.resume = { mode: state.mode, item: state.item, shownAt: state.shownAt };
    setMode("change", "Changing your last answer — pick the new one, or keep it (Esc)");
    showItem(state.last.item);
    setStatus("Your answer for item " + state.last.item.id + " was " + className(state.last.key) + ".");
    const was = $("answers").querySelector("button.was");
    if (was) was.focus();
  }

  function endChange(message) {
    const r = state.resume;
    state.resume = null;
    setMode(r.mode, "");
    if (r.mode === "empty") {
      showItem(null);
      $("item-text").textContent = "Nothing is waiting for you right now.";
    } else {
      showItem(r.item);
      state.shownAt = r.shownAt;
    }
    if (message) setStatus(message);
  }

  async function changeLast(key) {
    try {
      const res = await api("PUT", "/api/v1/me/labels/last", { item: state.last.item.id, label: key });
      state.last.key = res.label.label;
      endChange("Changed: your answer for item " + state.last.item.id + " is now " + className(key) + ".");
    } catch (e) {
      const msg = e.code === "too_late" ? "It is too late to change that answer." : "Not changed: " + e.message;
      state.last = null;
      endChange(msg);
    }
  }

  async function skip(reason) {
    if (state.busy || state.mode !== "work" || !state.lease) return;
    state.busy = true;
    try {
      await api("POST", "/api/v1/leases/" + encodeURIComponent(state.lease.id) + "/skip", { reason });
      setStatus(reason === "unsure" ? "Marked as hard to tell. Next item." : "Skipped. Next item.");
      await fetchWork();
    } catch (e) {
      setStatus("Could not skip: " + e.message);
    } finally {
      state.busy = false;
    }
  }

  function onKey(ev) {
    if (ev.altKey || ev.ctrlKey || ev.metaKey) return;
    const t = ev.target;
    if (t && (t.tagName === "INPUT" || t.tagName === "TEXTAREA" || t.tagName === "SELECT")) return;
    const k = ev.key;
    if (k >= "1" && k <= "9" && state.codebook) {
      const c = state.codebook.classes[Number(k) - 1];
      if (c) { ev.preventDefault(); answer(c.key); }
      return;
    }
    if (k === "s" || k === "S") { ev.preventDefault(); skip("skip"); return; }
    if (k === "u" || k === "U") { ev.preventDefault(); skip("unsure"); return; }
    if (k === "b" || k === "B") { ev.preventDefault(); startChange(); return; }
    if (k === "Escape" && state.mode === "change") { ev.preventDefault(); endChange("Kept your answer."); return; }
    if (k === "+" || k === "=") { zoom(1.25); return; }
    if (k === "-") { zoom(0.8); return; }
    if (k === "0") { zoom(0); return; }
  }

  document.addEventListener("DOMContentLoaded", async () => {
    $("signout").addEventListener("click", signOut);
    $("skip").addEventListener("click", () => skip("skip"));
    $("unsure").addEventListener("click", () => skip("unsure"));
    $("change").addEventListener("click", startChange);
    $("keep").addEventListener("click", () => endChange("Kept your answer."));
    $("zoom-in").addEventListener("click", () => zoom(1.25));
    $("zoom-out").addEventListener("click", () => zoom(0.8));
    $("zoom-fit").addEventListener("click", () => zoom(0));
    $("goal").addEventListener("change", () => { localStorage.setItem(goalKey, $("goal").value); showGoal(); });
    window.addEventListener("resize", () => applyZoom(true));
    document.addEventListener("keydown", onKey);
    // On a narrow screen the guide beside the item is not shown: the
    // instructions sit above the item, folded to their first lines.
    showGoal();
    try {
      const s = await session();
      $("who").textContent = s.id;
      $("board-link").hidden = !s.admin;
      state.codebook = await api("GET", "/api/v1/codebook");
      renderCodebook(state.codebook);
      const me = await api("GET", "/api/v1/me");
      state.changeSeconds = me.change_seconds || 0;
      setProgress(me.progress);
      if (!showPractice(me.practice)) await fetchWork();
      document.body.dataset.ready = "1";
    } catch (e) {
      setStatus("Could not start: " + e.message);
    }
  });
})();
