// polarsky workbench page.
// This script only draws. Every number it shows comes from the server (the same library
// calls as the commands), except the per-pixel preview of the frame behind a filter at a
// chosen angle: I(theta) = k/2 (S0 + D (S1 cos 2theta + S2 sin 2theta)), drawn from a
// decimated copy of S0, S1, S2, with the exposure kept as without a filter.
"use strict";

const TOKEN = new URLSearchParams(location.search).get("token") || "";
const $ = (id) => document.getElementById(id);

const S = {
  session: null, changes: -1,
  entry: null, meta: null,        // current entry (public dict) and its view meta
  layer: "frame", channel: "all",
  z: 1, ox: 0, oy: 0,             // screen = ox + image * z
  mode: "move",
  region: null, protect: null,    // [x0, y0, x1, y1], x1/y1 exclusive
  drag: null,
  panel: null, panelKey: "",
  filterOn: false, filterAngle: 0,
  preview: null,                  // {data: Uint16Array, info}
  tiles: new Map(),               // url -> Image
  firstView: false,
  pointer: null, readoutBusy: false, readoutWant: null, readoutShown: null,
};

// ------------------------------------------------------------------ server calls
async function api(path, opts = {}) {
  const headers = Object.assign({"X-Polarsky-Token": TOKEN}, opts.headers || {});
  const r = await fetch(path, Object.assign({}, opts, {headers, cache: "no-store"}));
  if (!r.ok) {
    let msg = r.status + " " + r.statusText;
    try { msg = (await r.json()).error || msg; } catch (e) { /* not JSON */ }
    const err = new Error(msg); err.status = r.status; throw err;
  }
  return r;
}
const getJSON = async (path, opts) => (await api(path, opts)).json();
const withToken = (path) => path + (path.includes("?") ? "&" : "?") + "token=" + encodeURIComponent(TOKEN);

function status(text, problem = false) {
  const el = $("status");
  el.textContent = text;
  el.classList.toggle("problem", problem);
}

// ------------------------------------------------------------------ entries
async function refreshSession(first = false) {
  let snap;
  try { snap = await getJSON("/api/session"); } catch (e) { status("lost the workbench: " + e.message, true); return; }
  const changed = snap.changes !== S.changes;
  S.session = snap; S.changes = snap.changes;
  if (!changed && !first) return;
  const sel = $("entry");
  sel.textContent = "";
  for (const e of snap.entries) {
    const o = document.createElement("option");
    o.value = e.id;
    o.textContent = e.label + (e.status === "ready" || e.status === "pending" ? "" : " — " + e.status);
    o.disabled = e.status === "unavailable";
    if (e.error) o.title = e.error;
    sel.appendChild(o);
  }
  $("follow-label").hidden = !snap.watch;
  $("follow").checked = !!snap.follow;
  if (first) $("safety").textContent = snap.safety;
  const want = snap.current;
  const cur = snap.entries.find((e) => S.entry && e.id === S.entry.id);
  if (want !== null && want !== undefined && !S.opening) {
    if (!S.entry || want !== S.entry.id || (cur && cur.version !== S.entry.version)
        || (cur && cur.status !== S.entry.status)) {
      await openEntry(want, false);
    }
  }
  if (S.entry) sel.value = S.entry.id;
  statusLine();
}

function statusLine() {
  const snap = S.session;
  if (!snap) return;
  const e = S.entry;
  let text = "";
  if (e) {
    text = e.status === "ready" ? `${e.label} · ${e.width}×${e.height} px · ${e.channels.join(",")}`
         : e.status === "failed" ? `${e.label}: ${e.error}` : `${e.label}: ${e.status}…`;
  }
  if (snap.watch) {
    const n = snap.entries.filter((x) => x.status !== "unavailable").length;
    text = `watching ${snap.watch} · ${n} bracket${n === 1 ? "" : "s"}` + (text ? " · " + text : "");
    if (!snap.entries.length) text = `watching ${snap.watch} · waiting for a complete bracket`;
  }
  if (snap.messages && snap.messages.length) text += " · " + snap.messages[snap.messages.length - 1];
  status(text, !!(e && e.status === "failed"));
}

async function openEntry(id, select = true) {
  S.opening = true;
  try { await openEntryNow(id, select); } finally { S.opening = false; }
}

