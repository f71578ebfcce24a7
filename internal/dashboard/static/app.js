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
// saturated red at and above the critical value k. Our own palette.
const STOPS = [
  [0.0, [120, 144, 166]],
  [0.55, [222, 168, 52]],
  [1.0, [196, 22, 28]],
];
const COLOUR_UNGAUGED = '#b9bec4';
const COLOUR_UNCHECKED = '#8d99a6';

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

// drawTruss rebuilds the drawing from the geometry and the current view.
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
  const span = Math.max(maxX - minX, maxY - minY, 1e-3);
  const pad = 0.08 * span;
  const bottom = 0.12 * span; // room for the scale bar
  svg.setAttribute('viewBox', [minX - pad, -maxY - pad, (maxX - minX) + 2 * pad, (maxY - minY) + 2 * pad + bottom].join(' '));
  svg.dataset.dimension = String(dim);

  const members = el('g', { id: 'members' }, svg);
  const hits = el('g', { id: 'member-hits' }, svg);
  const labels = el('g', { id: 'member-labels', 'pointer-events': 'none' }, svg);
  const order = g.members.slice();
  if (dim === 3) {
    const depth = (m) => (pos.get(m.start).depth + pos.get(m.end).depth) / 2;
    order.sort((a, b) => depth(b) - depth(a)); // far members first
  }
  for (const m of order) {
    const a = pos.get(m.start), b = pos.get(m.end);
    if (!a || !b) continue;
    const coords = { x1: a.x, y1: -a.y, x2: b.x, y2: -b.y };
    el('line', Object.assign({ 'data-member': m.id, 'vector-effect': 'non-scaling-stroke', 'stroke-linecap': 'round' }, coords), members);
    const hit = el('line', Object.assign({ 'data-hit': m.id, stroke: 'transparent', 'stroke-width': 14, 'vector-effect': 'non-scaling-stroke' }, coords), hits);
    const t = el('title', {}, hit);
    t.textContent = m.id;
    if (dim === 2 && g.members.length <= 80) {
      const tx = el('text', { x: (a.x + b.x) / 2, y: -(a.y + b.y) / 2 - 0.012 * span, 'font-size': 0.028 * span, 'text-anchor': 'middle', fill: '#44505b' }, labels);
      tx.textContent = m.id;
    }
  }
  const nodes = el('g', { id: 'nodes', 'pointer-events': 'none' }, svg);
  for (const nd of g.nodes) {
    const p = pos.get(nd.id);
    el('circle', { 'data-node': nd.id, cx: p.x, cy: -p.y, r: 0.007 * span, fill: '#2b3944' }, nodes);
  }
  // scale bar (lengths in the view plane are true lengths)
  const L = niceLength((maxX - minX + 2 * pad) / 5);
  const y0 = -minY + pad + 0.5 * bottom;
  const x0 = minX;
  const bar = el('g', { id: 'scale-bar' }, svg);
  el('line', { x1: x0, y1: y0, x2: x0 + L, y2: y0, stroke: '#2b3944', 'stroke-width': 2, 'vector-effect': 'non-scaling-stroke' }, bar);
  for (const x of [x0, x0 + L]) el('line', { x1: x, y1: y0 - 0.015 * span, x2: x, y2: y0 + 0.015 * span, stroke: '#2b3944', 'stroke-width': 2, 'vector-effect': 'non-scaling-stroke' }, bar);
  const lt = el('text', { x: x0 + L + 0.02 * span, y: y0 + 0.012 * span, 'font-size': 0.035 * span, fill: '#2b3944' }, bar);
  lt.textContent = L + ' m' + (dim === 3 ? ' (in the view plane)' : '');
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
    const m = byID.get(id);
    const r = res.get(id);
    const s = memberState(m, r);
    line.setAttribute('data-state', s);
    line.removeAttribute('stroke-dasharray');
    let colour, width;
    if (s === 'ungauged') { colour = COLOUR_UNGAUGED; width = 1.5; }
    else if (s === 'unchecked') { colour = COLOUR_UNCHECKED; width = 3.5; line.setAttribute('stroke-dasharray', '7 5'); }
    else { colour = colourFor(r.w, k); width = s === 'alarm' ? 7 : 4.5; }
    line.setAttribute('stroke', colour);
    line.setAttribute('stroke-width', id === app.selected ? width + 2 : width);
    line.setAttribute('data-selected', id === app.selected ? 'true' : 'false');
    line.setAttribute('data-w', r && r.w !== null ? r.w.toFixed(3) : '');
  }
}

