// Truss monitor dashboard: polls the read-only JSON API and draws the truss,
// the fit status, the estimated loads, the selected member's series and the
// events. Plain JavaScript and SVG; no network beyond this server.
'use strict';

const SVGNS = 'http://www.w3.org/2000/svg';
const params = new URLSearchParams(location.search);
const POLL_MS = Math.max(200, Number(params.get('poll')) || 2000);
const SERIES_WINDOW_MS = 15 * 60 * 1000;
const EVENTS_WINDOW_MS = 24 * 3600 * 1000;
const VIEW0 = { yaw: -0.65, pitch: 0.55 };

const app = {
  structure: params.get('structure') || '',
  state: null,
  geomKey: '',
  selected: '',
  listed: false,
  view: { yaw: VIEW0.yaw, pitch: VIEW0.pitch },
};

// Colour scale for |w| / k: neutral grey-blue near 0, amber in the middle,
// burnt orange at and above the critical value k ("elevated"). An active
// alarm is drawn differently in kind, not in shade: a purple core on a
// dark halo, thicker, with a marker at mid-member (ALARM_*). Our own
// palette.
const STOPS = [
  [0.0, [120, 144, 166]],
  [0.55, [222, 168, 52]],
  [1.0, [205, 92, 18]],
];
const COLOUR_UNGAUGED = '#b9bec4';
const COLOUR_UNCHECKED = '#8d99a6';
const ALARM_CORE = '#7b2cbf';
const ALARM_HALO = '#1d2a35';
const INK = '#2b3944';
const LOAD_COLOUR = '#1f6f8b';
const LABEL_PX = 11;

function colourFor(w, k) {
  const t = Math.min(Math.abs(w) / k, 1);
  for (let i = 1; i < STOPS.length; i++) {
    const [t1, c1] = STOPS[i];
    const [t0, c0] = STOPS[i - 1];
    if (t <= t1) {
      const f = (t - t0) / (t1 - t0);
      const c = c0.map((v, j) => Math.round(v + f * (c1[j] - v)));
      return `rgb(${c[0]}, ${c[1]}, ${c[2]})`;
    }
  }
  const c = STOPS[STOPS.length - 1][1];
  return `rgb(${c[0]}, ${c[1]}, ${c[2]})`;
}

function el(name, attrs, parent) {
  const e = document.createElementNS(SVGNS, name);
  for (const [k, v] of Object.entries(attrs || {})) e.setAttribute(k, String(v));
  if (parent) parent.appendChild(e);
  return e;
}

function html(tag, text, parent, attrs) {
  const e = document.createElement(tag);
  if (text !== undefined && text !== null) e.textContent = text;
  for (const [k, v] of Object.entries(attrs || {})) e.setAttribute(k, String(v));
  if (parent) parent.appendChild(e);
  return e;
}

function fmtForce(v) {
  if (v === null || v === undefined) return '–';
  return (v / 1000).toFixed(2) + ' kN';
}
function fmtNum(v, d) {
  if (v === null || v === undefined) return '–';
  return Number(v).toFixed(d);
}
function fmtP(v) {
  if (v === null || v === undefined) return '–';
  return v < 1e-3 ? v.toExponential(2) : v.toFixed(3);
}
function fmtSize(v, unit) {
  if (v === null || v === undefined) return '–';
  if (unit === 'N') return fmtForce(v);
  return Number(v).toPrecision(3) + (unit && unit !== '1' ? ' ' + unit : '');
}
function fmtTime(s) {
  return s ? s.replace('T', ' ').replace(/(\.\d{1,3})\d*/, '$1') : '–';
}

async function getJSON(url) {
  const r = await fetch(url, { cache: 'no-store' });
  let body;
  try { body = await r.json(); } catch (e) { body = { error: r.status + ' ' + r.statusText }; }
  if (!r.ok) throw new Error(body.error || (r.status + ' ' + r.statusText));
  return body;
}

function api(path) {
  return '/api/structures/' + encodeURIComponent(app.structure) + path;
}

// ---- projection ---------------------------------------------------------

// project maps a node to screen coordinates (x right, y up) in metres: the
// plane truss as it is, a space truss by an orthographic view turned by yaw
// about the vertical z axis and tilted by pitch.
function project(nd, dim) {
  if (dim !== 3) return { x: nd.x, y: nd.y, depth: 0 };
  const { yaw, pitch } = app.view;
  const x1 = nd.x * Math.cos(yaw) - nd.y * Math.sin(yaw);
  const y1 = nd.x * Math.sin(yaw) + nd.y * Math.cos(yaw);
  const z1 = nd.z;
  return {
    x: x1,
    y: z1 * Math.cos(pitch) + y1 * Math.sin(pitch),
    depth: y1 * Math.cos(pitch) - z1 * Math.sin(pitch),
  };
}

function niceLength(target) {
  const p = Math.pow(10, Math.floor(Math.log10(target)));
  for (const m of [1, 2, 5, 10]) if (m * p >= target) return m * p;
  return 10 * p;
}

// boxesOverlap reports whether two axis-aligned boxes {x, y, w, h} overlap.
function boxesOverlap(a, b) {
  return a.x < b.x + b.w && b.x < a.x + a.w && a.y < b.y + b.h && b.y < a.y + a.h;
}

// placeLabel finds a place for a member label: along the member at the
// positions nearest its middle first, on the line or to either side, the
// first whose box overlaps no box already taken and stays inside the
// drawing. It returns the box or null when every place is taken.
function placeLabel(text, a, b, taken, W, H) {
  const w = text.length * 0.62 * LABEL_PX + 4, h = LABEL_PX + 2;
  const len = Math.hypot(b.x - a.x, b.y - a.y) || 1;
  const nx = -(b.y - a.y) / len, ny = (b.x - a.x) / len;
  for (const t of [0.5, 0.4, 0.6, 0.3, 0.7, 0.22, 0.78]) {
    for (const off of [0, 9, -9, 15, -15]) {
      const cx = a.x + t * (b.x - a.x) + off * nx, cy = a.y + t * (b.y - a.y) + off * ny;
      const box = { x: cx - w / 2, y: cy - h / 2, w, h };
      if (box.x < 0 || box.y < 0 || box.x + w > W || box.y + h > H) continue;
      if (!taken.some((o) => boxesOverlap(box, o))) return box;
    }
  }
  return null;
}