async function openEntryNow(id, select) {
  if (select) await getJSON("/api/select?entry=" + id, {method: "POST"});
  $("busy").hidden = false;
  let info;
  for (;;) {
    info = await getJSON("/api/entry?entry=" + id);
    S.entry = info; statusLine();
    if (info.status === "ready" || info.status === "failed" || info.status === "unavailable") break;
    $("busy").textContent = info.status === "loading" ? "processing " + info.label + "…" : "waiting…";
    await new Promise((r) => setTimeout(r, 250));
  }
  $("busy").hidden = true;
  if (info.status !== "ready") { S.meta = null; document.body.dataset.state = "failed"; draw(); return; }
  const sameSize = S.meta && S.meta.width === info.meta.width && S.meta.height === info.meta.height;
  S.meta = info.meta;
  S.preview = null;
  S.tiles.clear();
  buildLayers();
  showFacts();
  if (!sameSize) {
    fit();
    if (S.region && !boxFits(S.region)) S.region = null;
    if (S.protect && !boxFits(S.protect)) S.protect = null;
  }
  S.panel = null; S.panelKey = "";
  document.body.dataset.entry = String(info.id);
  document.body.dataset.version = String(info.version);
  document.body.dataset.state = "ready";
  showBoxes();
  requestDraw();
  if (S.filterOn) ensurePreview().then(requestDraw);
  if (S.region) await updateAdvice();
}

function boxFits(b) { return b[2] <= S.meta.width && b[3] <= S.meta.height; }

// ------------------------------------------------------------------ layers and keys
function buildLayers() {
  const box = $("layers");
  box.textContent = "";
  const groups = {stokes: "", residual: "", sky: "sky comparison"};
  let lastGroup = null;
  const ids = S.meta.layers.map((l) => l.id);
  if (!ids.includes(S.layer) && S.layer !== "filter") S.layer = "frame";
  for (const l of S.meta.layers) {
    const g = l.group === "residual" ? "stokes" : l.group;
    if (g !== lastGroup && groups[g]) {
      const h = document.createElement("div"); h.className = "group"; h.textContent = groups[g]; box.appendChild(h);
    }
    lastGroup = g;
    const lab = document.createElement("label");
    if (l.group === "sky") lab.className = "sky";
    const r = document.createElement("input");
    r.type = "radio"; r.name = "layer"; r.value = l.id; r.checked = !S.filterOn && l.id === S.layer;
    r.addEventListener("change", () => { S.filterOn = false; S.layer = l.id; showKey(); requestDraw(); });
    lab.append(r, document.createTextNode(l.title));
    box.appendChild(lab);
  }
  const lab = document.createElement("label");
  const r = document.createElement("input");
  r.type = "radio"; r.name = "layer"; r.value = "filter"; r.checked = S.filterOn;
  r.addEventListener("change", () => setFilter(true));
  lab.append(r, document.createTextNode("Behind the virtual filter"));
  box.appendChild(lab);
  const chSel = $("channel");
  chSel.textContent = "";
  if (S.meta.channels.length > 1) {
    const all = document.createElement("option"); all.value = "all"; all.textContent = S.meta.channels.join("+");
    chSel.appendChild(all);
    S.meta.channels.forEach((c, i) => {
      const o = document.createElement("option"); o.value = String(i); o.textContent = c; chSel.appendChild(o);
    });
    if (S.channel !== "all" && +S.channel >= S.meta.channels.length) S.channel = "all";
    chSel.value = S.channel;
    $("channel-label").hidden = false;
  } else {
    S.channel = "all";
    $("channel-label").hidden = true;
  }
  $("preview-step").textContent = S.meta.preview.step > 1
    ? `at 1/${S.meta.preview.step} of the full resolution` : "at full resolution";
  showKey();
}

function layerInfo(id) { return S.meta.layers.find((l) => l.id === id); }

function fmtTick(v) { return Math.abs(v) >= 100 ? v.toFixed(0) : String(+v.toPrecision(3)); }

function showKey() {
  const key = $("key"), img = $("key-img"), ticks = $("key-ticks"), cap = $("key-caption");
  ticks.textContent = "";
  if (S.filterOn) {
    key.classList.remove("disc");
    img.src = withToken("/api/key/frame.png");
    ["0", "relative intensity", fmtTick(S.meta.top)].forEach((t) => { const s = document.createElement("span"); s.textContent = t; ticks.appendChild(s); });
    cap.textContent = "frame behind the virtual filter at " + S.filterAngle.toFixed(1) + " deg (exposure as without filter)";
    return;
  }
  const l = layerInfo(S.layer);
  img.src = withToken(`/api/key/${l.id}.png`);
  key.classList.toggle("disc", l.color_map === "combined");
  let labels;
  if (l.color_map === "combined") labels = ["0 deg", "90", "180 deg"];
  else if (l.id === "frame") labels = ["0", fmtTick(S.meta.top / 2), fmtTick(S.meta.top)];
  else { const [lo, hi] = l.range; labels = [fmtTick(lo), fmtTick((lo + hi) / 2), fmtTick(hi)]; }
  labels.forEach((t) => { const s = document.createElement("span"); s.textContent = t; ticks.appendChild(s); });
  cap.textContent = l.unit + (l.color_map === "combined" ? " (direction = AoLP as drawn, radius = DoLP; full colour at 0.6)" : "")
    + (l.note && S.channel === "all" ? " · " + l.note : "");
  document.body.dataset.layer = l.id;
}

