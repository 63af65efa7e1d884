// The command line's HTML reports (`search --html` and `identify --html`, each with --sample
// and --analyst), opened from disk in Debian's chromium (playwright-core): nothing wider than
// the page at 1280 and 1920 px, the reference's silhouette visible where it meets the
// unknown's line, and the browser's print to PDF holding the case, the hit table and whole
// plots on sensible pages. Started by scripts/browser-flows; from the environment
// WHORL_SEARCH_REPORT and WHORL_IDENTIFY_REPORT (HTML files), WHORL_SAMPLE, WHORL_ANALYST and
// WHORL_SHOTS (where screenshots and PDFs go).
'use strict';
const path = require('path');
const fs = require('fs');
const { chromium } = require('playwright-core');
const { pdfText } = require('./pdf-text');

const env = (k) => {
  const v = process.env[k];
  if (!v) { console.error(`cli-reports: ${k} is not set`); process.exit(2); }
  return v;
};
const reports = { search: env('WHORL_SEARCH_REPORT'), identify: env('WHORL_IDENTIFY_REPORT') };
const sample = env('WHORL_SAMPLE');
const analyst = env('WHORL_ANALYST');
const shots = env('WHORL_SHOTS');

let step = 0;
let failed = 0;
function expect(cond, what, why) {
  step += 1;
  if (cond) { console.log(`ok ${step} ${what}`); return; }
  failed += 1;
  console.log(`FAILED ${step} ${what}: ${why}`);
}
// Text compared without its white space and case (a PDF places words, it stores no spaces).
const squeeze = (t) => t.normalize('NFKC').replace(/\s+/g, '').toLowerCase();

// What sticks out past the page or its own box: the page's scroll width against the window,
// and every table's right edge against the main column's.
async function overflow(page) {
  return page.evaluate(() => {
    const main = document.querySelector('main').getBoundingClientRect();
    const tables = [...document.querySelectorAll('table')].map((t, i) => ({
      i, cls: t.className, right: Math.round(t.getBoundingClientRect().right), scroll: t.parentElement.scrollWidth - t.parentElement.clientWidth,
    }));
    return {
      page: document.documentElement.scrollWidth - window.innerWidth,
      main: Math.round(main.right),
      wide: tables.filter((t) => t.right > main.right + 1 || t.scroll > 1),
      tables: tables.length,
    };
  });
}

// The first overlay plot rasterised in the page (the SVG drawn onto a canvas at its own size),
// then read at the points of the unknown's line that lie inside the reference's silhouette:
// there the silhouette must show (the pixel tinted blue), and the line must still be dark.
async function silhouette(page) {
  return page.evaluate(async () => {
    const svg = document.querySelector('section.query figure svg');
    if (!svg) return { error: 'no plot' };
    const w = Number(svg.getAttribute('width'));
    const h = Number(svg.getAttribute('height'));
    const xml = new XMLSerializer().serializeToString(svg);
    const img = new Image();
    img.src = 'data:image/svg+xml;base64,' + btoa(unescape(encodeURIComponent(xml)));
    await img.decode();
    const canvas = document.createElement('canvas');
    canvas.width = w;
    canvas.height = h;
    const ctx = canvas.getContext('2d');
    ctx.drawImage(img, 0, 0, w, h);
    const px = ctx.getImageData(0, 0, w, h).data;
    const shapes = [...svg.querySelectorAll('polyline, polygon, path')];
    const colour = (e, a) => (e.getAttribute(a) || '').toUpperCase();
    // The unknown: the longest heavy near-black line; the reference: the largest sky fill.
    const lines = shapes.filter((e) => e.tagName === 'polyline' && colour(e, 'stroke') === '#1A1A1A' && Number(e.getAttribute('stroke-width')) >= 2);
    const fills = shapes.filter((e) => e.tagName === 'polygon' && colour(e, 'fill') === '#56B4E9');
    if (!lines.length || !fills.length) return { error: `lines ${lines.length}, fills ${fills.length}` };
    const line = lines.sort((a, b) => b.points.numberOfItems - a.points.numberOfItems)[0];
    const fill = fills.sort((a, b) => b.points.numberOfItems - a.points.numberOfItems)[0];
    let inside = 0;
    let tinted = 0;
    let dark = 0;
    for (let i = 0; i < line.points.numberOfItems; i += 1) {
      const p = line.points.getItem(i);
      const x = Math.round(p.x);
      const y = Math.round(p.y);
      if (x < 1 || y < 1 || x >= w - 1 || y >= h - 1) continue;
      // The line's whole width (2 px) under the silhouette, not just touching its edge.
      if (!fill.isPointInFill(new DOMPoint(x, y - 2)) || !fill.isPointInFill(new DOMPoint(x, y + 2))) continue;
      inside += 1;
      const k = (y * w + x) * 4;
      const [r, g, b] = [px[k], px[k + 1], px[k + 2]];
      if (b - r >= 25) tinted += 1;
      if (r < 110) dark += 1;
    }
    return { inside, tinted, dark };
  });
}