// screenDir is the on-screen direction (x right, y down) of a global
// direction vector d, and its length (short when d points at the viewer).
function screenDir(d, dim) {
  const o = project({ x: 0, y: 0, z: 0 }, dim), p = project({ x: d[0], y: d[1], z: d[2] }, dim);
  const sx = p.x - o.x, sy = -(p.y - o.y);
  const l = Math.hypot(sx, sy);
  return { x: l ? sx / l : 0, y: l ? sy / l : 0, len: l };
}

// drawSupport draws one support with our own symbols at screen point p:
// a vertical restraint as a triangle below the node (hatched ground for a
// pin, two wheels for a roller free along the ground), a horizontal-only
// restraint as a triangle beside it, a spring as a zigzag to a wall.
function drawSupport(sp, p, dim, parent, taken, rightHalf) {
  const up = dim === 3 ? 2 : 1;
  const vert = sp.fixed.includes('xyz'[up]);
  const horiz = sp.fixed.some((a) => a !== 'xyz'[up]);
  const g = el('g', { 'data-support': sp.node, stroke: INK, 'stroke-width': 1.4, fill: 'none' }, parent);
  let kind;
  if (vert) {
    kind = horiz ? 'pin' : 'roller';
    el('polygon', { points: `${p.x},${p.y + 4} ${p.x - 8},${p.y + 16} ${p.x + 8},${p.y + 16}`, fill: '#ffffff' }, g);
    let ground = p.y + 16;
    if (!horiz) {
      for (const dx of [-4, 4]) el('circle', { cx: p.x + dx, cy: p.y + 19, r: 2.6 }, g);
      ground = p.y + 22;
    }
    el('line', { x1: p.x - 12, y1: ground, x2: p.x + 12, y2: ground }, g);
    if (horiz) for (let i = -2; i <= 2; i++) el('line', { x1: p.x + 5 * i, y1: ground, x2: p.x + 5 * i - 4, y2: ground + 5 }, g);
    taken.push({ x: p.x - 13, y: p.y + 2, w: 26, h: ground + 6 - p.y - 2 });
  } else if (horiz) {
    kind = 'side';
    const s = rightHalf ? 1 : -1;
    el('polygon', { points: `${p.x + 4 * s},${p.y} ${p.x + 16 * s},${p.y - 8} ${p.x + 16 * s},${p.y + 8}`, fill: '#ffffff' }, g);
    el('line', { x1: p.x + 16 * s, y1: p.y - 12, x2: p.x + 16 * s, y2: p.y + 12 }, g);
    taken.push({ x: Math.min(p.x, p.x + 18 * s), y: p.y - 12, w: 18, h: 24 });
  }
  if (sp.inclined) kind = (kind || '') + ' inclined';
  for (const ax of sp.spring) {
    const d = screenDir([ax === 'x' ? 1 : 0, ax === 'y' ? 1 : 0, ax === 'z' ? 1 : 0], dim);
    if (d.len < 0.2) continue;
    const s = rightHalf ? 1 : -1;
    const ux = d.x * s, uy = d.y * s, vx = -uy, vy = ux;
    let pts = `${p.x + 5 * ux},${p.y + 5 * uy}`;
    for (let i = 1; i <= 6; i++) {
      const along = 5 + 3.5 * i, side = i === 6 ? 0 : (i % 2 ? 4 : -4);
      pts += ` ${p.x + along * ux + side * vx},${p.y + along * uy + side * vy}`;
    }
    el('polyline', { points: pts, 'data-spring': ax }, g);
    const e = 5 + 3.5 * 6;
    el('line', { x1: p.x + e * ux - 7 * vx, y1: p.y + e * uy - 7 * vy, x2: p.x + e * ux + 7 * vx, y2: p.y + e * uy + 7 * vy }, g);
    taken.push({ x: Math.min(p.x, p.x + (e + 2) * ux) - 8, y: Math.min(p.y, p.y + (e + 2) * uy) - 8, w: Math.abs((e + 2) * ux) + 16, h: Math.abs((e + 2) * uy) + 16 });
    kind = (kind ? kind + '+' : '') + 'spring';
  }
  g.setAttribute('data-kind', kind || 'none');
  const t = el('title', {}, g);
  t.textContent = `support ${sp.node}: fixed ${sp.fixed.join(' ') || '–'}` + (sp.spring.length ? `, spring ${sp.spring.join(' ')}` : '') + (sp.inclined ? ', inclined roller' : '');
}

