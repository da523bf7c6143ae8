// bandgeo review page: draws the unrolled surface, the axis profile and a 3-D view, and sends edits.
// Plain JavaScript, no libraries. The server owns the edit list; this page only asks it for changes.
"use strict";
(() => {
  const params = new URLSearchParams(location.search);
  const TOKEN = params.get("token");
  if (TOKEN) history.replaceState(null, "", location.pathname);  // the cookie carries it from now on
  const HEAD = TOKEN ? { "X-Review-Token": TOKEN } : {};
  const $ = (id) => document.getElementById(id);
  const COL = { auto: "#E69F00", accepted: "#009E73", added: "#0072B2", moved: "#0072B2",
    rejected: "#D55E00", merged: "#D55E00", hiatus: "rgba(204,121,167,0.28)",
    uncertain: "rgba(153,153,153,0.30)", stretch: "rgba(86,180,233,0.25)" };
  const DASH = { auto: [], accepted: [], added: [7, 4], moved: [7, 4], rejected: [2, 3], merged: [2, 3] };

  let S = null;            // page state from the server
  let surf = null;         // surface payload + decoded images
  const sel = { id: null, cursor: null, stretch: null };
  const view = { v0: 0, v1: 1 };
  let queue = Promise.resolve();

  // ---------------------------------------------------------------------------------- server calls
  async function call(path, body) {
    const opts = { headers: { ...HEAD }, credentials: "same-origin" };
    if (body !== undefined) {
      opts.method = "POST"; opts.headers["Content-Type"] = "application/json";
      opts.body = JSON.stringify(body);
    }
    const res = await fetch(path, opts);
    let data = null;
    try { data = await res.json(); } catch (e) { data = { error: res.statusText }; }
    if (!res.ok) throw new Error(data && data.error ? data.error : `HTTP ${res.status}`);
    return data;
  }
  function toast(msg) {
    const t = $("toast"); t.textContent = msg; t.classList.add("show");
    clearTimeout(toast.timer); toast.timer = setTimeout(() => t.classList.remove("show"), 6000);
  }
  function enqueue(fn) { queue = queue.then(fn).catch((e) => toast(e.message)); return queue; }
  function edit(e) {
    return enqueue(async () => { const r = await call("/api/edit", { edit: e }); setState(r.state); return r.edit; });
  }
  function undo() { enqueue(async () => setState((await call("/api/undo", {})).state)); }
  function redo() { enqueue(async () => setState((await call("/api/redo", {})).state)); }
  function save() {
    enqueue(async () => { const r = await call("/api/save", {}); setState(r.state); poll(); });
  }
  let polling = false;
  async function poll() {
    if (polling) return; polling = true;
    try {
      for (let i = 0; i < 3600; i++) {        // at most an hour of polling, once a second
        await new Promise((ok) => setTimeout(ok, 1000));
        const st = await call("/api/status");
        if (st.state !== "running") { setState(await call("/api/state")); break; }
        S.rerun = st; drawStatus();
      }
    } catch (e) { toast(e.message); } finally { polling = false; }
  }

  // ---------------------------------------------------------------------------------- helpers
  const fmt = (x, d = 2) => (x === null || x === undefined || !isFinite(x)) ? "–" : Number(x).toFixed(d);
  function bytes(b64) {
    const bin = atob(b64); const u = new Uint8Array(bin.length);
    for (let i = 0; i < bin.length; i++) u[i] = bin.charCodeAt(i);
    return u;
  }
  const active = () => S.boundaries.filter((b) => b.status !== "rejected" && b.status !== "merged");
  const byId = (id) => S.boundaries.find((b) => b.id === id) || null;
  function bandAt(h) {
    if (h === null) return null;
    return S.bands.find((b) => h >= b.base_mm && h < b.top_mm) || null;
  }
  function niceStep(range, n) {
    const raw = range / n, p = Math.pow(10, Math.floor(Math.log10(raw))), m = raw / p;
    return p * (m < 1.5 ? 1 : m < 3.5 ? 2 : m < 7.5 ? 5 : 10);
  }
  function fitCanvas(c, dpr) {
    const r = c.getBoundingClientRect();
    const w = Math.max(10, Math.round(r.width * dpr)), h = Math.max(10, Math.round(r.height * dpr));
    if (c.width !== w || c.height !== h) { c.width = w; c.height = h; }
    return { w: r.width, h: r.height };
  }

  // ---------------------------------------------------------------------------------- surface
  const M = { left: 50, right: 8, top: 8, bottom: 22 };
  function sy(s, h) { return M.top + (view.v1 - s) / (view.v1 - view.v0) * (h - M.top - M.bottom); }
  function ys(y, h) { return view.v1 - (y - M.top) / (h - M.top - M.bottom) * (view.v1 - view.v0); }
  function sx(az, w) { return M.left + az / 360 * (w - M.left - M.right); }
  function xaz(x, w) { return Math.min(360, Math.max(0, (x - M.left) / (w - M.left - M.right) * 360)); }
  function traceAt(b, az) {
    const t = b.trace_mm; if (!t || !t.length) return 0;
    const k = az / 5, i = Math.min(Math.floor(k), t.length - 2), f = k - i;
    return t[i] * (1 - f) + t[i + 1] * f;
  }
  function layerImage(name) {
    if (!surf.images[name]) {
      const g = bytes(surf.layers[name]), c = document.createElement("canvas");
      c.width = surf.cols; c.height = surf.rows;
      const ctx = c.getContext("2d"), img = ctx.createImageData(surf.cols, surf.rows);
      for (let r = 0; r < surf.rows; r++) {
        const out = (surf.rows - 1 - r) * surf.cols;     // row 0 is the base: draw it at the bottom
        for (let q = 0; q < surf.cols; q++) {
          const v = g[r * surf.cols + q], o = 4 * (out + q);
          if (v === 0) { img.data[o] = 236; img.data[o + 1] = 233; img.data[o + 2] = 226; }
          else { const gray = 25 + v * 0.85; img.data[o] = gray; img.data[o + 1] = gray; img.data[o + 2] = gray * 0.97 + 6; }
          img.data[o + 3] = 255;
        }
      }
      ctx.putImageData(img, 0, 0); surf.images[name] = c;
    }
    return surf.images[name];
  }
  function drawSurface() {
    const c = $("surface"), dpr = window.devicePixelRatio || 1, { w, h } = fitCanvas(c, dpr);
    const ctx = c.getContext("2d"); ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    ctx.clearRect(0, 0, w, h); ctx.fillStyle = "#fff"; ctx.fillRect(0, 0, w, h);
    if (!S || !surf) return;
    c.dataset.view = `${view.v0},${view.v1}`;      // the visible height range (mm), for tests and tools
    const img = layerImage($("layer").value || "relief");
    const span = surf.s1_mm - surf.s0_mm;
    const r0 = (view.v0 - surf.s0_mm) / span * surf.rows, r1 = (view.v1 - surf.s0_mm) / span * surf.rows;
    ctx.imageSmoothingEnabled = (r1 - r0) > (h - M.top - M.bottom);
    ctx.drawImage(img, 0, surf.rows - r1, surf.cols, r1 - r0, M.left, M.top, w - M.left - M.right, h - M.top - M.bottom);
    ctx.save(); ctx.beginPath(); ctx.rect(M.left, M.top, w - M.left - M.right, h - M.top - M.bottom); ctx.clip();
    for (const m of S.marks) {                       // marked stretches, with a hatch so colour is not needed
      const y0 = sy(m.s1_mm, h), y1 = sy(m.s0_mm, h);
      ctx.fillStyle = COL[m.kind]; ctx.fillRect(M.left, y0, w, y1 - y0);
      ctx.strokeStyle = m.kind === "hiatus" ? "#8a3d68" : "#555"; ctx.lineWidth = 1; ctx.setLineDash([]);
      ctx.beginPath();
      for (let x = M.left - (y1 - y0); x < w; x += m.kind === "hiatus" ? 12 : 20) { ctx.moveTo(x, y1); ctx.lineTo(x + (y1 - y0), y0); }
      ctx.globalAlpha = 0.35; ctx.stroke(); ctx.globalAlpha = 1;
    }
    if (sel.stretch) {
      const y0 = sy(sel.stretch[1], h), y1 = sy(sel.stretch[0], h);
      ctx.fillStyle = COL.stretch; ctx.fillRect(M.left, y0, w, y1 - y0);
    }
    // segmenter's flagged stretches: a hatched strip at the left edge of the image
    for (const f of S.flagged || []) {
      const y0 = sy(f[1], h), y1 = sy(f[0], h); if (y1 < 0 || y0 > h) continue;
      ctx.fillStyle = "#6b3fa0"; ctx.fillRect(M.left, y0, 6, Math.max(1.5, y1 - y0));
    }
    const inView = S.boundaries.filter((b) => b.height_mm >= view.v0 && b.height_mm <= view.v1).length;
    const dense = inView > 0 && (h - M.top - M.bottom) / inView < 6;   // lines closer than 6 px
    ctx.globalAlpha = dense ? 0.45 : 1;
    for (const b of S.boundaries) {
      const yb = sy(b.height_mm, h); if (yb < -40 || yb > h + 40) continue;
      const selected = b.id === sel.id;
      ctx.globalAlpha = selected ? 1 : (dense ? 0.45 : 1);
      ctx.setLineDash(DASH[b.status] || []);
      for (const pass of selected ? [0, 1] : [1]) {
        ctx.strokeStyle = pass === 0 ? "#fff" : (selected ? "#000" : COL[b.status]);
        ctx.lineWidth = pass === 0 ? 6 : (selected ? 2.5 : dense ? 1 : (b.status === "accepted" ? 2.2 : 1.6));
        ctx.beginPath();
        for (let az = 0; az <= 360; az += 5) {
          const x = sx(az, w), y = sy(b.height_mm + traceAt(b, az), h);
          if (az === 0) ctx.moveTo(x, y); else ctx.lineTo(x, y);
        }
        ctx.stroke();
      }
    }
    ctx.setLineDash([]); ctx.globalAlpha = 1;
    if (sel.cursor !== null) {
      const y = sy(sel.cursor, h); ctx.strokeStyle = "#000"; ctx.setLineDash([3, 3]); ctx.lineWidth = 1;
      ctx.beginPath(); ctx.moveTo(M.left, y); ctx.lineTo(w, y); ctx.stroke(); ctx.setLineDash([]);
    }
    ctx.restore();
    // axes: height ruler on the left, azimuth along the bottom
    ctx.fillStyle = "#333"; ctx.strokeStyle = "#888"; ctx.font = "11px system-ui, sans-serif"; ctx.lineWidth = 1;
    const step = niceStep(view.v1 - view.v0, Math.max(3, (h - 40) / 60));
    ctx.textAlign = "right"; ctx.textBaseline = "middle";
    for (let s = Math.ceil(view.v0 / step) * step; s <= view.v1; s += step) {
      const y = sy(s, h); ctx.beginPath(); ctx.moveTo(M.left - 5, y); ctx.lineTo(M.left, y); ctx.stroke();
      ctx.fillText(fmt(s, step < 0.1 ? 2 : step < 1 ? 1 : 0), M.left - 7, y);
    }
    ctx.save(); ctx.translate(11, h / 2); ctx.rotate(-Math.PI / 2); ctx.textAlign = "center";
    ctx.fillText("height along axis (mm)", 0, 0); ctx.restore();
    ctx.textAlign = "center"; ctx.textBaseline = "top";
    for (const az of [0, 90, 180, 270, 360]) {
      const x = sx(az, w); ctx.fillText(`${az}°${["N", "E", "S", "W", "N"][az / 90]}`, x, h - M.bottom + 5);
    }
  }
  function drawProfile() {
    const c = $("profile"), dpr = window.devicePixelRatio || 1, { w, h } = fitCanvas(c, dpr);
    const ctx = c.getContext("2d"); ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    ctx.fillStyle = "#fff"; ctx.fillRect(0, 0, w, h);
    if (!S || !surf) return;
    const name = $("layer").value || "relief", prof = surf.profiles[name] || [];
    const span = surf.s1_mm - surf.s0_mm, vals = prof.filter((v) => v !== null);
    if (!vals.length) return;
    let lo = Math.min(...vals), hi = Math.max(...vals); if (hi <= lo) hi = lo + 1;
    const px = (v) => 10 + (v - lo) / (hi - lo) * (w - 20);
    for (const b of active()) {
      const y = sy(b.height_mm, h); ctx.strokeStyle = b.id === sel.id ? "#000" : COL[b.status];
      ctx.setLineDash(DASH[b.status] || []); ctx.lineWidth = 1;
      ctx.beginPath(); ctx.moveTo(0, y); ctx.lineTo(w, y); ctx.stroke();
    }
    ctx.setLineDash([]); ctx.strokeStyle = "#1d1d1f"; ctx.lineWidth = 1.2; ctx.beginPath();
    let first = true;
    for (let r = 0; r < prof.length; r++) {
      if (prof[r] === null) { first = true; continue; }
      const s = surf.s0_mm + (r + 0.5) / prof.length * span; if (s < view.v0 || s > view.v1) continue;
      const x = px(prof[r]), y = sy(s, h);
      if (first) { ctx.moveTo(x, y); first = false; } else ctx.lineTo(x, y);
    }
    ctx.stroke();
    ctx.fillStyle = "#333"; ctx.font = "11px system-ui, sans-serif"; ctx.textAlign = "center";
    ctx.fillStyle = "rgba(255,255,255,0.85)"; ctx.fillRect(0, 0, w, 30); ctx.fillStyle = "#333";
    ctx.fillText(`profile: ${name}`, w / 2, 11);
    ctx.fillText(`(${surf.profile_units[name]}) ${fmt(lo, 3)} … ${fmt(hi, 3)}`, w / 2, 24);
  }

  // ---------------------------------------------------------------------------------- 3-D view
  const V3 = window.BandView3D;
  function colourFaces() {
    if (!S || !V3.ready()) return;
    const band = bandAt(sel.cursor);
    V3.colour(active().map((b) => b.height_mm), band ? band.index : -1);
  }
  const request3d = () => V3.request();

  // ---------------------------------------------------------------------------------- panels
  function drawStatus() {
    const st = $("status"), r = S.rerun || {};
    const hms = (t) => String(t || "").slice(11, 19);
    let text = S.dirty ? `${S.n_edits} edit(s), unsaved changes` : (S.saved_utc ? `saved ${hms(S.saved_utc)} UTC` : "no review saved yet");
    st.classList.remove("error");
    if (r.state === "running") text += " · re-running the analysis…";
    else if (r.state === "failed") { text += ` · re-run failed: ${r.error} (last good result shown)`; st.classList.add("error"); }
    else if (r.state === "done") text += ` · analysis updated ${hms(r.finished_utc)} UTC`;
    st.textContent = text; st.title = text;
    $("save").classList.toggle("dirty", S.dirty);
  }
  function drawHeader() {
    $("specimen").textContent = S.specimen_id;
    $("band-count").textContent = String(S.n_bands);
    $("auto-count").textContent = `(automatic: ${S.n_auto_bands})`;
    const res = S.result, e = $("estimate");
    if (!res || !res.days_per_year) e.textContent = "days per year: not yet analysed";
    else {
      const d = res.days_per_year, ci = d.ci95 || [];
      const unit = d.unit || "days/yr";
      const method = d.method ? String(d.method) : "";
      e.textContent = d.estimate === null ? "days per year: no significant annual cycle" :
        `days per year: ${fmt(d.estimate, 1)} ${unit} (95% CI ${fmt(ci[0], 1)}–${fmt(ci[1], 1)} ${unit})` +
        (d.significant === false ? " · not significant" : "") +
        (method ? ` · ${method.length > 38 ? method.slice(0, 36) + "…" : method}` : "");
      const b = res.bands || {};
      e.title = `From the last analysis: ${b.count ?? "–"} bands, mean thickness ${fmt(b.mean_thickness_mm, 3)} mm.` +
        (method ? ` Method: ${method}.` : "") + (d.p_value !== null && d.p_value !== undefined ? ` p = ${fmt(d.p_value, 4)}.` : "") +
        (d.is_minimum ? " Band counts are minima (missing days are not counted)." : "");
    }
    $("undo").disabled = !S.can_undo; $("redo").disabled = !S.can_redo;
    drawStatus();
  }
  function button(label, fn, title) {
    const b = document.createElement("button"); b.textContent = label; b.onclick = fn; if (title) b.title = title; return b;
  }
  function drawSelection() {
    const box = $("selection"); box.replaceChildren();
    const b = sel.id === null ? null : byId(sel.id), band = bandAt(sel.cursor);
    if (b) {
      const h = document.createElement("h3");
      h.textContent = `Boundary ${b.id} at ${fmt(b.height_mm, 3)} mm — ${b.status}`;
      const facts = document.createElement("div"); facts.className = "facts";
      facts.textContent = b.confidence !== undefined && b.confidence !== null ?
        `confidence ${fmt(b.confidence, 2)} · ring fit rms ${fmt(b.rms_mm, 3)} mm · coverage ${fmt(100 * b.coverage, 0)} %` :
        (b.auto ? "moved by hand" : "added by hand");
      const row = document.createElement("div"); row.className = "row";
      if (b.status === "rejected" || b.status === "merged") row.append(button("Restore (A)", () => act("accept")));
      else {
        if (b.auto && b.status !== "accepted") row.append(button("Accept (A)", () => act("accept")));
        row.append(button("Reject (X)", () => act("reject")), button("Merge bands across it (M)", () => act("merge")));
      }
      box.append(h, facts, row);
    }
    if (band || sel.stretch) {
      const h = document.createElement("h3");
      h.textContent = sel.stretch ? `Stretch ${fmt(sel.stretch[0], 3)}–${fmt(sel.stretch[1], 3)} mm` :
        `Band ${band.index}: ${fmt(band.base_mm, 3)}–${fmt(band.top_mm, 3)} mm, ${fmt(band.thickness_axis_mm, 3)} mm thick`;
      const row = document.createElement("div"); row.className = "row";
      if (band && !sel.stretch) row.append(button("Split at cursor (S)", () => act("split")));
      row.append(button("Mark hiatus (H)", () => act("hiatus")), button("Mark uncertain (U)", () => act("uncertain")));
      box.append(h, row);
    }
    if (!b && !band && !sel.stretch) {
      box.innerHTML = "<h3>Nothing selected</h3><div class='facts'>Click a boundary line, or click between lines to pick a band. " +
        "Double-click adds a boundary there.</div>";
      const lg = document.createElement("div"); lg.className = "legend";
      for (const [k, label] of [["auto", "automatic"], ["accepted", "accepted"], ["added", "added / moved"], ["rejected", "removed"]]) {
        const s = document.createElement("span"); const sw = document.createElement("span"); sw.className = "swatch";
        sw.style.borderTopColor = COL[k]; sw.style.borderTopStyle = DASH[k].length ? (DASH[k][0] > 3 ? "dashed" : "dotted") : "solid";
        s.append(sw, label); lg.append(s);
      }
      box.append(lg);
    }
  }
  function drawTables() {
    const tb = $("bands").tBodies[0], band = bandAt(sel.cursor), rows = [];
    for (const r of S.bands) {
      const tr = document.createElement("tr"); if (band && band.index === r.index) tr.className = "sel";
      for (const v of [r.index, fmt(r.base_mm, 3), fmt(r.top_mm, 3), fmt(r.thickness_axis_mm, 3), r.flags.join(", ")]) {
        const td = document.createElement("td"); td.textContent = v; tr.append(td);
      }
      tr.onclick = () => { sel.cursor = (r.base_mm + r.top_mm) / 2; sel.id = null; sel.stretch = null; reveal(sel.cursor); redraw(); };
      rows.push(tr);
    }
    tb.replaceChildren(...rows);
    const ml = $("marks"); ml.replaceChildren();
    for (const m of S.marks) {
      const li = document.createElement("li");
      li.textContent = `${m.kind} ${fmt(m.s0_mm, 3)}–${fmt(m.s1_mm, 3)} mm${m.note ? ": " + m.note : ""}`;
      li.append(button("remove", () => edit({ op: "unmark", mark: m.mark })));
      ml.append(li);
    }
    if (!S.marks.length) ml.innerHTML = "<li class='muted'>No hiatus or uncertain stretch marked.</li>";
    const nl = $("notes"); nl.replaceChildren();
    for (const n of S.notes) {
      const li = document.createElement("li");
      li.textContent = (n.id !== undefined ? `[boundary ${n.id}] ` : "") + n.text + (n.time_utc ? ` (${n.time_utc})` : "");
      nl.append(li);
    }
    const el = $("edits"); el.replaceChildren();
    for (const e of S.edits) {
      const li = document.createElement("li"); const { op, time_utc, seq, ...rest } = e;
      li.textContent = `${op} ${Object.entries(rest).map(([k, v]) => `${k}=${typeof v === "number" ? +v.toFixed(4) : v}`).join(" ")} · ${time_utc || ""}`;
      el.append(li);
    }
  }
  function redraw() { drawSurface(); drawProfile(); colourFaces(); request3d(); drawSelection(); drawTables(); }
  function setState(st) {
    S = st; drawHeader(); redraw();
  }

  // ---------------------------------------------------------------------------------- actions
  function act(kind) {
    const b = sel.id === null ? null : byId(sel.id);
    if (["accept", "reject", "merge"].includes(kind)) {
      if (!b) return toast("Select a boundary first (click its line, or use ↑/↓).");
      return edit({ op: kind, id: b.id });
    }
    if (kind === "add" || kind === "split") {
      let h = sel.cursor;
      if (kind === "split" && (h === null || !bandAt(h))) return toast("Click inside a band to choose where to split it.");
      if (h === null) return toast("Click the surface to place the cursor first.");
      return edit({ op: kind, height_mm: h }).then((e) => { if (e && e.id !== undefined) sel.id = e.id; redraw(); });
    }
    if (kind === "hiatus" || kind === "uncertain") {
      let s0, s1; const band = bandAt(sel.cursor);
      if (sel.stretch) [s0, s1] = sel.stretch; else if (band) [s0, s1] = [band.base_mm, band.top_mm];
      else return toast("Shift-drag on the surface to pick a stretch, or click inside a band.");
      const note = $("note-text").value.trim();
      return edit({ op: kind, s0_mm: s0, s1_mm: s1, note }).then(() => { sel.stretch = null; $("note-text").value = note ? "" : $("note-text").value; redraw(); });
    }
  }
  function moveSelected(dir, fine) {
    const b = sel.id === null ? null : byId(sel.id);
    if (!b || b.status === "rejected" || b.status === "merged") return toast("Select a boundary in place to move it.");
    const px = (view.v1 - view.v0) / Math.max(100, $("surface").clientHeight);
    const h = b.height_mm + dir * (fine ? px / 4 : px * 2);
    b.height_mm = h; drawSurface();                   // show at once; the server's answer follows
    edit({ op: "move", id: b.id, height_mm: h, coalesce: true });
  }
  function selectStep(dir) {
    const list = active(); if (!list.length) return;
    const cur = sel.id === null ? null : byId(sel.id);
    const ref = cur ? cur.height_mm : (sel.cursor ?? (dir > 0 ? -Infinity : Infinity));
    let pick = null;
    for (const b of list) {
      if (dir > 0 && b.height_mm > ref + 1e-9 && (!pick || b.height_mm < pick.height_mm)) pick = b;
      if (dir < 0 && b.height_mm < ref - 1e-9 && (!pick || b.height_mm > pick.height_mm)) pick = b;
    }
    if (!pick) pick = cur || list[dir > 0 ? 0 : list.length - 1];
    sel.id = pick.id; sel.stretch = null; reveal(pick.height_mm); redraw();
  }
  function reveal(h) {
    const span = view.v1 - view.v0;
    if (h < view.v0 + 0.05 * span || h > view.v1 - 0.05 * span) { view.v0 = h - span / 2; view.v1 = h + span / 2; clampView(); }
  }
  function clampView() {
    const lo = S.span_mm[0], hi = S.span_mm[1], full = hi - lo;
    const span = Math.min(full * 1.02, Math.max(full / 2000, view.v1 - view.v0)), pad = 0.03 * span;
    let v0 = (view.v0 + view.v1) / 2 - span / 2;
    if (span >= full) v0 = lo - (span - full) / 2;          // everything fits: centre it
    else v0 = Math.min(hi + pad - span, Math.max(lo - pad, v0));   // keep the specimen filling the view
    view.v0 = v0; view.v1 = v0 + span;
  }
  function jumpFlag(dir) {
    const list = S.flagged || []; if (!list.length) return toast("The segmenter flagged no stretch.");
    const here = (view.v0 + view.v1) / 2;
    let pick = null;
    for (const f of list) {
      const c = (f[0] + f[1]) / 2;
      if (dir > 0 && c > here + 1e-6 && (!pick || c < (pick[0] + pick[1]) / 2)) pick = f;
      if (dir < 0 && c < here - 1e-6 && (!pick || c > (pick[0] + pick[1]) / 2)) pick = f;
    }
    if (!pick) return toast(dir > 0 ? "No flagged stretch above." : "No flagged stretch below.");
    const span = Math.max(view.v1 - view.v0, 1e-3), c = (pick[0] + pick[1]) / 2;
    view.v0 = c - span / 2; view.v1 = c + span / 2; clampView();
    sel.stretch = [pick[0], pick[1]]; sel.id = null; redraw();
    toast(`Flagged ${fmt(pick[0], 2)}–${fmt(pick[1], 2)} mm: ${pick[2]}`);
  }
  function fit() {
    const lo = S.span_mm[0], hi = S.span_mm[1], pad = (hi - lo) * 0.01;
    view.v0 = lo - pad; view.v1 = hi + pad; redraw();
  }

  // ---------------------------------------------------------------------------------- input
  function hit(x, y, h, w) {
    const az = xaz(x, w); let best = null, bestd = 7;
    for (const b of S.boundaries) {
      const d = Math.abs(sy(b.height_mm + traceAt(b, az), h) - y);
      if (d < bestd) { best = b; bestd = d; }
    }
    return best;
  }
  function wireSurface() {
    const c = $("surface"); let drag = null;
    c.addEventListener("mousedown", (ev) => {
      const r = c.getBoundingClientRect(), x = ev.clientX - r.left, y = ev.clientY - r.top;
      c.focus();
      const s = ys(y, r.height);
      if (ev.shiftKey) { drag = { kind: "stretch", s0: s }; sel.stretch = [s, s]; return; }
      const b = hit(x, y, r.height, r.width);
      if (b && b.status !== "rejected" && b.status !== "merged") drag = { kind: "move", b, y0: y, h0: b.height_mm, moved: false };
      else drag = { kind: "pan", y0: y, v0: view.v0, v1: view.v1, moved: false, b, s };
    });
    window.addEventListener("mousemove", (ev) => {
      if (!drag) return;
      const r = c.getBoundingClientRect(), y = ev.clientY - r.top;
      const mmpp = (view.v1 - view.v0) / (r.height - M.top - M.bottom);
      if (drag.kind === "stretch") { const s = ys(y, r.height); sel.stretch = [Math.min(drag.s0, s), Math.max(drag.s0, s)]; drawSurface(); }
      else if (Math.abs(y - drag.y0) > 2 || drag.moved) {
        drag.moved = true;
        if (drag.kind === "move") { drag.b.height_mm = drag.h0 - (y - drag.y0) * mmpp; sel.id = drag.b.id; drawSurface(); drawProfile(); }
        else { const d = (y - drag.y0) * mmpp; view.v0 = drag.v0 + d; view.v1 = drag.v1 + d; drawSurface(); drawProfile(); }
      }
    });
    window.addEventListener("mouseup", () => {
      if (!drag) return; const d = drag; drag = null;
      if (d.kind === "stretch") {
        if (sel.stretch && sel.stretch[1] - sel.stretch[0] < 1e-6) sel.stretch = null;
        sel.id = null; redraw(); return;
      }
      if (d.kind === "move" && d.moved) { edit({ op: "move", id: d.b.id, height_mm: d.b.height_mm }); return; }
      if (d.kind === "move") { sel.id = d.b.id; sel.stretch = null; redraw(); return; }
      if (!d.moved) {        // a click: pick a removed boundary if on one, else place the cursor
        sel.stretch = null; sel.cursor = d.s; sel.id = d.b ? d.b.id : null; redraw();
      }
    });
    c.addEventListener("dblclick", (ev) => {
      const r = c.getBoundingClientRect(); sel.cursor = ys(ev.clientY - r.top, r.height); act("add");
    });
    c.addEventListener("wheel", (ev) => {
      ev.preventDefault();
      const r = c.getBoundingClientRect(), s = ys(ev.clientY - r.top, r.height), f = Math.exp(ev.deltaY * 0.0015);
      view.v0 = s - (s - view.v0) * f; view.v1 = s + (view.v1 - s) * f; clampView(); drawSurface(); drawProfile();
    }, { passive: false });
  }
  function wireKeys() {
    document.addEventListener("keydown", (ev) => {
      const tag = (ev.target && ev.target.tagName) || "";
      if (["TEXTAREA", "INPUT", "SELECT"].includes(tag)) return;
      if (!S) return;
      const key = ev.key.toLowerCase(), mod = ev.ctrlKey || ev.metaKey;
      let done = true;
      if (mod && key === "z" && !ev.shiftKey) undo();
      else if (mod && (key === "y" || (key === "z" && ev.shiftKey))) redo();
      else if (mod && key === "s") save();
      else if (mod) done = false;
      else if (ev.key === "ArrowUp" || ev.key === "ArrowDown") {
        const dir = ev.key === "ArrowUp" ? 1 : -1;
        if (ev.shiftKey) moveSelected(dir, ev.altKey); else selectStep(dir);
      }
      else if (key === "a") act("accept");
      else if (key === "x" || ev.key === "Delete" || ev.key === "Backspace") act("reject");
      else if (key === "m") act("merge");
      else if (key === "b") act("add");
      else if (key === "s") act("split");
      else if (key === "h") act("hiatus");
      else if (key === "u") act("uncertain");
      else if (key === "f") fit();
      else if (ev.key === "]" || ev.key === "[") jumpFlag(ev.key === "]" ? 1 : -1);
      else if (key === "n") { document.querySelector('[data-tab="marks-tab"]').click(); $("note-text").focus(); }
      else if (ev.key === "Escape") { sel.id = null; sel.stretch = null; redraw(); }
      else if (ev.key === "?") $("help").hidden = !$("help").hidden;
      else done = false;
      if (done) ev.preventDefault();
    });
  }
  function wireButtons() {
    $("undo").onclick = undo; $("redo").onclick = redo; $("save").onclick = save; $("fit").onclick = fit;
    $("layer").onchange = () => { drawSurface(); drawProfile(); };
    $("add-note").onclick = () => {
      const text = $("note-text").value.trim(); if (!text) return toast("Write the note first.");
      const e = { op: "note", text }; if (sel.id !== null) e.id = sel.id;
      if (sel.cursor !== null) e.height_mm = sel.cursor;
      edit(e).then(() => { $("note-text").value = ""; });
    };
    for (const t of document.querySelectorAll(".tab")) {
      t.onclick = () => {
        for (const u of document.querySelectorAll(".tab")) u.classList.toggle("on", u === t);
        for (const p of document.querySelectorAll(".tabpage")) p.classList.toggle("on", p.id === t.dataset.tab);
      };
    }
    window.addEventListener("resize", () => { if (S) redraw(); });
    window.addEventListener("beforeunload", (ev) => { if (S && S.dirty) { ev.preventDefault(); ev.returnValue = ""; } });
  }

  async function start() {
    wireButtons(); wireKeys(); wireSurface(); V3.wire($("view3d"));
    try {
      const [st, sf] = await Promise.all([call("/api/state"), call("/api/surface")]);
      surf = { ...sf, images: {} };
      const layer = $("layer");
      for (const name of Object.keys(surf.layers)) { const o = document.createElement("option"); o.value = o.textContent = name; layer.append(o); }
      S = st; fit();
      const hs = st.boundaries.map((b) => b.height_mm).sort((a, b) => a - b);
      if (hs.length > 40) {                   // start on the lowest thirty bands; F shows everything
        const pad = (hs[30] - hs[0]) * 0.04; view.v0 = hs[0] - pad; view.v1 = hs[30] + pad;
      }
      setState(st);
      if (st.rerun && st.rerun.state === "running") poll();
      document.body.dataset.ready = "1";
      call("/api/mesh").then((m) => { V3.setup(m, $("view3d-note")); colourFaces(); request3d(); document.body.dataset.mesh = "1"; })
        .catch((e) => toast(`3-D view unavailable: ${e.message}`));
    } catch (e) { $("status").textContent = `could not load the review: ${e.message}`; $("status").classList.add("error"); }
  }
  start();
})();
