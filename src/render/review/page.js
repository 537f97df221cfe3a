"use strict";
// The review page's behaviour. Data arrive through the scripts of data/: caravanRun (sizes,
// moments), caravanTracks (track points), caravanShapes (per-frame ellipses, loaded when a
// frame of their range is shown). Nothing is fetched from a network.

let RUN = null;
let TRACKS = [];
const trackById = new Map();
const shapeChunks = new Map();
const requestedChunks = new Set();
const images = new Map();
const state = {
  frame: 0, playing: false, timer: null, selected: null,
  scale: 1, ox: 0, oy: 0, fitted: true,
  shapes: true, ids: false, tails: true,
};
const TAIL = 8;
const $ = (id) => document.getElementById(id);

function caravanRun(data) { RUN = data; RUN.fullSet = new Set(RUN.full); }
function caravanTracks(data) {
  TRACKS = data;
  for (const t of data) {
    trackById.set(t.id, t);
  }
}
function caravanShapes(k, frames) {
  shapeChunks.set(k, frames);
  draw();
}

// ---- data access ----
function shapesOf(frame) {
  const k = Math.floor(frame / RUN.chunk);
  const chunk = shapeChunks.get(k);
  if (chunk) return chunk[frame - k * RUN.chunk];
  if (!requestedChunks.has(k)) {
    requestedChunks.add(k);
    const s = document.createElement("script");
    s.src = "data/shapes_" + String(k).padStart(4, "0") + ".js";
    document.body.appendChild(s);
  }
  return null;
}

function pointIndex(track, frame) {
  // Points are (frame, x, y, confidence) in frame order: binary search on the frame.
  const p = track.p;
  let lo = 0, hi = p.length / 4 - 1;
  while (lo <= hi) {
    const mid = (lo + hi) >> 1, f = p[mid * 4];
    if (f === frame) return mid;
    if (f < frame) lo = mid + 1; else hi = mid - 1;
  }
  return -lo - 1;
}

function image(frame, full) {
  const key = (full ? "f" : "d") + frame;
  let img = images.get(key);
  if (!img) {
    img = new Image();
    img.onload = () => { if (frame === state.frame) draw(); };
    img.src = (full ? "full/" : "frames/") + String(frame).padStart(6, "0") + ".jpg";
    images.set(key, img);
    if (images.size > 80) images.delete(images.keys().next().value);
  }
  return img;
}

// ---- view ----
function canvas() { return $("view"); }

function fit() {
  const c = canvas();
  state.scale = Math.min(c.width / RUN.width, c.height / RUN.height);
  state.ox = (c.width - RUN.width * state.scale) / 2;
  state.oy = (c.height - RUN.height * state.scale) / 2;
  state.fitted = true;
}

function resizeCanvas() {
  const c = canvas();
  const r = c.getBoundingClientRect();
  const w = Math.max(100, Math.round(r.width)), h = Math.max(100, Math.round(r.height));
  if (c.width !== w || c.height !== h) {
    c.width = w; c.height = h;
    if (state.fitted) fit();
  }
}

function zoomAt(factor, cx, cy) {
  const s = Math.min(Math.max(state.scale * factor, 0.05), 40);
  state.ox = cx - (cx - state.ox) * s / state.scale;
  state.oy = cy - (cy - state.oy) * s / state.scale;
  state.scale = s;
  state.fitted = false;
  draw();
}

function toRecording(cx, cy) { return [(cx - state.ox) / state.scale, (cy - state.oy) / state.scale]; }
function toCanvas(x, y) { return [state.ox + x * state.scale, state.oy + y * state.scale]; }

function wantsFull() {
  // Full resolution pays once a recording pixel is drawn larger than a display pixel.
  return RUN.display.factor > 1 && RUN.fullSet.has(state.frame) && state.scale > 1.05 / RUN.display.factor;
}

function colour(track) { return RUN.palette[(track - 1) % RUN.palette.length]; }

function draw() {
  if (!RUN) return;
  const c = canvas(), ctx = c.getContext("2d");
  ctx.fillStyle = "#000";
  ctx.fillRect(0, 0, c.width, c.height);
  const full = wantsFull();
  let img = full ? image(state.frame, true) : null;
  if (!img || !img.complete || !img.naturalWidth) img = image(state.frame, false);
  const shownFull = full && img.src.includes("/full/");
  if (img.complete && img.naturalWidth) {
    ctx.imageSmoothingEnabled = state.scale < 2;
    ctx.drawImage(img, state.ox, state.oy, RUN.width * state.scale, RUN.height * state.scale);
  }
  drawOverlays(ctx);
  showResolution(shownFull);
}