function showFacts() {
  const dl = $("facts");
  dl.textContent = "";
  const m = S.meta;
  const rows = [
    ["size", `${m.width} × ${m.height} px, ${m.channels.join(",")}`],
    ["analyzer angles", m.analyzer_angles_deg.map((a) => a + "").join(", ") + " deg"],
    ["filter", m.extinction_ratio ? "extinction ratio " + m.extinction_ratio : "ideal (no --extinction)"],
    ["frames", m.inputs.length ? m.inputs.map((p) => p.split("/").pop()).join(", ") : "—"],
  ];
  if (m.sky) rows.push(["sky model", `${m.sky.model_title || m.sky.model}, DoLP max ${(+m.sky.dolp_max).toFixed(3)}, `
                        + `AoLP residual ${(+m.sky.rms_aolp_residual_deg).toFixed(2)} deg rms`]);
  if (S.entry.note) rows.push(["note", S.entry.note]);
  for (const [k, v] of rows) {
    const dt = document.createElement("dt"); dt.textContent = k;
    const dd = document.createElement("dd"); dd.textContent = v;
    dl.append(dt, dd);
  }
  $("warnings").textContent = (m.warnings || []).join(" · ");
  if (m.sky && m.sky.caution) $("safety").textContent = m.sky.caution;
}

// ------------------------------------------------------------------ view transform
function stageSize() { const r = $("stage").getBoundingClientRect(); return [r.width, r.height]; }

function fit() {
  if (!S.meta) return;
  const [w, h] = stageSize();
  S.z = Math.min(w / S.meta.width, h / S.meta.height) * 0.96;
  S.ox = (w - S.meta.width * S.z) / 2;
  S.oy = (h - S.meta.height * S.z) / 2;
  requestDraw();
}

function zoomAt(factor, sx, sy) {
  const z = Math.min(64, Math.max(0.01, S.z * factor));
  S.ox = sx - (sx - S.ox) * (z / S.z);
  S.oy = sy - (sy - S.oy) * (z / S.z);
  S.z = z;
  requestDraw();
}

const toImage = (sx, sy) => [(sx - S.ox) / S.z, (sy - S.oy) / S.z];
const toScreen = (x, y) => [S.ox + x * S.z, S.oy + y * S.z];

// ------------------------------------------------------------------ drawing
let drawQueued = false;
function requestDraw() {
  if (drawQueued) return;
  drawQueued = true;
  requestAnimationFrame(() => { drawQueued = false; draw(); });
}

function sizeCanvas(c) {
  const [w, h] = stageSize();
  if (c.width !== Math.round(w) || c.height !== Math.round(h)) { c.width = Math.round(w); c.height = Math.round(h); }
  return c.getContext("2d");
}

function tileURL(level, tx, ty) {
  const e = S.entry;
  return withToken(`/api/tile/${e.id}/${e.version}/${S.layer}/${S.channel}/${level}/${tx}/${ty}.png`);
}

function getTile(url) {
  let img = S.tiles.get(url);
  if (!img) {
    img = new Image();
    img.onload = () => requestDraw();
    img.onerror = () => { img.failed = true; };
    img.src = url;
    S.tiles.set(url, img);
    if (S.tiles.size > 600) S.tiles.delete(S.tiles.keys().next().value);
  }
  return img;
}

function drawTiles(ctx, level, onlyLoaded) {
  const m = S.meta, step = 1 << level, span = m.tile * step;
  const [cw, ch] = [ctx.canvas.width, ctx.canvas.height];
  const [ix0, iy0] = toImage(0, 0), [ix1, iy1] = toImage(cw, ch);
  const tx0 = Math.max(0, Math.floor(ix0 / span)), ty0 = Math.max(0, Math.floor(iy0 / span));
  const tx1 = Math.min(Math.ceil(m.width / span) - 1, Math.floor(ix1 / span));
  const ty1 = Math.min(Math.ceil(m.height / span) - 1, Math.floor(iy1 / span));
  let complete = true;
  for (let ty = ty0; ty <= ty1; ty++) {
    for (let tx = tx0; tx <= tx1; tx++) {
      const url = tileURL(level, tx, ty);
      const img = onlyLoaded ? S.tiles.get(url) : getTile(url);
      if (!img || !img.complete || !img.naturalWidth) { complete = false; continue; }
      const [sx, sy] = toScreen(tx * span, ty * span);
      ctx.drawImage(img, sx, sy, img.naturalWidth * step * S.z, img.naturalHeight * step * S.z);
    }
  }
  return complete;
}

