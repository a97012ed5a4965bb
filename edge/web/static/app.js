// steam-edge operator page: live figures over server-sent events, a trend and a
// pressure-temperature chart drawn on canvas, alarm actions through a signed-in session.
"use strict";
(function () {
  const $ = (id) => document.getElementById(id);
  const state = {
    points: {}, texts: {}, flows: {}, flowTexts: {}, alarms: [], csrf: null, user: null, writes: false,
    selected: null, range: 600, trend: null, tracks: {}, saturation: null, lastT: 0,
  };
  const QWORD = ["bad", "uncertain", "good"];
  const PEN = { p: "#1d3557", t: "#5b3a1a", tsat: "#444", sh: "#222" };

  function el(tag, cls, text) {
    const e = document.createElement(tag);
    if (cls) e.className = cls;
    if (text !== undefined && text !== null) e.textContent = String(text);
    return e;
  }
  function fmt(v, d) { return v === null || v === undefined ? "—" : Number(v).toFixed(d); }
  function timeText(t) {
    if (!t) return "—";
    const d = typeof t === "string" ? new Date(t) : new Date(t * 1000);  // RFC 3339 or epoch s
    return d.toLocaleString([], { hour12: false, month: "2-digit", day: "2-digit",
      hour: "2-digit", minute: "2-digit", second: "2-digit" });
  }
  function quantityText(q) {  // an API Quantity: its display value and unit, else SI
    if (!q) return "—";
    const v = q.display || q;
    return (typeof v.value === "number" ? +v.value.toPrecision(4) : v.value) + " " + (v.unit || "");
  }
  function first(obj, keys) {
    for (const k of keys) if (obj && obj[k] !== undefined && obj[k] !== null) return obj[k];
    return null;
  }

  // --- session -------------------------------------------------------------------------
  async function api(method, path, body) {
    const headers = { "Content-Type": "application/json" };
    if (state.csrf) headers["X-CSRF-Token"] = state.csrf;
    const r = await fetch(path, { method, headers, credentials: "same-origin",
      body: body === undefined ? undefined : JSON.stringify(body) });
    let data = null;
    try { data = await r.json(); } catch (e) { data = null; }
    if (!r.ok) throw new Error((data && (data.detail || data.error)) || ("HTTP " + r.status));
    return data;
  }
  async function loadSession() {
    const s = await api("GET", "/api/v1/session");
    state.csrf = s.signed_in ? s.csrf : null;
    state.user = s.signed_in ? s.user : null;
    state.writes = s.writes;
    showSession();
  }
  function showSession() {
    $("user").textContent = state.user ? "signed in: " + state.user : "";
    $("signin").hidden = !!state.user || !state.writes;
    $("signout").hidden = !state.user;
    $("write-note").hidden = !!state.user;
    if (!state.writes) $("write-note").textContent = "Writes are disabled: no API token is configured.";
    renderAlarms();
  }
  $("signin").addEventListener("click", () => { $("signin-error").textContent = ""; $("signin-dialog").showModal(); });
  $("signin-cancel").addEventListener("click", () => $("signin-dialog").close());
  $("signin-form").addEventListener("submit", async (ev) => {
    ev.preventDefault();
    try {
      const r = await fetch("/api/v1/session", { method: "POST", credentials: "same-origin",
        headers: { "Content-Type": "application/json", "Authorization": "Bearer " + $("signin-token").value },
        body: JSON.stringify({ user: $("signin-user").value }) });
      const data = await r.json();
      if (!r.ok) throw new Error(data.detail || data.error);
      state.csrf = data.csrf; state.user = data.user;
      $("signin-token").value = "";
      $("signin-dialog").close();
      showSession();
    } catch (e) { $("signin-error").textContent = "Not signed in: " + e.message; }
  });
  $("signout").addEventListener("click", async () => {
    try { await api("DELETE", "/api/v1/session"); } catch (e) { /* already gone */ }
    state.csrf = null; state.user = null; showSession();
  });

  // --- points ----------------------------------------------------------------------------
  function qualityCell(code, reason) {
    const word = QWORD[code] || "bad";
    return el("td", "q-" + word, reason && word !== "good" ? word + " (" + reason + ")" : word);
  }
  function renderPoints() {
    const body = $("points").tBodies[0];
    const names = Object.keys(state.points).sort();
    body.textContent = "";
    for (const name of names) {
      const f = state.points[name];
      const tx = state.texts[name] || {};
      const tr = el("tr", "clickable" + (name === state.selected ? " selected" : ""));
      tr.dataset.point = name;
      tr.appendChild(el("td", "", name));
      tr.appendChild(el("td", "", tx.state || ""));
      [[0, 3], [1, 3], [2, 1], [3, 1], [4, 1]].forEach(([i, d]) => {
        tr.appendChild(el("td", "num" + (f[5] === 0 ? " stale" : ""), fmt(f[i], d)));
      });
      const phase = first(tx, ["phase", "measured_phase"]);
      tr.appendChild(el("td", "", typeof phase === "object" && phase ? (phase.name || phase.phase || JSON.stringify(phase)) : (phase || "—")));
      tr.appendChild(qualityCell(f[5], tx.reason));
      const hints = Array.isArray(tx.hints) && tx.hints.length ? tx.hints.map((h) => (h && (h.text || h.message)) || String(h)).join("; ") : tx.hint;
      tr.appendChild(el("td", hints ? "hint" : "", hints || ""));
      tr.addEventListener("click", () => select(name));
      body.appendChild(tr);
    }
    const sel = $("trend-point");
    if (sel.options.length !== names.length) {
      sel.textContent = "";
      for (const n of names) { const o = el("option", "", n); o.value = n; sel.appendChild(o); }
      if (!state.selected && names.length) select(names.includes("superheater") ? "superheater" : names[0]);
      sel.value = state.selected;
    }
  }
  $("trend-point").addEventListener("change", (ev) => select(ev.target.value));
  function select(name) {
    state.selected = name; $("trend-point").value = name;
    renderPoints(); loadTrend();
  }

  // --- flows -----------------------------------------------------------------------------
  // m.f: name -> [t/h, kW, total t, total GJ, not measured s, quality code]; m.flow_texts on change
  function renderFlows() {
    const names = Object.keys(state.flows).sort();
    $("flows-box").hidden = names.length === 0;
    if (!names.length) return;
    let table = $("flows-table");
    if (!table) {
      table = el("table", "grid"); table.id = "flows-table";
      const head = el("tr");
      [["flow", ""], ["meter", ""], ["mass flow", "t/h"], ["energy", "kW"], ["total", "t"],
        ["total", "GJ"], ["not measured", "s"], ["quality", ""]].forEach(([h, u], i) => {
        const th = el("th", i >= 2 && i <= 6 ? "num" : "", h);
        if (u) { th.appendChild(el("br")); th.appendChild(el("span", "u", u)); }
        head.appendChild(th);
      });
      table.createTHead().appendChild(head);
      table.appendChild(el("tbody"));
      $("flows").appendChild(table);
    }
    const body = table.tBodies[0];
    body.textContent = "";
    for (const name of names) {
      const f = state.flows[name];
      const tx = state.flowTexts[name] || {};
      const tr = el("tr"); tr.dataset.flow = name;
      tr.appendChild(el("td", "", name));
      tr.appendChild(el("td", "", tx.meter || ""));
      [[0, 3], [1, 0], [2, 3], [3, 3], [4, 0]].forEach(([i, d]) => {
        tr.appendChild(el("td", "num" + (f[5] === 0 && i < 2 ? " stale" : ""), fmt(f[i], d)));
      });
      tr.appendChild(qualityCell(f[5], tx.reason));
      body.appendChild(tr);
    }
  }

  // --- alarms ----------------------------------------------------------------------------
  function act(kind, alarm, extra) {
    return api("POST", "/api/v1/alarms/" + encodeURIComponent(alarm) + "/" + kind,
      Object.assign({ user: state.user || "" }, extra || {}));
  }
  let pending = null;
  function openAct(kind, alarm) {
    pending = { kind, alarm };
    $("act-title").textContent = (kind === "shelve" ? "Shelve " : "Out of service: ") + alarm;
    $("act-duration-label").hidden = kind !== "shelve";
    $("act-go").textContent = kind === "shelve" ? "Shelve" : "Take out of service";
    $("act-reason").value = ""; $("act-error").textContent = "";
    $("act-dialog").showModal();
  }
  $("act-cancel").addEventListener("click", () => $("act-dialog").close());
  $("act-form").addEventListener("submit", async (ev) => {
    ev.preventDefault();
    const extra = { reason: $("act-reason").value };
    if (pending.kind === "shelve") extra.duration = $("act-duration").value;
    try { await act(pending.kind, pending.alarm, extra); $("act-dialog").close(); }
    catch (e) { $("act-error").textContent = e.message; }
  });
  function button(label, fn) {
    const b = el("button", "", label); b.type = "button";
    b.disabled = !state.user;
    b.addEventListener("click", async () => {
      try { await fn(); } catch (e) { b.title = e.message; b.textContent = label + " (refused)"; }
    });
    return b;
  }
  function renderAlarms() {
    const body = $("alarms").tBodies[0];
    body.textContent = "";
    const rows = state.alarms.slice().sort((a, b) => rank(a) - rank(b));
    let standing = 0;
    for (const a of rows) {
      const normal = a.state === "normal" && !a.shelved && !a.out_of_service;
      if (!normal) standing++;
      else if (!$("show-normal").checked) continue;
      const tr = el("tr", (a.unacknowledged ? "unack " : "") + (normal ? "normal" : ""));
      tr.dataset.alarm = a.name;
      tr.appendChild(el("td", "prio prio-" + a.priority, a.priority));
      tr.appendChild(el("td", "", a.name));
      const word = (a.state || "").replace(/_/g, " ");
      tr.appendChild(el("td", "state", word + (a.unacknowledged && !/unack/.test(word) ? " (unacknowledged)" : "")));
      const act0 = a.activation || null;  // what happened when it came in, kept as it was
      tr.appendChild(el("td", "", timeText(act0 ? act0.time : a.since)));
      tr.appendChild(el("td", "num", quantityText(act0 ? act0.value : null)));
      tr.appendChild(el("td", "num", quantityText(a.live ? a.live.value : null)));
      tr.appendChild(el("td", "small", a.message || ""));
      const acts = el("td", "acts");
      if (a.unacknowledged) acts.appendChild(button("Ack", () => act("ack", a.name)));
      if (a.shelved) acts.appendChild(button("Unshelve", () => act("unshelve", a.name)));
      else if (!a.out_of_service) acts.appendChild(button("Shelve…", () => openAct("shelve", a.name)));
      if (a.out_of_service) acts.appendChild(button("In service", () => act("in-service", a.name, { reason: "returned from the page" })));
      else acts.appendChild(button("Out of service…", () => openAct("out-of-service", a.name)));
      tr.appendChild(acts);
      body.appendChild(tr);
    }
    $("alarm-count").textContent = standing + " not in normal state, of " + rows.length;
  }
  $("show-normal").addEventListener("change", renderAlarms);
  function rank(a) {
    const p = { critical: 0, high: 1, medium: 2, low: 3 }[a.priority] || 4;
    const normal = a.state === "normal" && !a.shelved && !a.out_of_service;
    return (normal ? 10 : 0) + (a.unacknowledged ? 0 : 5) + p;
  }
  function renderHealth(h) {
    const e = $("health");
    if (!h) { e.textContent = "alarm-system health: no journal"; return; }
    if (h.error) { e.textContent = "alarm-system health: " + h.error; e.className = "small error"; return; }
    const parts = [];
    for (const [k, label] of [["rate_10min", "raised in 10 min"], ["rate_hour", "in 1 h"],
      ["standing", "standing"], ["shelved", "shelved"]]) if (h[k] !== undefined) parts.push(label + " " + h[k]);
    if (h.flood) parts.push("FLOOD");
    if (h.chattering && h.chattering.length) parts.push("chattering: " + h.chattering.map((c) => c.alarm || c).join(", "));
    if (h.stale && h.stale.length) parts.push("stale: " + h.stale.map((c) => c.alarm || c).join(", "));
    e.textContent = "alarm-system health: " + parts.join(" · ");
    e.className = "small" + (h.flood ? " error" : "");
  }
  function renderSources(list) {
    const body = $("sources").tBodies[0];
    body.textContent = "";
    for (const s of list) {
      const tr = el("tr");
      tr.appendChild(el("td", "", s.name));
      tr.appendChild(el("td", s.up ? "up" : "down", s.up ? "up" : "down"));
      tr.appendChild(el("td", "", timeText(s.last_read)));
      tr.appendChild(el("td", "small", s.error || ""));
      body.appendChild(tr);
    }
  }

  // --- live ------------------------------------------------------------------------------
  function onMessage(m) {
    state.lastT = m.t;
    state.points = m.p;
    if (m.texts) state.texts = m.texts;
    state.flows = m.f || {};
    if (m.flow_texts) state.flowTexts = m.flow_texts;
    if (m.site) {
      $("site").textContent = m.site.site;
      if (m.site.notice) $("notice").textContent = m.site.notice;
      const b = m.site.barometer;
      $("baro").textContent = b ? "barometer " + fmt(b.value, 4) + " bar a (" + b.origin + ", " + b.quality + "); gauge = absolute − barometer" : "";
    }
    if (m.alarms) state.alarms = m.alarms;
    if (m.health !== undefined) renderHealth(m.health);
    if (m.sources) renderSources(m.sources);
    $("clock").textContent = timeText(m.t);
    for (const [name, f] of Object.entries(m.p)) {
      const tr = state.tracks[name] || (state.tracks[name] = []);
      tr.push([f[2], f[0], f[5]]);
      if (tr.length > 450) tr.shift();
    }
    renderPoints();
    renderFlows();
    if (m.alarms) renderAlarms();
    extendTrend(m);
    drawPT();
  }
  function connect() {
    const es = new EventSource("/api/v1/live?every=2");
    es.onopen = () => { $("link").textContent = "live"; $("link").className = "muted"; };
    es.onmessage = (ev) => { try { onMessage(JSON.parse(ev.data)); } catch (e) { console.error(e); } };
    es.onerror = () => { $("link").textContent = "✕ connection lost, retrying"; $("link").className = "error"; };
  }

  // --- trend -----------------------------------------------------------------------------
  for (const b of document.querySelectorAll("#ranges button")) {
    b.addEventListener("click", () => { state.range = Number(b.dataset.range); loadTrend(); });
  }
  function query(since) {
    const step = Math.max(1, Math.round(state.range / 700));
    let q = "point=" + encodeURIComponent(state.selected) + "&since=-" + state.range + "s";
    if (state.range > 600) q += "&step=" + step + "s";
    return q;
  }
  let trendTimer = null;
  async function loadTrend() {
    if (!state.selected) return;
    for (const b of document.querySelectorAll("#ranges button")) b.setAttribute("aria-pressed", String(Number(b.dataset.range) === state.range));
    $("csv").href = "/api/v1/history.csv?" + query();
    try {
      const d = await api("GET", "/api/v1/history?format=compact&" + query());
      const byQ = {};
      for (const s of d.series) byQ[s.quantity] = s;
      state.trend = { point: state.selected, series: byQ, events: d.alarms, since: Date.now() / 1000 - state.range };
      $("trend-info").textContent = (byQ.pressure ? byQ.pressure.resolution : "") + " · " + (d.server_ms) + " ms";
    } catch (e) { $("trend-info").textContent = "history: " + e.message; state.trend = null; }
    drawTrend();
    clearTimeout(trendTimer);
    if (state.range > 600) trendTimer = setTimeout(loadTrend, Math.min(300000, state.range * 50));
  }
  function extendTrend(m) {
    const tr = state.trend;
    if (!tr || tr.point !== state.selected) return;
    const f = m.p[tr.point];
    if (!f) return;
    const add = { pressure: f[0], temperature: f[2], tsat: f[3], superheat: f[4] };
    for (const [q, v] of Object.entries(add)) {
      const s = tr.series[q];
      if (!s) continue;
      const last = s.samples[s.samples.length - 1];
      if (state.range <= 600 || !last || m.t - last[0] >= (s.step || 1)) s.samples.push([m.t, v, v, v, f[5] === 0 ? 0 : f[5]]);
      while (s.samples.length && s.samples[0][0] < m.t - state.range) s.samples.shift();
    }
    tr.since = m.t - state.range;
    drawTrend();
  }
  function canvasCtx(c) {
    const r = window.devicePixelRatio || 1;
    const w = c.clientWidth, h = Number(c.getAttribute("height"));
    if (c.width !== Math.round(w * r)) { c.width = Math.round(w * r); c.style.height = h + "px"; }
    c.height = Math.round(h * r);
    const ctx = c.getContext("2d");
    ctx.setTransform(r, 0, 0, r, 0, 0);
    ctx.font = "11px system-ui, sans-serif";
    return { ctx, w, h };
  }
  function extent(lists, pad) {
    let lo = Infinity, hi = -Infinity;
    for (const xs of lists) for (const v of xs) if (v !== null && isFinite(v)) { lo = Math.min(lo, v); hi = Math.max(hi, v); }
    if (!isFinite(lo)) return [0, 1];
    if (hi - lo < 1e-9) { lo -= 0.5; hi += 0.5; }
    const p = (hi - lo) * pad;
    return [lo - p, hi + p];
  }
  function ticks(lo, hi, n) {
    const raw = (hi - lo) / n, mag = Math.pow(10, Math.floor(Math.log10(raw)));
    const step = [1, 2, 5, 10].map((k) => k * mag).find((s) => s >= raw) || raw;
    const out = [];
    for (let v = Math.ceil(lo / step) * step; v <= hi; v += step) out.push(Number(v.toPrecision(10)));
    return out;
  }
  function timeTicks(t0, t1) {
    const span = t1 - t0;
    const steps = [60, 120, 300, 600, 1800, 3600, 7200, 14400, 21600, 43200, 86400, 172800, 432000];
    const step = steps.find((s) => span / s <= 7) || 864000;
    const out = [];
    const off = new Date().getTimezoneOffset() * 60;
    for (let t = Math.ceil((t0 - off) / step) * step + off; t <= t1; t += step) out.push(t);
    return { out, step };
  }
  function timeLabel(t, step) {
    const d = new Date(t * 1000), hh = String(d.getHours()).padStart(2, "0"), mm = String(d.getMinutes()).padStart(2, "0");
    return step >= 86400 ? (d.getMonth() + 1) + "/" + d.getDate() : hh + ":" + mm;
  }
  function drawTrend() {
    const tr = state.trend;
    const main = canvasCtx($("trend")), low = canvasCtx($("trend-sh"));
    const t1 = state.lastT || Date.now() / 1000, t0 = t1 - state.range;
    const L = 58, R = 58, T = 16, B = 20;
    let count = 0;
    for (const c of [main, low]) { c.ctx.fillStyle = "#ececea"; c.ctx.fillRect(0, 0, c.w, c.h); }
    if (!tr) { main.ctx.fillStyle = "#555"; main.ctx.fillText("no history yet", L, 30); $("trend").dataset.samples = "0"; return; }
    const S = tr.series;
    const col = (q, i) => (S[q] ? S[q].samples.map((s) => s[i]) : []);
    const pr = extent([col("pressure", 2), col("pressure", 3), (S.pressure ? S.pressure.limits : []).map((l) => l.display)], 0.08);
    const tt = extent([col("temperature", 2), col("temperature", 3), col("tsat", 2), col("tsat", 3),
      (S.temperature ? S.temperature.limits : []).map((l) => l.display)], 0.08);
    const sh = extent([col("superheat", 2), col("superheat", 3), [0], (S.superheat ? S.superheat.limits : []).map((l) => l.display)], 0.1);
    const x = (c, t) => L + (c.w - L - R) * (t - t0) / (t1 - t0);
    const y = (c, lo, hi, v) => T + (c.h - T - B) * (1 - (v - lo) / (hi - lo));
    const tk = timeTicks(t0, t1);
    for (const c of [main, low]) {
      const g = c.ctx;
      g.strokeStyle = "#cfcfca"; g.lineWidth = 1; g.fillStyle = "#555";
      for (const t of tk.out) { const X = x(c, t); g.beginPath(); g.moveTo(X, T); g.lineTo(X, c.h - B); g.stroke(); g.fillText(timeLabel(t, tk.step), X - 14, c.h - 5); }
      g.strokeStyle = "#999"; g.strokeRect(L, T, c.w - L - R, c.h - T - B);
    }
    // bad-quality stretches of the point's measurements, merged, hatched inside the plot
    const spans = [];
    for (const q of ["pressure", "temperature"]) if (S[q]) {
      const ss = S[q].samples, st = S[q].step || 1;
      for (let i = 0; i < ss.length; i++) if (ss[i][4] === 0) spans.push([ss[i][0], i + 1 < ss.length ? ss[i + 1][0] : ss[i][0] + st]);
    }
    spans.sort((a, b) => a[0] - b[0]);
    const bad = [];
    for (const sp of spans) {
      const last = bad[bad.length - 1];
      if (last && sp[0] <= last[1] + 0.001) last[1] = Math.max(last[1], sp[1]); else bad.push(sp.slice());
    }
    for (const c of [main, low]) {
      const g = c.ctx, top = T, bottom = c.h - B;
      g.save(); g.beginPath(); g.rect(L, top, c.w - L - R, bottom - top); g.clip();
      for (const [a, b] of bad) {
        const X0 = Math.max(L, x(c, a)), X1 = Math.max(X0 + 2, Math.min(c.w - R, x(c, b)));
        g.fillStyle = "#f1e3b8"; g.fillRect(X0, top, X1 - X0, bottom - top);
        g.save(); g.beginPath(); g.rect(X0, top, X1 - X0, bottom - top); g.clip();
        g.strokeStyle = "#c9b27a"; g.lineWidth = 1;
        for (let k = X0 - (bottom - top); k < X1; k += 7) { g.beginPath(); g.moveTo(k, bottom); g.lineTo(k + (bottom - top), top); g.stroke(); }
        g.restore();
      }
      g.restore();
    }
    // axes labels
    const gm = main.ctx;
    gm.fillStyle = PEN.p;
    for (const v of ticks(pr[0], pr[1], 5)) gm.fillText(v.toFixed(2), 4, y(main, pr[0], pr[1], v) + 4);
    gm.fillText("bar a", 4, 11);
    gm.fillStyle = PEN.t;
    for (const v of ticks(tt[0], tt[1], 5)) gm.fillText(v.toFixed(1), main.w - R + 4, y(main, tt[0], tt[1], v) + 4);
    gm.fillText("°C", main.w - R + 4, 11);
    low.ctx.fillStyle = PEN.sh;
    for (const v of ticks(sh[0], sh[1], 3)) low.ctx.fillText(v.toFixed(1), 4, y(low, sh[0], sh[1], v) + 4);
    low.ctx.fillText("superheat K", 4, 11);
    function pen(c, s, lo, hi, colour, dash, width) {
      if (!s) return;
      const g = c.ctx;
      if (s.aggregated) { // min-max band
        g.fillStyle = colour + "22"; g.beginPath();
        let open = false;
        const ss = s.samples;
        for (let i = 0; i < ss.length; i++) { if (ss[i][3] === null) continue; const X = x(c, ss[i][0]), Y = y(c, lo, hi, ss[i][3]); if (!open) { g.moveTo(X, Y); open = true; } else g.lineTo(X, Y); }
        for (let i = ss.length - 1; i >= 0; i--) { if (ss[i][2] === null) continue; g.lineTo(x(c, ss[i][0]), y(c, lo, hi, ss[i][2])); }
        if (open) g.fill();
      }
      g.strokeStyle = colour; g.lineWidth = width; g.setLineDash(dash); g.beginPath();
      let down = false, prev = null;
      const gap = Math.max(5, (s.step || 1) * 3.5);
      for (const smp of s.samples) {
        if (smp[1] === null || (prev !== null && smp[0] - prev > gap)) { down = false; }
        if (smp[1] !== null) { const X = x(c, smp[0]), Y = y(c, lo, hi, smp[1]); if (down) g.lineTo(X, Y); else g.moveTo(X, Y); down = true; count++; }
        prev = smp[0];
      }
      g.stroke(); g.setLineDash([]);
    }
    function limits(c, s, lo, hi) {
      if (!s) return;
      const g = c.ctx;
      for (const l of s.limits) {
        if (l.display === null) continue;
        const Y = y(c, lo, hi, l.display);
        g.strokeStyle = getComputedStyle(document.documentElement).getPropertyValue("--" + l.priority) || "#800";
        g.setLineDash([6, 3]); g.lineWidth = 1.2; g.beginPath(); g.moveTo(L, Y); g.lineTo(c.w - R, Y); g.stroke(); g.setLineDash([]);
        g.fillStyle = g.strokeStyle; g.fillText(l.kind.replace("_", " ") + " " + l.display + " (" + l.alarm + ")", L + 4, Y - 3 < T + 10 ? Y + 11 : Y - 3);
      }
    }
    g0(main); g0(low);
    function g0(c) { c.ctx.save(); c.ctx.beginPath(); c.ctx.rect(L, T, c.w - L - R, c.h - T - B); c.ctx.clip(); }
    pen(main, S.pressure, pr[0], pr[1], PEN.p, [], 1.6);
    pen(main, S.temperature, tt[0], tt[1], PEN.t, [], 1.6);
    pen(main, S.tsat, tt[0], tt[1], PEN.tsat, [5, 3], 1.2);
    limits(main, S.pressure, pr[0], pr[1]);
    limits(main, S.temperature, tt[0], tt[1]);
    const zero = y(low, sh[0], sh[1], 0);
    low.ctx.strokeStyle = "#888"; low.ctx.beginPath(); low.ctx.moveTo(L, zero); low.ctx.lineTo(low.w - R, zero); low.ctx.stroke();
    pen(low, S.superheat, sh[0], sh[1], PEN.sh, [], 1.4);
    limits(low, S.superheat, sh[0], sh[1]);
    main.ctx.restore(); low.ctx.restore();
    $("trend").dataset.samples = String(count);
    $("trend-legend").textContent = "— pressure (bar a, left axis)   — temperature (°C, right)   - - Tsat (°C, right)   lower: superheat (K; below 0 subcooled)   - - alarm limits   ▨ bad quality" + (bad.length ? " (" + bad.length + (bad.length === 1 ? " stretch" : " stretches") + ")" : "");
  }

  // --- pressure-temperature chart -------------------------------------------------------
  async function loadSaturation() {
    const d = await api("GET", "/api/v1/saturation");
    state.saturation = d.line;
    drawPT();
  }
  function drawPT() {
    const line = state.saturation;
    const c = canvasCtx($("pt"));
    const g = c.ctx;
    g.fillStyle = "#ececea"; g.fillRect(0, 0, c.w, c.h);
    if (!line) return;
    const L = 50, R = 10, T = 8, B = 24;
    const pts = Object.entries(state.points).filter(([, f]) => f[0] !== null && f[2] !== null);
    const temps = pts.map(([, f]) => f[2]), pres = pts.map(([, f]) => f[0]);
    let t0 = Math.min(...temps, 100) - 20, t1 = Math.max(...temps, 200) + 20;
    let p0 = Math.max(0.006, Math.min(...pres, 1) / 2), p1 = Math.max(...pres, 10) * 2;
    const lp0 = Math.log10(p0), lp1 = Math.log10(p1);
    const X = (t) => L + (c.w - L - R) * (t - t0) / (t1 - t0);
    const Y = (p) => T + (c.h - T - B) * (1 - (Math.log10(p) - lp0) / (lp1 - lp0));
    g.strokeStyle = "#cfcfca"; g.fillStyle = "#555";
    for (const t of ticks(t0, t1, 6)) { g.beginPath(); g.moveTo(X(t), T); g.lineTo(X(t), c.h - B); g.stroke(); g.fillText(String(t), X(t) - 8, c.h - 10); }
    for (let e = Math.floor(lp0); e <= lp1; e++) for (const k of [1, 2, 5]) { const p = k * Math.pow(10, e); if (p < p0 || p > p1) continue; g.beginPath(); g.moveTo(L, Y(p)); g.lineTo(c.w - R, Y(p)); g.stroke(); g.fillText(String(Number(p.toPrecision(3))), 4, Y(p) + 4); }
    g.fillText("bar a (log)", 4, T + 8); g.fillText("°C", c.w - R - 14, c.h - 10);
    g.strokeStyle = "#999"; g.strokeRect(L, T, c.w - L - R, c.h - T - B);
    g.save(); g.beginPath(); g.rect(L, T, c.w - L - R, c.h - T - B); g.clip();
    g.strokeStyle = "#333"; g.lineWidth = 2; g.beginPath();
    line.forEach(([t, p], i) => { if (i) g.lineTo(X(t), Y(p)); else g.moveTo(X(t), Y(p)); });
    g.stroke(); g.lineWidth = 1;
    g.fillStyle = "#777"; g.fillText("saturation (IF97)", X(line[Math.floor(line.length * 0.45)][0]) + 6, Y(line[Math.floor(line.length * 0.45)][1]));
    const placed = [];
    for (const [name, f] of Object.entries(state.points)) {
      const track = state.tracks[name] || [];
      g.fillStyle = "#666";
      for (const [t, p] of track) if (t !== null && p !== null) g.fillRect(X(t) - 1, Y(p) - 1, 2, 2);
      let last = f[0] !== null && f[2] !== null ? [f[2], f[0]] : null;
      const badNow = f[5] === 0;
      if (!last) { for (let i = track.length - 1; i >= 0; i--) if (track[i][0] !== null && track[i][1] !== null) { last = [track[i][0], track[i][1]]; break; } }
      if (!last) continue;
      const px = X(last[0]), py = Y(last[1]);
      g.strokeStyle = badNow ? getComputedStyle(document.documentElement).getPropertyValue("--critical") : "#111";
      g.lineWidth = name === state.selected ? 2.5 : 1.5;
      g.beginPath();
      if (badNow) { g.moveTo(px, py - 6); g.lineTo(px + 6, py); g.lineTo(px, py + 6); g.lineTo(px - 6, py); g.closePath(); }
      else g.arc(px, py, 5, 0, 2 * Math.PI);
      g.stroke(); g.lineWidth = 1;
      const label = name + (badNow ? " (bad)" : "");
      const w = g.measureText(label).width;
      let ly = py - 6;
      const lx = px + 8 + w > c.w - R ? px - 8 - w : px + 8;
      while (placed.some((r) => lx < r[0] + r[2] && r[0] < lx + w && Math.abs(r[1] - ly) < 12)) ly += 12;
      placed.push([lx, ly, w]);
      if (Math.abs(ly - (py - 6)) > 1) { g.strokeStyle = "#999"; g.beginPath(); g.moveTo(px, py); g.lineTo(lx < px ? lx + w : lx, ly - 4); g.stroke(); }
      g.fillStyle = "#111"; g.fillText(label, lx, ly);
    }
    g.restore();
  }
  window.addEventListener("resize", () => { drawTrend(); drawPT(); });

  loadSession().catch(() => {});
  loadSaturation().catch(() => {});
  connect();
})();
