// The labelling page: one item at a time. Before real work, a person may
// have to go through a short training (the expected answer is shown after
// each) and a quiz (no answers shown); then items come as leases and each
// answer is sent with an idempotency key, retried with the same key if the
// network fails, so it is never stored twice.
"use strict";

(() => {
  const { el, clear, api, session, signOut } = loop;
  const $ = (id) => document.getElementById(id);
  const state = {
    codebook: null,
    mode: "work",          // "training", "quiz", "failed", "work", "empty", "feedback"
    item: null,            // ItemView shown
    lease: null,           // LeaseView (work only)
    shownAt: 0,
    busy: false,
    zoom: 1,
  };

  function setStatus(text) { $("status").textContent = text; }

  function setProgress(p) {
    if (!p) return;
    $("p-labelled").textContent = String(p.labelled);
    $("p-today").textContent = String(p.today);
    $("p-open").textContent = String(p.open_pool);
  }

  function renderCodebook(cb) {
    $("question").textContent = cb.question;
    $("instructions").textContent = cb.instructions || "";
    const dl = clear($("classes"));
    const answers = clear($("answers"));
    cb.classes.forEach((c, i) => {
      const name = c.name || c.key;
      dl.append(el("dt", {}, (i < 9 ? (i + 1) + " · " : "") + name));
      if (c.description) dl.append(el("dd", {}, c.description));
      const b = el("button", {
        type: "button", "data-key": c.key,
        "aria-keyshortcuts": i < 9 ? String(i + 1) : null,
        onclick: () => answer(c.key),
      });
      if (i < 9) b.append(el("kbd", {}, String(i + 1)));
      b.append(document.createTextNode(name));
      answers.append(b);
    });
  }

  function showItem(item) {
    state.item = item;
    state.shownAt = performance.now();
    clear($("feedback"));
    const text = $("item-text");
    const imgBox = $("item-image");
    if (!item) {
      text.textContent = "";
      text.hidden = false;
      imgBox.hidden = true;
      $("item-id").textContent = "";
      setAnswering(false);
      return;
    }
    if (item.kind === "image") {
      text.textContent = "";
      text.hidden = true;
      imgBox.hidden = false;
      state.zoom = 1;
      applyZoom();
      const img = $("img");
      img.alt = "Image of item " + item.id;
      img.onload = () => img.classList.toggle("small", img.naturalWidth < 200);
      img.src = item.image;
    } else {
      imgBox.hidden = true;
      text.hidden = false;
      text.textContent = item.text; // always text, never markup
    }
    $("item-id").textContent = "Item " + item.id;
    setAnswering(true);
  }

  function setAnswering(on) {
    for (const b of $("answers").querySelectorAll("button")) b.disabled = !on;
    const work = state.mode === "work";
    $("skip").disabled = !(on && work);
    $("unsure").disabled = !(on && work);
  }

  function setMode(mode, text) {
    state.mode = mode;
    $("mode").textContent = text || "";
    const work = mode === "work";
    $("skip").hidden = !work;
    $("unsure").hidden = !work;
  }

  // applyZoom sizes the image as a share of the box's width (1 = fit the
  // width); the box scrolls when it is larger.
  function applyZoom() {
    const img = $("img");
    img.style.width = (100 * state.zoom) + "%";
    $("zoombox").classList.toggle("zoomed", state.zoom !== 1);
  }

  function zoom(f) {
    if ($("item-image").hidden) return;
    state.zoom = f === 0 ? 1 : Math.min(8, Math.max(0.25, state.zoom * f));
    applyZoom();
  }

  // ---- training and quiz ----

  function showTraining(t) {
    if (t.state === "training") {
      setMode("training", "Practice " + (t.step + 1) + " of " + t.steps + " — you will see the expected answer after each");
      showItem(t.item);
      return true;
    }
    if (t.state === "quiz") {
      setMode("quiz", "Check " + (t.quiz_step + 1) + " of " + t.quiz_steps + " — answers are not shown; real work starts once you pass");
      showItem(t.item);
      return true;
    }
    if (t.state === "failed") {
      setMode("failed", "Check not passed");
      showItem(null);
      const fb = clear($("feedback"));
      const need = Math.ceil(t.pass_mark * t.quiz_steps - 1e-9);
      fb.append(el("div", { class: "notice bad" },
        el("p", {}, "You matched " + t.quiz_correct + " of " + t.quiz_steps + " check items; " + need + " are needed."),
        el("button", { type: "button", class: "primary", id: "again", onclick: restartTraining }, "Practise again")));
      $("again").focus();
      return true;
    }
    return false;
  }

  async function restartTraining() {
    const t = await api("POST", "/api/v1/training/restart");
    showTraining(t);
    setStatus("");
  }

  async function answerTraining(key) {
    const res = await api("POST", "/api/v1/training/answers", { item: state.item.id, label: key });
    if (state.mode === "training" && res.expected) {
      setMode("feedback", $("mode").textContent);
      setAnswering(false);
      const fb = clear($("feedback"));
      const exp = res.expected.name || res.expected.key;
      const box = el("div", { class: "notice " + (res.correct ? "good" : "bad") },
        el("p", {}, res.correct ? "Yes — the expected answer is " + exp + "." : "The expected answer is " + exp + "."));
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

  async function next(training) {
    if (training && showTraining(training)) return;
    if (training && training.state === "passed" && state.mode === "quiz") {
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
      if (e.code === "training_required") {
        const t = await api("GET", "/api/v1/training");
        showTraining(t);
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
    showItem(nr.item);
  }

  // send posts a label, retrying with the same idempotency key when the
  // network fails or the server is briefly unavailable.
  async function send(body, key) {
    for (let attempt = 0; ; attempt++) {
      try {
        return await api("POST", "/api/v1/labels", body, { "Idempotency-Key": key });
      } catch (e) {
        const retry = !(e instanceof loop.HTTPError) || e.status >= 500;
        if (!retry || attempt >= 4) throw e;
        setStatus("Connection trouble; trying again…");
        await new Promise((r) => setTimeout(r, 500 * (attempt + 1)));
      }
    }
  }

  async function answer(key) {
    if (state.busy || !state.item) return;
    if (!["work", "training", "quiz"].includes(state.mode)) return;
    state.busy = true;
    setAnswering(false);
    const chosen = $("answers").querySelector('button[data-key="' + CSS.escape(key) + '"]');
    if (chosen) chosen.classList.add("chosen");
    try {
      if (state.mode === "training" || state.mode === "quiz") {
        await answerTraining(key);
        return;
      }
      const seconds = Math.round((performance.now() - state.shownAt) / 100) / 10;
      const res = await send({ lease: state.lease.id, item: state.item.id, label: key, seconds, next: true }, loop.newKey());
      setStatus("Saved (" + (state.codebook.classes.find((c) => c.key === key) || {}).name + "). Next item.");
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
    if (t && (t.tagName === "INPUT" || t.tagName === "TEXTAREA")) return;
    const k = ev.key;
    if (k >= "1" && k <= "9" && state.codebook) {
      const c = state.codebook.classes[Number(k) - 1];
      if (c) { ev.preventDefault(); answer(c.key); }
      return;
    }
    if (k === "s" || k === "S") { ev.preventDefault(); skip("skip"); return; }
    if (k === "u" || k === "U") { ev.preventDefault(); skip("unsure"); return; }
    if (k === "+" || k === "=") { zoom(1.25); return; }
    if (k === "-") { zoom(0.8); return; }
    if (k === "0") { zoom(0); return; }
  }

  document.addEventListener("DOMContentLoaded", async () => {
    $("signout").addEventListener("click", signOut);
    $("skip").addEventListener("click", () => skip("skip"));
    $("unsure").addEventListener("click", () => skip("unsure"));
    $("zoom-in").addEventListener("click", () => zoom(1.25));
    $("zoom-out").addEventListener("click", () => zoom(0.8));
    $("zoom-fit").addEventListener("click", () => zoom(0));
    document.addEventListener("keydown", onKey);
    try {
      const s = await session();
      $("who").textContent = s.id;
      $("board-link").hidden = !s.admin;
      state.codebook = await api("GET", "/api/v1/codebook");
      renderCodebook(state.codebook);
      const me = await api("GET", "/api/v1/me");
      setProgress(me.progress);
      if (!showTraining(me.training)) await fetchWork();
      document.body.dataset.ready = "1";
    } catch (e) {
      setStatus("Could not start: " + e.message);
    }
  });
})();