function draw() {
  const ctx = sizeCanvas($("image"));
  ctx.fillStyle = "#101112";
  ctx.fillRect(0, 0, ctx.canvas.width, ctx.canvas.height);
  if (S.meta && S.entry && S.entry.status === "ready") {
    ctx.save();
    const [x0, y0] = toScreen(0, 0);
    ctx.beginPath(); ctx.rect(x0, y0, S.meta.width * S.z, S.meta.height * S.z); ctx.clip();
    if (S.filterOn) {
      drawFilterView(ctx);
    } else {
      const level = Math.max(0, Math.min(S.meta.levels, Math.floor(Math.log2(1 / S.z))));
      ctx.imageSmoothingEnabled = S.z * (1 << level) < 1;
      for (let l = S.meta.levels; l > level; l--) drawTiles(ctx, l, true);  // coarser tiles underneath
      const complete = drawTiles(ctx, level, false);
      if (complete && !S.firstView) {
        S.firstView = true;
        document.body.dataset.firstViewMs = String(Math.round(performance.now()));
      }
      document.body.dataset.tiles = complete ? "complete" : "loading";
    }
    ctx.restore();
  }
  drawMarks();
  $("zoom").textContent = Math.round(S.z * 1000) / 10 + "%";
}

function drawBox(ctx, b, colour, label) {
  const [x0, y0] = toScreen(b[0], b[1]), [x1, y1] = toScreen(b[2], b[3]);
  ctx.lineWidth = 4; ctx.strokeStyle = "#000"; ctx.strokeRect(x0, y0, x1 - x0, y1 - y0);
  ctx.lineWidth = 2; ctx.strokeStyle = colour; ctx.strokeRect(x0, y0, x1 - x0, y1 - y0);
  ctx.font = "bold 12px system-ui, sans-serif";
  const w = ctx.measureText(label).width + 8;
  ctx.fillStyle = "#000b"; ctx.fillRect(x0, y0 - 17, w, 16);
  ctx.fillStyle = colour; ctx.fillText(label, x0 + 4, y0 - 5);
}

function drawMarks() {
  const ctx = sizeCanvas($("marks"));
  ctx.clearRect(0, 0, ctx.canvas.width, ctx.canvas.height);
  if (!S.meta) return;
  const pal = S.session.palette;
  const adv = S.panel && S.panel.advice;
  if (adv && S.region) {
    const cx = (S.region[0] + S.region[2]) / 2, cy = (S.region[1] + S.region[3]) / 2;
    const [sx, sy] = toScreen(cx, cy);
    const t = adv.best_angle_deg * Math.PI / 180, L = Math.hypot(ctx.canvas.width, ctx.canvas.height);
    const dx = Math.cos(t) * L, dy = -Math.sin(t) * L;  // counter-clockwise as displayed
    for (const [w, c] of [[5, pal.outline], [2.5, pal.recommended_axis]]) {
      ctx.lineWidth = w; ctx.strokeStyle = c;
      ctx.beginPath(); ctx.moveTo(sx - dx, sy - dy); ctx.lineTo(sx + dx, sy + dy); ctx.stroke();
    }
    // the label sits on the axis just outside the region box, where the box labels are not
    ctx.font = "bold 13px system-ui, sans-serif";
    const text = `filter axis ${adv.best_angle_deg.toFixed(1)} deg`;
    const [bx0, by0] = toScreen(S.region[0], S.region[1]), [bx1, by1] = toScreen(S.region[2], S.region[3]);
    const ux = Math.cos(t), uy = -Math.sin(t);
    const reach = Math.min(Math.abs(ux) > 1e-6 ? (bx1 - bx0) / 2 / Math.abs(ux) : Infinity,
                           Math.abs(uy) > 1e-6 ? (by1 - by0) / 2 / Math.abs(uy) : Infinity);
    const sgn = uy > 0 ? 1 : -1;  // go toward the bottom of the box
    const lx = sx + sgn * ux * (reach + 14), ly = sy + sgn * uy * (reach + 14);
    const tw = ctx.measureText(text).width + 8;
    ctx.fillStyle = "#000b"; ctx.fillRect(lx + 6, ly - 4, tw, 18);
    ctx.fillStyle = pal.recommended_axis; ctx.fillText(text, lx + 10, ly + 10);
  }
  if (S.region) drawBox(ctx, S.region, pal.region, "region (darken)");
  if (S.protect) drawBox(ctx, S.protect, pal.protect, "protected region (keep)");
  if (S.drag && S.drag.box) drawBox(ctx, S.drag.box, S.drag.mode === "region" ? pal.region : pal.protect, "");
  const sky = S.meta.sky;
  if (sky && sky.sun_pixel) {
    const [sx, sy] = toScreen(sky.sun_pixel[0] + 0.5, sky.sun_pixel[1] + 0.5);
    ctx.lineWidth = 4; ctx.strokeStyle = pal.outline; ctx.beginPath(); ctx.arc(sx, sy, 9, 0, 2 * Math.PI); ctx.stroke();
    ctx.lineWidth = 2; ctx.strokeStyle = pal.sun; ctx.beginPath(); ctx.arc(sx, sy, 9, 0, 2 * Math.PI); ctx.stroke();
    ctx.fillStyle = pal.sun; ctx.font = "bold 12px system-ui, sans-serif"; ctx.fillText("sun", sx + 12, sy + 4);
  }
}