// drawLoads draws one arrow per loaded node and direction (the patterns
// acting there in its title). The arrow ends at the node; when that would
// run along a member it hangs from the node on the other side instead.
// Loads straight into a fixed support direction are left out.
function drawLoadArrows(g, P, dim, parent, taken, memberDirs) {
  const byKey = new Map();
  const sup = new Map(g.supports.map((s) => [s.node, s]));
  for (const l of g.loads) {
    const key = l.node + ' ' + l.direction.map((v) => v.toFixed(3)).join(',');
    if (!byKey.has(key)) byKey.set(key, { node: l.node, dir: l.direction, patterns: [], unknown: false });
    const e = byKey.get(key);
    e.patterns.push(l.pattern);
    e.unknown = e.unknown || l.unknown;
  }
  const grp = el('g', { id: 'loads', 'pointer-events': 'none' }, parent);
  for (const e of byKey.values()) {
    const s = sup.get(e.node);
    if (s) {
      const k = e.dir.findIndex((v) => Math.abs(v) > 0.999);
      if (k >= 0 && s.fixed.includes('xyz'[k])) continue;
    }
    const d = screenDir(e.dir, dim);
    if (d.len < 0.2) continue;
    const p = P.get(e.node);
    const along = (memberDirs.get(e.node) || []).some((m) => m.x * d.x + m.y * d.y < -0.96);
    const L = 26;
    let tip, tail;
    if (!along) { tip = { x: p.x - 5 * d.x, y: p.y - 5 * d.y }; tail = { x: tip.x - L * d.x, y: tip.y - L * d.y }; }
    else { tail = { x: p.x + 5 * d.x, y: p.y + 5 * d.y }; tip = { x: tail.x + L * d.x, y: tail.y + L * d.y }; }
    const a = el('g', { 'data-load': e.node, 'data-unknown': String(e.unknown) }, grp);
    el('line', { x1: tail.x, y1: tail.y, x2: tip.x - 6 * d.x, y2: tip.y - 6 * d.y, stroke: LOAD_COLOUR, 'stroke-width': 1.6, 'stroke-dasharray': e.unknown ? '4 2' : '' }, a);
    const vx = -d.y, vy = d.x;
    el('polygon', { points: `${tip.x},${tip.y} ${tip.x - 8 * d.x + 3.5 * vx},${tip.y - 8 * d.y + 3.5 * vy} ${tip.x - 8 * d.x - 3.5 * vx},${tip.y - 8 * d.y - 3.5 * vy}`, fill: LOAD_COLOUR }, a);
    el('title', {}, a).textContent = `load at ${e.node}: ${e.patterns.join(', ')}` + (e.unknown ? ' (magnitude estimated from the gauges)' : '');
    taken.push({ x: Math.min(tip.x, tail.x) - 4, y: Math.min(tip.y, tail.y) - 4, w: Math.abs(tip.x - tail.x) + 8, h: Math.abs(tip.y - tail.y) + 8 });
  }
}

// drawAxisMarker draws the global axes as seen in the current view in the
// lower right corner.
function drawAxisMarker(dim, parent, W, H) {
  const o = { x: W - 46, y: H - 26 };
  const g = el('g', { id: 'axis-marker', 'font-size': 11, fill: INK }, parent);
  const axes = dim === 3 ? ['x', 'y', 'z'] : ['x', 'y'];
  for (const a of axes) {
    const d = screenDir([a === 'x' ? 1 : 0, a === 'y' ? 1 : 0, a === 'z' ? 1 : 0], dim);
    const L = 24 * d.len;
    el('line', { x1: o.x, y1: o.y, x2: o.x + L * d.x, y2: o.y + L * d.y, stroke: INK, 'stroke-width': 1.4, 'data-axis': a }, g);
    const t = el('text', { x: o.x + (L + 7) * d.x, y: o.y + (L + 7) * d.y + 4, 'text-anchor': 'middle' }, g);
    t.textContent = a;
  }
  el('circle', { cx: o.x, cy: o.y, r: 2, fill: INK }, g);
}

