// whorl's interactive plot: enhances each static figure (figure.plot with its spectra as JSON in
// data-plot) with zoom and pan on x. Without this script the server's static SVG stays; with it,
// the static SVG is hidden on screen (a printout still shows it) and this one is drawn instead.
//
//   drag across the plot        zoom to the dragged x range
//   shift-drag, arrow keys      pan
//   + and -                     zoom in and out about the middle
//   0, or the Reset button      the whole range
//
// x runs by the trade's convention (data-plot's "dir"): wavenumber, Raman shift and chemical
// shift decrease to the right ("down"), m/z increases ("up"). Colours are the Okabe-Ito palette
// in the order the static plots use, each spectrum after the first with a dash pattern too.
// Plain JavaScript and SVG; no library, no build step; nothing inline (the pages' policy is
// script-src 'self', and every attribute set here is an SVG presentation attribute).
'use strict';
(function () {
  const NS = 'http://www.w3.org/2000/svg';
  const COLOURS = ['#1a1a1a', '#0072b2', '#d55e00', '#009e73', '#cc79a7', '#e69f00', '#56b4e9'];
  const DASHES = [null, '9 5', '3 4', '16 5'];
  const W = 1000;
  const H = 420;
  const M = { left: 64, right: 18, top: 16, bottom: 56 };
  const PW = W - M.left - M.right;
  const PH = H - M.top - M.bottom;
  let counter = 0;

  function el(name, attrs, parent) {
    const e = document.createElementNS(NS, name);
    for (const k in attrs) e.setAttribute(k, attrs[k]);
    if (parent) parent.appendChild(e);
    return e;
  }

  // Tick positions at 1, 2 or 5 times a power of ten, about `count` of them.
  function ticks(lo, hi, count) {
    const span = hi - lo;
    if (!(span > 0)) return [lo];
    const raw = span / count;
    const mag = Math.pow(10, Math.floor(Math.log10(raw)));
    const step = [1, 2, 5, 10].map((m) => m * mag).find((s) => s >= raw) || 10 * mag;
    const out = [];
    for (let v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) {
      out.push(Math.abs(v) < step * 1e-9 ? 0 : v);
    }
    return { values: out, step: step };
  }

  function format(v, step) {
    const digits = Math.max(0, -Math.floor(Math.log10(step) + 1e-9));
    return v.toFixed(Math.min(digits, 4));
  }

  // Each series as points [x, y] (curves) or sticks [x, h], y scaled to the series' maximum.
  function seriesPoints(s) {
    if (s.sticks) {
      const max = s.sticks.reduce((m, p) => Math.max(m, p[1]), 0) || 1;
      return { sticks: true, points: s.sticks.map((p) => [p[0], p[1] / max]) };
    }
    const y = s.y || [];
    return { sticks: false, points: y.map((v, i) => [s.x0 + i * s.dx, v]) };
  }

  function enhance(figure) {
    let data;
    try {
      data = JSON.parse(figure.getAttribute('data-plot'));
    } catch (e) {
      return; // the static SVG stays
    }
    const series = (data.series || []).map(seriesPoints);
    const all = series.flatMap((s) => s.points.map((p) => p[0]));
    if (all.length < 2) return;
    const full = [Math.min.apply(null, all), Math.max.apply(null, all)];
    if (!(full[1] > full[0])) return;
    const down = data.dir === 'down';
    const mirror = !!data.mirror;
    const minSpan = (full[1] - full[0]) / 500;
    let view = full.slice();

    const n = ++counter;
    const caption = figure.querySelector('figcaption');
    const title = caption ? caption.textContent.trim() : 'Spectra';

    const tools = document.createElement('div');
    tools.className = 'plot-tools';
    const reset = document.createElement('button');
    reset.type = 'button';
    reset.className = 'quiet';
    reset.textContent = 'Whole range';
    const range = document.createElement('span');
    range.className = 'plot-range';
    range.id = `plot-range-${n}`;
    range.setAttribute('aria-live', 'polite');
    tools.appendChild(reset);
    tools.appendChild(range);

    const help = document.createElement('p');
    help.className = 'help';
    help.id = `plot-help-${n}`;
    help.textContent = 'Drag across the plot to zoom; shift-drag or the arrow keys to pan; + and - to zoom; 0 for the whole range.';

    const live = document.createElement('div');
    live.className = 'plot-live';
    live.tabIndex = 0;
    live.setAttribute('role', 'group');
    live.setAttribute('aria-label', `${title}: interactive plot of ${data.x}`);
    live.setAttribute('aria-describedby', `${range.id} ${help.id}`);

    const svg = el('svg', { viewBox: `0 0 ${W} ${H}`, 'aria-hidden': 'true', focusable: 'false' }, live);
    const clipId = `plot-clip-${n}`;
    el('rect', { x: M.left, y: M.top, width: PW, height: PH }, el('clipPath', { id: clipId }, el('defs', {}, svg)));
    const axes = el('g', {}, svg);
    const body = el('g', { 'clip-path': `url(#${clipId})` }, svg);
    const band = el('rect', { x: 0, y: M.top, width: 0, height: PH, fill: '#0072b2', 'fill-opacity': '0.15', stroke: '#0072b2', visibility: 'hidden' }, svg);
    const hit = el('rect', { x: M.left, y: M.top, width: PW, height: PH, fill: 'transparent' }, svg);

    const legend = document.createElement('ul');
    legend.className = 'plot-legend';
    (data.series || []).forEach((s, i) => {
      const li = document.createElement('li');
      const key = el('svg', { width: 34, height: 10, 'aria-hidden': 'true', focusable: 'false' });
      const attrs = { x1: 2, y1: 5, x2: 32, y2: 5, stroke: COLOURS[i % COLOURS.length], 'stroke-width': i === 0 ? 3 : 2 };
      if (DASHES[i % DASHES.length]) attrs['stroke-dasharray'] = DASHES[i % DASHES.length];
      el('line', attrs, key);
      li.appendChild(key);
      li.appendChild(document.createTextNode(' ' + s.label + (mirror ? (i === 0 ? ' (above the axis)' : ' (below the axis)') : '')));
      legend.appendChild(li);
    });

    // x to the plot's pixels and back, by the trade's direction.
    const px = (x) => M.left + (down ? (view[1] - x) : (x - view[0])) / (view[1] - view[0]) * PW;
    const fromPx = (p) => {
      const f = (p - M.left) / PW;
      return down ? view[1] - f * (view[1] - view[0]) : view[0] + f * (view[1] - view[0]);
    };

    function draw() {
      axes.textContent = '';
      body.textContent = '';
      // y: 0..1 (each spectrum scaled to its maximum), -1..1 for a mirror plot; on zoom, to the
      // largest value in view so that a small band fills the plot.
      let top = 0;
      series.forEach((s) => s.points.forEach((p) => { if (p[0] >= view[0] && p[0] <= view[1]) top = Math.max(top, p[1]); }));
      top = Math.max(top, 0.02) * 1.08;
      const bottom = mirror ? -top : 0;
      const py = (y) => M.top + (top - y) / (top - bottom) * PH;

      const xt = ticks(view[0], view[1], 8);
      xt.values.forEach((v) => {
        el('line', { x1: px(v), x2: px(v), y1: M.top, y2: M.top + PH, stroke: '#e4e4e4' }, axes);
        const t = el('text', { x: px(v), y: M.top + PH + 20, 'text-anchor': 'middle', 'font-size': 14, fill: '#1a1a1a' }, axes);
        t.textContent = format(v, xt.step);
      });
      const yt = ticks(bottom, top, 5);
      yt.values.forEach((v) => {
        el('line', { x1: M.left, x2: M.left + PW, y1: py(v), y2: py(v), stroke: '#e4e4e4' }, axes);
        const t = el('text', { x: M.left - 8, y: py(v) + 5, 'text-anchor': 'end', 'font-size': 14, fill: '#1a1a1a' }, axes);
        t.textContent = format(Math.abs(v), yt.step);
      });
      el('rect', { x: M.left, y: M.top, width: PW, height: PH, fill: 'none', stroke: '#1a1a1a' }, axes);
      const xl = el('text', { x: M.left + PW / 2, y: H - 10, 'text-anchor': 'middle', 'font-size': 15, fill: '#1a1a1a' }, axes);
      xl.textContent = data.x;
      const yl = el('text', { x: 16, y: M.top + PH / 2, 'text-anchor': 'middle', 'font-size': 15, fill: '#1a1a1a', transform: `rotate(-90 16 ${M.top + PH / 2})` }, axes);
      yl.textContent = 'scaled to 1';
      if (mirror) el('line', { x1: M.left, x2: M.left + PW, y1: py(0), y2: py(0), stroke: '#1a1a1a' }, axes);

      series.forEach((s, i) => {
        const colour = COLOURS[i % COLOURS.length];
        const sign = mirror && i === 1 ? -1 : 1;
        if (s.sticks) {
          let d = '';
          s.points.forEach((p) => {
            if (p[0] < view[0] || p[0] > view[1]) return;
            const x = px(p[0]).toFixed(1);
            d += `M${x} ${py(0).toFixed(1)}V${py(sign * p[1]).toFixed(1)}`;
          });
          el('path', { d: d || 'M0 0', stroke: colour, 'stroke-width': i === 0 ? 2.5 : 2, fill: 'none' }, body);
        } else {
          // Points in view, one beyond on each side, so the line reaches the frame.
          const pts = [];
          s.points.forEach((p, j) => {
            const next = s.points[j + 1];
            const prev = s.points[j - 1];
            const inside = (q) => q && q[0] >= view[0] && q[0] <= view[1];
            if (inside(p) || inside(next) || inside(prev)) pts.push(px(p[0]).toFixed(1) + ',' + py(sign * p[1]).toFixed(1));
          });
          const attrs = { points: pts.join(' '), stroke: colour, 'stroke-width': i === 0 ? 2.2 : 1.6, fill: 'none', 'stroke-linejoin': 'round' };
          if (DASHES[i % DASHES.length]) attrs['stroke-dasharray'] = DASHES[i % DASHES.length];
          el('polyline', attrs, body);
        }
      });

      const whole = view[0] <= full[0] && view[1] >= full[1];
      const step = ticks(view[0], view[1], 8).step;
      const first = down ? view[1] : view[0];
      const last = down ? view[0] : view[1];
      range.textContent = `${data.x}: ${format(first, step / 10)} to ${format(last, step / 10)}` + (whole ? ' (whole range)' : '');
      figure.setAttribute('data-x-from', String(view[0]));
      figure.setAttribute('data-x-to', String(view[1]));
      reset.disabled = whole;
    }

    function setView(lo, hi) {
      if (hi - lo < minSpan) {
        const mid = (lo + hi) / 2;
        lo = mid - minSpan / 2;
        hi = mid + minSpan / 2;
      }
      const span = Math.min(hi - lo, full[1] - full[0]);
      if (lo < full[0]) { lo = full[0]; hi = lo + span; }
      if (hi > full[1]) { hi = full[1]; lo = hi - span; }
      view = [lo, hi];
      draw();
    }
    function zoom(factor) {
      const mid = (view[0] + view[1]) / 2;
      const half = (view[1] - view[0]) * factor / 2;
      setView(mid - half, mid + half);
    }
    // Pan by a fraction of the view to the right on screen (lower x where x runs down).
    function pan(fraction) {
      const d = (view[1] - view[0]) * fraction * (down ? -1 : 1);
      setView(view[0] + d, view[1] + d);
    }

    // The pointer's x in the SVG's own units.
    function svgX(ev) {
      const r = svg.getBoundingClientRect();
      return (ev.clientX - r.left) / r.width * W;
    }
    let drag = null;
    hit.addEventListener('pointerdown', (ev) => {
      if (ev.button !== 0) return;
      hit.setPointerCapture(ev.pointerId);
      drag = { start: svgX(ev), pan: ev.shiftKey, view: view.slice() };
      ev.preventDefault();
      live.focus({ preventScroll: true });
    });
    hit.addEventListener('pointermove', (ev) => {
      if (!drag) return;
      const x = Math.max(M.left, Math.min(M.left + PW, svgX(ev)));
      if (drag.pan) {
        const d = (x - drag.start) / PW * (drag.view[1] - drag.view[0]) * (down ? 1 : -1);
        view = drag.view.slice();
        setView(drag.view[0] + d, drag.view[1] + d);
      } else {
        band.setAttribute('x', Math.min(drag.start, x));
        band.setAttribute('width', Math.abs(x - drag.start));
        band.setAttribute('visibility', 'visible');
      }
    });
    function endDrag(ev) {
      if (!drag) return;
      const d = drag;
      drag = null;
      band.setAttribute('visibility', 'hidden');
      if (d.pan) return;
      const x = Math.max(M.left, Math.min(M.left + PW, svgX(ev)));
      if (Math.abs(x - d.start) < 6) return; // a click, not a drag
      const a = fromPx(d.start);
      const b = fromPx(x);
      setView(Math.min(a, b), Math.max(a, b));
    }
    hit.addEventListener('pointerup', endDrag);
    hit.addEventListener('pointercancel', () => { drag = null; band.setAttribute('visibility', 'hidden'); });

    live.addEventListener('keydown', (ev) => {
      if (ev.altKey || ev.ctrlKey || ev.metaKey) return;
      const k = ev.key;
      if (k === 'ArrowRight') pan(0.1);
      else if (k === 'ArrowLeft') pan(-0.1);
      else if (k === '+' || k === '=') zoom(0.5);
      else if (k === '-' || k === '_') zoom(2);
      else if (k === '0') setView(full[0], full[1]);
      else return;
      ev.preventDefault();
    });
    reset.addEventListener('click', () => setView(full[0], full[1]));

    const still = figure.querySelector('.plot-static');
    figure.insertBefore(tools, still);
    figure.insertBefore(live, still);
    figure.insertBefore(legend, still);
    figure.insertBefore(help, still);
    if (still) still.classList.add('plot-replaced');
    figure.classList.add('plot-enhanced');
    draw();
  }

  function start() {
    document.querySelectorAll('figure.plot[data-plot]').forEach(enhance);
  }
  if (document.readyState === 'loading') document.addEventListener('DOMContentLoaded', start);
  else start();
})();
