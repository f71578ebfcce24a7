// Member totals and utilisation for the truss monitor dashboard: the
// colour mode "utilisation" of the drawing, its legend, the totals rows of
// the member detail and the table of every member's total force. Loaded
// before app.js; app.js calls these functions at small hooks. Plain
// JavaScript, no network beyond this server.
'use strict';

const stateView = {
  // mode is what the drawing's colour shows: 'w' (Baarda's normalised
  // residual) or 'utilisation' (|total force| / design resistance).
  mode: new URLSearchParams(location.search).get('colour') === 'utilisation' ? 'utilisation' : 'w',
};

// Utilisation colours, our own palette: pale sage at 0, slate blue at 0.5,
// deep violet at the alarm level 0.9 and above (never the red of an
// alarm on |w|).
const UTIL_STOPS = [
  [0.0, [196, 214, 190]],
  [0.5, [84, 118, 178]],
  [0.9, [92, 36, 128]],
];
const UTIL_ALARM = 0.9; // the MemberUtilisationHigh raise level (internal/alerts)

function utilisationColour(u) {
  const t = Math.max(0, Math.min(u, UTIL_ALARM));
  for (let i = 1; i < UTIL_STOPS.length; i++) {
    const [t1, c1] = UTIL_STOPS[i];
    const [t0, c0] = UTIL_STOPS[i - 1];
    if (t <= t1) {
      const f = (t - t0) / (t1 - t0);
      const c = c0.map((v, j) => Math.round(v + f * (c1[j] - v)));
      return `rgb(${c[0]}, ${c[1]}, ${c[2]})`;
    }
  }
  const c = UTIL_STOPS[UTIL_STOPS.length - 1][1];
  return `rgb(${c[0]}, ${c[1]}, ${c[2]})`;
}

function stateFmtForce(v) {
  if (v === null || v === undefined) return '–';
  return (v / 1000).toFixed(2) + ' kN';
}
function stateFmtStress(v) {
  if (v === null || v === undefined) return '–';
  return (v / 1e6).toFixed(1) + ' MPa';
}
function stateFmtRatio(v, d) {
  if (v === null || v === undefined) return '–';
  return Number(v).toFixed(d);
}

function memberTotal(id) {
  const st = app.state;
  if (!st || !st.members) return null;
  return st.members.find((m) => m.id === id) || null;
}

// paintUtilisation colours one member line by its utilisation; it returns
// false (the caller paints as usual) when the colour mode is |w| or the
// structure has no design basis.
function paintUtilisation(line, id) {
  if (stateView.mode !== 'utilisation' || !app.state || !app.state.design) return false;
  const m = memberTotal(id);
  const u = m ? m.utilisation : null;
  line.removeAttribute('stroke-dasharray');
  line.setAttribute('data-state', u === null ? 'no-utilisation' : u > UTIL_ALARM ? 'utilisation-high' : 'utilisation');
  line.setAttribute('data-utilisation', u === null ? '' : u.toFixed(3));
  line.setAttribute('stroke', u === null ? '#b9bec4' : utilisationColour(u));
  const width = u !== null && u > UTIL_ALARM ? 7 : 4.5;
  line.setAttribute('stroke-width', id === app.selected ? width + 2 : width);
  line.setAttribute('data-selected', id === app.selected ? 'true' : 'false');
  return true;
}