// drawTruss rebuilds the drawing from the geometry and the current view.
// The drawing is laid out in screen pixels: the truss is scaled to fill the
// panel's width, and a plane truss's panel takes the height its aspect
// needs (within limits), so a long low truss is not a thin strip.
function drawTruss() {
  const st = app.state;
  const svg = document.getElementById('truss');
  svg.replaceChildren();
  if (!st) return;
  const g = st.geometry;
  const dim = g.dimension;
  document.getElementById('view-controls').hidden = dim !== 3;
  const pos = new Map();
  for (const nd of g.nodes) pos.set(nd.id, project(nd, dim));
  let minX = Infinity, maxX = -Infinity, minY = Infinity, maxY = -Infinity;
  for (const p of pos.values()) {
    minX = Math.min(minX, p.x); maxX = Math.max(maxX, p.x);
    minY = Math.min(minY, p.y); maxY = Math.max(maxY, p.y);
  }
  if (!isFinite(minX)) return;
  const W = Math.max(svg.clientWidth || 0, 320);
  const pad = 44, foot = 40; // room for symbols, labels and the scale bar
  const bw = Math.max(maxX - minX, 1e-3), bh = Math.max(maxY - minY, 1e-3);
  let H = 460;
  if (dim !== 3) H = Math.round(Math.min(Math.max(bh * (W - 2 * pad) / bw + 2 * pad + foot, 240), 560));
  const scale = Math.min((W - 2 * pad) / bw, (H - 2 * pad - foot) / bh);
  const ox = (W - bw * scale) / 2, oy = pad + ((H - 2 * pad - foot) - bh * scale) / 2;
  const P = new Map();
  for (const [id, p] of pos) P.set(id, { x: ox + (p.x - minX) * scale, y: oy + (maxY - p.y) * scale, depth: p.depth });
  svg.style.height = H + 'px';
  svg.setAttribute('viewBox', `0 0 ${W} ${H}`);
  svg.dataset.dimension = String(dim);
  svg.dataset.fill = ((bw * scale) / (W - 2 * pad)).toFixed(3) + ' ' + ((bh * scale) / (H - 2 * pad - foot)).toFixed(3);

  const halos = el('g', { id: 'alarm-halos', 'pointer-events': 'none' }, svg);
  const members = el('g', { id: 'members' }, svg);
  const hits = el('g', { id: 'member-hits' }, svg);
  const marks = el('g', { id: 'member-marks', 'pointer-events': 'none' }, svg);
  const order = g.members.slice();
  if (dim === 3) {
    const depth = (m) => (P.get(m.start).depth + P.get(m.end).depth) / 2;
    order.sort((a, b) => depth(b) - depth(a)); // far members first
  }
  const taken = [];
  const memberDirs = new Map();
  const addDir = (n, from, to) => {
    const l = Math.hypot(to.x - from.x, to.y - from.y) || 1;
    if (!memberDirs.has(n)) memberDirs.set(n, []);
    memberDirs.get(n).push({ x: (to.x - from.x) / l, y: (to.y - from.y) / l });
  };
  for (const m of order) {
    const a = P.get(m.start), b = P.get(m.end);
    if (!a || !b) continue;
    addDir(m.start, a, b); addDir(m.end, b, a);
    const coords = { x1: a.x, y1: a.y, x2: b.x, y2: b.y };
    el('line', Object.assign({ 'data-halo': m.id, stroke: ALARM_HALO, 'stroke-width': 12, 'stroke-linecap': 'round', visibility: 'hidden' }, coords), halos);
    el('line', Object.assign({ 'data-member': m.id, 'stroke-linecap': 'round' }, coords), members);
    const hit = el('line', Object.assign({ 'data-hit': m.id, stroke: 'transparent', 'stroke-width': 14 }, coords), hits);
    el('title', {}, hit).textContent = m.id + (m.gauge_or_stiffness ? ' (gauge fault and stiffness change cannot be told apart)' : '');
    const mx = (a.x + b.x) / 2, my = (a.y + b.y) / 2;
    // alarm marker (shown by paintMembers): a ring at mid-member
    el('circle', { 'data-alarm-mark': m.id, cx: mx, cy: my, r: 7, fill: '#ffffff', stroke: ALARM_CORE, 'stroke-width': 3, visibility: 'hidden' }, marks);
    if (m.gauge_or_stiffness) {
      const q = { x: a.x + 0.5 * (b.x - a.x), y: a.y + 0.5 * (b.y - a.y) };
      el('polygon', { 'data-tied': m.id, points: `${q.x},${q.y - 6} ${q.x + 6},${q.y} ${q.x},${q.y + 6} ${q.x - 6},${q.y}`, fill: '#ffffff', stroke: INK, 'stroke-width': 1.4 }, marks);
    }
    taken.push({ x: mx - 7, y: my - 7, w: 14, h: 14 }); // the marker's place
  }
  const nodes = el('g', { id: 'nodes', 'pointer-events': 'none' }, svg);
  for (const nd of g.nodes) {
    const p = P.get(nd.id);
    el('circle', { 'data-node': nd.id, cx: p.x, cy: p.y, r: 3, fill: INK }, nodes);
    taken.push({ x: p.x - 4, y: p.y - 4, w: 8, h: 8 });
  }
  const sups = el('g', { id: 'supports', 'pointer-events': 'none' }, svg);
  const midX = (minX + maxX) / 2;
  for (const sp of g.supports || []) {
    const p = P.get(sp.node);
    if (p) drawSupport(sp, p, dim, sups, taken, pos.get(sp.node).x > midX);
  }
  drawLoadArrows(g, P, dim, svg, taken, memberDirs);
  // member labels, placed without overlap (plane trusses and small space trusses)
  const labels = el('g', { id: 'member-labels', 'pointer-events': 'none', 'font-size': LABEL_PX }, svg);
  if (g.members.length <= 80) {
    const placed = [];
    for (const m of g.members) {
      const a = P.get(m.start), b = P.get(m.end);
      if (!a || !b) continue;
      const box = placeLabel(m.id, a, b, taken.concat(placed), W, H);
      if (!box) { labels.setAttribute('data-unplaced', (labels.getAttribute('data-unplaced') || '') + m.id + ' '); continue; }
      placed.push(box);
      const tx = el('text', { 'data-label': m.id, x: box.x + box.w / 2, y: box.y + box.h - 3, 'text-anchor': 'middle', fill: '#33404b', stroke: '#ffffff', 'stroke-width': 3, 'paint-order': 'stroke' }, labels);
      tx.textContent = m.id;
    }
  }
  // scale bar (lengths in the view plane are true lengths)
  const Lm = niceLength(bw / 5);
  const y0 = H - 16, x0 = 16;
  const bar = el('g', { id: 'scale-bar' }, svg);
  el('line', { x1: x0, y1: y0, x2: x0 + Lm * scale, y2: y0, stroke: INK, 'stroke-width': 2 }, bar);
  for (const x of [x0, x0 + Lm * scale]) el('line', { x1: x, y1: y0 - 5, x2: x, y2: y0 + 5, stroke: INK, 'stroke-width': 2 }, bar);
  const lt = el('text', { x: x0 + Lm * scale + 8, y: y0 + 4, 'font-size': 12, fill: INK }, bar);
  lt.textContent = Lm + ' m' + (dim === 3 ? ' (in the view plane)' : '');
  drawAxisMarker(dim, svg, W, H);
  paintMembers();
}

// memberState says how a member is drawn: ungauged, unchecked, alarm or ok.
function memberState(m, res) {
  if (!m.gauged) return 'ungauged';
  if (!res || !res.checkable || res.w === null) return 'unchecked';
  return res.alarm ? 'alarm' : 'ok';
}

// paintMembers updates colours and states in place after each poll.
function paintMembers() {
  const st = app.state;
  if (!st) return;
  const k = st.critical_value || 3.29;
  const res = new Map(st.gauged.map((r) => [r.id, r]));
  const byID = new Map(st.geometry.members.map((m) => [m.id, m]));
  for (const line of document.querySelectorAll('#truss line[data-member]')) {
    const id = line.getAttribute('data-member');
    if (paintUtilisation(line, id)) continue; // state.js
    const m = byID.get(id);
    const r = res.get(id);
    const s = memberState(m, r);
    line.setAttribute('data-state', s);
    line.removeAttribute('stroke-dasharray');
    let colour, width;
    if (s === 'ungauged') { colour = COLOUR_UNGAUGED; width = 1.5; }
    else if (s === 'unchecked') { colour = COLOUR_UNCHECKED; width = 3.5; line.setAttribute('stroke-dasharray', '7 5'); }
    else if (s === 'alarm') { colour = ALARM_CORE; width = 6; }
    else { colour = colourFor(r.w, k); width = 4.5; }
    line.setAttribute('stroke', colour);
    line.setAttribute('stroke-width', id === app.selected ? width + 2 : width);
    line.setAttribute('data-selected', id === app.selected ? 'true' : 'false');
    line.setAttribute('data-w', r && r.w !== null ? r.w.toFixed(3) : '');
    const vis = s === 'alarm' ? 'visible' : 'hidden';
    const halo = document.querySelector(`#truss line[data-halo="${CSS.escape(id)}"]`);
    if (halo) halo.setAttribute('visibility', vis);
    const mark = document.querySelector(`#truss circle[data-alarm-mark="${CSS.escape(id)}"]`);
    if (mark) mark.setAttribute('visibility', vis);
  }
}