function drawOverlays(ctx) {
  const objects = shapesOf(state.frame);
  if (state.tails) drawTails(ctx);
  if (state.selected !== null) drawSelectedPath(ctx);
  if (!objects) return;
  ctx.lineWidth = 1.5;
  ctx.font = "12px system-ui, sans-serif";
  for (let i = 0; i < objects.length; i += 6) {
    const [id, x, y, major, minor, angle] = objects.slice(i, i + 6);
    const [cx, cy] = toCanvas(x, y);
    const chosen = id === state.selected;
    if (state.shapes || chosen) {
      ctx.strokeStyle = chosen ? "#ffffff" : colour(id);
      ctx.lineWidth = chosen ? 3 : 1.5;
      ctx.beginPath();
      ctx.ellipse(cx, cy, Math.max(major / 2 * state.scale, 1), Math.max(minor / 2 * state.scale, 1),
        angle * Math.PI / 180, 0, 2 * Math.PI);
      ctx.stroke();
    }
    if (state.ids || chosen) {
      ctx.fillStyle = chosen ? "#ffffff" : colour(id);
      ctx.fillText(String(id), cx + major / 2 * state.scale + 2, cy);
    }
  }
}

function drawTails(ctx) {
  const objects = shapeChunks.get(Math.floor(state.frame / RUN.chunk));
  if (!objects) return;
  const here = objects[state.frame % RUN.chunk];
  ctx.lineWidth = 1.5;
  for (let i = 0; i < here.length; i += 6) {
    const t = trackById.get(here[i]);
    if (!t) continue;
    const k = pointIndex(t, state.frame);
    if (k < 0) continue;
    ctx.strokeStyle = colour(t.id);
    // Each segment of the last TAIL frames, older ones fainter.
    for (let j = Math.max(1, k - TAIL + 1); j <= k; j++) {
      const age = state.frame - t.p[j * 4];
      if (state.frame - t.p[(j - 1) * 4] > TAIL) continue;
      const [x0, y0] = toCanvas(t.p[(j - 1) * 4 + 1], t.p[(j - 1) * 4 + 2]);
      const [x1, y1] = toCanvas(t.p[j * 4 + 1], t.p[j * 4 + 2]);
      ctx.globalAlpha = Math.max(0.15, 1 - age / TAIL);
      ctx.beginPath();
      ctx.moveTo(x0, y0);
      ctx.lineTo(x1, y1);
      ctx.stroke();
    }
  }
  ctx.globalAlpha = 1;
}

function drawSelectedPath(ctx) {
  const t = trackById.get(state.selected);
  if (!t) return;
  ctx.strokeStyle = "rgba(255,255,255,0.6)";
  ctx.lineWidth = 1;
  ctx.beginPath();
  for (let j = 0; j < t.p.length / 4; j++) {
    const [cx, cy] = toCanvas(t.p[j * 4 + 1], t.p[j * 4 + 2]);
    if (j === 0) ctx.moveTo(cx, cy); else ctx.lineTo(cx, cy);
  }
  ctx.stroke();
}

function showResolution(shownFull) {
  let text;
  if (RUN.display.factor <= 1) {
    text = "Every frame at full resolution.";
  } else if (shownFull) {
    text = "Full resolution (stored for this frame).";
  } else if (RUN.fullSet.has(state.frame)) {
    text = "Display resolution 1:" + RUN.display.factor + "; zoom in for full resolution.";
  } else {
    text = "Display resolution 1:" + RUN.display.factor + ". Full resolution is stored for the moments worth a look" +
      (RUN.full_every > 0 ? " and every " + RUN.full_every + "th frame" : "") + ".";
  }
  $("resolution").textContent = text;
}

// ---- frames and time ----
function timeText(frame) {
  if (RUN.interval_s === null) return "";
  const s = Math.round(frame * RUN.interval_s);
  const h = Math.floor(s / 3600), m = Math.floor((s % 3600) / 60), sec = s % 60;
  if (h > 0) return h + " h " + String(m).padStart(2, "0") + " min";
  if (m > 0) return m + " min" + (sec ? " " + sec + " s" : "");
  return sec + " s";
}

function go(frame) {
  state.frame = Math.min(Math.max(frame, 0), RUN.frames - 1);
  $("scrub").value = state.frame;
  const time = timeText(state.frame);
  $("frame-label").textContent = "frame " + state.frame + " of " + (RUN.frames - 1) + (time ? " · " + time : "");
  for (const li of document.querySelectorAll("#moments li")) {
    li.classList.toggle("current", Number(li.dataset.frame) === state.frame);
  }
  for (let k = 1; k <= 3 && state.playing; k++) image(Math.min(state.frame + k, RUN.frames - 1), false);
  draw();
}

