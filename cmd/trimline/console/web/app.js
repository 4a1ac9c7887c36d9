// trimline console: follows the station's state over server-sent events and
// posts the operator's actions with the page's CSRF token. No libraries.
"use strict";

(function () {
  const $ = (id) => document.getElementById(id);
  const csrf = document.querySelector('meta[name="csrf"]').content;

  // post sends a form's fields (or an object) and returns the JSON answer.
  async function post(url, fields) {
    const body = new URLSearchParams(fields);
    body.set("csrf", csrf);
    let res;
    try {
      res = await fetch(url, {
        method: "POST", body, credentials: "same-origin",
        headers: { "Accept": "application/json", "X-CSRF-Token": csrf },
      });
    } catch (e) {
      return { ok: false, error: "the console does not answer: is trimline still running?" };
    }
    let a;
    try { a = await res.json(); } catch (e) { a = { ok: false, error: (await res.text().catch(() => "")) || res.statusText }; }
    if (a.reload) { location.reload(); }
    return a;
  }

  function show(el, on) { if (el) el.hidden = !on; }
  function text(id, t) { const el = $(id); if (el) el.textContent = t == null ? "" : t; }

  // --- sign-in page ---
  const signin = $("signin");
  if (signin) {
    signin.addEventListener("submit", async (ev) => {
      ev.preventDefault();
      const a = await post("/signin", new FormData(signin));
      if (!a.ok && !a.reload) {
        text("signin-error", a.error || "sign-in refused");
        show($("signin-error"), true);
        const pass = $("passphrase");
        if (pass) pass.value = "";
        $("badge").select();
      }
    });
    return;
  }

  // --- station page ---
  const scan = $("scan");
  const reviewer = document.body.dataset.review === "1";
  let st = null;          // the last state
  let pts = [];           // the plot's points
  let plotUnit = "";

  function typing(el) {
    return el && (el.tagName === "TEXTAREA" || (el.tagName === "INPUT" && el !== scan && el.type !== "hidden"));
  }
  // The scan field has the focus whenever nothing else needs the keyboard.
  function refocus() {
    if (!scan || scan.disabled) return;
    if (!$("fault").hidden || !$("retest").hidden) return;
    if (typing(document.activeElement)) return;
    scan.focus();
  }
  document.addEventListener("click", () => setTimeout(refocus, 0));
  if (scan) scan.addEventListener("blur", () => setTimeout(refocus, 150));

  function scanError(msg) {
    text("scan-error", msg);
    show($("scan-error"), !!msg);
    // A refused scan is not the last unit's verdict: that one fades.
    document.body.classList.toggle("refused", !!msg);
  }

  // --- scan, retest ---
  let pendingRetest = "";
  $("scan-form").addEventListener("submit", async (ev) => {
    ev.preventDefault();
    const serial = scan.value.trim();
    scan.value = "";
    await startScan(serial, false);
  });
  async function startScan(serial, confirmed) {
    scanError("");
    const f = { serial };
    if (confirmed) f.retest = "confirm";
    const a = await post("/scan", f);
    if (a.retest) {
      pendingRetest = a.retest.serial;
      text("retest-serial", a.retest.serial);
      text("retest-earlier", a.retest.earlier);
      text("retest-attempt", a.retest.attempt);
      show($("retest"), true);
      // The question holds the focus, not its Yes button: a barcode scan's
      // Enter must never answer it.
      $("retest-box").focus();
      return;
    }
    if (!a.ok) scanError(a.error || "refused");
    refocus();
  }
  $("retest-yes").addEventListener("click", async () => {
    show($("retest"), false);
    const s = pendingRetest;
    pendingRetest = "";
    await startScan(s, true);
  });
  $("retest").addEventListener("keydown", (ev) => {
    if (ev.key === "Escape") $("retest-no").click();
  });
  $("retest-no").addEventListener("click", () => {
    show($("retest"), false);
    pendingRetest = "";
    scanError("Not retested. Scan the next unit.");
    refocus();
  });

  // --- stop, clear ---
  $("stop-form").addEventListener("submit", async (ev) => {
    ev.preventDefault();
    $("stop").disabled = true;
    const a = await post("/stop", {});
    if (!a.ok) scanError(a.error);
  });
  $("clear-form").addEventListener("submit", async (ev) => {
    ev.preventDefault();
    const a = await post("/clear", { note: $("clear-note").value });
    if (!a.ok) {
      text("clear-error", a.error);
      show($("clear-error"), true);
    } else {
      $("clear-note").value = "";
      show($("clear-error"), false);
    }
  });
  for (const f of document.querySelectorAll("form[action='/signout']")) {
    f.addEventListener("submit", async (ev) => {
      ev.preventDefault();
      await post("/signout", {});
    });
  }

  // --- review ---
  const reviewBox = $("review");
  if (reviewBox) {
    reviewBox.addEventListener("click", async (ev) => {
      const b = ev.target.closest("button.review-accept, button.review-reject");
      if (!b) return;
      const row = b.closest("tr.review-row");
      const reason = row.querySelector(".review-reason").value.trim();
      const decision = b.classList.contains("review-accept") ? "accept" : "reject";
      b.disabled = true;
      const a = await post("/review/" + encodeURIComponent(row.dataset.cert), { decision, reason });
      b.disabled = false;
      text("review-error", a.ok ? "" : a.error);
      show($("review-error"), !a.ok);
    });
  }

  // --- rendering ---
  const shapeOf = { PASS: "pass", FAIL: "fail", REVIEW: "review", FAULT: "fault", ABORTED: "aborted" };

  function fmtClock(ms) {
    if (!(ms >= 0)) return "—";
    const s = Math.round(ms / 1000);
    return Math.floor(s / 60) + ":" + String(s % 60).padStart(2, "0");
  }

  function renderStatus(items) {
    const ul = $("status");
    ul.replaceChildren();
    for (const it of items || []) {
      const li = document.createElement("li");
      li.dataset.status = it.key;
      li.dataset.state = it.state;
      li.title = (it.detail || []).join("\n");
      const icon = document.createElement("span");
      icon.className = "st-icon";
      icon.setAttribute("aria-hidden", "true");
      const word = document.createElement("span");
      word.className = "st-word";
      word.textContent = it.state === "ok" ? "OK" : it.state === "warn" ? "CHECK" : "BLOCKED";
      const t = document.createElement("span");
      t.className = "st-title";
      t.textContent = it.title;
      li.append(icon, word, t);
      ul.append(li);
    }
  }

  function renderStatusDetail(items) {
    const ul = $("status-detail");
    ul.replaceChildren();
    for (const it of items || []) {
      for (const d of it.detail || []) {
        const li = document.createElement("li");
        li.textContent = d;
        ul.append(li);
      }
    }
  }

  function renderCounters(c) {
    const set = (k, v) => { const el = document.querySelector('[data-count="' + k + '"]'); if (el) el.textContent = v; };
    set("units", c.units); set("passed", c.passed); set("failed", c.failed); set("review", c.review);
    set("faults", c.faults); set("fpy", c.fpy || "—"); set("cycle", c.cycle_text || "—");
  }

  function cell(tr, t, cls) {
    const td = document.createElement("td");
    if (t instanceof Node) td.append(t); else td.textContent = t;
    if (cls) td.className = cls;
    tr.append(td);
    return td;
  }

  function verdictTag(v) {
    const s = document.createElement("span");
    s.className = "tag tag-" + (shapeOf[v] || "aborted");
    s.textContent = v;
    return s;
  }

  function renderRecent(rows) {
    const tb = document.querySelector("#recent tbody");
    tb.replaceChildren();
    for (const r of rows || []) {
      const tr = document.createElement("tr");
      tr.dataset.verdict = r.verdict;
      cell(tr, r.at);
      cell(tr, r.serial + (r.retest ? " ↻" : ""));
      cell(tr, verdictTag(r.verdict));
      if (r.cert_url) {
        const a = document.createElement("a");
        a.href = r.cert_url; a.target = "_blank"; a.rel = "noopener"; a.textContent = r.cert;
        cell(tr, a);
      } else cell(tr, r.cert || "—");
      tb.append(tr);
    }
  }

  function renderReview(rows) {
    if (!reviewBox) return;
    const tb = reviewBox.querySelector("tbody");
    // Keep what a reviewer is typing when the queue is redrawn.
    const typed = {};
    for (const tr of tb.querySelectorAll("tr.review-row")) typed[tr.dataset.cert] = tr.querySelector(".review-reason").value;
    tb.replaceChildren();
    for (const r of rows || []) {
      const tr = document.createElement("tr");
      tr.className = "review-row";
      tr.dataset.cert = r.cert;
      const td = document.createElement("td");
      const head = document.createElement("div");
      head.className = "rv-head";
      head.textContent = r.serial + " · " + r.cert + " · " + r.at;
      const why = document.createElement("div");
      why.className = "rv-why";
      why.textContent = r.reasons;
      const inp = document.createElement("input");
      inp.type = "text"; inp.className = "review-reason"; inp.placeholder = "reason for the decision";
      inp.value = typed[r.cert] || "";
      const acc = document.createElement("button");
      acc.type = "button"; acc.className = "btn btn-go review-accept"; acc.textContent = "✓ Accept";
      const rej = document.createElement("button");
      rej.type = "button"; rej.className = "btn btn-stop review-reject"; rej.textContent = "✕ Reject";
      const btns = document.createElement("div");
      btns.className = "rv-buttons";
      btns.append(acc, rej);
      td.append(head, why, inp, btns);
      tr.append(td);
      tb.append(tr);
    }
    show($("review-empty"), !(rows && rows.length));
  }

  function renderSteps(steps, cur) {
    const ol = $("steps");
    ol.replaceChildren();
    (steps || []).forEach((s, i) => {
      const li = document.createElement("li");
      li.textContent = s.name;
      li.dataset.state = s.status || (i === cur ? "running" : "");
      ol.append(li);
    });
    const n = (steps || []).length;
    const done = (steps || []).filter((s) => s.status && s.status !== "running").length;
    $("prog-bar").style.width = n ? (100 * done / n).toFixed(1) + "%" : "0%";
  }

  // The plot: error against stimulus, rescaled as points come.
  const svgNS = "http://www.w3.org/2000/svg";
  function drawPlot() {
    const g = $("plot-points");
    g.replaceChildren();
    if (!pts.length) { text("plot-top", ""); text("plot-bottom", ""); text("plot-unit", ""); return; }
    let xmin = Infinity, xmax = -Infinity, ymax = 0;
    for (const p of pts) { xmin = Math.min(xmin, p.X); xmax = Math.max(xmax, p.X); ymax = Math.max(ymax, Math.abs(p.Y)); }
    if (xmax === xmin) { xmax += 1; xmin -= 1; }
    if (!(ymax > 0)) ymax = 1;
    for (const p of pts) {
      const c = document.createElementNS(svgNS, "circle");
      c.setAttribute("class", "pt s" + (p.Step % 6));
      c.setAttribute("cx", (60 + 720 * (p.X - xmin) / (xmax - xmin)).toFixed(1));
      c.setAttribute("cy", (130 - 110 * p.Y / ymax).toFixed(1));
      c.setAttribute("r", "6");
      g.append(c);
    }
    const u = plotUnit === "count" ? "counts" : plotUnit || "V";
    text("plot-top", "+" + fmtSI(ymax, u));
    text("plot-bottom", "−" + fmtSI(ymax, u));
    text("plot-unit", "error at each point");
  }
  // fmtSI writes a magnitude with the SI prefix that suits it: "12.4 mV".
  function fmtSI(v, unit) {
    if (unit === "counts") return v.toPrecision(3) + " counts";
    const p = [[1, ""], [1e-3, "m"], [1e-6, "µ"], [1e-9, "n"]];
    for (const [f, s] of p) if (v >= f) return (v / f).toPrecision(3) + " " + s + unit;
    return (v / 1e-9).toPrecision(3) + " n" + unit;
  }

  function renderVerdict(v) {
    const box = $("verdict");
    box.dataset.verdict = v.verdict;
    box.className = "panel verdict v-" + (shapeOf[v.verdict] || "aborted");
    const word = v.word || v.verdict;
    text("verdict-word", word);
    // A long headline ("STATION FAULT") is set smaller so that it fits.
    $("verdict-word").dataset.len = word.length > 10 ? "long" : word.length > 5 ? "mid" : "short";
    text("v-serial", v.serial);
    // The worst reasons first; the rest are counted (the statement has all).
    const rs = v.reasons || [];
    text("reason", rs.slice(0, 3).join("\n") + (rs.length > 3 ? "\n(+" + (rs.length - 3) + " more)" : ""));
    show($("reason"), (v.reasons || []).length > 0);
    text("action", v.action);
    const notes = $("v-notes");
    notes.replaceChildren();
    for (const n of v.notes || []) { const li = document.createElement("li"); li.textContent = n; notes.append(li); }
    text("cert-number", v.cert || "none");
    const link = $("cert-link");
    if (v.cert_url) { link.href = v.cert_url; link.hidden = false; } else { link.removeAttribute("href"); link.hidden = true; }
    text("v-retest", v.retest);
    const sl = $("statement-lines");
    sl.replaceChildren();
    for (const l of v.statement || []) { const li = document.createElement("li"); li.textContent = l; sl.append(li); }
  }

  let timer = null;
  function tick() {
    if (!st || !st.unit || st.phase !== "running") return;
    text("elapsed", fmtClock(Date.now() - st.unit.started_ms));
  }

  function apply(s) {
    st = s;
    renderStatus(s.status);
    renderStatusDetail(s.status);
    renderCounters(s.counters);
    renderRecent(s.recent);
    renderReview(s.review);
    const running = s.phase === "running";
    show($("idle"), !running && !s.verdict);
    // Anything blocking: the idle panel says what, instead of "Ready".
    const blocks = (s.status || []).filter((it) => it.state === "block").map((it) => it.title);
    text("idle-big", blocks.length ? "Blocked" : "Ready");
    text("idle-small", blocks.length ? "No unit can start: " + blocks.join("; ") + ". Call the test engineer."
      : "Put the unit in the fixture, close the lid, scan its serial.");
    $("idle").classList.toggle("blocked", blocks.length > 0);
    show($("progress"), running);
    show($("verdict"), !running && !!s.verdict);
    if (s.unit) {
      text("prog-serial", s.unit.serial + (s.unit.retest ? " (retest, attempt " + s.unit.attempt + ")" : ""));
      text("step-name", s.unit.step_name || "starting…");
      text("point-text", s.unit.point_text);
      text("expected", s.unit.expected_ms > 0 ? fmtClock(s.unit.expected_ms) : "—");
      renderSteps(s.unit.steps, s.unit.step);
      pts = (s.unit.points || []).slice();
      plotUnit = s.unit.unit;
      drawPlot();
      $("stop").disabled = !running || s.unit.stopping;
      $("stop").lastChild.textContent = s.unit.stopping ? "STOPPING…" : "STOP";
    }
    if (s.verdict) renderVerdict(s.verdict);
    const locked = s.phase === "locked" && !!s.fault;
    show($("fault"), locked);
    if (locked) {
      text("fault-serial", s.fault.serial ? "unit " + s.fault.serial + " · " + s.fault.at : s.fault.at);
      text("fault-what", s.fault.what);
      text("fault-said", s.fault.said);
      text("fault-check", s.fault.check);
      if (document.activeElement !== $("clear-note")) $("clear-note").focus();
    }
    document.body.dataset.phase = s.phase;
    clearInterval(timer);
    if (running) { tick(); timer = setInterval(tick, 250); }
    refocus();
  }

  function onStep(e) {
    if (!st || !st.unit) return;
    const u = st.unit;
    u.step = e.step; u.step_name = e.step_name; u.steps = e.steps;
    if (e.expected_ms > 0) u.expected_ms = e.expected_ms;
    text("step-name", e.step_name);
    if (e.kind === "step_start") { u.point_text = ""; text("point-text", ""); }
    text("expected", u.expected_ms > 0 ? fmtClock(u.expected_ms) : "—");
    renderSteps(e.steps, e.step);
  }
  function onPoint(e) {
    if (!st || !st.unit) return;
    st.unit.point_text = e.point_text;
    text("point-text", e.point_text);
    plotUnit = e.unit;
    if (isFinite(e.x) && isFinite(e.y)) { pts.push({ X: e.x, Y: e.y, Step: e.step }); drawPlot(); }
  }

  // --- the event stream; on a break the page reads the whole state again ---
  function connect() {
    const es = new EventSource("/events");
    es.addEventListener("state", (m) => apply(JSON.parse(m.data)));
    es.addEventListener("step", (m) => onStep(JSON.parse(m.data)));
    es.addEventListener("point", (m) => onPoint(JSON.parse(m.data)));
    es.onerror = () => {
      es.close();
      setTimeout(async () => {
        try {
          const r = await fetch("/state", { credentials: "same-origin" });
          if (r.status === 403) { location.reload(); return; }
          apply(await r.json());
        } catch (e) { /* the console is away; try again */ }
        connect();
      }, 1000);
    };
  }
  connect();
  refocus();
})();