function drawLegend(k) {
  const svg = document.getElementById('legend');
  if (drawUtilisationLegend(svg)) return; // state.js
  svg.replaceChildren();
  const defs = el('defs', {}, svg);
  const grad = el('linearGradient', { id: 'w-scale', x1: 0, x2: 1, y1: 0, y2: 0 }, defs);
  for (let i = 0; i <= 20; i++) el('stop', { offset: i / 20, 'stop-color': colourFor(i / 20 * k, k) }, grad);
  el('rect', { x: 10, y: 8, width: 300, height: 14, fill: 'url(#w-scale)', stroke: '#66727d', 'stroke-width': 0.5 }, svg);
  const ticks = [[0, '0'], [0.5, (k / 2).toFixed(2)], [1, '≥ ' + k.toFixed(2) + ' (critical)']];
  for (const [f, label] of ticks) {
    el('line', { x1: 10 + 300 * f, y1: 22, x2: 10 + 300 * f, y2: 27, stroke: '#66727d' }, svg);
    const t = el('text', { x: 10 + 300 * f, y: 39, 'font-size': 11, 'text-anchor': f === 0 ? 'start' : f === 1 ? 'end' : 'middle', fill: '#1d2a35' }, svg);
    t.textContent = label;
  }
  const cap = el('text', { x: 10, y: 56, 'font-size': 11, fill: '#66727d' }, svg);
  cap.textContent = '|w|, Baarda\'s normalised residual (elevated, no alarm)';
  const item = (y, draw, text, id) => {
    const g = el('g', { 'data-legend': id }, svg);
    draw(g, y);
    const t = el('text', { x: 408, y: y + 4, 'font-size': 11, fill: '#1d2a35' }, g);
    t.textContent = text;
  };
  item(15, (g, y) => el('line', { x1: 360, y1: y, x2: 400, y2: y, stroke: COLOUR_UNGAUGED, 'stroke-width': 1.5 }, g), 'no gauge', 'ungauged');
  item(35, (g, y) => el('line', { x1: 360, y1: y, x2: 400, y2: y, stroke: COLOUR_UNCHECKED, 'stroke-width': 3.5, 'stroke-dasharray': '7 5' }, g), 'gauged, redundancy ≈ 0: cannot be checked', 'unchecked');
  item(55, (g, y) => {
    el('line', { x1: 360, y1: y, x2: 400, y2: y, stroke: ALARM_HALO, 'stroke-width': 12, 'stroke-linecap': 'round' }, g);
    el('line', { x1: 360, y1: y, x2: 400, y2: y, stroke: ALARM_CORE, 'stroke-width': 6, 'stroke-linecap': 'round' }, g);
    el('circle', { cx: 380, cy: y, r: 7, fill: '#ffffff', stroke: ALARM_CORE, 'stroke-width': 3 }, g);
  }, 'alarm active', 'alarm');
  item(77, (g, y) => el('polygon', { points: `380,${y - 6} 386,${y} 380,${y + 6} 374,${y}`, fill: '#ffffff', stroke: INK, 'stroke-width': 1.4 }, g), 'gauge fault and stiffness change cannot be told apart', 'tied');
  const sym = el('g', { 'data-legend': 'symbols', stroke: INK, 'stroke-width': 1.4, fill: 'none' }, svg);
  el('polygon', { points: '20,70 13,82 27,82', fill: '#ffffff' }, sym);
  el('line', { x1: 9, y1: 82, x2: 31, y2: 82 }, sym);
  el('polygon', { points: '100,70 93,82 107,82', fill: '#ffffff' }, sym);
  for (const dx of [-4, 4]) el('circle', { cx: 100 + dx, cy: 85, r: 2.6 }, sym);
  el('polyline', { points: '170,78 174,74 178,82 182,74 186,82 190,78' }, sym);
  el('line', { x1: 190, y1: 71, x2: 190, y2: 85 }, sym);
  el('line', { x1: 250, y1: 68, x2: 250, y2: 80, stroke: LOAD_COLOUR, 'stroke-width': 1.6 }, sym);
  el('polygon', { points: '250,88 246.5,80 253.5,80', fill: LOAD_COLOUR, stroke: 'none' }, sym);
  const labs = el('g', { 'font-size': 11, fill: '#1d2a35' }, svg);
  for (const [x, text] of [[34, 'pin'], [112, 'roller'], [196, 'spring'], [258, 'load']]) {
    const t = el('text', { x, y: 84 }, labs);
    t.textContent = text;
  }
}

// ---- panels ---------------------------------------------------------------

function rows(tbody, list) {
  tbody.replaceChildren();
  for (const [k, v] of list) {
    const tr = html('tr', null, tbody);
    html('th', k, tr);
    html('td', v, tr, { class: 'num' });
  }
}

function drawFit() {
  const f = app.state.fit;
  const status = document.getElementById('fit-status');
  const hasEpoch = !!app.state.epoch;
  status.dataset.rejected = String(hasEpoch && f.rejected);
  status.textContent = !hasEpoch ? 'no epoch reconciled yet'
    : f.rejected ? 'model rejected by the chi-square test' : 'model accepted by the chi-square test';
  rows(document.querySelector('#fit tbody'), [
    ['chi-square T', fmtNum(f.chi_square, 2)],
    ['degrees of freedom', String(f.dof)],
    ['p-value', fmtP(f.p_value)],
    ['alpha', fmtP(f.alpha)],
    ['critical |w| (k)', fmtNum(app.state.critical_value, 2)],
  ]);
}

