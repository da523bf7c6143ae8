// bandgeo review page. Height runs across; the side surface is flattened so that each automatic
// boundary is a straight vertical line, with the relief profile and each boundary's confidence in
// tracks below. Work goes by confidence: jump to the next low-confidence boundary, confirm or fix it,
// confirm a checked stretch in one action; every other command is in the palette (Ctrl+K).
// The server owns the edit list; this page only asks it for changes.
import { createView3D } from "./view3d.js";

const params = new URLSearchParams(location.search);
const TOKEN = params.get("token");
if (TOKEN) { sessionStorage.setItem("bandgeo-review-token", TOKEN); history.replaceState(null, "", location.pathname); }
const HEAD = { "X-Review-Token": TOKEN || sessionStorage.getItem("bandgeo-review-token") || "" };
const $ = (id) => document.getElementById(id);
// Okabe & Ito colours; the line style repeats the distinction (solid / dashed / dotted).
const COL = { auto: "#56B4E9", low: "#D55E00", accepted: "#009E73", added: "#0072B2", moved: "#0072B2",
  rejected: "#999999", merged: "#999999", hiatus: "rgba(204,121,167,0.25)", uncertain: "rgba(153,153,153,0.25)",
  stretch: "rgba(240,228,66,0.35)", flagged: "#CC79A7" };
const DASH = { auto: [], low: [], accepted: [], added: [6, 3], moved: [6, 3], rejected: [2, 3], merged: [2, 3] };
const NAMES = { auto: "automatic", accepted: "confirmed", added: "inserted", moved: "moved", rejected: "removed",
  merged: "joined" };

let S = null, surf = null, V3 = null;
const sel = { id: null, cursor: null, stretch: null };
const view = { v0: 0, v1: 1 };
const list = { mode: "view", key: "height_mm", desc: false };
let threshold = 0.6;
let queue = Promise.resolve();