function play(on) {
  state.playing = on;
  $("play").textContent = on ? "Pause" : "Play";
  clearInterval(state.timer);
  if (on) {
    state.timer = setInterval(() => {
      if (state.frame >= RUN.frames - 1) { play(false); return; }
      go(state.frame + 1);
    }, 1000 / Number($("fps").value));
  }
}

// ---- tracks ----
function pick(x, y) {
  const objects = shapesOf(state.frame);
  if (!objects) return null;
  let best = null, bestScore = Infinity;
  for (let i = 0; i < objects.length; i += 6) {
    const [id, ox, oy, major, minor, angle] = objects.slice(i, i + 6);
    const a = angle * Math.PI / 180, dx = x - ox, dy = y - oy;
    const u = dx * Math.cos(a) + dy * Math.sin(a), v = -dx * Math.sin(a) + dy * Math.cos(a);
    const inside = (u / Math.max(major / 2, 1)) ** 2 + (v / Math.max(minor / 2, 1)) ** 2;
    const near = Math.hypot(dx, dy) <= Math.max(major / 2, 3) + 3 / state.scale;
    const score = inside <= 1 ? inside : (near ? 1 + Math.hypot(dx, dy) : Infinity);
    if (score < bestScore) { bestScore = score; best = id; }
  }
  return best;
}

function link(id) {
  const a = document.createElement("a");
  a.href = "#";
  a.textContent = String(id);
  a.addEventListener("click", (e) => { e.preventDefault(); select(id, true); });
  return a;
}

function frameLink(el, frame) {
  el.textContent = String(frame);
  el.onclick = (e) => { e.preventDefault(); go(frame); };
}

function select(id, jump) {
  state.selected = id;
  const t = trackById.get(id);
  $("track-none").hidden = !!t;
  $("track-info").hidden = !t;
  if (!t) { draw(); return; }
  const n = t.p.length / 4, first = t.p[0], last = t.p[(n - 1) * 4];
  $("track-id").textContent = String(t.id);
  frameLink($("track-first"), first);
  frameLink($("track-last"), last);
  $("track-points").textContent = n + " (" + (last - first + 1 - n) + " missing frames)";
  $("track-mother").replaceChildren(t.parent === null ? document.createTextNode("none") : link(t.parent));
  const daughters = t.daughters.length ? [] : [document.createTextNode("none")];
  t.daughters.forEach((d, i) => { if (i) daughters.push(document.createTextNode(", ")); daughters.push(link(d)); });
  $("track-daughters").replaceChildren(...daughters);
  $("track-speed").textContent = speedText(t.speed);
  $("track-straightness").textContent = t.straightness === null ? "–" : t.straightness.toFixed(2);
  const links = [];
  for (let j = 0; j < n; j++) if (t.p[j * 4 + 3] >= 0) links.push([t.p[j * 4], t.p[j * 4 + 3]]);
  links.sort((a, b) => a[1] - b[1] || a[0] - b[0]);
  $("track-links").replaceChildren(...links.map(([f, c]) => {
    const li = document.createElement("li");
    li.textContent = "frame " + f + ": " + c.toFixed(2);
    li.addEventListener("click", () => go(f));
    return li;
  }));
  if (jump && pointIndex(t, state.frame) < 0) go(first); else draw();
}

function speedText(speed) {
  if (speed === null) return "–";
  let text = speed.toFixed(2) + " px/frame";
  if (RUN.pixel_size_um !== null && RUN.interval_s !== null) {
    text += " (" + (speed * RUN.pixel_size_um * 60 / RUN.interval_s).toFixed(2) + " µm/min)";
  }
  return text;
}

function stepAlong(direction) {
  const t = trackById.get(state.selected);
  if (!t) return;
  const k = pointIndex(t, state.frame);
  const here = k >= 0 ? k : (direction > 0 ? -k - 2 : -k - 1);
  const j = Math.min(Math.max(here + direction, 0), t.p.length / 4 - 1);
  go(t.p[j * 4]);
}

// ---- moments ----
function fillMoments() {
  const kind = $("moment-kind").value;
  const shown = RUN.moments.filter((m) => !kind || m.kind === kind).sort((a, b) => a.frame - b.frame);
  const items = shown.map((m) => {
    const li = document.createElement("li");
    li.dataset.frame = m.frame;
    const label = RUN.kinds.find((k) => k.key === m.kind).label;
    li.textContent = "frame " + m.frame + " · " + label + (m.track !== null ? " · track " + m.track : "") +
      (m.note ? " — " + m.note : "");
    li.addEventListener("click", () => { go(m.frame); if (m.track !== null) select(m.track, false); });
    return li;
  });
  $("moments").replaceChildren(...items);
  go(state.frame);
}

