// bandgeo review page: the 3-D view. A small software rasteriser on a 2-D canvas (orthographic camera,
// z-buffer, flat shading), so it needs neither WebGL nor a GPU. Bands alternate light and dark tones;
// the chosen band is orange (Okabe & Ito); faces outside the banded stretch are grey.
"use strict";
window.BandView3D = (() => {
  const cam = { yaw: 0.6, pitch: 0.25, zoom: 1.0 };
  let mesh = null, canvas = null;
  function bytes(b64) {
    const bin = atob(b64); const u = new Uint8Array(bin.length);
    for (let i = 0; i < bin.length; i++) u[i] = bin.charCodeAt(i);
    return u;
  }
  // m: the /api/mesh payload (base64 little-endian arrays); note: element for the face count line.
  function setup(m, note) {
    const v = new Float32Array(bytes(m.vertices).buffer), f = new Uint32Array(bytes(m.faces).buffer);
    const hgt = new Float32Array(bytes(m.height).buffer), nf = m.n_faces;
    const fn = new Float32Array(nf * 3), fh = new Float32Array(nf);
    const c = m.centre_mm;
    for (let i = 0; i < v.length; i += 3) { v[i] -= c[0]; v[i + 1] -= c[1]; v[i + 2] -= c[2]; }
    for (let k = 0; k < nf; k++) {
      const a = 3 * f[3 * k], b = 3 * f[3 * k + 1], d = 3 * f[3 * k + 2];
      const ux = v[b] - v[a], uy = v[b + 1] - v[a + 1], uz = v[b + 2] - v[a + 2];
      const wx = v[d] - v[a], wy = v[d + 1] - v[a + 1], wz = v[d + 2] - v[a + 2];
      const nx = uy * wz - uz * wy, ny = uz * wx - ux * wz, nz = ux * wy - uy * wx;
      const l = Math.hypot(nx, ny, nz) || 1; fn[3 * k] = nx / l; fn[3 * k + 1] = ny / l; fn[3 * k + 2] = nz / l;
      fh[k] = (hgt[f[3 * k]] + hgt[f[3 * k + 1]] + hgt[f[3 * k + 2]]) / 3;
    }
    mesh = { v, f, fn, fh, nf, size: m.size_mm, faceCol: new Uint8Array(nf * 3).fill(205) };
    if (note) note.textContent = `${nf.toLocaleString()} of ${m.n_faces_full.toLocaleString()} faces · drag to turn, wheel to zoom`;
  }
  // heights: boundary heights in force, base to top (mm); pick: index of the chosen band or -1.
  function colour(heights, pick) {
    if (!mesh) return;
    const hs = heights, LIGHT = [226, 214, 183], DARK = [128, 118, 100], OUT = [205, 205, 205], PICK = [230, 159, 0];
    for (let k = 0; k < mesh.nf; k++) {
      const h = mesh.fh[k]; let lo = 0, hi = hs.length;
      while (lo < hi) { const mid = (lo + hi) >> 1; if (hs[mid] <= h) lo = mid + 1; else hi = mid; }
      let col = (lo === 0 || lo === hs.length) ? OUT : (lo % 2 ? LIGHT : DARK);
      if (pick === lo) col = PICK;
      mesh.faceCol[3 * k] = col[0]; mesh.faceCol[3 * k + 1] = col[1]; mesh.faceCol[3 * k + 2] = col[2];
    }
  }
  let frame = 0;
  function request() { if (canvas && !frame) frame = requestAnimationFrame(() => { frame = 0; render(); }); }
  function render() {
    const c = canvas, r = c.getBoundingClientRect();
    const W = Math.max(10, Math.round(r.width)), H = Math.max(10, Math.round(r.height));
    if (c.width !== W || c.height !== H) { c.width = W; c.height = H; }
    const ctx = c.getContext("2d"); const img = ctx.createImageData(W, H);
    const buf = new Uint32Array(img.data.buffer), zb = new Float32Array(W * H).fill(Infinity);
    buf.fill(0xfffafbfb);
    if (!mesh) { ctx.putImageData(img, 0, 0); return; }
    const cy = Math.cos(cam.yaw), sn = Math.sin(cam.yaw), cp = Math.cos(cam.pitch), sp = Math.sin(cam.pitch);
    const k = cam.zoom * 0.72 * Math.min(W, H) / mesh.size, ox = W / 2, oy = H / 2;
    const n = mesh.v.length / 3, X = new Float32Array(n), Y = new Float32Array(n), Z = new Float32Array(n);
    for (let i = 0; i < n; i++) {
      const x = mesh.v[3 * i], y = mesh.v[3 * i + 1], z = mesh.v[3 * i + 2];
      const x1 = cy * x - sn * y, y1 = sn * x + cy * y;
      const y2 = cp * y1 - sp * z, z2 = sp * y1 + cp * z;
      X[i] = ox + k * x1; Y[i] = oy - k * z2; Z[i] = y2;
    }
    const f = mesh.f, fn = mesh.fn, fc = mesh.faceCol;
    for (let t = 0; t < mesh.nf; t++) {
      const a = f[3 * t], b = f[3 * t + 1], d = f[3 * t + 2];
      const nx = fn[3 * t], ny = fn[3 * t + 1], nz = fn[3 * t + 2];
      const ny1 = sn * nx + cy * ny, nview = cp * ny1 - sp * nz, nup = sp * ny1 + cp * nz;
      const nx1 = cy * nx - sn * ny;
      const lit = 0.3 + 0.7 * Math.min(1, Math.abs(0.45 * nx1 - 0.8 * nview + 0.4 * nup));
      const col = (255 << 24) | ((fc[3 * t + 2] * lit) << 16) | ((fc[3 * t + 1] * lit) << 8) | (fc[3 * t] * lit);
      tri(X[a], Y[a], Z[a], X[b], Y[b], Z[b], X[d], Y[d], Z[d], col, W, H, buf, zb);
    }
    ctx.putImageData(img, 0, 0);
  }
  function tri(ax, ay, az, bx, by, bz, cx, cy, cz, col, W, H, buf, zb) {
    const minx = Math.max(0, Math.floor(Math.min(ax, bx, cx))), maxx = Math.min(W - 1, Math.floor(Math.max(ax, bx, cx)));
    const miny = Math.max(0, Math.floor(Math.min(ay, by, cy))), maxy = Math.min(H - 1, Math.floor(Math.max(ay, by, cy)));
    if (minx > maxx || miny > maxy) return;
    const area = (bx - ax) * (cy - ay) - (by - ay) * (cx - ax);
    if (maxx - minx < 1 && maxy - miny < 1 || Math.abs(area) < 1e-6) {   // below a pixel: one dot
      const i = miny * W + minx, z = (az + bz + cz) / 3;
      if (z < zb[i]) { zb[i] = z; buf[i] = col; }
      return;
    }
    const inv = 1 / area;
    for (let y = miny; y <= maxy; y++) {
      const py = y + 0.5;
      for (let x = minx; x <= maxx; x++) {
        const px = x + 0.5;
        const w0 = ((bx - px) * (cy - py) - (by - py) * (cx - px)) * inv;
        const w1 = ((cx - px) * (ay - py) - (cy - py) * (ax - px)) * inv;
        const w2 = 1 - w0 - w1;
        if (w0 < -1e-6 || w1 < -1e-6 || w2 < -1e-6) continue;
        const z = w0 * az + w1 * bz + w2 * cz, i = y * W + x;
        if (z < zb[i]) { zb[i] = z; buf[i] = col; }
      }
    }
  }
  function wire(c) {
    canvas = c; let last = null;
    c.addEventListener("mousedown", (ev) => { last = [ev.clientX, ev.clientY]; c.style.cursor = "grabbing"; });
    window.addEventListener("mousemove", (ev) => {
      if (!last) return;
      cam.yaw += (ev.clientX - last[0]) * 0.01;
      cam.pitch = Math.max(-1.45, Math.min(1.45, cam.pitch + (ev.clientY - last[1]) * 0.01));
      last = [ev.clientX, ev.clientY]; request();
    });
    window.addEventListener("mouseup", () => { last = null; c.style.cursor = "grab"; });
    c.addEventListener("wheel", (ev) => {
      ev.preventDefault(); cam.zoom = Math.max(0.3, Math.min(20, cam.zoom * Math.exp(-ev.deltaY * 0.0015))); request();
    }, { passive: false });
    window.addEventListener("resize", request);
  }
  return { setup, colour, request, wire, ready: () => mesh !== null };
})();