function drawLegend(k) {
  const svg = document.getElementById('legend');
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
  cap.textContent = '|w|, Baarda\'s normalised residual';
  el('line', { x1: 360, y1: 15, x2: 400, y2: 15, stroke: COLOUR_UNGAUGED, 'stroke-width': 1.5 }, svg);
  const t1 = el('text', { x: 408, y: 19, 'font-size': 11, fill: '#1d2a35' }, svg);
  t1.textContent = 'no gauge';
  el('line', { x1: 360, y1: 37, x2: 400, y2: 37, stroke: COLOUR_UNCHECKED, 'stroke-width': 3.5, 'stroke-dasharray': '7 5' }, svg);
  const t2 = el('text', { x: 408, y: 41, 'font-size': 11, fill: '#1d2a35' }, svg);
  t2.textContent = 'gauged, cannot be checked';
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

function drawLoads() {
  const tbody = document.querySelector('#loads tbody');
  tbody.replaceChildren();
  if (!app.state.loads.length) {
    const tr = html('tr', null, tbody);
    html('td', 'none estimated in this epoch', tr, { colspan: 3 });
  }
  for (const l of app.state.loads) {
    const tr = html('tr', null, tbody, { 'data-pattern': l.pattern });
    html('td', l.pattern, tr);
    html('td', fmtSize(l.value, l.unit), tr, { class: 'num' });
    html('td', fmtSize(l.std_dev, l.unit), tr, { class: 'num' });
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
    rows(tbody, [['gauge', 'none: this member is not measured']]);
    return;
  }
  const r = app.state.gauged.find((x) => x.id === id);
  if (!r) { rows(tbody, [['latest epoch', 'no result']]); return; }
  rows(tbody, [
    ['state', memberState(m, r)],
    ['measured', fmtForce(r.measured_n)],
    ['predicted', fmtForce(r.predicted_n)],
    ['acceptance band', fmtForce(r.band_low_n) + ' … ' + fmtForce(r.band_high_n)],
    ['w', fmtNum(r.w, 2)],
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
  yl.textContent = 'axial force (kN, tension +)';
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
    el('rect', { x: xa, y: H - B + 22, width: Math.max(xb - xa, 2), height: 6, fill: colourFor(1, 1) }, strip);
  }
  const lg = el('g', { 'font-size': 11, fill: '#1d2a35' }, svg);
  el('line', { x1: L + 8, x2: L + 30, y1: H - 6, y2: H - 6, stroke: '#1d2a35', 'stroke-width': 1.6 }, lg);
  el('text', { x: L + 34, y: H - 2 }, lg).textContent = 'measured';
  el('line', { x1: L + 100, x2: L + 122, y1: H - 6, y2: H - 6, stroke: '#3d5a73', 'stroke-width': 1.6, 'stroke-dasharray': '5 3' }, lg);
  el('text', { x: L + 126, y: H - 2 }, lg).textContent = 'predicted';
  el('rect', { x: L + 196, y: H - 11, width: 22, height: 10, fill: 'rgba(120,144,166,0.25)' }, lg);
  el('text', { x: L + 222, y: H - 2 }, lg).textContent = `band ± ${fmtNum(ser.critical_value, 2)} σ of residual`;
  el('rect', { x: L + 420, y: H - 9, width: 22, height: 6, fill: colourFor(1, 1) }, lg);
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
      const ol = html('ol', null, td);
      for (const c of e.causes.filter((c, i) => i < 3 || c.group === 1)) {
        // Causes of one group cannot be told apart by the gauges: shown
        // with their group number, in no order of likelihood.
        const grp = c.group ? `[group ${c.group}] ` : '';
        const std = c.std ? ` ± ${fmtSize(c.std, c.unit)}` : '';
        const odd = c.implausible ? ' (implausible size)' : '';
        html('li', `${grp}${c.kind.replace(/_/g, ' ')} ${c.subject}: T = ${fmtNum(c.t, 1)}, size ${fmtSize(c.size, c.unit)}${std}${odd}`, ol);
      }
    }
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
    document.getElementById('epoch').textContent = st.epoch ? 'epoch ' + fmtTime(st.epoch) + ' UTC' : 'no epoch yet';
    document.getElementById('model-version').textContent = st.model_version ? 'model ' + st.model_version.slice(0, 12) : '';
    document.getElementById('caution').textContent = st.caution;
    if (key !== app.geomKey) { app.geomKey = key; drawTruss(); drawLegend(st.critical_value || 3.29); }
    else paintMembers();
    drawFit();
    drawLoads();
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
  document.getElementById('structure-select').addEventListener('change', (e) => {
    app.structure = e.target.value; app.geomKey = ''; app.selected = ''; drawSeries(null);
  });
  poll();
}

setup();