function nextMoment(direction) {
  const frames = RUN.moments.map((m) => m.frame).sort((a, b) => a - b);
  const target = direction > 0 ? frames.find((f) => f > state.frame) : frames.reverse().find((f) => f < state.frame);
  if (target !== undefined) go(target);
}

// ---- wiring ----
function wire() {
  const c = canvas();
  let drag = null;
  c.addEventListener("mousedown", (e) => { drag = { x: e.offsetX, y: e.offsetY, moved: false }; });
  c.addEventListener("mousemove", (e) => {
    if (!drag) return;
    const dx = e.offsetX - drag.x, dy = e.offsetY - drag.y;
    if (Math.abs(dx) + Math.abs(dy) > 3) drag.moved = true;
    if (drag.moved) {
      state.ox += dx; state.oy += dy; state.fitted = false;
      drag.x = e.offsetX; drag.y = e.offsetY;
      draw();
    }
  });
  c.addEventListener("mouseup", (e) => {
    const clicked = drag && !drag.moved;
    drag = null;
    if (!clicked) return;
    const scaleX = c.width / c.getBoundingClientRect().width;
    const scaleY = c.height / c.getBoundingClientRect().height;
    const [x, y] = toRecording(e.offsetX * scaleX, e.offsetY * scaleY);
    const id = pick(x, y);
    select(id, false);
  });
  c.addEventListener("wheel", (e) => {
    e.preventDefault();
    zoomAt(e.deltaY < 0 ? 1.25 : 0.8, e.offsetX, e.offsetY);
  }, { passive: false });
  $("play").addEventListener("click", () => play(!state.playing));
  $("back").addEventListener("click", () => go(state.frame - 1));
  $("next").addEventListener("click", () => go(state.frame + 1));
  $("scrub").addEventListener("input", () => go(Number($("scrub").value)));
  $("fps").addEventListener("change", () => play(state.playing));
  $("fit").addEventListener("click", () => { fit(); draw(); });
  for (const [box, key] of [["show-shapes", "shapes"], ["show-ids", "ids"], ["show-tails", "tails"]]) {
    $(box).addEventListener("change", () => { state[key] = $(box).checked; draw(); });
  }
  $("track-prev").addEventListener("click", () => stepAlong(-1));
  $("track-next").addEventListener("click", () => stepAlong(1));
  $("moment-kind").addEventListener("change", fillMoments);
  document.addEventListener("keydown", onKey);
  window.addEventListener("resize", () => { resizeCanvas(); draw(); });
}

function toggle(box) { $(box).checked = !$(box).checked; $(box).dispatchEvent(new Event("change")); }

function onKey(e) {
  if (e.target.tagName === "SELECT" || (e.target.tagName === "INPUT" && e.target.type !== "checkbox" && e.target.type !== "range")) return;
  const c = canvas(), step = e.shiftKey ? 10 : 1;
  const keys = {
    " ": () => play(!state.playing),
    "ArrowRight": () => go(state.frame + step),
    "ArrowLeft": () => go(state.frame - step),
    "Home": () => go(0),
    "End": () => go(RUN.frames - 1),
    "+": () => zoomAt(1.25, c.width / 2, c.height / 2),
    "=": () => zoomAt(1.25, c.width / 2, c.height / 2),
    "-": () => zoomAt(0.8, c.width / 2, c.height / 2),
    "0": () => { fit(); draw(); },
    "o": () => toggle("show-shapes"),
    "i": () => toggle("show-ids"),
    "t": () => toggle("show-tails"),
    "n": () => nextMoment(1),
    "p": () => nextMoment(-1),
  };
  const action = keys[e.key.length === 1 ? e.key.toLowerCase() : e.key] || keys[e.key];
  if (action) { e.preventDefault(); action(); }
}

window.addEventListener("load", () => {
  document.title = "Review · " + RUN.title;
  const verdict = $("verdict");
  verdict.textContent = RUN.verdict.join(" ");
  const level = (RUN.verdict[0] || "").match(/(ok|doubtful|failed)/);
  if (level) verdict.className = level[1];
  $("scrub").max = RUN.frames - 1;
  for (const k of RUN.kinds) {
    if (!RUN.moments.some((m) => m.kind === k.key)) continue;
    const o = document.createElement("option");
    o.value = k.key;
    o.textContent = k.label + " (" + RUN.moments.filter((m) => m.kind === k.key).length + ")";
    $("moment-kind").appendChild(o);
  }
  wire();
  resizeCanvas();
  fit();
  fillMoments();
});