// ------------------------------------------------------------------------------------ server calls
async function call(path, body) {
  const opts = { headers: { ...HEAD }, credentials: "same-origin" };
  if (body !== undefined) {
    opts.method = "POST"; opts.headers["Content-Type"] = "application/json"; opts.body = JSON.stringify(body);
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
const undo = () => enqueue(async () => setState((await call("/api/undo", {})).state));
const redo = () => enqueue(async () => setState((await call("/api/redo", {})).state));
const save = () => enqueue(async () => { const r = await call("/api/save", {}); setState(r.state); poll(); });
let polling = false;
async function poll() {
  if (polling) return; polling = true;
  try {
    for (let i = 0; i < 7200; i++) {           // at most an hour, twice a second
      await new Promise((ok) => setTimeout(ok, 500));
      const st = await call("/api/status");
      const fresh = st.result_utc && st.result_utc !== (S.rerun || {}).result_utc;
      if (st.state !== "running") {   // the new result and "updated" are drawn together, never one before the other
        setState(await call("/api/state"));
        if ((S.rerun || {}).state === "running") continue;   // another save's re-run began meanwhile
        break;
      }
      S.rerun = st; drawStatus();
      if (fresh) setState(await call("/api/state"));   // new figures are in; the report follows
    }
  } catch (e) { toast(e.message); } finally { polling = false; }
}

// ------------------------------------------------------------------------------------ helpers
const fmt = (x, d = 2) => (x === null || x === undefined || !isFinite(x)) ? "–" : Number(x).toFixed(d);
function bytes(b64) {
  const bin = atob(b64); const u = new Uint8Array(bin.length);
  for (let i = 0; i < bin.length; i++) u[i] = bin.charCodeAt(i);
  return u;
}
const inForce = (b) => b.status !== "rejected" && b.status !== "merged";
const active = () => S.boundaries.filter(inForce);
const byId = (id) => S.boundaries.find((b) => b.id === id) || null;
const isLow = (b) => inForce(b) && !b.checked && b.confidence !== null && b.confidence !== undefined && b.confidence < threshold;
const lineKind = (b) => (b.status === "auto" && isLow(b)) ? "low" : b.status;
function bandAt(h) {
  if (h === null || h === undefined) return null;
  const a = active();
  for (let k = 0; k + 1 < a.length; k++) if (h >= a[k].height_mm && h < a[k + 1].height_mm) return { k, lo: a[k], hi: a[k + 1] };
  return null;
}
function niceStep(range, n) {
  const raw = range / n, p = Math.pow(10, Math.floor(Math.log10(raw))), m = raw / p;
  return p * (m < 1.5 ? 1 : m < 3.5 ? 2 : m < 7.5 ? 5 : 10);
}
function fitCanvas(c) {
  const dpr = window.devicePixelRatio || 1, r = c.getBoundingClientRect();
  const w = Math.max(10, Math.round(r.width * dpr)), h = Math.max(10, Math.round(r.height * dpr));
  if (c.width !== w || c.height !== h) { c.width = w; c.height = h; }
  const ctx = c.getContext("2d"); ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
  return { ctx, w: r.width, h: r.height };
}
function button(label, fn, title) {
  const b = document.createElement("button"); b.textContent = label; b.onclick = fn; if (title) b.title = title; return b;
}
const inView = (h) => h >= view.v0 && h <= view.v1;

// ------------------------------------------------------------------------------------ the strip
// Margins and tracks of the strip canvas (CSS px). Height runs across.
const M = { left: 70, right: 14, top: 8, bottom: 38 };
function tracks(h) {
  const H = h - M.top - M.bottom;
  const img = { y0: M.top, y1: M.top + 0.56 * H };
  const prof = { y0: img.y1 + 0.04 * H, y1: img.y1 + 0.24 * H };
  const conf = { y0: prof.y1 + 0.04 * H, y1: M.top + H };
  return { img, prof, conf };
}
const sx = (s, w) => M.left + (s - view.v0) / (view.v1 - view.v0) * (w - M.left - M.right);
const xs = (x, w) => view.v0 + (x - M.left) / (w - M.left - M.right) * (view.v1 - view.v0);
function layerImage(name) {
  // transposed: canvas x = surface row (height), canvas y = angle (0 at the top)
  if (!surf.images[name]) {
    const g = bytes(surf.layers[name]), c = document.createElement("canvas");
    c.width = surf.rows; c.height = surf.cols;
    const ctx = c.getContext("2d"), img = ctx.createImageData(surf.rows, surf.cols);
    for (let r = 0; r < surf.rows; r++) {
      for (let q = 0; q < surf.cols; q++) {
        const v = g[r * surf.cols + q], o = 4 * (q * surf.rows + r);
        if (v === 0) { img.data[o] = 238; img.data[o + 1] = 236; img.data[o + 2] = 230; }
        else { const t = 30 + v * 0.84; img.data[o] = t * 0.96 + 4; img.data[o + 1] = t; img.data[o + 2] = t * 0.9 + 10; }
        img.data[o + 3] = 255;
      }
    }
    ctx.putImageData(img, 0, 0); surf.images[name] = c;
  }
  return surf.images[name];
}
// Which boundaries get a line: all when they are at least 4 px apart; else (the whole-column view of a
// long record) only the selected, low-confidence and hand-edited ones, the rest shown as a density.
function visibleLines(w) {
  const vis = S.boundaries.filter((b) => b.height_mm >= view.v0 && b.height_mm <= view.v1);
  const dense = vis.length > (w - M.left - M.right) / 4;
  // dense: full lines only for the selection and hand edits, at most one per 4 px; low-confidence ones
  // become ticks on the track edges (see drawStrip)
  let drawn = vis;
  if (dense) {
    drawn = []; let last = -Infinity;
    for (const b of vis) {
      if (b.id !== sel.id && (b.status === "auto" || b.status === "accepted")) continue;
      const x = sx(b.height_mm, w);
      if (b.id === sel.id || x - last >= 4) { drawn.push(b); last = x; }
    }
  }
  return { vis, drawn, dense };
}
function drawStrip() {
  const c = $("strip"), { ctx, w, h } = fitCanvas(c);
  ctx.clearRect(0, 0, w, h); ctx.fillStyle = "#fff"; ctx.fillRect(0, 0, w, h);
  if (!S || !surf) return;
  const T = tracks(h), x0 = M.left, x1 = w - M.right;
  c.dataset.view = `${view.v0},${view.v1}`;
  const span = surf.s1_mm - surf.s0_mm, name = $("layer").value || "relief";
  const r0 = (view.v0 - surf.s0_mm) / span * surf.rows, r1 = (view.v1 - surf.s0_mm) / span * surf.rows;
  ctx.imageSmoothingEnabled = (r1 - r0) > (x1 - x0);
  ctx.drawImage(layerImage(name), r0, 0, r1 - r0, surf.cols, x0, T.img.y0, x1 - x0, T.img.y1 - T.img.y0);
  ctx.save(); ctx.beginPath(); ctx.rect(x0, 0, x1 - x0, h); ctx.clip();
  // marked stretches and the chosen stretch, across every track
  for (const m of S.marks) {
    const a = sx(m.s0_mm, w), b = sx(m.s1_mm, w);
    ctx.fillStyle = COL[m.kind]; ctx.fillRect(a, T.img.y0, b - a, T.conf.y1 - T.img.y0);
    ctx.strokeStyle = m.kind === "hiatus" ? "#8a3d68" : "#555"; ctx.lineWidth = 1; ctx.globalAlpha = 0.4;
    ctx.beginPath();
    for (let y = T.img.y0; y < T.conf.y1; y += m.kind === "hiatus" ? 8 : 16) { ctx.moveTo(a, y); ctx.lineTo(b, y); }
    ctx.stroke(); ctx.globalAlpha = 1;
  }
  if (sel.stretch) {
    const a = sx(sel.stretch[0], w), b = sx(sel.stretch[1], w);
    ctx.fillStyle = COL.stretch; ctx.fillRect(a, T.img.y0, b - a, T.conf.y1 - T.img.y0);
  }
  for (const f of S.flagged || []) {           // the segmenter's own flagged stretches: a bar on top
    const a = sx(f[0], w), b = sx(f[1], w); if (b < x0 || a > x1) continue;
    ctx.fillStyle = COL.flagged; ctx.fillRect(a, T.img.y0, Math.max(2, b - a), 5);
  }
  const { vis, drawn, dense } = visibleLines(w);
  c.dataset.inview = String(vis.length); c.dataset.drawn = String(drawn.length);
  // confidence track: a bar per boundary, or the lowest confidence per 3-px column when dense
  const cy = (v) => T.conf.y1 - v * (T.conf.y1 - T.conf.y0);
  if (dense) {
    const cols = Math.ceil((x1 - x0) / 3), lo = new Array(cols).fill(2);
    for (const b of vis) {
      if (!inForce(b)) continue;
      const i = Math.floor((sx(b.height_mm, w) - x0) / 3); if (i < 0 || i >= cols) continue;
      lo[i] = Math.min(lo[i], b.checked ? 1 : (b.confidence ?? 1));
    }
    for (let i = 0; i < cols; i++) {
      if (lo[i] > 1.5) continue;
      ctx.fillStyle = lo[i] < threshold ? COL.low : "#9ab7c6";
      ctx.fillRect(x0 + 3 * i, cy(lo[i]), 2.5, T.conf.y1 - cy(lo[i]));
    }
  } else {
    for (const b of vis) {
      if (!inForce(b)) continue;
      const v = b.checked ? 1 : (b.confidence ?? 1), x = sx(b.height_mm, w);
      ctx.strokeStyle = b.checked ? COL.accepted : (v < threshold ? COL.low : "#7fa7bb"); ctx.lineWidth = 3;
      ctx.beginPath(); ctx.moveTo(x, T.conf.y1); ctx.lineTo(x, cy(v)); ctx.stroke();
    }
  }
  ctx.strokeStyle = "#D55E00"; ctx.setLineDash([4, 3]); ctx.lineWidth = 1;
  ctx.beginPath(); ctx.moveTo(x0, cy(threshold)); ctx.lineTo(x1, cy(threshold)); ctx.stroke(); ctx.setLineDash([]);
  if (dense) {                       // low-confidence boundaries as ticks, one per 3 px at most
    ctx.fillStyle = COL.low; let last = -Infinity, n = 0;
    for (const b of vis) {
      if (!isLow(b)) continue;
      const x = sx(b.height_mm, w); if (x - last < 3) continue;
      ctx.fillRect(x - 1, T.img.y1 - 9, 2, 9); ctx.fillRect(x - 1, T.prof.y0, 2, 6); last = x; n++;
    }
    c.dataset.ticks = String(n);
  }
  // boundary lines over the surface and the profile
  for (const b of drawn) {
    const x = sx(b.height_mm, w), kind = lineKind(b), selected = b.id === sel.id;
    ctx.setLineDash(DASH[kind] || []);
    if (selected) { ctx.strokeStyle = "#fff"; ctx.lineWidth = 5; ctx.beginPath(); ctx.moveTo(x, T.img.y0); ctx.lineTo(x, T.prof.y1); ctx.stroke(); }
    ctx.strokeStyle = selected ? COL.select || "#000" : COL[kind];
    ctx.lineWidth = selected ? 2.5 : (kind === "low" ? 2 : 1.4);
    ctx.beginPath(); ctx.moveTo(x, T.img.y0); ctx.lineTo(x, T.prof.y1); ctx.stroke();
  }
  ctx.setLineDash([]);
  // the profile along the height
  const prof = surf.profiles[name] || [], vals = [];
  for (let r = Math.max(0, Math.floor(r0)); r < Math.min(prof.length, Math.ceil(r1) + 1); r++) if (prof[r] !== null) vals.push(prof[r]);
  if (vals.length) {
    let lo = Math.min(...vals), hi = Math.max(...vals); if (hi <= lo) hi = lo + 1e-9;
    const py = (v) => T.prof.y1 - 3 - (v - lo) / (hi - lo) * (T.prof.y1 - T.prof.y0 - 6);
    ctx.strokeStyle = "#1d1d1f"; ctx.lineWidth = 1.2; ctx.beginPath(); let first = true;
    const step = Math.max(1, Math.floor((r1 - r0) / (2 * (x1 - x0))));
    for (let r = Math.max(0, Math.floor(r0)); r < Math.min(prof.length, Math.ceil(r1) + 1); r += step) {
      if (prof[r] === null) { first = true; continue; }
      const x = sx(surf.s0_mm + (r + 0.5) / prof.length * span, w), y = py(prof[r]);
      if (first) { ctx.moveTo(x, y); first = false; } else ctx.lineTo(x, y);
    }
    ctx.stroke();
    c.dataset.profileRange = `${lo},${hi}`;
  }
  if (sel.cursor !== null) {
    const x = sx(sel.cursor, w); ctx.strokeStyle = "#000"; ctx.setLineDash([3, 3]); ctx.lineWidth = 1;
    ctx.beginPath(); ctx.moveTo(x, T.img.y0); ctx.lineTo(x, T.conf.y1); ctx.stroke(); ctx.setLineDash([]);
  }
  ctx.restore();
  // track frames and labels (in the left margin, each fitted to the margin's width)
  ctx.strokeStyle = "#c9c7c0"; ctx.lineWidth = 1;
  for (const t of [T.img, T.prof, T.conf]) ctx.strokeRect(x0 + 0.5, t.y0 + 0.5, x1 - x0 - 1, t.y1 - t.y0 - 1);
  ctx.fillStyle = "#333"; ctx.textAlign = "right"; ctx.textBaseline = "middle";
  const label = (lines, t) => {
    const mid = (t.y0 + t.y1) / 2, n = lines.length;
    lines.forEach((s, i) => { ctx.font = i === 0 ? "600 11px system-ui, sans-serif" : "10px system-ui, sans-serif";
      fitText(ctx, s, x0 - 6, mid + (i - (n - 1) / 2) * 12, M.left - 8); });
  };
  const unit = surf.profile_units[name] || "";
  label(["surface", name, "0–360° round"], T.img);
  label(["profile", unit.length > 12 ? unit.split(" ")[0] : unit], T.prof);
  label(["confidence", "0 to 1"], T.conf);
  // height ruler
  ctx.font = "11px system-ui, sans-serif"; ctx.textAlign = "center"; ctx.textBaseline = "top";
  const step = niceStep(view.v1 - view.v0, Math.max(3, (x1 - x0) / 90));
  const dec = step < 0.01 ? 3 : step < 0.1 ? 2 : step < 1 ? 1 : 0;
  for (let s = Math.ceil(view.v0 / step) * step; s <= view.v1 + 1e-9; s += step) {
    const x = sx(s, w); ctx.beginPath(); ctx.moveTo(x, T.conf.y1); ctx.lineTo(x, T.conf.y1 + 4); ctx.stroke();
    ctx.fillText(fmt(s, dec), x, T.conf.y1 + 6);
  }
  ctx.fillText("height along the growth axis (mm)", (x0 + x1) / 2, h - 14);
  if (dense) {
    ctx.textAlign = "right"; ctx.textBaseline = "top"; ctx.font = "11px system-ui, sans-serif";
    const text = `${vis.length} boundaries in view, too close to draw: low-confidence ones are ticks, edited ones lines; zoom in for all`;
    const tw = Math.min(ctx.measureText(text).width, x1 - x0 - 12) + 8;
    ctx.fillStyle = "rgba(255,255,255,0.88)"; ctx.fillRect(x1 - tw - 4, T.img.y0 + 8, tw, 16);
    ctx.fillStyle = "#333"; fitText(ctx, text, x1 - 8, T.img.y0 + 10, x1 - x0 - 12);
  }
}
function fitText(ctx, text, x, y, maxw) {
  let t = text;
  while (t.length > 3 && ctx.measureText(t).width > maxw) t = t.slice(0, -2);
  if (t !== text) {
    const px = parseFloat(ctx.font.match(/(\d+(\.\d+)?)px/)[1]);
    if (px > 8) { ctx.font = ctx.font.replace(/\d+(\.\d+)?px/, `${px - 1}px`); return fitText(ctx, text, x, y, maxw); }
  }
  ctx.fillText(t, x, y);
}
function drawOverview() {
  const c = $("overview"), { ctx, w, h } = fitCanvas(c);
  ctx.fillStyle = "#fff"; ctx.fillRect(0, 0, w, h);
  if (!S) return;
  const [lo, hi] = S.span_mm, ox = (s) => M.left + (s - lo) / (hi - lo) * (w - M.left - M.right);
  ctx.fillStyle = "#333"; ctx.font = "10px system-ui, sans-serif"; ctx.textAlign = "right"; ctx.textBaseline = "middle";
  fitText(ctx, "whole column", M.left - 6, h / 2, M.left - 8);
  for (const f of S.flagged || []) { ctx.fillStyle = COL.flagged; ctx.fillRect(ox(f[0]), 2, Math.max(1, ox(f[1]) - ox(f[0])), 4); }
  for (const b of S.boundaries) {
    const kind = lineKind(b); if (kind === "auto" || kind === "accepted") continue;
    ctx.fillStyle = COL[kind]; ctx.fillRect(ox(b.height_mm) - 0.5, kind === "low" ? 8 : 20, 1.5, 10);
  }
  const a = ox(view.v0), b = ox(view.v1);
  ctx.strokeStyle = "#000"; ctx.lineWidth = 1.5; ctx.strokeRect(Math.max(M.left, a), 1, Math.max(3, b - a), h - 2);
}

// ------------------------------------------------------------------------------------ 3-D view
function colourFaces() {
  if (!S || !V3 || !V3.ready()) return;
  const b = sel.id === null ? null : byId(sel.id), band = bandAt(sel.cursor ?? (b ? b.height_mm + 1e-9 : null));
  V3.colour(active().map((x) => x.height_mm), band ? band.k : -1);
}
function focus3d() {
  if (!V3 || !V3.ready()) return;
  const b = sel.id === null ? null : byId(sel.id);
  const h = b ? b.height_mm : (sel.cursor ?? (view.v0 + view.v1) / 2);
  V3.focus(h, Math.min(view.v1 - view.v0, (S.span_mm[1] - S.span_mm[0])));
}

// ------------------------------------------------------------------------------------ panels
function drawStatus() {
  const st = $("status"), r = S.rerun || {}, hms = (t) => String(t || "").slice(11, 19);
  let text = S.dirty ? `${S.n_edits} edit(s), unsaved` : (S.saved_utc ? `saved ${hms(S.saved_utc)} UTC` : "not saved yet");
  st.classList.remove("error");
  const bar = $("progress");
  if (r.state === "running") {
    const part = r.total ? ` ${r.stage || ""} (${r.done}/${r.total})` : "";
    text += r.result_utc && r.started_utc && r.result_utc >= r.started_utc ?
      " · figures updated, writing the report…" : ` · refreshing the analysis…${part}`;
    bar.hidden = false; $("progress-bar").style.width = `${r.total ? Math.round(100 * r.done / r.total) : 5}%`;
  } else bar.hidden = true;
  if (r.state === "failed") { text += ` · refresh failed: ${r.error} (last good result shown)`; st.classList.add("error"); }
  else if (r.state === "done") text += ` · analysis updated ${hms(r.finished_utc)} UTC${r.seconds !== null && r.seconds !== undefined ? ` in ${fmt(r.seconds, 1)} s` : ""}`;
  st.textContent = text; st.title = text;
  document.body.dataset.rerun = r.state || "idle";
  $("save").classList.toggle("dirty", S.dirty);
}
function drawHeader() {
  $("specimen").textContent = S.specimen_id;
  $("band-count").textContent = String(S.n_bands);
  $("auto-count").textContent = `(auto ${S.n_auto_bands}, from 0)`;
  const res = S.result, e = $("estimate");
  if (!res || !res.days_per_year) e.textContent = "days per year: not yet analysed";
  else {
    const d = res.days_per_year, ci = d.ci95 || [], unit = d.unit || "days/yr", method = d.method ? String(d.method) : "";
    e.textContent = d.estimate === null ? "days per year: no significant annual cycle" :
      `${fmt(d.estimate, 1)} ${unit} (95%: ${fmt(ci[0], 1)}–${fmt(ci[1], 1)})` +
      (d.significant === false ? " · not significant" : "");
    const b = res.bands || {};
    e.title = `From the last analysis: ${b.count ?? "–"} bands, mean thickness ${fmt(b.mean_thickness_mm, 3)} mm.` +
      (method ? ` Method: ${method}.` : "") + (d.p_value !== null && d.p_value !== undefined ? ` p = ${fmt(d.p_value, 4)}.` : "") +
      (d.is_minimum ? " Band counts are minima (missing days are not counted)." : "");
    e.dataset.bands = String(b.count ?? "");
  }
  $("undo").disabled = !S.can_undo; $("redo").disabled = !S.can_redo;
  const apart = S.set_apart;
  $("apart").hidden = !apart;
  if (apart) $("apart-text").textContent = ` It belongs to ${apart.belongs_to} (${apart.n_edits ?? "?"} edits): ` +
    `${apart.reasons.join("; ")}. Saving is off until it is set aside (renamed, not deleted).`;
  const low = S.boundaries.filter(isLow).length;
  $("low-count").textContent = `${low} low-confidence boundaries to check`;
  drawStatus();
}
function drawSelection() {
  const box = $("selection"); box.replaceChildren();
  const b = sel.id === null ? null : byId(sel.id), band = bandAt(sel.cursor);
  if (b) {
    const h = document.createElement("h3");
    const bandText = b.band !== null && b.band !== undefined ? `, base of band ${b.band}` : "";
    h.textContent = `Boundary ${b.id} at ${fmt(b.height_mm, 3)} mm${bandText} — ${NAMES[b.status] || b.status}`;
    const facts = document.createElement("div"); facts.className = "facts";
    facts.textContent = b.confidence !== null && b.confidence !== undefined ?
      `confidence ${fmt(b.confidence, 2)} (0–1) · ring fit rms ${fmt(b.rms_mm, 3)} mm · traced ${fmt(100 * b.coverage, 0)} % of the circumference` :
      (b.auto ? "moved by hand" : "inserted by hand");
    const row = document.createElement("div"); row.className = "row";
    if (!inForce(b)) row.append(button("Restore", () => run("confirm")));
    else {
      if (b.auto && b.status !== "accepted") row.append(button("Confirm ⏎", () => run("confirm"), "Confirm and go to the next low-confidence boundary (Enter)"));
      row.append(button("Remove ⌦", () => run("remove"), "Not a boundary (Delete)"),
        button("Join the bands either side", () => run("join")));
    }
    box.append(h, facts, row);
  }
  if (sel.stretch || (!b && band)) {
    const h = document.createElement("h3"), row = document.createElement("div"); row.className = "row";
    h.textContent = sel.stretch ? `Stretch ${fmt(sel.stretch[0], 3)}–${fmt(sel.stretch[1], 3)} mm` :
      `Band ${band.k}: ${fmt(band.lo.height_mm, 3)}–${fmt(band.hi.height_mm, 3)} mm, ${fmt(band.hi.height_mm - band.lo.height_mm, 3)} mm thick`;
    if (sel.stretch) row.append(button("Confirm all in this stretch", () => run("confirm-stretch")));
    else row.append(button("Insert a boundary at the cursor", () => run("insert")));
    row.append(button("Gap in the record", () => run("gap")), button("Doubtful stretch", () => run("doubtful")));
    box.append(h, row);
  }
  if (!b && !band && !sel.stretch) {
    box.innerHTML = "<h3>Nothing selected</h3><div class='facts'>Page Down goes to the next low-confidence boundary " +
      "in view. Click a line to select it, between lines to choose a band; Shift-drag chooses a stretch.</div>";
  }
}
function listRows() {
  let rows = S.boundaries;
  if (list.mode === "view") rows = rows.filter((b) => inView(b.height_mm));
  else if (list.mode === "low") rows = rows.filter(isLow);
  const k = list.key, sgn = list.desc ? -1 : 1;
  const val = (b) => k === "status" ? (NAMES[b.status] || b.status) : (b[k] ?? (k === "confidence" ? (b.checked ? 2 : -1) : Infinity));
  return [...rows].sort((a, b) => { const x = val(a), y = val(b); return (x < y ? -1 : x > y ? 1 : a.height_mm - b.height_mm) * sgn; });
}
let tableKey = "";
function drawTable(force) {
  const rows = listRows(), LIMIT = 400;
  const key = `${list.mode}|${list.key}|${list.desc}|${threshold}|${sel.id}|${rows.length}|${rows.length ? rows[0].id + ":" + rows[rows.length - 1].id : ""}|${S.n_edits}|${S.saved_utc}`;
  if (!force && key === tableKey) return;
  tableKey = key;
  const out = [];
  for (const b of rows.slice(0, LIMIT)) {
    const tr = document.createElement("tr");
    tr.dataset.id = b.id;
    if (b.id === sel.id) tr.className = "sel";
    if (isLow(b)) tr.classList.add("low");
    if (!inForce(b)) tr.classList.add("removed");
    const conf = b.confidence === null || b.confidence === undefined ? "by hand" : fmt(b.confidence, 2);
    for (const v of [b.band ?? (inForce(b) ? "top" : "–"), fmt(b.height_mm, 3), fmt(b.thickness_mm, 3), conf, NAMES[b.status] || b.status]) {
      const td = document.createElement("td"); td.textContent = v; tr.append(td);
    }
    tr.onclick = () => { select(b.id, true); };
    out.push(tr);
  }
  $("blist").tBodies[0].replaceChildren(...out);
  $("list-note").textContent = rows.length > LIMIT ? `first ${LIMIT} of ${rows.length}` : `${rows.length} rows`;
  for (const th of document.querySelectorAll("#blist th")) {
    th.classList.toggle("sorted", th.dataset.key === list.key); th.classList.toggle("desc", th.dataset.key === list.key && list.desc);
  }
  const cur = $("blist").querySelector("tr.sel");
  if (cur) cur.scrollIntoView({ block: "nearest" });
}
function drawLists() {
  const ml = $("marks"); ml.replaceChildren();
  for (const m of S.marks) {
    const li = document.createElement("li");
    li.textContent = `${m.kind === "hiatus" ? "gap in the record" : "doubtful"} ${fmt(m.s0_mm, 3)}–${fmt(m.s1_mm, 3)} mm${m.note ? ": " + m.note : ""}`;
    li.append(button("remove", () => edit({ op: "unmark", mark: m.mark })));
    ml.append(li);
  }
  if (!S.marks.length) ml.innerHTML = "<li class='muted'>No stretch marked.</li>";
  const nl = $("notes"); nl.replaceChildren();
  for (const n of S.notes) {
    const li = document.createElement("li");
    li.textContent = (n.id !== undefined ? `[boundary ${n.id}] ` : "") + n.text + (n.time_utc ? ` (${n.time_utc})` : "");
    nl.append(li);
  }
  const bs = S.basis || {};
  $("basis").textContent = `Edits are kept for scan ${String(bs.scan_sha256 || "unknown").slice(0, 12)}…` +
    `${bs.scan_path ? ` (${String(bs.scan_path).split(/[\\/]/).pop()})` : ""}, units ${bs.units ?? "?"} (${bs.mm_per_unit ?? "?"} mm per unit), ` +
    `segmentation ${bs.segmentation_id} of ${bs.n_boundaries} boundaries; heights in mm along its centreline, ` +
    "specimen frame. They are not applied to any other.";
  const el = $("edits"); el.replaceChildren();
  for (const e of S.edits) {
    const li = document.createElement("li");
    li.textContent = `${describeEdit(e)} · ${String(e.time_utc || "").replace("T", " ").replace("Z", " UTC")}`;
    el.append(li);
  }
}
function describeEdit(e) {
  const mm = (x) => `${fmt(x, 3)} mm`, note = e.note ? `: ${e.note}` : "";
  switch (e.op) {
    case "accept": return `confirmed boundary ${e.id}`;
    case "accept_stretch": return `confirmed every boundary in ${fmt(e.s0_mm, 3)}–${mm(e.s1_mm)}`;
    case "reject": return `removed boundary ${e.id}`;
    case "merge": return `joined the bands either side of boundary ${e.id}`;
    case "move": return `moved boundary ${e.id} to ${mm(e.height_mm)}`;
    case "add": case "split": return `inserted boundary ${e.id ?? ""} at ${mm(e.height_mm)}`;
    case "hiatus": return `gap in the record ${fmt(e.s0_mm, 3)}–${mm(e.s1_mm)}${note}`;
    case "uncertain": return `doubtful stretch ${fmt(e.s0_mm, 3)}–${mm(e.s1_mm)}${note}`;
    case "unmark": return `unmarked stretch ${e.mark}`;
    case "note": return `note${e.id !== undefined ? ` on boundary ${e.id}` : ""}: ${e.text}`;
    default: return e.op;
  }
}
function drawLegend() {
  const lg = $("legend"); if (lg.childElementCount) return;
  for (const [k, label] of [["auto", "automatic"], ["low", "low confidence"], ["accepted", "confirmed"], ["added", "inserted / moved"], ["rejected", "removed"]]) {
    const s = document.createElement("span"), sw = document.createElement("span"); sw.className = "swatch";
    sw.style.borderTopColor = COL[k]; sw.style.borderTopStyle = (DASH[k] || []).length ? (DASH[k][0] > 3 ? "dashed" : "dotted") : "solid";
    s.append(sw, label); lg.append(s);
  }
  const f = document.createElement("span"), fs = document.createElement("span");
  fs.className = "swatch"; fs.style.borderTopColor = COL.flagged; fs.style.borderTopWidth = "5px";
  f.append(fs, "flagged by the segmenter"); lg.append(f);
}
let frameReq = 0;
function redrawView() {              // pan and zoom: the strip, the overview and the table follow
  if (frameReq) return;
  frameReq = requestAnimationFrame(() => { frameReq = 0; drawStrip(); drawOverview(); if (list.mode === "view") drawTable(); });
}
function redraw() { drawStrip(); drawOverview(); colourFaces(); drawSelection(); drawTable(); drawLists(); }
function setState(st) { S = st; drawHeader(); redraw(); }

// ------------------------------------------------------------------------------------ navigation
function reveal(h) {
  const span = view.v1 - view.v0;
  if (h < view.v0 + 0.05 * span || h > view.v1 - 0.05 * span) { view.v0 = h - span / 2; view.v1 = h + span / 2; clampView(); }
}
function clampView() {
  const lo = S.span_mm[0], hi = S.span_mm[1], full = hi - lo;
  const span = Math.min(full * 1.02, Math.max(full / 5000, view.v1 - view.v0)), pad = Math.min(0.01 * full, 0.04 * span);
  let v0 = (view.v0 + view.v1) / 2 - span / 2;
  if (span >= full) v0 = lo - (span - full) / 2; else v0 = Math.min(hi + pad - span, Math.max(lo - pad, v0));
  view.v0 = v0; view.v1 = v0 + span;
}
function zoomTo(h, span) { view.v0 = h - span / 2; view.v1 = h + span / 2; clampView(); }
function select(id, show) {
  const b = byId(id); if (!b) return;
  sel.id = id; sel.stretch = null; sel.cursor = null;
  if (show) reveal(b.height_mm);
  redraw(); focus3d();
}
// The reference a step starts from: the selection when it is in view, else the view's own edge, so
// that a jump after panning never starts back at the base.
function stepRef(dir) {
  const cur = sel.id === null ? null : byId(sel.id);
  if (cur && inView(cur.height_mm)) return cur.height_mm;
  if (sel.cursor !== null && inView(sel.cursor)) return sel.cursor;
  return dir > 0 ? view.v0 - 1e-9 : view.v1 + 1e-9;
}
function step(dir, pred) {
  const ref = stepRef(dir); let pick = null;
  for (const b of S.boundaries) {
    if (!pred(b)) continue;
    if (dir > 0 && b.height_mm > ref + 1e-9 && (!pick || b.height_mm < pick.height_mm)) pick = b;
    if (dir < 0 && b.height_mm < ref - 1e-9 && (!pick || b.height_mm > pick.height_mm)) pick = b;
  }
  return pick;
}
function neighbour(dir) {
  const pick = step(dir, inForce);
  if (pick) select(pick.id, true); else toast(dir > 0 ? "No boundary further up." : "No boundary further down.");
}
function nextLow(dir) {
  const pick = step(dir, isLow);
  if (!pick) { toast(dir > 0 ? "No low-confidence boundary further up." : "No low-confidence boundary further down."); return; }
  const span = view.v1 - view.v0, typical = 12 * medianThickness();
  if (span > 4 * typical) zoomTo(pick.height_mm, typical); else reveal(pick.height_mm);
  select(pick.id, true);
}
function medianThickness() {
  const t = S.boundaries.map((b) => b.thickness_mm).filter((x) => x !== null && x !== undefined).sort((a, b) => a - b);
  return t.length ? t[Math.floor(t.length / 2)] : (S.span_mm[1] - S.span_mm[0]) / 30;
}
function jumpFlag(dir) {
  const fl = S.flagged || []; if (!fl.length) return toast("The segmenter flagged no stretch.");
  const here = (view.v0 + view.v1) / 2; let pick = null;
  for (const f of fl) {
    const c = (f[0] + f[1]) / 2;
    if (dir > 0 && c > here + 1e-6 && (!pick || c < (pick[0] + pick[1]) / 2)) pick = f;
    if (dir < 0 && c < here - 1e-6 && (!pick || c > (pick[0] + pick[1]) / 2)) pick = f;
  }
  if (!pick) return toast(dir > 0 ? "No flagged stretch further up." : "No flagged stretch further down.");
  zoomTo((pick[0] + pick[1]) / 2, Math.max(view.v1 - view.v0, 1.5 * (pick[1] - pick[0])));
  sel.stretch = [pick[0], pick[1]]; sel.id = null;
  const first = S.boundaries.find((b) => inForce(b) && inView(b.height_mm) && b.height_mm >= pick[0]);
  if (first) sel.id = first.id;                      // the selection starts in view
  redraw(); focus3d();
  toast(`Flagged ${fmt(pick[0], 2)}–${fmt(pick[1], 2)} mm: ${pick[2]}`);
}
function whole() { const [lo, hi] = S.span_mm, pad = (hi - lo) * 0.01; view.v0 = lo - pad; view.v1 = hi + pad; redraw(); }

// ------------------------------------------------------------------------------------ commands
function selected() { return sel.id === null ? null : byId(sel.id); }
const COMMANDS = [
  { id: "next-low", name: "Next low-confidence boundary", key: "Page Down", run: () => nextLow(1) },
  { id: "prev-low", name: "Previous low-confidence boundary", key: "Page Up", run: () => nextLow(-1) },
  { id: "confirm", name: "Confirm the selected boundary (and go to the next low one)", key: "Enter", when: () => selected(),
    run: () => { const b = selected(); if (!b) return toast("Select a boundary first (Page Down, or click its line).");
      const restoring = !inForce(b); edit({ op: "accept", id: b.id }).then(() => { if (!restoring) nextLow(1); }); } },
  { id: "remove", name: "Remove the selected boundary (not a boundary)", key: "Delete", when: () => selected(),
    run: () => { const b = selected(); if (!b) return toast("Select a boundary first."); edit({ op: "reject", id: b.id }); } },
  { id: "join", name: "Join the two bands either side of the selected boundary", when: () => selected(),
    run: () => { const b = selected(); if (!b) return toast("Select a boundary first."); edit({ op: "merge", id: b.id }); } },
  { id: "confirm-view", name: "Confirm every automatic boundary in view", key: "Ctrl+Enter", run: () => confirmStretch(view.v0, view.v1) },
  { id: "confirm-stretch", name: "Confirm every automatic boundary in the chosen stretch", when: () => sel.stretch,
    run: () => sel.stretch ? confirmStretch(...sel.stretch) : toast("Shift-drag on the strip to choose a stretch.") },
  { id: "insert", name: "Insert a boundary at the cursor", key: "double-click", when: () => sel.cursor !== null,
    run: () => { if (sel.cursor === null) return toast("Click the strip to place the cursor first.");
      edit({ op: "add", height_mm: sel.cursor }).then((e) => { if (e && e.id !== undefined) select(e.id, false); }); } },
  { id: "gap", name: "Mark the chosen stretch (or band) as a gap in the record", run: () => mark("hiatus") },
  { id: "doubtful", name: "Mark the chosen stretch (or band) as doubtful", run: () => mark("uncertain") },
  { id: "next-flag", name: "Next stretch flagged by the segmenter", run: () => jumpFlag(1) },
  { id: "prev-flag", name: "Previous stretch flagged by the segmenter", run: () => jumpFlag(-1) },
  { id: "whole", name: "Show the whole column", key: "Home", run: () => whole() },
  { id: "note", name: "Write a note", run: () => { document.querySelector('[data-tab="marks-tab"]').click(); $("note-text").focus(); } },
  { id: "list-low", name: "List every low-confidence boundary, lowest first", run: () => { setListMode("low", "confidence", false); } },
  { id: "3d-whole", name: "3-D view: the whole specimen", run: () => V3 && V3.whole() },
  { id: "undo", name: "Undo", key: "Ctrl+Z", run: () => undo() },
  { id: "redo", name: "Redo", key: "Ctrl+Y", run: () => redo() },
  { id: "save", name: "Save and refresh the analysis", key: "Ctrl+S", run: () => save() },
  { id: "set-aside", name: "Set aside the review file that does not fit", when: () => S && S.set_apart, run: () => setAside() },
];
function run(id) { const c = COMMANDS.find((x) => x.id === id); if (c) c.run(); }
function confirmStretch(s0, s1) {
  const n = S.boundaries.filter((b) => inForce(b) && b.auto && b.status !== "accepted" && b.height_mm >= s0 && b.height_mm <= s1).length;
  if (!n) return toast("Every boundary here is already confirmed or set by hand.");
  edit({ op: "accept_stretch", s0_mm: Math.max(s0, S.span_mm[0]), s1_mm: Math.min(s1, S.span_mm[1]) })
    .then(() => toast(`Confirmed ${n} boundaries between ${fmt(s0, 2)} and ${fmt(s1, 2)} mm.`));
}
function mark(kind) {
  let s0, s1; const band = bandAt(sel.cursor);
  if (sel.stretch) [s0, s1] = sel.stretch; else if (band) [s0, s1] = [band.lo.height_mm, band.hi.height_mm];
  else return toast("Shift-drag on the strip to choose a stretch, or click inside a band.");
  const note = $("note-text").value.trim();
  return edit({ op: kind, s0_mm: s0, s1_mm: s1, note }).then(() => { sel.stretch = null; if (note) $("note-text").value = ""; redraw(); });
}
function setAside() {
  enqueue(async () => { const r = await call("/api/set-aside", {}); setState(r.state); toast(`Renamed to ${r.renamed_to}; saving is on.`); });
}
function setListMode(mode, key, desc) {
  list.mode = mode; if (key) { list.key = key; list.desc = !!desc; }
  for (const r of document.querySelectorAll("input[name=listmode]")) r.checked = r.value === mode;
  document.querySelector('[data-tab="list-tab"]').click(); drawTable(true);
}
// the palette
const pal = { open: false, items: [], on: 0 };
function openPalette() {
  pal.open = true; $("palette").hidden = false; $("palette-input").value = ""; fillPalette(); $("palette-input").focus();
}
function closePalette() { pal.open = false; $("palette").hidden = true; $("strip").focus(); }
function fillPalette() {
  const q = $("palette-input").value.trim().toLowerCase().split(/\s+/).filter(Boolean);
  pal.items = COMMANDS.filter((c) => q.every((w) => c.name.toLowerCase().includes(w)));
  pal.on = Math.min(pal.on, Math.max(0, pal.items.length - 1));
  const ul = $("palette-list"); ul.replaceChildren();
  pal.items.forEach((c, i) => {
    const li = document.createElement("li"), name = document.createElement("span"), key = document.createElement("span");
    name.textContent = c.name; key.className = "why"; key.textContent = c.key || "";
    if (c.when && !c.when()) li.classList.add("off");
    if (i === pal.on) li.classList.add("on");
    li.dataset.command = c.id; li.append(name, key);
    li.onmousedown = (ev) => { ev.preventDefault(); closePalette(); c.run(); };
    ul.append(li);
  });
}
function wirePalette() {
  $("palette-open").onclick = openPalette;
  $("palette-input").addEventListener("input", () => { pal.on = 0; fillPalette(); });
  $("palette-input").addEventListener("keydown", (ev) => {
    if (ev.key === "Escape") { ev.preventDefault(); closePalette(); }
    else if (ev.key === "ArrowDown" || ev.key === "ArrowUp") {
      ev.preventDefault(); pal.on = (pal.on + (ev.key === "ArrowDown" ? 1 : -1) + pal.items.length) % Math.max(1, pal.items.length); fillPalette();
    } else if (ev.key === "Enter") {
      ev.preventDefault(); const c = pal.items[pal.on]; closePalette(); if (c) c.run();
    }
  });
  $("palette-input").addEventListener("blur", () => setTimeout(() => { if (pal.open && document.activeElement !== $("palette-input")) closePalette(); }, 150));
}

// ------------------------------------------------------------------------------------ input
function nudge(dir, fine) {
  const b = selected();
  if (!b || !inForce(b)) return toast("Select a boundary in place to move it.");
  const c = $("strip"), px = (view.v1 - view.v0) / Math.max(100, c.clientWidth - M.left - M.right);
  b.height_mm += dir * (fine ? px / 4 : px * 2); drawStrip();      // show at once; the server's answer follows
  edit({ op: "move", id: b.id, height_mm: b.height_mm, coalesce: true });
}
function hit(x, w) {
  const { drawn } = visibleLines(w); let best = null, bestd = 6;
  for (const b of drawn) { const d = Math.abs(sx(b.height_mm, w) - x); if (d < bestd) { best = b; bestd = d; } }
  return best;
}
function wireStrip() {
  const c = $("strip"); let drag = null;
  c.addEventListener("mousedown", (ev) => {
    const r = c.getBoundingClientRect(), x = ev.clientX - r.left; c.focus();
    const s = xs(x, r.width);
    if (ev.shiftKey) { drag = { kind: "stretch", s0: s }; sel.stretch = [s, s]; return; }
    const b = hit(x, r.width);
    if (b && inForce(b)) drag = { kind: "move", b, x0: x, h0: b.height_mm, moved: false };
    else drag = { kind: "pan", x0: x, v0: view.v0, v1: view.v1, moved: false, b, s };
  });
  window.addEventListener("mousemove", (ev) => {
    if (!drag) return;
    const r = c.getBoundingClientRect(), x = ev.clientX - r.left, mmpp = (view.v1 - view.v0) / (r.width - M.left - M.right);
    if (drag.kind === "stretch") { const s = xs(x, r.width); sel.stretch = [Math.min(drag.s0, s), Math.max(drag.s0, s)]; drawStrip(); }
    else if (Math.abs(x - drag.x0) > 2 || drag.moved) {
      drag.moved = true;
      if (drag.kind === "move") { drag.b.height_mm = drag.h0 + (x - drag.x0) * mmpp; sel.id = drag.b.id; drawStrip(); }
      else { const d = (x - drag.x0) * mmpp; view.v0 = drag.v0 - d; view.v1 = drag.v1 - d; redrawView(); }
    }
  });
  window.addEventListener("mouseup", () => {
    if (!drag) return; const d = drag; drag = null;
    if (d.kind === "stretch") { if (sel.stretch && sel.stretch[1] - sel.stretch[0] < 1e-6) sel.stretch = null; sel.id = null; redraw(); return; }
    if (d.kind === "move" && d.moved) { sel.id = d.b.id; edit({ op: "move", id: d.b.id, height_mm: d.b.height_mm }); return; }
    if (d.kind === "move") { select(d.b.id, false); return; }
    if (!d.moved) { sel.stretch = null; sel.cursor = d.s; sel.id = d.b ? d.b.id : null; redraw(); focus3d(); }
    else if (list.mode === "view") drawTable();
  });
  c.addEventListener("dblclick", (ev) => { const r = c.getBoundingClientRect(); sel.cursor = xs(ev.clientX - r.left, r.width); run("insert"); });
  c.addEventListener("wheel", (ev) => {
    ev.preventDefault();
    const r = c.getBoundingClientRect(), s = xs(ev.clientX - r.left, r.width), f = Math.exp(ev.deltaY * 0.0015);
    view.v0 = s - (s - view.v0) * f; view.v1 = s + (view.v1 - s) * f; clampView(); redrawView();
  }, { passive: false });
  const o = $("overview");
  const jump = (ev) => { const r = o.getBoundingClientRect(), [lo, hi] = S.span_mm;
    const s = lo + (ev.clientX - r.left - M.left) / (r.width - M.left - M.right) * (hi - lo); zoomTo(s, view.v1 - view.v0); redraw(); };
  o.addEventListener("mousedown", (ev) => { jump(ev); const mv = (e) => jump(e), up = () => { window.removeEventListener("mousemove", mv); window.removeEventListener("mouseup", up); };
    window.addEventListener("mousemove", mv); window.addEventListener("mouseup", up); });
}
function wireKeys() {
  document.addEventListener("keydown", (ev) => {
    if (pal.open) return;
    const tag = (ev.target && ev.target.tagName) || "";
    const mod = ev.ctrlKey || ev.metaKey, key = ev.key.toLowerCase();
    if (mod && key === "k") { ev.preventDefault(); openPalette(); return; }
    if (["TEXTAREA", "INPUT", "SELECT"].includes(tag) && !(mod && key === "s")) return;
    if (!S) return;
    let done = true;
    if (mod && key === "z" && !ev.shiftKey) undo();
    else if (mod && (key === "y" || (key === "z" && ev.shiftKey))) redo();
    else if (mod && key === "s") save();
    else if (mod && ev.key === "Enter") run("confirm-view");
    else if (mod) done = false;
    else if (ev.key === "PageDown") nextLow(1);
    else if (ev.key === "PageUp") nextLow(-1);
    else if (ev.key === "Enter" && tag !== "BUTTON") run("confirm");
    else if (ev.key === "Delete" || ev.key === "Backspace") run("remove");
    else if (ev.key === "ArrowRight" || ev.key === "ArrowLeft") {
      const dir = ev.key === "ArrowRight" ? 1 : -1;
      if (ev.shiftKey) nudge(dir, ev.altKey); else neighbour(dir);
    }
    else if (ev.key === "Home") whole();
    else if (ev.key === "Escape") { sel.id = null; sel.stretch = null; sel.cursor = null; redraw(); }
    else done = false;
    if (done) ev.preventDefault();
  });
}
function wireButtons() {
  $("undo").onclick = undo; $("redo").onclick = redo; $("save").onclick = save;
  $("next-low").onclick = () => nextLow(1); $("prev-low").onclick = () => nextLow(-1);
  $("confirm-view").onclick = () => run("confirm-view"); $("whole").onclick = whole;
  $("apart-button").onclick = setAside;
  $("view3d-whole").onclick = () => V3 && V3.whole(); $("view3d-here").onclick = focus3d;
  $("layer").onchange = () => drawStrip();
  $("threshold").oninput = () => { threshold = +$("threshold").value; $("threshold-out").textContent = fmt(threshold, 2); drawHeader(); redraw(); };
  for (const r of document.querySelectorAll("input[name=listmode]")) r.onchange = () => setListMode(r.value);
  for (const th of document.querySelectorAll("#blist th")) {
    th.onclick = () => { if (list.key === th.dataset.key) list.desc = !list.desc; else { list.key = th.dataset.key; list.desc = false; } drawTable(true); };
  }
  $("add-note").onclick = () => {
    const text = $("note-text").value.trim(); if (!text) return toast("Write the note first.");
    const e = { op: "note", text }; if (sel.id !== null) e.id = sel.id; if (sel.cursor !== null) e.height_mm = sel.cursor;
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
  wireButtons(); wireKeys(); wireStrip(); wirePalette(); drawLegend();
  try {
    const [st, sf] = await Promise.all([call("/api/state"), call("/api/surface")]);
    surf = { ...sf, images: {} };
    for (const name of Object.keys(surf.layers)) { const o = document.createElement("option"); o.value = o.textContent = name; $("layer").append(o); }
    S = st; threshold = st.low_confidence ?? 0.6; $("threshold").value = threshold; $("threshold-out").textContent = fmt(threshold, 2);
    whole();
    const hs = st.boundaries.map((b) => b.height_mm);
    if (hs.length > 60) zoomTo(hs[0] + 15 * medianThickness(), 32 * medianThickness());   // open on the lowest thirty bands
    setState(st);
    if (st.notice) toast(st.notice);
    if (st.rerun && st.rerun.state === "running") poll();
    document.body.dataset.ready = "1";
    try { V3 = createView3D($("view3d"), $("view3d-note")); } catch (e) { $("view3d-note").textContent = `3-D view unavailable: ${e.message}`; }
    call("/api/mesh").then((m) => { if (!V3) return; V3.setup(m); colourFaces(); focus3d(); document.body.dataset.mesh = "1"; })
      .catch((e) => toast(`3-D view unavailable: ${e.message}`));
  } catch (e) { $("status").textContent = `could not load the review: ${e.message}`; $("status").classList.add("error"); }
}
start();