// shiftText words an unknown load flagged when an alarm rose.
function shiftText(l) {
  return `unknown load ${l.pattern} left its recent distribution when the alarm rose: ${fmtSize(l.value, l.unit)} against ` +
    `${fmtSize(l.recent_mean, l.unit)} ± ${fmtSize(l.recent_std_dev, l.unit)} (z = ${fmtNum(l.z, 1)}); it may be absorbing the fault`;
}

function drawAlarms() {
  const box = document.getElementById('alarms');
  box.replaceChildren();
  const list = app.state.alarms || [];
  if (!list.length) {
    html('p', 'none', box);
    return;
  }
  for (const a of list) {
    const div = html('div', null, box, { class: 'alarm', 'data-rule': a.rule, 'data-subject': a.subject });
    const asOf = a.causes_at && a.causes_at !== a.fired_at ? `sizes as of ${fmtTime(a.causes_at)}` : 'sizes as of the raise';
    html('h3', `${a.rule}${a.subject ? ' ' + a.subject : ''}`, div);
    html('p', `raised ${fmtTime(a.fired_at)} UTC (condition since ${fmtTime(a.since)}); ${asOf}`, div, { class: 'note' });
    if (a.causes.length) {
      const ol = html('ol', null, div);
      for (const c of a.causes) html('li', c.text, ol, { 'data-group': c.group || 0 });
    }
    for (const l of a.load_shifts) html('p', shiftText(l), div, { class: 'load-shift', 'data-pattern': l.pattern });
  }
}

function drawAdapted() {
  const box = document.getElementById('adapted');
  const a = app.state.adapted;
  box.hidden = !a;
  if (!a) return;
  rows(document.querySelector('#adapted-fit tbody'), [
    ...a.hypotheses.map((h) => ['carried: ' + h.kind.replace(/_/g, ' ') + ' ' + h.subject, fmtSize(h.size, h.unit) + ' ± ' + fmtSize(h.std, h.unit)]),
    ['chi-square T', fmtNum(a.chi_square, 2)],
    ['degrees of freedom', String(a.dof)],
    ['p-value', fmtP(a.p_value)],
    ['verdict', a.rejected ? 'rejected: a further cause may be present' : 'accepted'],
  ]);
}

function drawLoads() {
  const tbody = document.querySelector('#loads tbody');
  tbody.replaceChildren();
  if (!app.state.loads.length) {
    const tr = html('tr', null, tbody);
    html('td', 'none estimated in this epoch', tr, { colspan: 4 });
  }
  for (const l of app.state.loads) {
    const tr = html('tr', null, tbody, { 'data-pattern': l.pattern });
    html('td', l.pattern, tr);
    html('td', fmtSize(l.value, l.unit), tr, { class: 'num' });
    html('td', fmtSize(l.std_dev, l.unit), tr, { class: 'num' });
    html('td', fmtNum(l.factor, 4) + ' ± ' + fmtNum(l.factor_std_dev, 4), tr, { class: 'num' });
  }
}

function drawMemberDetail() {
  const id = app.selected;
  const tbody = document.querySelector('#member-detail tbody');
  tbody.replaceChildren();
  if (!id || !app.state) return;
  const m = app.state.geometry.members.find((x) => x.id === id);
  document.getElementById('member-title').textContent = 'Member ' + id;
  document.getElementById('member-hint').textContent = m ? `from node ${m.start} to node ${m.end}` : '';
  if (!m) return;
  if (!m.gauged) {
    rows(tbody, [['gauge', 'none: this member is not measured'], ...memberTotalRows(id)]);
    return;
  }
  const r = app.state.gauged.find((x) => x.id === id);
  if (!r) { rows(tbody, [['latest epoch', 'no result']]); return; }
  rows(tbody, [
    ['state', memberState(m, r)],
    ...memberTotalRows(id), // state.js
    ['measured (change since zeroing)', fmtForce(r.measured_n)],
    ['predicted (change since zeroing)', fmtForce(r.predicted_n)],
    ['acceptance band', fmtForce(r.band_low_n) + ' … ' + fmtForce(r.band_high_n)],
    ...(r.w_nominal === null ? [['w', fmtNum(r.w, 2)]]
      : [['w (adapted fit)', fmtNum(r.w, 2)], ['w (nominal fit)', fmtNum(r.w_nominal, 2)]]),
    ['redundancy r', fmtNum(r.redundancy, 3)],
    ['MDB', fmtForce(r.mdb_n)],
  ]);
}

function niceTicks(lo, hi, n) {
  const step0 = (hi - lo) / n;
  const p = Math.pow(10, Math.floor(Math.log10(step0)));
  let step = p;
  for (const m of [1, 2, 5, 10]) { if (m * p >= step0) { step = m * p; break; } }
  const out = [];
  for (let v = Math.ceil(lo / step) * step; v <= hi + 1e-9 * step; v += step) out.push(v);
  return out;
}

