// whorl's interactive plot: enhances each static figure (figure.plot with its spectra as JSON in
// data-plot) with zoom and pan on x, stacking, a difference trace and peak labels. Without this
// script the server's static SVG stays; with it, the static SVG is hidden on screen (a printout
// still shows it) and this one is drawn instead.
//
//   drag across the plot        zoom to the dragged x range
//   shift-drag, arrow keys      pan
//   + and -                     zoom in and out about the middle
//   0, or the Whole range button   the whole range
//   s, or the Stack button      stack the spectra one above the other (each scaled to its own
//                               maximum in view), or lay them over each other again
//   d, or the Difference list   the first spectrum minus another, as a trace of its own
//                               (d steps through the choices, then back to none)
//   l, or the Peak labels button   peak positions written at the strongest peaks in view
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
  const DIFF_COLOUR = '#cc79a7';
  const DASHES = [null, '9 5', '3 4', '16 5'];
  const W = 1000;
  const H = 420;
  const M = { left: 64, right: 18, top: 16, bottom: 56 };
  const PW = W - M.left - M.right;
  const PH = H - M.top - M.bottom;
  // Labels per spectrum at most, and how close (px) two may stand.
  const MOST_LABELS = 10;
  const LABEL_GAP_X = 40;
  const LABEL_GAP_Y = 16;
  let counter = 0;

  function el(name, attrs, parent) {
    const e = document.createElementNS(NS, name);
    for (const k in attrs) e.setAttribute(k, attrs[k]);
    if (parent) parent.appendChild(e);
    return e;
  }

  function button(text, pressed) {
    const b = document.createElement('button');
    b.type = 'button';
    b.className = 'quiet';
    b.textContent = text;
    if (pressed !== undefined) b.setAttribute('aria-pressed', String(pressed));
    return b;
  }

  // Tick positions at 1, 2 or 5 times a power of ten, about `count` of them.
  function ticks(lo, hi, count) {
    const span = hi - lo;
    if (!(span > 0)) return { values: [lo], step: 1 };
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

  // Each series as points [x, y] (curves) or sticks [x, h], y scaled to the series' maximum,
  // with its picked peaks as [x, y] (a curve's value at the peak; a stick's height).
  function seriesPoints(s) {
    if (s.sticks) {
      const max = s.sticks.reduce((m, p) => Math.max(m, p[1]), 0) || 1;
      const points = s.sticks.map((p) => [p[0], p[1] / max]);
      return { label: s.label, sticks: true, points: points, peaks: points };
    }
    const y = s.y || [];
    const points = y.map((v, i) => [s.x0 + i * s.dx, v]);
    const peaks = (s.peaks || []).map((x) => {
      const i = Math.round((x - s.x0) / s.dx);
      return [x, i >= 0 && i < y.length ? y[i] : 0];
    });
    return { label: s.label, sticks: false, points: points, peaks: peaks, x0: s.x0, dx: s.dx };
  }

  // a minus b: on the same grid point by point (curves), or m/z by m/z (sticks).
  function difference(a, b) {
    if (a.sticks || b.sticks) {
      const d = new Map();
      a.points.forEach((p) => d.set(Math.round(p[0] * 1000), (d.get(Math.round(p[0] * 1000)) || 0) + p[1]));
      b.points.forEach((p) => d.set(Math.round(p[0] * 1000), (d.get(Math.round(p[0] * 1000)) || 0) - p[1]));
      const points = [...d.entries()].map((e) => [e[0] / 1000, e[1]]).filter((p) => p[1] !== 0).sort((p, q) => p[0] - q[0]);
      return { label: `${a.label} minus ${b.label}`, sticks: true, points: points, peaks: [], diff: true };
    }
    const points = a.points.map((p) => {
      const i = Math.round((p[0] - b.x0) / b.dx);
      const other = i >= 0 && i < b.points.length ? b.points[i][1] : 0;
      return [p[0], p[1] - other];
    });
    return { label: `${a.label} minus ${b.label}`, sticks: false, points: points, peaks: [], diff: true };
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
    const digits = Number.isInteger(data.digits) ? data.digits : 0;
    const minSpan = (full[1] - full[0]) / 500;
    let view = full.slice();
    let stacked = false;
    let labels = true;
    let diffWith = 0; // 0: no difference; k: series 0 minus series k
    let diffSeries = null;

    const n = ++counter;
    const caption = figure.querySelector('figcaption');
    const title = caption ? caption.textContent.trim() : 'Spectra';

    const tools = document.createElement('div');
    tools.className = 'plot-tools';
    const reset = button('Whole range');
    const stack = button('Stack', false);
    const labelButton = button('Peak labels', true);
    tools.appendChild(reset);
    tools.appendChild(stack);
    tools.appendChild(labelButton);
    let diffSelect = null;
    if (series.length >= 2) {
      const wrap = document.createElement('span');
      wrap.className = 'plot-diff-choice';
      const lab = document.createElement('label');
      lab.htmlFor = `plot-diff-${n}`;
      lab.textContent = 'Difference';
      diffSelect = document.createElement('select');
      diffSelect.id = `plot-diff-${n}`;
      const none = document.createElement('option');
      none.value = '0';
      none.textContent = 'none';
      diffSelect.appendChild(none);
      series.slice(1).forEach((s, i) => {
        const o = document.createElement('option');
        o.value = String(i + 1);
        o.textContent = `${series[0].label} minus ${s.label}`;
        diffSelect.appendChild(o);
      });
      wrap.appendChild(lab);
      wrap.appendChild(diffSelect);
      tools.appendChild(wrap);
    }
    const range = document.createElement('span');
    range.className = 'plot-range';
    range.id = `plot-range-${n}`;
    range.setAttribute('aria-live', 'polite');
    tools.appendChild(range);

    const help = document.createElement('p');
    help.className = 'help';
    help.id = `plot-help-${n}`;
    help.textContent = 'Drag across the plot to zoom; shift-drag or the arrow keys to pan; + and - to zoom; 0 for the whole range; ' +
      's to stack or overlay' + (series.length >= 2 ? '; d for the difference trace' : '') + '; l for peak labels.';

    const live = document.createElement('div');
    live.className = 'plot-live';
    live.tabIndex = 0;
    live.setAttribute('role', 'group');
    live.setAttribute('aria-label', `${title}: interactive plot of ${data.x}`);
    live.setAttribute('aria-describedby', `${range.id} ${help.id}`);

    const svg = el('svg', { viewBox: `0 0 ${W} ${H}`, 'aria-hidden': 'true', focusable: 'false' }, live);
    const clipId = `plot-clip-${n}`;
    el('rect', { x: M.left, y: M.top, width: PW, height: PH }, el('clipPath', { id: clipId }, el('defs', {}, svg)));
    const axes = el('g', { class: 'plot-axes' }, svg);
    const body = el('g', { 'clip-path': `url(#${clipId})` }, svg);
    const marks = el('g', { class: 'plot-labels', 'clip-path': `url(#${clipId})` }, svg);
    const band = el('rect', { x: 0, y: M.top, width: 0, height: PH, fill: '#0072b2', 'fill-opacity': '0.15', stroke: '#0072b2', visibility: 'hidden' }, svg);
    const hit = el('rect', { x: M.left, y: M.top, width: PW, height: PH, fill: 'transparent' }, svg);

    const legend = document.createElement('ul');
    legend.className = 'plot-legend';

    function key(colour, width, dash) {
      const k = el('svg', { width: 34, height: 10, 'aria-hidden': 'true', focusable: 'false' });
      const attrs = { x1: 2, y1: 5, x2: 32, y2: 5, stroke: colour, 'stroke-width': width };
      if (dash) attrs['stroke-dasharray'] = dash;
      el('line', attrs, k);
      return k;
    }

    // The layers drawn: the spectra, then the difference trace when one is chosen.
    function layers() {
      const out = series.map((s, i) => ({ s: s, colour: COLOURS[i % COLOURS.length], dash: DASHES[i % DASHES.length], width: i === 0 ? 2.2 : 1.6, index: i }));
      if (diffSeries) out.push({ s: diffSeries, colour: DIFF_COLOUR, dash: null, width: 1.8, index: -1 });
      return out;
    }
    // A mirror plot (two EI spectra, the second below the axis) only laid over, without a
    // difference trace; stacking or a difference draws every spectrum upwards.
    const mirrored = () => !!data.mirror && !stacked && !diffSeries;

    function drawLegend() {
      legend.textContent = '';
      layers().forEach((l) => {
        const li = document.createElement('li');
        li.appendChild(key(l.colour, l.index === 0 ? 3 : 2, l.dash));
        let text = ' ' + l.s.label;
        if (mirrored()) text += l.index === 0 ? ' (above the axis)' : ' (below the axis)';
        if (l.s.diff) text += ' (difference)';
        li.appendChild(document.createTextNode(text));
        legend.appendChild(li);
      });
    }

    // x to the plot's pixels and back, by the trade's direction.
    const px = (x) => M.left + (down ? (view[1] - x) : (x - view[0])) / (view[1] - view[0]) * PW;
    const fromPx = (p) => {
      const f = (p - M.left) / PW;
      return down ? view[1] - f * (view[1] - view[0]) : view[0] + f * (view[1] - view[0]);
    };
    const inView = (x) => x >= view[0] && x <= view[1];

    // The lowest and highest value of a layer in view (0 always included).
    function extent(s) {
      let lo = 0;
      let hi = 0;
      s.points.forEach((p) => { if (inView(p[0])) { lo = Math.min(lo, p[1]); hi = Math.max(hi, p[1]); } });
      return [lo, Math.max(hi, lo + 0.02)];
    }

    function draw() {
      axes.textContent = '';
      body.textContent = '';
      marks.textContent = '';
      const ls = layers();
      const mirror = mirrored();
      // Each layer's baseline (its y = 0 on the plot's scale) and the plot's y range. Laid
      // over: one scale from the lowest to the highest value in view (so a zoomed band fills
      // the plot); a mirror plot symmetric about 0. Stacked: the layers one above the other,
      // the first on top, each scaled to its own range in view.
      let top;
      let bottom;
      const base = [];
      const scale = [];
      if (stacked) {
        let cursor = 0;
        for (let i = ls.length - 1; i >= 0; i--) {
          const e = extent(ls[i].s);
          const k = 1 / (e[1] - e[0]);
          scale[i] = k;
          base[i] = cursor - e[0] * k;
          cursor = base[i] + e[1] * k + 0.12;
        }
        bottom = -0.04;
        top = cursor - 0.08;
      } else {
        let lo = 0;
        let hi = 0;
        ls.forEach((l, i) => {
          const e = extent(l.s);
          const sign = mirror && i === 1 ? -1 : 1;
          lo = Math.min(lo, sign * e[0], sign * e[1]);
          hi = Math.max(hi, sign * e[0], sign * e[1]);
          base[i] = 0;
          scale[i] = sign;
        });
        hi = Math.max(hi, 0.02) * 1.08;
        lo = lo < 0 ? lo * 1.08 : 0;
        if (mirror) { hi = Math.max(hi, -lo); lo = -hi; }
        top = hi;
        bottom = lo;
      }
      const py = (y) => M.top + (top - y) / (top - bottom) * PH;
      const at = (i, y) => py(base[i] + scale[i] * y);

      const xt = ticks(view[0], view[1], 8);
      xt.values.forEach((v) => {
        el('line', { x1: px(v), x2: px(v), y1: M.top, y2: M.top + PH, stroke: '#e4e4e4' }, axes);
        const t = el('text', { x: px(v), y: M.top + PH + 20, 'text-anchor': 'middle', 'font-size': 14, fill: '#1a1a1a' }, axes);
        t.textContent = format(v, xt.step);
      });
      if (stacked) {
        ls.forEach((l, i) => {
          el('line', { x1: M.left, x2: M.left + PW, y1: at(i, 0), y2: at(i, 0), stroke: '#b0b0b0' }, axes);
          const t = el('text', { x: M.left - 8, y: at(i, 0) + 5, 'text-anchor': 'end', 'font-size': 14, fill: '#1a1a1a' }, axes);
          t.textContent = '0';
        });
      } else {
        const yt = ticks(bottom, top, 5);
        yt.values.forEach((v) => {
          el('line', { x1: M.left, x2: M.left + PW, y1: py(v), y2: py(v), stroke: '#e4e4e4' }, axes);
          const t = el('text', { x: M.left - 8, y: py(v) + 5, 'text-anchor': 'end', 'font-size': 14, fill: '#1a1a1a' }, axes);
          t.textContent = format(mirror ? Math.abs(v) : v, yt.step);
        });
        if (bottom < 0) el('line', { x1: M.left, x2: M.left + PW, y1: py(0), y2: py(0), stroke: '#1a1a1a' }, axes);
      }
      el('rect', { x: M.left, y: M.top, width: PW, height: PH, fill: 'none', stroke: '#1a1a1a' }, axes);
      const xl = el('text', { x: M.left + PW / 2, y: H - 10, 'text-anchor': 'middle', 'font-size': 15, fill: '#1a1a1a' }, axes);
      xl.textContent = data.x;
      const yl = el('text', { x: 16, y: M.top + PH / 2, 'text-anchor': 'middle', 'font-size': 15, fill: '#1a1a1a', transform: `rotate(-90 16 ${M.top + PH / 2})` }, axes);
      yl.textContent = stacked ? 'stacked, each scaled to its range' : 'scaled to 1';

      ls.forEach((l, i) => {
        const s = l.s;
        const cls = s.diff ? 'plot-diff' : 'plot-series';
        if (s.sticks) {
          let d = '';
          s.points.forEach((p) => {
            if (!inView(p[0])) return;
            const x = px(p[0]).toFixed(1);
            d += `M${x} ${at(i, 0).toFixed(1)}V${at(i, p[1]).toFixed(1)}`;
          });
          el('path', { class: cls, d: d || 'M0 0', stroke: l.colour, 'stroke-width': i === 0 ? 2.5 : 2, fill: 'none' }, body);
        } else {
          // Points in view, one beyond on each side, so the line reaches the frame.
          const pts = [];
          s.points.forEach((p, j) => {
            const next = s.points[j + 1];
            const prev = s.points[j - 1];
            const inside = (q) => q && inView(q[0]);
            if (inside(p) || inside(next) || inside(prev)) pts.push(px(p[0]).toFixed(1) + ',' + at(i, p[1]).toFixed(1));
          });
          const attrs = { class: cls, points: pts.join(' '), stroke: l.colour, 'stroke-width': l.width, fill: 'none', 'stroke-linejoin': 'round' };
          if (l.dash) attrs['stroke-dasharray'] = l.dash;
          el('polyline', attrs, body);
        }
        if (stacked) {
          const t = el('text', { x: M.left + 8, y: at(i, 0) - 6, 'font-size': 13, fill: '#1a1a1a' }, marks);
          t.textContent = s.label;
        }
      });

      // Peak labels, strongest first, none within reach of another already written.
      let written = 0;
      if (labels) {
        const kept = [];
        ls.forEach((l, i) => {
          if (l.s.diff) return;
          if (!stacked && !mirror && i > 1) return; // laid over: the first two only
          const below = mirror && i === 1;
          let count = 0;
          l.s.peaks
            .filter((p) => inView(p[0]) && p[1] >= 0.05)
            .sort((a, b) => b[1] - a[1])
            .forEach((p) => {
              if (count >= MOST_LABELS) return;
              const x = px(p[0]);
              const y = below ? at(i, p[1]) + 15 : at(i, p[1]) - 6;
              if (kept.some((k) => Math.abs(k[0] - x) < LABEL_GAP_X && Math.abs(k[1] - y) < LABEL_GAP_Y)) return;
              if (y < M.top + 10) return;
              kept.push([x, y]);
              count += 1;
              const t = el('text', { x: x, y: y, 'text-anchor': 'middle', 'font-size': 12, fill: l.index === 0 ? '#1a1a1a' : '#005a8c' }, marks);
              t.textContent = p[0].toFixed(digits);
            });
          written += count;
        });
      }

      const whole = view[0] <= full[0] && view[1] >= full[1];
      const step = ticks(view[0], view[1], 8).step;
      const first = down ? view[1] : view[0];
      const last = down ? view[0] : view[1];
      range.textContent = `${data.x}: ${format(first, step / 10)} to ${format(last, step / 10)}` + (whole ? ' (whole range)' : '') +
        (stacked ? '; stacked' : '') + (diffSeries ? `; with ${diffSeries.label}` : '');
      figure.setAttribute('data-x-from', String(view[0]));
      figure.setAttribute('data-x-to', String(view[1]));
      figure.setAttribute('data-stacked', String(stacked));
      figure.setAttribute('data-difference', diffSeries ? String(diffWith) : '');
      figure.setAttribute('data-labels', String(written));
      reset.disabled = whole;
      stack.setAttribute('aria-pressed', String(stacked));
      labelButton.setAttribute('aria-pressed', String(labels));
      if (diffSelect) diffSelect.value = String(diffWith);
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
    function setDifference(k) {
      diffWith = k > 0 && k < series.length ? k : 0;
      diffSeries = diffWith ? difference(series[0], series[diffWith]) : null;
      drawLegend();
      draw();
    }
    function toggleStack() {
      stacked = !stacked;
      drawLegend();
      draw();
    }
    function toggleLabels() {
      labels = !labels;
      draw();
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
      else if (k === 's' || k === 'S') toggleStack();
      else if ((k === 'd' || k === 'D') && series.length >= 2) setDifference((diffWith + 1) % series.length);
      else if (k === 'l' || k === 'L') toggleLabels();
      else return;
      ev.preventDefault();
    });
    reset.addEventListener('click', () => setView(full[0], full[1]));
    stack.addEventListener('click', toggleStack);
    labelButton.addEventListener('click', toggleLabels);
    if (diffSelect) diffSelect.addEventListener('change', () => setDifference(Number(diffSelect.value)));

    const still = figure.querySelector('.plot-static');
    figure.insertBefore(tools, still);
    figure.insertBefore(live, still);
    figure.insertBefore(legend, still);
    figure.insertBefore(help, still);
    if (still) still.classList.add('plot-replaced');
    figure.classList.add('plot-enhanced');
    drawLegend();
    draw();
  }

  function start() {
    document.querySelectorAll('figure.plot[data-plot]').forEach(enhance);
    // The printable report's print button: shown only where this script runs.
    document.querySelectorAll('button[data-action="print"]').forEach((b) => {
      b.hidden = false;
      b.addEventListener('click', () => window.print());
    });
  }
  if (document.readyState === 'loading') document.addEventListener('DOMContentLoaded', start);
  else start();
})();