// drawUtilisationLegend draws the utilisation scale instead of the |w|
// scale; false when the mode is |w|.
function drawUtilisationLegend(svg) {
  if (stateView.mode !== 'utilisation' || !app.state || !app.state.design) return false;
  svg.replaceChildren();
  const defs = el('defs', {}, svg);
  const grad = el('linearGradient', { id: 'u-scale', x1: 0, x2: 1, y1: 0, y2: 0 }, defs);
  for (let i = 0; i <= 20; i++) el('stop', { offset: i / 20, 'stop-color': utilisationColour(i / 20 * UTIL_ALARM) }, grad);
  el('rect', { x: 10, y: 8, width: 300, height: 14, fill: 'url(#u-scale)', stroke: '#66727d', 'stroke-width': 0.5 }, svg);
  for (const [f, label] of [[0, '0'], [0.5 / UTIL_ALARM, '0.5'], [1, '≥ 0.90 (warning)']]) {
    el('line', { x1: 10 + 300 * f, y1: 22, x2: 10 + 300 * f, y2: 27, stroke: '#66727d' }, svg);
    const t = el('text', { x: 10 + 300 * f, y: 39, 'font-size': 11, 'text-anchor': f === 0 ? 'start' : f === 1 ? 'end' : 'middle', fill: '#1d2a35' }, svg);
    t.textContent = label;
  }
  const cap = el('text', { x: 10, y: 56, 'font-size': 11, fill: '#66727d' }, svg);
  cap.textContent = 'utilisation |total force| / design resistance (' + app.state.design.standard + '), a monitoring estimate';
  return true;
}

// memberTotalRows are the member detail's rows of the total state.
function memberTotalRows(id) {
  const m = memberTotal(id);
  if (!m) return [];
  const out = [];
  if (m.gauged) {
    out.push(['force in the zero state (model)', stateFmtForce(m.zero_state_n)]);
    out.push(['total force, measured', stateFmtForce(m.total_measured_n)]);
  }
  out.push(['total force, predicted', stateFmtForce(m.total_predicted_n)]);
  out.push(['total stress', stateFmtStress(m.stress_pa) + (m.measured ? ' (measured)' : ' (predicted)')]);
  if (m.gauged) out.push(['measured / predicted total', stateFmtRatio(m.measured_to_predicted, 3)]);
  if (app.state.design) {
    out.push(['design resistance (' + app.state.design.standard + ')', stateFmtForce(m.resistance_n)]);
    out.push(['utilisation (estimate)', stateFmtRatio(m.utilisation, 3) + ', predicted ' + stateFmtRatio(m.utilisation_predicted, 3)]);
  }
  return out;
}

// drawTotals fills the table of every member's total force and shows the
// utilisation caution when the structure has a design basis.
function drawTotals() {
  const st = app.state;
  const tbody = document.querySelector('#totals tbody');
  if (!tbody || !st) return;
  tbody.replaceChildren();
  const note = document.getElementById('utilisation-caution');
  const design = !!st.design;
  if (!design && stateView.mode === 'utilisation') {
    stateView.mode = 'w';
    document.getElementById('colour-mode').value = 'w';
    setStateHeading();
  }
  note.hidden = !design;
  note.textContent = design ? st.design.caution : '';
  document.getElementById('colour-mode').disabled = !design;
  document.querySelector('#totals thead th[data-col="utilisation"]').hidden = !design;
  const list = (st.members || []).slice();
  if (design) list.sort((a, b) => (b.utilisation || 0) - (a.utilisation || 0));
  for (const m of list) {
    const tr = html('tr', null, tbody, { 'data-member': m.id });
    html('td', m.id, tr);
    html('td', m.gauged ? stateFmtForce(m.change_measured_n) : '–', tr, { class: 'num' });
    html('td', stateFmtForce(m.total_n) + (m.measured ? '' : ' (pred.)'), tr, { class: 'num' });
    html('td', stateFmtStress(m.stress_pa), tr, { class: 'num' });
    const u = html('td', stateFmtRatio(m.utilisation, 3), tr, { class: 'num', 'data-col': 'utilisation' });
    u.hidden = !design;
  }
}

function setStateHeading() {
  document.getElementById('truss-heading').textContent = stateView.mode === 'utilisation'
    ? 'Members coloured by utilisation (estimate)' : 'Members coloured by |w|';
}

function setupStateView() {
  const sel = document.getElementById('colour-mode');
  sel.value = stateView.mode;
  setStateHeading();
  sel.addEventListener('change', (e) => {
    stateView.mode = e.target.value;
    setStateHeading();
    if (app.state) { drawLegend(app.state.critical_value || 3.29); paintMembers(); }
  });
}