// drawSeries draws measured and predicted force with the acceptance band.
function drawSeries(ser) {
  const svg = document.getElementById('series-chart');
  svg.replaceChildren();
  svg.setAttribute('data-member', ser ? ser.member : '');
  svg.setAttribute('data-points', ser ? ser.points.length : 0);
  const note = document.getElementById('series-note');
  if (!ser) { note.textContent = ''; return; }
  const W = 640, H = 280, L = 62, R = 12, T = 14, B = 44;
  const pts = ser.points.filter((p) => p.measured_n !== null || p.predicted_n !== null);
  if (!pts.length) {
    const t = el('text', { x: W / 2, y: H / 2, 'text-anchor': 'middle', 'font-size': 13, fill: '#66727d' }, svg);
    t.textContent = 'no epochs in this period';
    note.textContent = '';
    return;
  }
  const ts = pts.map((p) => Date.parse(p.time));
  let t0 = Math.min(...ts), t1 = Math.max(...ts);
  if (t1 === t0) { t0 -= 1000; t1 += 1000; }
  let lo = Infinity, hi = -Infinity;
  for (const p of pts) for (const v of [p.measured_n, p.predicted_n, p.band_low_n, p.band_high_n]) {
    if (v !== null) { lo = Math.min(lo, v); hi = Math.max(hi, v); }
  }
  if (hi === lo) { lo -= 1; hi += 1; }
  const m = 0.06 * (hi - lo); lo -= m; hi += m;
  const X = (t) => L + (W - L - R) * (t - t0) / (t1 - t0);
  const Y = (v) => T + (H - T - B) * (hi - v) / (hi - lo);
  const axes = el('g', { id: 'series-axes', 'font-size': 11, fill: '#44505b' }, svg);
  for (const v of niceTicks(lo, hi, 5)) {
    el('line', { x1: L, x2: W - R, y1: Y(v), y2: Y(v), stroke: '#e3e7ea' }, axes);
    const tx = el('text', { x: L - 6, y: Y(v) + 4, 'text-anchor': 'end' }, axes);
    tx.textContent = (v / 1000).toFixed(Math.abs(hi - lo) < 5000 ? 2 : 1);
  }
  const yl = el('text', { x: 14, y: T + (H - T - B) / 2, transform: `rotate(-90 14 ${T + (H - T - B) / 2})`, 'text-anchor': 'middle' }, axes);
  yl.textContent = 'change since zeroing (kN, tension +)';
  for (const f of [0, 0.5, 1]) {
    const t = t0 + f * (t1 - t0);
    const tx = el('text', { x: X(t), y: H - B + 16, 'text-anchor': f === 0 ? 'start' : f === 1 ? 'end' : 'middle' }, axes);
    tx.textContent = new Date(t).toISOString().slice(11, 19);
  }
  el('line', { x1: L, x2: L, y1: T, y2: H - B, stroke: '#66727d' }, axes);
  el('line', { x1: L, x2: W - R, y1: H - B, y2: H - B, stroke: '#66727d' }, axes);
  // band polygon
  const bp = pts.filter((p) => p.band_low_n !== null && p.band_high_n !== null);
  if (bp.length) {
    const up = bp.map((p) => `${X(Date.parse(p.time)).toFixed(1)},${Y(p.band_high_n).toFixed(1)}`);
    const dn = bp.slice().reverse().map((p) => `${X(Date.parse(p.time)).toFixed(1)},${Y(p.band_low_n).toFixed(1)}`);
    el('polygon', { id: 'series-band', points: up.concat(dn).join(' '), fill: 'rgba(120,144,166,0.25)', stroke: 'none' }, svg);
  }
  const path = (key) => {
    let d = '', pen = false;
    for (const p of pts) {
      if (p[key] === null) { pen = false; continue; }
      d += (pen ? 'L' : 'M') + X(Date.parse(p.time)).toFixed(1) + ',' + Y(p[key]).toFixed(1);
      pen = true;
    }
    return d;
  };
  el('path', { id: 'series-predicted', d: path('predicted_n'), fill: 'none', stroke: '#3d5a73', 'stroke-width': 1.6, 'stroke-dasharray': '5 3' }, svg);
  el('path', { id: 'series-measured', d: path('measured_n'), fill: 'none', stroke: '#1d2a35', 'stroke-width': 1.6 }, svg);
  // alarm strip
  const strip = el('g', { id: 'series-alarms' }, svg);
  for (let i = 0; i < pts.length; i++) {
    if (!pts[i].alarm) continue;
    const xa = X(ts[i]);
    const xb = i + 1 < pts.length ? X(ts[i + 1]) : xa + 2;
    el('rect', { x: xa, y: H - B + 22, width: Math.max(xb - xa, 2), height: 6, fill: ALARM_CORE }, strip);
  }
  const lg = el('g', { 'font-size': 11, fill: '#1d2a35' }, svg);
  el('line', { x1: L + 8, x2: L + 30, y1: H - 6, y2: H - 6, stroke: '#1d2a35', 'stroke-width': 1.6 }, lg);
  el('text', { x: L + 34, y: H - 2 }, lg).textContent = 'measured';
  el('line', { x1: L + 100, x2: L + 122, y1: H - 6, y2: H - 6, stroke: '#3d5a73', 'stroke-width': 1.6, 'stroke-dasharray': '5 3' }, lg);
  el('text', { x: L + 126, y: H - 2 }, lg).textContent = 'predicted';
  el('rect', { x: L + 196, y: H - 11, width: 22, height: 10, fill: 'rgba(120,144,166,0.25)' }, lg);
  el('text', { x: L + 222, y: H - 2 }, lg).textContent = `band ± ${fmtNum(ser.critical_value, 2)} σ of residual`;
  el('rect', { x: L + 420, y: H - 9, width: 22, height: 6, fill: ALARM_CORE }, lg);
  el('text', { x: L + 446, y: H - 2 }, lg).textContent = 'alarm active';
  note.textContent = ser.total_points > ser.points.length
    ? `${ser.points.length} of ${ser.total_points} epochs shown (largest |w| per bucket).`
    : `${ser.points.length} epochs.`;
}

function drawEvents(evs) {
  const tbody = document.querySelector('#events tbody');
  tbody.replaceChildren();
  if (!evs.length) {
    const tr = html('tr', null, tbody);
    html('td', 'no events in the last 24 hours', tr, { colspan: 7 });
    return;
  }
  for (const e of evs.slice().reverse()) {
    const tr = html('tr', null, tbody, { 'data-kind': e.kind, 'data-subject': e.subject });
    html('td', fmtTime(e.time), tr);
    html('td', e.kind, tr);
    html('td', e.rule, tr);
    html('td', e.subject, tr);
    html('td', fmtNum(e.w, 2), tr, { class: 'num' });
    html('td', fmtSize(e.size, e.size_unit), tr, { class: 'num' });
    const td = html('td', null, tr);
    if (e.message) html('div', e.message, td);
    if (e.causes.length) {
      if (e.causes_at && e.causes_at !== e.time) html('div', `sizes over the fault's epochs, as of ${fmtTime(e.causes_at)} UTC`, td, { class: 'note' });
      const ol = html('ol', null, td);
      // The service sends the top three causes, or the whole first group
      // (its causes cannot be told apart by the gauges: shown with their
      // group number, in no order of likelihood), each with its wording.
      for (const c of e.causes) html('li', c.text, ol);
    }
    for (const l of e.load_shifts) html('div', shiftText(l), td, { class: 'load-shift' });
  }
}

