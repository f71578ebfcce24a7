// Fatigue panel: per fatigue gauge, Miner's damage since its start, the
// recent daily rate and the projected remaining life, with the daily damage
// of the last 30 days as small bars. A monitoring estimate, not a design
// check or an assessment: the caution comes with the data and is shown above
// the table.
'use strict';
(function () {
  const SVG = 'http://www.w3.org/2000/svg';

  function cell(tr, text) {
    const td = document.createElement('td');
    td.textContent = text;
    tr.appendChild(td);
    return td;
  }

  function sci(x) {
    if (x === null || x === undefined) return '–';
    if (x === 0) return '0';
    return x.toExponential(2);
  }

  function years(y) {
    if (y === null || y === undefined) return 'no damage at the recent rate';
    if (y > 1e6) return '> 1e6 years';
    return y.toFixed(1) + ' years';
  }

  function bars(days) {
    const w = 120, h = 24;
    const svg = document.createElementNS(SVG, 'svg');
    svg.setAttribute('viewBox', `0 0 ${w} ${h}`);
    svg.setAttribute('width', w);
    svg.setAttribute('height', h);
    svg.setAttribute('role', 'img');
    svg.setAttribute('aria-label', 'damage per day');
    const max = Math.max(0, ...days.map((d) => d.damage || 0));
    const bw = w / Math.max(days.length, 1);
    days.forEach((d, i) => {
      const v = max > 0 ? (d.damage || 0) / max : 0;
      const r = document.createElementNS(SVG, 'rect');
      r.setAttribute('x', (i * bw).toFixed(2));
      r.setAttribute('width', Math.max(bw - 1, 0.5).toFixed(2));
      r.setAttribute('y', (h - v * h).toFixed(2));
      r.setAttribute('height', (v * h).toFixed(2));
      r.setAttribute('class', 'fatigue-bar');
      const t = document.createElementNS(SVG, 'title');
      t.textContent = `${d.day}: D = ${sci(d.damage)}, ${d.cycles.toFixed(1)} cycles`;
      r.appendChild(t);
      svg.appendChild(r);
    });
    return svg;
  }

  async function refresh() {
    const sel = document.getElementById('structure-select');
    const panel = document.getElementById('fatigue-panel');
    if (!sel || !panel) return;
    if (!sel.value) { // app.js has not listed the structures yet
      setTimeout(refresh, 300);
      return;
    }
    let data;
    try {
      const res = await fetch('/api/structures/' + encodeURIComponent(sel.value) + '/fatigue', { cache: 'no-store' });
      if (!res.ok) return;
      data = await res.json();
    } catch (e) {
      return;
    }
    if (!data.gauges || data.gauges.length === 0) {
      panel.hidden = true;
      return;
    }
    panel.hidden = false;
    document.getElementById('fatigue-caution').textContent = data.caution;
    const body = document.querySelector('#fatigue tbody');
    body.replaceChildren();
    for (const g of data.gauges) {
      const tr = document.createElement('tr');
      tr.dataset.gauge = g.gauge;
      cell(tr, g.gauge);
      cell(tr, g.detail_category_mpa + ' MPa');
      cell(tr, g.gamma_Ff.toFixed(2) + ' / ' + g.gamma_Mf.toFixed(2));
      cell(tr, g.start ? g.start.slice(0, 10) : 'first reading');
      cell(tr, sci(g.damage_total));
      cell(tr, sci(g.damage_per_day) + (g.rate_window_days ? ` (${g.rate_window_days.toFixed(1)} d)` : ''));
      cell(tr, years(g.remaining_life_years));
      cell(tr, '').appendChild(bars(g.days));
      body.appendChild(tr);
    }
  }

  document.addEventListener('DOMContentLoaded', () => {
    const sel = document.getElementById('structure-select');
    if (sel) sel.addEventListener('change', refresh);
    refresh();
    setInterval(refresh, 30000);
  });
})();