async function pdfOf(page, name) {
  await page.emulateMedia({ media: 'print' });
  const pdf = await page.pdf({ format: 'A4', printBackground: true });
  await page.emulateMedia({ media: 'screen' });
  fs.writeFileSync(path.join(shots, `cli-${name}.pdf`), pdf);
  const { pages, text } = pdfText(pdf);
  return { pages, perPage: text.split('\f').map(squeeze), bytes: pdf.length };
}

(async () => {
  const browser = await chromium.launch({
    executablePath: '/usr/bin/chromium',
    args: ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'],
  });
  try {
    const page = await browser.newPage();
    for (const [name, file] of Object.entries(reports)) {
      for (const width of [1280, 1920]) {
        await page.setViewportSize({ width, height: 900 });
        await page.goto('file://' + path.resolve(file));
        const o = await overflow(page);
        expect(o.page <= 0 && o.wide.length === 0 && o.tables >= 2,
          `${name} report at ${width} px: nothing wider than the page or its column (${o.tables} tables)`, JSON.stringify(o));
        await page.screenshot({ path: path.join(shots, `cli-${name}-${width}.png`), fullPage: true });
      }
      const caseText = squeeze(await page.textContent('#case'));
      expect(caseText.includes(squeeze(sample)) && caseText.includes(squeeze(analyst)),
        `${name} report: the case section names the sample and the analyst`, caseText.slice(0, 200));
      const provenance = await page.$$eval('#case table.provenance tbody tr', (rs) => rs.map((r) => [...r.cells].map((c) => c.textContent.trim())));
      expect(provenance.length >= 2 && provenance.every((r) => r[3] === 'verified' && r[5] !== '' && r[6] !== ''),
        `${name} report: each hit's provenance (${provenance.length} rows) shows who signed it off and when`, JSON.stringify(provenance.slice(0, 3)));

      const s = await silhouette(page);
      expect(!s.error && s.inside >= 20 && s.tinted >= 0.9 * s.inside && s.dark >= 0.9 * s.inside,
        `${name} report: where the unknown's line lies inside the reference's silhouette, both show (${s.tinted}/${s.inside} points tinted, ${s.dark} dark)`,
        JSON.stringify(s));

      const pdf = await pdfOf(page, name);
      const all = pdf.perPage.join('');
      expect(pdf.pages >= 1 && pdf.pages <= 14, `${name} report printed to PDF: ${pdf.pages} A4 pages, ${pdf.bytes} bytes`, `${pdf.pages}`);
      const first = pdf.perPage[0];
      expect(first.includes(squeeze('A library match is evidence, not proof of identity')) && first.includes(squeeze(sample)),
        `${name} PDF: the caution and the case on page 1`, first.slice(0, 300));
      const firstHit = provenance[0] ? squeeze(provenance[0][1]) : '?';
      expect(all.includes(firstHit) && all.includes(squeeze("Where the hits' references come from")),
        `${name} PDF: the hit table and the provenance`, firstHit);
      // Each plot whole on one page: its caption's rank box and its axis title together.
      const captions = await page.$$eval('section.query figure figcaption', (fs) => fs.map((f) => f.textContent.trim()));
      const axisWords = ['wavenumber', 'Raman shift', 'm/z', 'chemical shift'].map(squeeze);
      let whole = 0;
      for (const c of captions) {
        const key = squeeze(c).slice(0, 40);
        const at = pdf.perPage.findIndex((t) => t.includes(key));
        if (at >= 0 && axisWords.some((a) => pdf.perPage[at].slice(pdf.perPage[at].indexOf(key)).includes(a))) whole += 1;
      }
      expect(captions.length >= 2 && whole === captions.length,
        `${name} PDF: each of the ${captions.length} plots has its caption and its axis on one page`, `${whole} of ${captions.length}`);
    }
  } finally {
    await browser.close();
  }
  console.log(`cli-reports: ${step - failed} passed, ${failed} failed`);
  process.exit(failed ? 1 : 0);
})().catch((e) => { console.error(e); process.exit(1); });