// ------------------------------------------------------------------ the virtual filter (per-pixel preview)
async function ensurePreview() {
  if (S.preview && S.preview.key === S.entry.id + "/" + S.entry.version) return S.preview;
  const e = S.entry;
  const r = await api(`/api/preview/${e.id}/${e.version}.bin`);
  const info = JSON.parse(r.headers.get("x-preview"));
  const data = new Uint16Array(await r.arrayBuffer());
  S.preview = {key: e.id + "/" + e.version, data, info, canvases: new Map()};
  return S.preview;
}

const SRGB = (() => {  // IEC 61966-2-1 encoding, 4096 steps of linear light
  const t = new Uint8ClampedArray(4097);
  for (let i = 0; i <= 4096; i++) {
    const v = i / 4096;
    t[i] = Math.round(255 * (v <= 0.0031308 ? 12.92 * v : 1.055 * Math.pow(v, 1 / 2.4) - 0.055));
  }
  return t;
})();

function diattenuation() {
  const er = parseFloat($("filter-er").value);
  if (er > 1) return (er - 1) / (er + 1);
  const m = S.meta.extinction_ratio;
  return m ? (m - 1) / (m + 1) : 1;
}

// angleDeg null: no filter (S0). Returns a canvas of the preview size.
function previewCanvas(angleDeg) {
  const p = S.preview, info = p.info, D = diattenuation();
  const key = angleDeg === null ? "none" : angleDeg.toFixed(2) + "/" + D;
  if (p.canvases.has(key)) return p.canvases.get(key);
  const w = info.width, h = info.height, n = w * h, C = info.channels, q = p.data;
  const c2 = angleDeg === null ? 0 : Math.cos(2 * angleDeg * Math.PI / 180);
  const s2 = angleDeg === null ? 0 : Math.sin(2 * angleDeg * Math.PI / 180);
  const d = angleDeg === null ? 0 : D;
  const k0 = info.scale / 65534, k1 = 2 * info.scale / 65534;
  const inv = 4096 / S.meta.top;
  const canvas = document.createElement("canvas");
  canvas.width = w; canvas.height = h;
  const ctx = canvas.getContext("2d");
  const img = ctx.createImageData(w, h);
  const out = img.data;
  const [dark, light] = S.session.checker_greys.map((g) => Math.round(g * 255));  // polarsky/palette.py
  for (let i = 0; i < n; i++) {
    const o = 4 * i;
    if (q[i] === 65535) {
      const y = (i / w) | 0, x = i - y * w;
      out[o] = out[o + 1] = out[o + 2] = (((x / 6) | 0) + ((y / 6) | 0)) % 2 ? light : dark;
      out[o + 3] = 255;
      continue;
    }
    for (let c = 0; c < 3; c++) {
      const k = C === 3 ? c : 0, base = k * 3 * n;
      const s0 = q[base + i] * k0;
      const s1 = q[base + n + i] * k1 - info.scale;
      const s2v = q[base + 2 * n + i] * k1 - info.scale;
      const v = (s0 + d * (s1 * c2 + s2v * s2)) * inv;  // 2 I / k relative to the frame's white
      out[o + c] = SRGB[v <= 0 ? 0 : v >= 4096 ? 4096 : v | 0];
    }
    out[o + 3] = 255;
  }
  ctx.putImageData(img, 0, 0);
  if (p.canvases.size > 24) p.canvases.delete(p.canvases.keys().next().value);
  p.canvases.set(key, canvas);
  return canvas;
}

function drawFilterView(ctx) {
  if (!S.preview) { ensurePreview().then(requestDraw); return; }
  const c = previewCanvas(S.filterAngle), st = S.preview.info.step;
  const [sx, sy] = toScreen(0, 0);
  ctx.imageSmoothingEnabled = S.z * st < 1;
  ctx.drawImage(c, sx, sy, c.width * st * S.z, c.height * st * S.z);
  document.body.dataset.filterAngle = S.filterAngle.toFixed(1);
}

function setFilter(on, angle) {
  S.filterOn = on;
  if (angle !== undefined) {
    S.filterAngle = Math.round(angle * 10) / 10;
    $("filter-angle").value = String(S.filterAngle);
  }
  $("filter-angle-out").textContent = S.filterAngle.toFixed(1) + " deg";
  document.querySelectorAll('input[name="layer"]').forEach((r) => { r.checked = on ? r.value === "filter" : r.value === S.layer; });
  drawDial();
  if (S.meta) showKey();
  if (on) ensurePreview().then(requestDraw); else requestDraw();
}

