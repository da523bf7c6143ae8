// bandgeo review page: the 3-D view, drawn with three.js (vendored under static/vendor, MIT licence).
// Bands in alternating light and dark tones, the chosen band orange (Okabe & Ito), faces outside the
// banded stretch grey. The camera opens on the region being edited and follows the selection.
import * as THREE from "./vendor/three.module.min.js";

function bytes(b64) {
  const bin = atob(b64); const u = new Uint8Array(bin.length);
  for (let i = 0; i < bin.length; i++) u[i] = bin.charCodeAt(i);
  return u;
}

export function createView3D(canvas, note) {
  let renderer = null, scene, camera, controls, mesh = null, geom = null, data = null, frame = 0;
  const LIGHT = [0.89, 0.85, 0.74], DARK = [0.52, 0.48, 0.41], OUT = [0.8, 0.8, 0.8], PICK = [0.90, 0.62, 0.0];
  try {
    renderer = new THREE.WebGLRenderer({ canvas, antialias: true, preserveDrawingBuffer: true });
  } catch (e) {
    if (note) note.textContent = "3-D view needs WebGL, which this browser does not offer";
    return { setup() {}, colour() {}, focus() {}, whole() {}, ready: () => false, request() {} };
  }
  renderer.setClearColor(0xfbfbfa, 1);
  scene = new THREE.Scene();
  camera = new THREE.PerspectiveCamera(35, 1, 0.01, 1000);
  scene.add(new THREE.AmbientLight(0xffffff, 0.55));
  const sun = new THREE.DirectionalLight(0xffffff, 1.6);
  sun.position.set(1, 1.5, 2); camera.add(sun); scene.add(camera);
  controls = new THREE.OrbitControls(camera, canvas);
  controls.enableDamping = false;
  controls.addEventListener("change", request);

  function request() { if (!frame) frame = requestAnimationFrame(() => { frame = 0; render(); }); }
  function render() {
    const r = canvas.getBoundingClientRect(), w = Math.max(10, r.width), h = Math.max(10, r.height);
    const dpr = window.devicePixelRatio || 1;
    if (canvas.width !== Math.round(w * dpr) || canvas.height !== Math.round(h * dpr)) {
      renderer.setPixelRatio(dpr); renderer.setSize(w, h, false);
      camera.aspect = w / h; camera.updateProjectionMatrix();
    }
    renderer.render(scene, camera);
  }
  new ResizeObserver(request).observe(canvas);

  // m: the /api/mesh payload (base64 little-endian arrays, centred on centre_mm, axis points).
  function setup(m) {
    const v = new Float32Array(bytes(m.vertices).buffer), f = new Uint32Array(bytes(m.faces).buffer);
    const c = m.centre_mm;
    for (let i = 0; i < v.length; i += 3) { v[i] -= c[0]; v[i + 1] -= c[1]; v[i + 2] -= c[2]; }
    geom = new THREE.BufferGeometry();
    geom.setAttribute("position", new THREE.BufferAttribute(v, 3));
    geom.setIndex(new THREE.BufferAttribute(f, 1));
    geom.computeVertexNormals();
    // Bands are thinner than the display mesh's faces on a long record, so the colour comes from a
    // texture indexed by height (interpolated per pixel), not from the vertices.
    const hgt = new Float32Array(bytes(m.height).buffer), ax = m.axis.heights_mm;
    const lo = ax[0], hi = ax[ax.length - 1], uv = new Float32Array(2 * hgt.length);
    for (let i = 0; i < hgt.length; i++) { uv[2 * i] = (hgt[i] - lo) / ((hi - lo) || 1); uv[2 * i + 1] = 0.5; }
    geom.setAttribute("uv", new THREE.BufferAttribute(uv, 2));
    const W = Math.min(16384, renderer.capabilities.maxTextureSize || 4096);
    const tex = new THREE.DataTexture(new Uint8Array(4 * W).fill(205), W, 1, THREE.RGBAFormat);
    tex.magFilter = THREE.NearestFilter; tex.minFilter = THREE.NearestFilter; tex.generateMipmaps = false;
    tex.wrapS = THREE.ClampToEdgeWrapping; tex.colorSpace = THREE.SRGBColorSpace; tex.needsUpdate = true;
    const mat = new THREE.MeshLambertMaterial({ map: tex, side: THREE.DoubleSide });
    mesh = new THREE.Mesh(geom, mat); scene.add(mesh);
    data = { height: hgt, size: m.size_mm, radius: m.radius_mm || m.size_mm / 6, axis: m.axis, tex, W, lo, hi };
    camera.near = data.size / 500; camera.far = data.size * 20; camera.updateProjectionMatrix();
    if (note) note.textContent = `${m.n_faces.toLocaleString()} of ${m.n_faces_full.toLocaleString()} faces · drag to turn, wheel to zoom`;
    whole();
  }
  // heights: boundary heights in force, base to top (mm); pick: the chosen band's number or -1.
  function colour(heights, pick) {
    if (!data) return;
    const a = data.tex.image.data, W = data.W, hs = heights, span = (data.hi - data.lo) || 1;
    let lo = 0;
    for (let i = 0; i < W; i++) {
      const h = data.lo + (i + 0.5) / W * span;
      while (lo < hs.length && hs[lo] <= h) lo++;
      const band = lo - 1;     // band k lies between boundary k and k+1
      const c = (lo === 0 || lo === hs.length) ? OUT : (band === pick ? PICK : (band % 2 ? DARK : LIGHT));
      a[4 * i] = 255 * c[0]; a[4 * i + 1] = 255 * c[1]; a[4 * i + 2] = 255 * c[2]; a[4 * i + 3] = 255;
    }
    data.tex.needsUpdate = true; request();
  }
  function axisAt(s) {
    const ax = data.axis, hs = ax.heights_mm; let k = 0;
    while (k < hs.length - 2 && hs[k + 1] < s) k++;
    const t = Math.max(0, Math.min(1, (s - hs[k]) / ((hs[k + 1] - hs[k]) || 1)));
    const p = [0, 1, 2].map((j) => ax.points_mm[k][j] * (1 - t) + ax.points_mm[k + 1][j] * t);
    const d = [0, 1, 2].map((j) => ax.tangents[k][j] * (1 - t) + ax.tangents[k + 1][j] * t);
    return { p: new THREE.Vector3(...p), t: new THREE.Vector3(...d).normalize() };
  }
  // Look at height s (mm) on the axis, showing about `span` mm of the column around it.
  function focus(s, span) {
    if (!data) return;
    const { p, t } = axisAt(s);
    let dir = camera.position.clone().sub(controls.target);
    dir.sub(t.clone().multiplyScalar(dir.dot(t)));                 // keep the side we look from
    if (dir.lengthSq() < 1e-12) dir = new THREE.Vector3(1, 0, 0).sub(t.clone().multiplyScalar(t.x));
    dir.normalize().add(t.clone().multiplyScalar(0.35)).normalize();
    const want = Math.max(3 * data.radius, Math.min(data.size * 1.5, (span || 4 * data.radius) * 1.8));
    controls.target.copy(p); camera.up.copy(t);
    camera.position.copy(p.clone().add(dir.multiplyScalar(want)));
    camera.lookAt(p); controls.update(); request();
    canvas.dataset.focus = String(s);            // the height the view is centred on (mm), for tests
  }
  function whole() {
    if (!data) return;
    const mid = data.axis.heights_mm[Math.floor(data.axis.heights_mm.length / 2)];
    focus(mid, data.size);
  }
  return { setup, colour, focus, whole, ready: () => mesh !== null, request };
}