// ---- polling ----------------------------------------------------------------

function epochMs() {
  return app.state && app.state.epoch ? Date.parse(app.state.epoch) : Date.now();
}

async function loadSeries() {
  if (!app.selected || !app.state) { drawSeries(null); return; }
  const m = app.state.geometry.members.find((x) => x.id === app.selected);
  if (!m || !m.gauged) { drawSeries(null); return; }
  const to = new Date(epochMs() + 1).toISOString();
  const from = new Date(epochMs() - SERIES_WINDOW_MS).toISOString();
  const ser = await getJSON(api('/members/' + encodeURIComponent(app.selected) + `/series?from=${from}&to=${to}`));
  if (ser.member === app.selected) drawSeries(ser);
}

async function poll() {
  const conn = document.getElementById('conn');
  try {
    if (!app.listed) {
      const list = await getJSON('/api/structures');
      const sel = document.getElementById('structure-select');
      sel.replaceChildren();
      for (const s of list.structures) html('option', s, sel, { value: s });
      if (!list.structures.length) throw new Error('no structures are monitored');
      if (!app.structure) app.structure = list.structures[0];
      sel.value = app.structure;
      app.listed = true;
    }
    const st = await getJSON(api('/state'));
    const key = JSON.stringify(st.geometry);
    app.state = st;
    document.getElementById('title').textContent = st.title || st.structure;
    document.title = (st.title || st.structure) + ' – truss monitor';
    document.getElementById('epoch').textContent = (st.epoch ? 'epoch ' + fmtTime(st.epoch) + ' UTC' : 'no epoch yet') + (st.clock_note ? ' (' + st.clock_note + ')' : '');
    document.getElementById('model-version').textContent = st.model_version ? 'model ' + st.model_version.slice(0, 12) : '';
    document.getElementById('caution').textContent = st.caution;
    if (key !== app.geomKey) { app.geomKey = key; drawTruss(); drawLegend(st.critical_value || 3.29); }
    else paintMembers();
    drawAlarms();
    drawFit();
    drawAdapted();
    drawLoads();
    drawTotals(); // state.js
    drawMemberDetail();
    const to = new Date(epochMs() + 1).toISOString();
    const from = new Date(epochMs() - EVENTS_WINDOW_MS).toISOString();
    const evs = await getJSON(api(`/events?from=${from}&to=${to}`));
    drawEvents(evs.events);
    await loadSeries();
    conn.dataset.ok = 'true';
    conn.textContent = 'updated ' + new Date().toISOString().slice(11, 19) + ' UTC';
  } catch (err) {
    conn.dataset.ok = 'false';
    conn.textContent = 'update failed: ' + err.message;
  }
  setTimeout(poll, POLL_MS);
}

function select(id) {
  app.selected = id;
  paintMembers();
  drawMemberDetail();
  loadSeries().catch((err) => { document.getElementById('series-note').textContent = 'series failed: ' + err.message; });
}

function rotate(dyaw, dpitch) {
  app.view.yaw += dyaw;
  app.view.pitch = Math.max(-Math.PI / 2, Math.min(Math.PI / 2, app.view.pitch + dpitch));
  drawTruss();
}

function setup() {
  const svg = document.getElementById('truss');
  let drag = null, moved = false, frame = 0;
  svg.addEventListener('pointerdown', (e) => { drag = { x: e.clientX, y: e.clientY }; moved = false; });
  svg.addEventListener('pointermove', (e) => {
    if (!drag || !app.state || app.state.geometry.dimension !== 3) return;
    const dx = e.clientX - drag.x, dy = e.clientY - drag.y;
    if (Math.abs(dx) + Math.abs(dy) < 4 && !moved) return;
    moved = true;
    drag = { x: e.clientX, y: e.clientY };
    app.view.yaw += dx * 0.01;
    app.view.pitch = Math.max(-Math.PI / 2, Math.min(Math.PI / 2, app.view.pitch + dy * 0.01));
    if (!frame) frame = requestAnimationFrame(() => { frame = 0; drawTruss(); });
  });
  window.addEventListener('pointerup', () => { drag = null; });
  let resizeFrame = 0;
  window.addEventListener('resize', () => {
    if (!resizeFrame) resizeFrame = requestAnimationFrame(() => { resizeFrame = 0; drawTruss(); });
  });
  svg.addEventListener('click', (e) => {
    if (moved) { moved = false; return; }
    const t = e.target.closest('[data-member], [data-hit]');
    if (t) select(t.getAttribute('data-member') || t.getAttribute('data-hit'));
  });
  const step = Math.PI / 12;
  document.getElementById('rot-left').addEventListener('click', () => rotate(-step, 0));
  document.getElementById('rot-right').addEventListener('click', () => rotate(step, 0));
  document.getElementById('rot-up').addEventListener('click', () => rotate(0, step));
  document.getElementById('rot-down').addEventListener('click', () => rotate(0, -step));
  document.getElementById('rot-reset').addEventListener('click', () => { app.view = { yaw: VIEW0.yaw, pitch: VIEW0.pitch }; drawTruss(); });
  setupStateView(); // state.js
  document.getElementById('structure-select').addEventListener('change', (e) => {
    app.structure = e.target.value; app.geomKey = ''; app.selected = ''; drawSeries(null);
    document.getElementById('member-title').textContent = 'Member';
    document.getElementById('member-hint').textContent = 'Click a member of the drawing to see its measured and predicted force over time.';
    document.querySelector('#member-detail tbody').replaceChildren();
  });
  poll();
}

setup();