function drawDial() {
  const c = $("dial"), ctx = c.getContext("2d"), r = 26, cx = 32, cy = 32;
  ctx.clearRect(0, 0, 64, 64);
  ctx.strokeStyle = "#5b6166"; ctx.lineWidth = 1;
  ctx.beginPath(); ctx.arc(cx, cy, r + 3, 0, 2 * Math.PI); ctx.stroke();
  const adv = S.panel && S.panel.advice;
  if (!S.session) return;
  const pal = S.session.palette;
  const lines = [];
  if (adv) lines.push([adv.best_angle_deg, pal.recommended_axis, 3]);
  if (S.filterOn) lines.push([S.filterAngle, "#e4e1da", 1.5]);
  for (const [a, col, w] of lines) {
    const t = a * Math.PI / 180, dx = Math.cos(t) * r, dy = -Math.sin(t) * r;
    ctx.strokeStyle = col; ctx.lineWidth = w;
    ctx.beginPath(); ctx.moveTo(cx - dx, cy - dy); ctx.lineTo(cx + dx, cy + dy); ctx.stroke();
  }
}

function drawThumb(canvas, source) {
  const w = 160, h = Math.max(1, Math.round(w * source.height / source.width));
  canvas.width = w; canvas.height = h;
  const ctx = canvas.getContext("2d");
  ctx.imageSmoothingEnabled = true;
  ctx.drawImage(source, 0, 0, w, h);
}

// ------------------------------------------------------------------ regions and advice
const boxText = (b) => b ? b.join(",") : "—";

function showBoxes() {
  $("region-text").textContent = boxText(S.region);
  $("protect-text").textContent = boxText(S.protect);
  document.body.dataset.region = S.region ? S.region.join(",") : "";
  document.body.dataset.protect = S.protect ? S.protect.join(",") : "";
}

async function updateAdvice() {
  showBoxes();
  if (!S.region || !S.meta) {
    S.panel = null;
    $("advice").hidden = true; $("advice-empty").hidden = false;
    document.body.dataset.advice = "none";
    requestDraw();
    return;
  }
  const key = `${S.entry.id}/${S.entry.version}/${boxText(S.region)}/${boxText(S.protect)}`;
  S.panelKey = key;
  document.body.dataset.advice = "pending";
  let url = "/api/panel?entry=" + S.entry.id + "&region=" + boxText(S.region);
  if (S.protect) url += "&protect=" + boxText(S.protect);
  let panel;
  try { panel = await getJSON(url); } catch (e) {
    if (S.panelKey !== key) return;
    S.panel = null;
    $("advice").hidden = true; $("advice-empty").hidden = false;
    $("advice-empty").textContent = e.message;
    document.body.dataset.advice = "error";
    requestDraw();
    return;
  }
  if (S.panelKey !== key) return;  // a newer box was drawn meanwhile
  S.panel = panel;
  showAdvice();
}

function row(table, label, value) {
  const tr = table.insertRow();
  tr.insertCell().textContent = label;
  tr.insertCell().textContent = value;
}

function showAdvice() {
  const p = S.panel, a = p.advice;
  $("advice-empty").hidden = true;
  $("advice").hidden = false;
  $("best-angle").textContent = a.best_angle_deg.toFixed(1);
  $("advice-sub").textContent = a.protect ? "recommended filter angle (best contrast of the protected region against the region)"
                                          : "recommended filter angle (darkest region)";
  const t = $("advice-table");
  t.textContent = "";
  const stops = (v) => v === null ? "all of it (fully polarized)" : `${v.toFixed(2)} stops`;
  row(t, "region: DoLP, AoLP", `${a.region_dolp.toFixed(3)}, ${a.region_aolp_deg.toFixed(1)} deg`);
  row(t, "darker by, ideal filter", stops(a.reduction_stops_ideal));
  if (a.extinction_ratio !== null) row(t, `darker by, ER ${a.extinction_ratio}`, stops(a.reduction_stops));
  for (const fl of p.filters) row(t, `darker by, ER ${fl.extinction_ratio}`, stops(fl.reduction_stops));
  if (a.contrast_gain !== null) {  // every advice key is present, null where it does not apply
    row(t, "contrast gain (keep / darken)", `${a.contrast_gain.toFixed(2)}×`);
    row(t, "angle that only darkens", `${a.minimum_angle_deg.toFixed(1)} deg`);
  }
  row(t, "valid pixels", `${a.region_pixels}` + (a.protect_pixels ? ` / ${a.protect_pixels} kept` : ""));
  $("advice-text").textContent = p.text + "\n" + p.safety;
  $("command").textContent = p.command || ("no equivalent command: " + p.command_note);
  $("copy").disabled = !p.command;
  $("thumb-best-caption").textContent = `at ${a.best_angle_deg.toFixed(1)} deg`;
  document.body.dataset.advice = "ready";
  document.body.dataset.bestAngle = String(a.best_angle_deg);
  drawDial();
  requestDraw();
  ensurePreview().then(() => {
    drawThumb($("thumb-shot"), previewCanvas(null));
    drawThumb($("thumb-best"), previewCanvas(a.best_angle_deg));
  }).catch(() => {});
}

