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
      text("retest-lot", a.retest.lot);
      show($("retest-lot"), !!a.retest.lot);
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

  // --- the production lot ---
  // The lot in force is always shown beside the scan field. A new lot is
  // scanned (or typed) into its own field and Enter: every unit started after
  // it records it. A lot field left with the focus gives it back to the scan
  // field after a while, so that the next serial is not scanned into it.
  const lotField = $("lot");
  const LOT_IDLE_MS = 20000;
  let lotIdle = null;
  function lotError(msg) {
    text("lot-error", msg);
    show($("lot-error"), !!msg);
  }
  function lotTouched() {
    clearTimeout(lotIdle);
    lotIdle = setTimeout(() => {
      if (document.activeElement === lotField) { lotField.blur(); refocus(); }
    }, LOT_IDLE_MS);
  }
  lotField.addEventListener("focus", lotTouched);
  lotField.addEventListener("input", lotTouched);
  $("lot-form").addEventListener("submit", async (ev) => {
    ev.preventDefault();
    const a = await post("/lot", { lot: lotField.value.trim() });
    if (a.ok) {
      lotField.value = "";
      lotError("");
      clearTimeout(lotIdle);
      lotField.blur();
      refocus();
    } else {
      lotError(a.error || "refused");
      // A second scan replaces what was refused.
      lotField.focus();
      lotField.select();
    }
  });
  function renderLot(s) {
    const el = $("lot-now");
    el.dataset.lot = s.lot || "";
    el.textContent = s.lot || "none";
    el.classList.toggle("none", !s.lot);
    // Not while a unit runs: it records the lot it started in.
    const off = document.body.dataset.operate !== "1" || s.phase === "running";
    lotField.disabled = off;
    $("lot-go").disabled = off;
  }

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
  // A decision reissues a certificate: it takes two taps. The first arms the
  // button ("Confirm accept — …") for a few seconds; the second decides.
  const reviewBox = $("review");
  const ARM_MS = 6000;
  let armed = null;        // { cert, decision, until }
  let armTimer = null;
  const rowErrors = {};    // cert → the refusal shown under its row
  const confirmText = {
    accept: "Confirm accept \u2014 reissue the certificate as PASS",
    reject: "Confirm reject \u2014 reissue the certificate as FAIL",
  };
  function oneLine(v) { return v.replace(/\s*[\r\n]+\s*/g, " ").trim(); }
  function rowOf(cert) {
    for (const tr of reviewBox.querySelectorAll("tr.review-row")) if (tr.dataset.cert === cert) return tr;
    return null;
  }
  function showArmed() {
    if (!reviewBox) return;
    for (const tr of reviewBox.querySelectorAll("tr.review-row")) {
      const on = armed && armed.cert === tr.dataset.cert ? armed.decision : "";
      const acc = tr.querySelector(".review-accept"), rej = tr.querySelector(".review-reject");
      acc.classList.toggle("armed", on === "accept");
      rej.classList.toggle("armed", on === "reject");
      acc.textContent = on === "accept" ? confirmText.accept : "\u2713 Accept";
      rej.textContent = on === "reject" ? confirmText.reject : "\u2715 Reject";
      acc.hidden = on === "reject";
      rej.hidden = on === "accept";
      tr.querySelector(".rv-cancel").hidden = !on;
    }
  }
  function disarm() {
    armed = null;
    clearTimeout(armTimer);
    showArmed();
  }
  function rowError(cert, msg) {
    if (msg) rowErrors[cert] = msg; else delete rowErrors[cert];
    const tr = rowOf(cert);
    const el = tr && tr.querySelector(".rv-error");
    if (el) {
      el.textContent = msg || "";
      el.hidden = !msg;
      if (msg) el.scrollIntoView({ block: "nearest" });
    }
    // A refusal for a row that is gone shows above the queue.
    text("review-error", el ? "" : msg);
    show($("review-error"), !el && !!msg);
  }
  if (reviewBox) {
    reviewBox.addEventListener("click", async (ev) => {
      const row = ev.target.closest("tr.review-row");
      if (!row) return;
      if (ev.target.closest("button.rv-cancel")) { disarm(); return; }
      const b = ev.target.closest("button.review-accept, button.review-reject");
      if (!b) return;
      const cert = row.dataset.cert;
      const field = row.querySelector(".review-reason");
      const reason = oneLine(field.value);
      const decision = b.classList.contains("review-accept") ? "accept" : "reject";
      if (!reason) {
        disarm();
        rowError(cert, "Write the reason for the decision first.");
        field.focus();
        return;
      }
      if (!(armed && armed.cert === cert && armed.decision === decision)) {
        rowError(cert, "");
        armed = { cert, decision };
        clearTimeout(armTimer);
        armTimer = setTimeout(disarm, ARM_MS);
        showArmed();
        return;
      }
      disarm();
      b.disabled = true;
      const a = await post("/review/" + encodeURIComponent(cert), { decision, reason });
      b.disabled = false;
      rowError(cert, a.ok ? "" : a.error || "not recorded");
    });
    // The reason is one line (a decision's reason holds no line breaks):
    // Enter does not break it, a pasted break becomes a space.
    reviewBox.addEventListener("keydown", (ev) => {
      if (ev.key === "Enter" && ev.target.classList.contains("review-reason")) ev.preventDefault();
    });
    reviewBox.addEventListener("input", (ev) => {
      const f = ev.target;
      if (f.classList.contains("review-reason") && /[\r\n]/.test(f.value)) f.value = f.value.replace(/[\r\n]+/g, " ");
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

  // The last units' lot: in the heading when they share one, else under each
  // serial.
  function renderRecent(rows) {
    const tb = document.querySelector("#recent tbody");
    tb.replaceChildren();
    const lots = new Set((rows || []).map((r) => r.lot || ""));
    const differ = lots.size > 1;
    const one = !differ && lots.size === 1 ? [...lots][0] : "";
    text("recent-lot", one ? " \u00b7 lot " + one : "");
    for (const r of rows || []) {
      const tr = document.createElement("tr");
      tr.dataset.verdict = r.verdict;
      tr.dataset.lot = r.lot || "";
      cell(tr, r.at);
      const sn = document.createElement("span");
      sn.textContent = r.serial + (r.retest ? " ↻" : "");
      const td = cell(tr, sn);
      if (differ) {
        const l = document.createElement("div");
        l.className = "row-lot";
        l.textContent = r.lot ? "lot " + r.lot : "no lot";
        td.append(l);
      }
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
    const fe = document.activeElement;
    const focused = fe && fe.classList && fe.classList.contains("review-reason")
      ? { cert: fe.closest("tr.review-row").dataset.cert, at: fe.selectionStart } : null;
    tb.replaceChildren();
    for (const r of rows || []) {
      const tr = document.createElement("tr");
      tr.className = "review-row";
      tr.dataset.cert = r.cert;
      const td = document.createElement("td");
      const head = document.createElement("div");
      head.className = "rv-head";
      // Each part stays whole ("2026-12-02 17:10" never splits).
      [r.serial, r.cert, r.at].forEach((t, i) => {
        if (i) head.append(" · ");
        const sp = document.createElement("span");
        sp.textContent = t;
        head.append(sp);
      });
      const why = document.createElement("div");
      why.className = "rv-why";
      why.textContent = r.reasons;
      const inp = document.createElement("textarea");
      inp.className = "review-reason"; inp.rows = 2; inp.maxLength = 500; inp.spellcheck = false;
      inp.placeholder = "reason for the decision (one sentence)";
      inp.setAttribute("aria-label", "reason for the decision on " + r.serial);
      inp.value = typed[r.cert] || "";
      const acc = document.createElement("button");
      acc.type = "button"; acc.className = "btn btn-go review-accept";
      const rej = document.createElement("button");
      rej.type = "button"; rej.className = "btn btn-stop review-reject";
      const cancel = document.createElement("button");
      cancel.type = "button"; cancel.className = "btn btn-quiet rv-cancel"; cancel.textContent = "Cancel";
      const btns = document.createElement("div");
      btns.className = "rv-buttons";
      btns.append(acc, rej, cancel);
      const err = document.createElement("div");
      err.className = "rv-error"; err.setAttribute("role", "alert");
      err.textContent = rowErrors[r.cert] || "";
      err.hidden = !rowErrors[r.cert];
      td.append(head, why, inp, btns, err);
      tr.append(td);
      tb.append(tr);
    }
    if (armed && !(rows || []).some((r) => r.cert === armed.cert)) disarm();
    showArmed();
    // A redraw keeps the reviewer's place in the field being typed in.
    if (focused) {
      const tr = rowOf(focused.cert);
      const f = tr && tr.querySelector(".review-reason");
      if (f) { f.focus(); f.setSelectionRange(focused.at, focused.at); }
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

  // The plot: the error at each point of the reading step on test, one plot
  // per step. x is the point's index (1 … Points), fixed from the first point
  // on, so nothing moves sideways as points come; y is symmetric about zero
  // on a 1-2-5 scale. Labels sit outside the plotted area.
  const svgNS = "http://www.w3.org/2000/svg";
  const NB = "\u00a0";
  const X0 = 150, X1 = 770, YMID = 124, YHALF = 104;
  function niceCeil(v) {
    const e = Math.pow(10, Math.floor(Math.log10(v)));
    for (const m of [1, 2, 2.5, 5, 10]) if (m * e >= v) return m * e;
    return 10 * e;
  }
  function drawPlot() {
    const g = $("plot-points");
    g.replaceChildren();
    for (const id of ["plot-top", "plot-mid", "plot-bottom", "plot-xmin", "plot-xmax", "plot-unit"]) text(id, "");
    if (!pts.length) return;
    let ymax = 0, xmin = Infinity, xmax = -Infinity;
    let n = 0;
    for (const p of pts) n = Math.max(n, p.N || 0, p.I || 0);
    for (const p of pts) { ymax = Math.max(ymax, Math.abs(p.Y)); xmin = Math.min(xmin, p.X); xmax = Math.max(xmax, p.X); }
    ymax = ymax > 0 ? niceCeil(ymax * 1.05) : 1e-3;
    // By index when every point knows its step's count; else by stimulus.
    const byIndex = n > 0 && pts.every((p) => p.I > 0 && p.N > 0);
    const xOf = (p) => {
      if (byIndex) return n > 1 ? X0 + (X1 - X0) * (p.I - 1) / (n - 1) : (X0 + X1) / 2;
      return xmax > xmin ? X0 + (X1 - X0) * (p.X - xmin) / (xmax - xmin) : (X0 + X1) / 2;
    };
    pts.forEach((p, i) => {
      const c = document.createElementNS(svgNS, "circle");
      c.setAttribute("class", "pt" + (i === pts.length - 1 ? " last" : ""));
      c.setAttribute("cx", xOf(p).toFixed(1));
      c.setAttribute("cy", (YMID - YHALF * p.Y / ymax).toFixed(1));
      c.setAttribute("r", i === pts.length - 1 ? "11" : "8");
      g.append(c);
    });
    const u = plotUnit === "count" ? "counts" : plotUnit || "V";
    text("plot-top", "+" + fmtSI(ymax, u));
    text("plot-mid", "0");
    text("plot-bottom", "\u2212" + fmtSI(ymax, u));
    // The stimulus axis: the first and the last point's level, as soon as
    // each is known; until then the point's number holds its place.
    const xu = pts[0].XUnit === "count" ? "counts" : pts[0].XUnit || "V";
    const first = byIndex ? pts.find((p) => p.I === 1) : pts.find((p) => p.X === xmin);
    const last = byIndex ? pts.find((p) => p.I === n) : (pts.length > 1 ? pts.find((p) => p.X === xmax) : null);
    text("plot-xmin", first ? fmtSigned(first.X, xu) : "point 1");
    text("plot-xmax", last ? fmtSigned(last.X, xu) : byIndex ? "point " + n : "");
    text("plot-unit", byIndex ? "error at each of the " + n + " stimulus levels" : "error against stimulus");
  }
  // fmtSI writes a magnitude with the SI prefix that suits it: "12.4 mV",
  // the number and its unit joined by a no-break space.
  function fmtSI(v, unit) {
    if (unit === "counts") return +v.toPrecision(3) + NB + "counts";
    const p = [[1, ""], [1e-3, "m"], [1e-6, "\u00b5"], [1e-9, "n"]];
    for (const [f, s] of p) if (v >= f) return +(v / f).toPrecision(3) + NB + s + unit;
    return +(v / 1e-9).toPrecision(3) + NB + "n" + unit;
  }
  // fmtSigned is fmtSI with the sign: "\u22124 mV", "+2.5 V", "0 V".
  function fmtSigned(v, unit) {
    if (v === 0) return "0" + NB + (unit === "counts" ? "counts" : unit);
    return (v < 0 ? "\u2212" : "+") + fmtSI(Math.abs(v), unit);
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
    renderLot(s);
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
    // A new reading step starts a new plot.
    if (pts.length && pts[pts.length - 1].Step !== e.step) pts = [];
    if (isFinite(e.x) && isFinite(e.y)) {
      pts.push({ X: e.x, Y: e.y, Step: e.step, I: e.point, N: e.points, XUnit: e.x_unit });
      drawPlot();
    }
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