function clampBox(a, b) {
  const m = S.meta;
  const x0 = Math.max(0, Math.min(a[0], b[0])), y0 = Math.max(0, Math.min(a[1], b[1]));
  const x1 = Math.min(m.width, Math.max(a[0], b[0]) + 1), y1 = Math.min(m.height, Math.max(a[1], b[1]) + 1);
  return x1 > x0 && y1 > y0 ? [x0, y0, x1, y1] : null;
}

// ------------------------------------------------------------------ pointer: drag, zoom, readout
function pixelAt(ev) {
  const r = $("marks").getBoundingClientRect();
  const sx = ev.clientX - r.left, sy = ev.clientY - r.top;
  const [x, y] = toImage(sx, sy);
  return {sx, sy, x: Math.floor(x), y: Math.floor(y)};
}

function setupPointer() {
  const marks = $("marks");
  marks.addEventListener("pointerdown", (ev) => {
    if (!S.meta) return;
    marks.setPointerCapture(ev.pointerId);
    const p = pixelAt(ev);
    const mode = ev.button === 1 || ev.shiftKey ? "move" : S.mode;
    S.drag = {mode, start: p, last: p, box: null};
  });
  marks.addEventListener("pointermove", (ev) => {
    const p = pixelAt(ev);
    readoutAt(p);
    const d = S.drag;
    if (!d) return;
    if (d.mode === "move") {
      S.ox += p.sx - d.last.sx; S.oy += p.sy - d.last.sy;
      requestDraw();
    } else if (Math.hypot(p.sx - d.start.sx, p.sy - d.start.sy) >= 3) {
      d.box = clampBox([d.start.x, d.start.y], [p.x, p.y]);
      drawMarks();
    }
    d.last = p;
  });
  const end = (ev) => {
    const d = S.drag;
    S.drag = null;
    if (!d || d.mode === "move" || !d.box) { drawMarks(); return; }
    if (d.mode === "region") S.region = d.box; else S.protect = d.box;
    updateAdvice();
  };
  marks.addEventListener("pointerup", end);
  marks.addEventListener("pointercancel", end);
  marks.addEventListener("pointerleave", () => { if (!S.drag) { S.readoutWant = null; } });
  marks.addEventListener("wheel", (ev) => {
    ev.preventDefault();
    const p = pixelAt(ev);
    zoomAt(Math.pow(1.0015, -ev.deltaY), p.sx, p.sy);
  }, {passive: false});
}

function readoutAt(p) {
  if (!S.meta || S.entry.status !== "ready") return;
  if (p.x < 0 || p.y < 0 || p.x >= S.meta.width || p.y >= S.meta.height) return;
  const key = S.entry.id + "/" + S.entry.version + "/" + p.x + "/" + p.y;
  if (key === S.readoutShown) return;
  S.readoutWant = {key, x: p.x, y: p.y, entry: S.entry.id};
  pumpReadout();
}

async function pumpReadout() {
  if (S.readoutBusy || !S.readoutWant) return;
  const want = S.readoutWant;
  S.readoutWant = null;
  S.readoutBusy = true;
  try {
    const v = await getJSON(`/api/pixel?entry=${want.entry}&x=${want.x}&y=${want.y}`);
    S.readoutShown = want.key;
    showReadout(v);
  } catch (e) { /* the entry changed under the pointer */ }
  S.readoutBusy = false;
  if (S.readoutWant) pumpReadout();
}

function cell(tr, text, cls, raw) {
  const td = tr.insertCell();
  td.textContent = text;
  if (cls) td.className = cls;
  if (raw !== undefined) td.dataset.value = raw === null ? "" : String(raw);
  return td;
}
const f = (v, d) => v === null || v === undefined ? "—" : v.toFixed(d);
// an uncertainty smaller than the last decimal shown keeps two significant digits
const sig = (s, d) => s === null || s === undefined ? "?" : s >= Math.pow(10, -d) || s === 0 ? s.toFixed(d) : s.toPrecision(2);
const pm = (v, s, d) => v === null ? "—" : `${v.toFixed(d)} ± ${sig(s, d)}`;

function showReadout(v) {
  $("where").textContent = `x ${v.x}  y ${v.y}`;
  $("where").dataset.x = String(v.x); $("where").dataset.y = String(v.y);
  const body = $("values").tBodies[0];
  body.textContent = "";
  for (const c of v.channels) {
    const tr = body.insertRow();
    tr.dataset.channel = c.channel;
    cell(tr, c.channel, "ch");
    cell(tr, "S0 " + f(c.S0, 4), "S0", c.S0);
    cell(tr, "DoLP " + pm(c.dolp, c.sigma_dolp, 3), "dolp", c.dolp).dataset.sigma = String(c.sigma_dolp);
    cell(tr, "debiased " + f(c.dolp_unbiased, 3), "dolp_unbiased", c.dolp_unbiased);
    cell(tr, "AoLP " + pm(c.aolp_deg, c.sigma_aolp_deg, 1) + " deg", "aolp", c.aolp_deg).dataset.sigma = String(c.sigma_aolp_deg);
    if (!c.valid) cell(tr, "not valid (saturated, black or outside the aligned frames)", "invalid");
  }
  if (v.sky) {
    const s = v.sky, tr = body.insertRow();
    tr.className = "sky";
    cell(tr, "sky", "ch");
    cell(tr, `model DoLP ${f(s.dolp_model, 3)}, AoLP ${f(s.aolp_model_deg, 1)} deg`);
    cell(tr, `residual DoLP ${f(s.dolp_residual, 3)}, AoLP ${f(s.aolp_residual_deg, 1)} deg`);
    cell(tr, `${f(s.scattering_angle_deg, 1)} deg from the sun`);
    cell(tr, s.sky_mask || "");
  }
  document.body.dataset.readout = `${v.x},${v.y}`;
}

// ------------------------------------------------------------------ buttons
function setupControls() {
  $("entry").addEventListener("change", () => openEntry(+$("entry").value));
  $("follow").addEventListener("change", () => getJSON("/api/follow?on=" + ($("follow").checked ? 1 : 0), {method: "POST"}));
  $("channel").addEventListener("change", () => { S.channel = $("channel").value; showKey(); requestDraw(); });
  document.querySelectorAll(".mode").forEach((b) => b.addEventListener("click", () => {
    S.mode = b.dataset.mode;
    document.querySelectorAll(".mode").forEach((x) => x.classList.toggle("on", x === b));
    $("stage").classList.toggle("drawing", S.mode !== "move");
  }));
  $("region-clear").addEventListener("click", () => { S.region = null; S.protect = null; updateAdvice(); });
  $("protect-clear").addEventListener("click", () => { S.protect = null; updateAdvice(); });
  $("zoom-in").addEventListener("click", () => { const [w, h] = stageSize(); zoomAt(1.5, w / 2, h / 2); });
  $("zoom-out").addEventListener("click", () => { const [w, h] = stageSize(); zoomAt(1 / 1.5, w / 2, h / 2); });
  $("zoom-fit").addEventListener("click", fit);
  $("zoom-1").addEventListener("click", () => { const [w, h] = stageSize(); zoomAt(1 / S.z, w / 2, h / 2); });
  $("filter-angle").addEventListener("input", () => setFilter(true, parseFloat($("filter-angle").value)));
  $("filter-er").addEventListener("input", () => { if (S.filterOn) requestDraw(); });
  $("show-best").addEventListener("click", () => { if (S.panel) setFilter(true, S.panel.advice.best_angle_deg); });
  $("copy").addEventListener("click", copyCommand);
  $("save").addEventListener("click", save);
  window.addEventListener("resize", requestDraw);
}

async function copyCommand() {
  const text = S.panel && S.panel.command;
  if (!text) return;
  let done = false;
  try { if (navigator.clipboard) { await navigator.clipboard.writeText(text); done = true; } } catch (e) { done = false; }
  if (!done) {  // older browsers or no clipboard permission: select the text for Ctrl-C
    const range = document.createRange();
    range.selectNodeContents($("command"));
    const sel = window.getSelection(); sel.removeAllRanges(); sel.addRange(range);
    try { done = document.execCommand("copy"); } catch (e) { done = false; }
  }
  $("action-status").textContent = done ? "command copied" : "command selected: press Ctrl-C to copy";
  document.body.dataset.copied = done ? "yes" : "selected";
}

async function save() {
  if (!S.region) return;
  $("save").disabled = true;
  try {
    const r = await getJSON("/api/save", {method: "POST", headers: {"Content-Type": "application/json"},
      body: JSON.stringify({entry: S.entry.id, region: boxText(S.region), protect: S.protect ? boxText(S.protect) : null})});
    $("action-status").textContent = `saved ${r.outputs.join(", ")} to ${r.folder}`;
    document.body.dataset.saved = r.folder;
  } catch (e) {
    $("action-status").textContent = "not saved: " + e.message;
  }
  $("save").disabled = false;
}

// for tools and tests: the view transform (page px = canvas left + ox + x * z)
window.polarskyView = () => ({ox: S.ox, oy: S.oy, z: S.z, width: S.meta ? S.meta.width : 0,
                              height: S.meta ? S.meta.height : 0});

// ------------------------------------------------------------------ start
async function start() {
  setupControls();
  setupPointer();
  await refreshSession(true);
  drawDial();
  setInterval(() => refreshSession(false), 1000);
}

document.addEventListener("DOMContentLoaded", () => { start().catch((e) => status("could not start: " + e.message, true)); });
