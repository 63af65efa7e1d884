// The printable report, the interactive plot's stacking, difference trace, peak labels and
// keys, and the audit trail's chain check, in Debian's chromium (playwright-core), with
// axe-core on the new pages. Started by scripts/browser-flows after flows.js, on the same
// server; from the environment (as flows.js) WHORL_URL, WHORL_SECOND (a signer),
// WHORL_CURATOR ("name:password" of a curator), WHORL_UNKNOWN, WHORL_SHOTS.
// The report is printed to PDF by the browser (page.pdf); its text is read by pdf-text.js.
'use strict';
const path = require('path');
const fs = require('fs');
const { chromium } = require('playwright-core');
const { pdfText } = require('./pdf-text');

const env = (k) => {
  const v = process.env[k];
  if (!v) { console.error(`report-and-plot: ${k} is not set`); process.exit(2); }
  return v;
};
const base = env('WHORL_URL');
const [signerName, signerPass] = env('WHORL_SECOND').split(':');
const [curatorName, curatorPass] = env('WHORL_CURATOR').split(':');
const unknown = env('WHORL_UNKNOWN');
const shots = env('WHORL_SHOTS');
const axeSource = fs.readFileSync(require.resolve('axe-core'), 'utf8');

let step = 0;
function ok(what) { step += 1; console.log(`ok ${step} ${what}`); }
function fail(what, why) {
  step += 1;
  console.log(`FAILED ${step} ${what}: ${why}`);
  throw new Error('step failed');
}
function expect(cond, what, why) { if (!cond) fail(what, why); ok(what); }
// Text compared without its white space: a PDF places words, it does not store the spaces.
// Compatibility forms folded (a PDF may keep the "fi" ligature as one character) and case
// folded (the verdict's head is upper-cased by the style sheet).
const squeeze = (t) => t.normalize('NFKC').replace(/\s+/g, '').toLowerCase();

async function axe(page, name) {
  await page.evaluate(axeSource);
  const v = await page.evaluate(async () => (await window.axe.run(document, { resultTypes: ['violations'] })).violations
    .map((x) => ({ id: x.id, impact: x.impact, help: x.help, nodes: x.nodes.slice(0, 3).map((n) => n.target.join(' ')) })));
  const bad = v.filter((x) => x.impact === 'serious' || x.impact === 'critical');
  expect(bad.length === 0, `axe-core on ${name}: no serious or critical violation (${v.length} minor)`,
    bad.map((x) => `${x.id} (${x.impact}): ${x.help}; ${x.nodes.join(' | ')}`).join('\n  '));
}

async function signIn(page, name, pass) {
  await page.goto(base + '/sign-in');
  await page.fill('#name', name);
  await page.fill('#password', pass);
  await Promise.all([page.waitForNavigation(), page.click('form[action="/sign-in"] button[type=submit]')]);
  const who = ((await page.textContent('#account').catch(() => '')) || '').trim();
  expect(who.toLowerCase() === name.toLowerCase(), `sign in as ${name}`, `found ${JSON.stringify(who)}`);
}

async function signOut(page) {
  await Promise.all([page.waitForNavigation(), page.click('form[action="/sign-out"] button')]);
}

// The boxes (in page pixels) of a figure's drawn spectra, first to last.
async function seriesBoxes(fig) {
  return fig.locator('.plot-live svg .plot-series').evaluateAll((ls) => ls.map((l) => {
    const b = l.getBoundingClientRect();
    return { top: b.top, bottom: b.bottom };
  }));
}

async function plotSteps(page) {
  // The unknown with all plotted hits on one axis: stacked by key s, laid over again by s.
  const together = page.locator('figure#hits-together');
  expect(await together.count() === 1, 'the search result has a figure of the unknown with its hits', 'no #hits-together');
  const data = JSON.parse(await together.getAttribute('data-plot'));
  const help = (await together.locator('p.help').textContent()) || '';
  expect(/s to stack/.test(help) && /d for the difference/.test(help) && /l for peak labels/.test(help),
    'the plot documents its keys (s, d, l)', help);
  const live = together.locator('.plot-live');
  await live.scrollIntoViewIfNeeded();
  await live.focus();
  const over = await seriesBoxes(together);
  expect(over.length === data.series.length && over.length >= 3, `${over.length} spectra drawn laid over each other`, JSON.stringify(over));
  await page.keyboard.press('s');
  const stacked = await seriesBoxes(together);
  const apart = stacked.every((b, i) => i === 0 || stacked[i - 1].bottom <= b.top + 1);
  expect((await together.getAttribute('data-stacked')) === 'true' && apart,
    `key s stacks the ${stacked.length} spectra one above the other, the unknown on top`, JSON.stringify(stacked));
  expect((await together.getByRole('button', { name: 'Stack' }).getAttribute('aria-pressed')) === 'true',
    'the Stack button shows it is pressed', 'aria-pressed not true');
  await page.keyboard.press('s');
  const again = await seriesBoxes(together);
  const overlapping = again.some((b, i) => i > 0 && b.top < again[0].bottom - 1);
  expect((await together.getAttribute('data-stacked')) === 'false' && overlapping, 'key s again lays them over each other',
    JSON.stringify(again));

  // The first hit's overlay: the unknown minus the hit as a trace of its own, by key d; its
  // highest and lowest points stand where the difference of the sent spectra is largest and
  // smallest (computed here from data-plot, independently of the script).
  const fig = page.locator('figure.plot').nth(1);
  const d1 = JSON.parse(await fig.getAttribute('data-plot'));
  const [u, r] = d1.series;
  expect(u.y && r.y && u.y.length === r.y.length && u.x0 === r.x0, 'the overlay sends both spectra on one grid', JSON.stringify([u.x0, r.x0]));
  const diff = u.y.map((v, i) => v - r.y[i]);
  const argmax = diff.indexOf(Math.max(...diff));
  const argmin = diff.indexOf(Math.min(...diff));
  await fig.locator('.plot-live').focus();
  expect((await fig.locator('.plot-diff').count()) === 0, 'no difference trace at first', 'one is drawn');
  await page.keyboard.press('d');
  expect((await fig.getAttribute('data-difference')) === '1' && (await fig.locator('.plot-diff').count()) === 1,
    'key d draws the unknown minus hit 1 as a difference trace', await fig.getAttribute('data-difference'));
  const ys = (await fig.locator('.plot-diff').getAttribute('points')).trim().split(/\s+/).map((p) => Number(p.split(',')[1]));
  const highest = ys.indexOf(Math.min(...ys));
  const lowest = ys.indexOf(Math.max(...ys));
  // Points are written to 0.1 px: the drawn extreme may be any point within that of the true one.
  const tol = (diff[argmax] - diff[argmin]) * 0.002;
  expect(ys.length === diff.length && diff[highest] >= diff[argmax] - tol && diff[lowest] <= diff[argmin] + tol,
    `the difference trace peaks at the unknown's excess (point ${highest}) and dips at the hit's (point ${lowest})`,
    `trace ${ys.length} points, highest ${highest} lowest ${lowest}; expected ${argmax} and ${argmin}`);
  const legend = (await fig.locator('ul.plot-legend').textContent()) || '';
  expect(/minus/.test(legend) && /difference/.test(legend), 'the legend names the difference trace', legend);
  await page.keyboard.press('d');
  expect((await fig.locator('.plot-diff').count()) === 0 && (await fig.getAttribute('data-difference')) === '',
    'key d again (two spectra): back to no difference', await fig.getAttribute('data-difference'));
  await fig.locator('select').selectOption('1');
  expect((await fig.locator('.plot-diff').count()) === 1, 'the Difference list draws it too', 'no trace');
  await fig.locator('select').selectOption('0');

  // Peak labels: on by default, each one a peak position the server sent, written with the
  // report's decimals; l hides them and shows them again.
  const labels = async () => fig.locator('.plot-labels text').allTextContents();
  const shown = await labels();
  const sent = new Set([...u.peaks, ...r.peaks].map((x) => x.toFixed(d1.digits)));
  expect(shown.length > 0 && shown.every((t) => sent.has(t)) && Number(await fig.getAttribute('data-labels')) === shown.length,
    `${shown.length} peak labels, each a picked peak (${shown.slice(0, 5).join(', ')} ...)`, JSON.stringify(shown));
  await fig.locator('.plot-live').focus();
  await page.keyboard.press('l');
  expect((await labels()).length === 0, 'key l hides the peak labels', 'labels remain');
  await page.keyboard.press('l');
  expect((await labels()).length === shown.length, 'key l shows them again', 'not the same labels');
  // Zoomed in to a quarter (keys only) and panned to where there are peaks, the labels stay
  // within the range in view.
  for (const k of ['+', '+']) await page.keyboard.press(k);
  for (let i = 0; i < 12 && (await labels()).length === 0; i++) await page.keyboard.press('ArrowRight');
  const from = Number(await fig.getAttribute('data-x-from'));
  const to = Number(await fig.getAttribute('data-x-to'));
  const inView = (await labels()).map(Number);
  expect(inView.length > 0 && inView.length < shown.length + 20 && inView.every((x) => x >= from - 1 && x <= to + 1),
    `zoomed to ${from.toFixed(0)}..${to.toFixed(0)}: ${inView.length} labels, all in view (${inView.join(', ')})`,
    JSON.stringify(inView));
  await page.keyboard.press('0');
}

async function reportSteps(page, context) {
  // From the search result to its printable report.
  const link = page.locator('#report-link');
  expect(await link.count() === 1, 'the search result links to the printable report', 'no #report-link');
  await Promise.all([page.waitForNavigation(), link.click()]);
  expect(/\/search\/[0-9a-f]+\/report$/.test(new URL(page.url()).pathname), 'the printable report opens', page.url());
  // The verdict first: before the case, the provenance and the search in full.
  const order = await page.evaluate(() => ['#verdict', '#case', '#provenance', 'section.query', '#signatures']
    .map((s) => { const e = document.querySelector(s); return e ? e.getBoundingClientRect().top + window.scrollY : -1; }));
  expect(order.every((y, i) => y >= 0 && (i === 0 || y > order[i - 1])), 'the verdict comes first, then case, provenance, the search, the signatures',
    JSON.stringify(order));
  const hits = await page.$$eval('section.query table.hits tbody tr', (rs) => rs.length);
  const prov = await page.$$eval('#provenance tbody tr', (rs) => rs.map((r) => [...r.cells].map((c) => c.textContent.trim())));
  expect(prov.length === hits && prov.length > 0 && prov.every((r) => /^(verified|pending|withdrawn)$/.test(r[3]) && /^\d+$/.test(r[4])),
    `provenance of each of the ${hits} hits: status and revision`, JSON.stringify(prov));
  // The demo's references were approved on the command line: asserted, by name and time.
  const approved = prov.filter((r) => r[3] === 'verified');
  expect(approved.length > 0 && approved.every((r) => r[5] !== 'nobody' && /UTC/.test(r[6]) && /^(signed-in|asserted|imported)/.test(r[7])),
    `each verified hit names its approver, when, and how it was signed (${approved[0] ? approved[0][7].split(' ')[0] : ''})`, JSON.stringify(approved));
  const cautions = await page.$$eval('.caution', (cs) => cs.filter((c) => /evidence, not proof of identity/.test(c.textContent)).length);
  expect(cautions >= 2, 'the caution opens and closes the report', `${cautions}`);

  // The case fields.
  const sample = 'CASE-2026-0147 / vial 3';
  const analyst = 'R. Lindqvist (analyst)';
  await page.fill('#report-sample', sample);
  await page.fill('#report-analyst', analyst);
  await Promise.all([page.waitForNavigation(), page.click('#case-fields button[type=submit]')]);
  expect((await page.textContent('#case-sample')).trim() === sample && (await page.textContent('#case-analyst')).trim() === analyst,
    'the sample or case id and the analyst are put on the report', page.url());
  expect(await page.locator('button[data-action="print"]').isVisible(), 'with the script, a print button is shown', 'hidden');
  await page.screenshot({ path: path.join(shots, 'report.png'), fullPage: true });
  await axe(page, 'the printable report');

  // Print media: no navigation, no buttons, no forms; the plots and the signature block stay.
  await page.emulateMedia({ media: 'print' });
  const print = await page.evaluate(() => {
    const shown = (s) => [...document.querySelectorAll(s)].filter((e) => e.getClientRects().length > 0 && getComputedStyle(e).visibility !== 'hidden').length;
    return { nav: shown('header.bar, nav'), buttons: shown('button'), forms: shown('form'), figures: shown('section.query figure svg'), sig: shown('#signatures .sig') };
  });
  expect(print.nav === 0 && print.buttons === 0 && print.forms === 0 && print.figures >= 1 && print.sig === 1,
    `printed: no navigation, buttons or forms; ${print.figures} plots and the signature block kept`, JSON.stringify(print));
  await page.screenshot({ path: path.join(shots, 'report-print.png'), fullPage: true });

  // The browser's own print to PDF.
  const pdf = await page.pdf({ format: 'A4', printBackground: true });
  fs.writeFileSync(path.join(shots, 'report.pdf'), pdf);
  await page.emulateMedia({ media: 'screen' });
  expect(pdf.subarray(0, 5).toString('latin1') === '%PDF-', `print to PDF: ${pdf.length} bytes written`, 'not a PDF');
  const { pages, text } = pdfText(pdf);
  expect(pages >= 2 && pages <= 12, `the PDF has ${pages} pages (2 to 12 expected for 10 hits and 5 plots)`, `${pages}`);
  const flat = squeeze(text);
  const verdictText = squeeze(await page.textContent('#verdict'));
  const wanted = {
    'the verdict': verdictText,
    'the case id': squeeze(sample),
    'the analyst': squeeze(analyst),
    'the caution': squeeze('A library match is evidence, not proof of identity'),
    'the provenance heading': squeeze("Where each hit's reference comes from"),
    'the signature block': squeeze("Reviewer's signature and date"),
    'the plots\' x axis': squeeze('wavenumber'),
    'the first hit\'s name': squeeze(prov[0][1]),
  };
  for (const [what, t] of Object.entries(wanted)) {
    expect(flat.includes(t), `the PDF holds ${what}`, `"${t}" not in its text (${flat.slice(0, 200)}...)`);
  }
  const absent = ['Sign out', 'Put on the report', 'Print or save as PDF', 'Search again'];
  expect(absent.every((t) => !flat.includes(squeeze(t))), 'the PDF holds no navigation and no button labels',
    absent.filter((t) => flat.includes(squeeze(t))).join(', '));
  const firstVerdict = flat.indexOf(verdictText);
  const firstProvenance = flat.indexOf(squeeze("Where each hit's reference comes from"));
  expect(firstVerdict >= 0 && firstVerdict < firstProvenance, 'in the PDF the verdict comes before the hits', `${firstVerdict} ${firstProvenance}`);

  // Without JavaScript the report is the same document (no print button).
  const plain = await page.context().browser().newContext({ javaScriptEnabled: false, storageState: await context.storageState() });
  const p2 = await plain.newPage();
  await p2.goto(page.url());
  const still = { verdict: await p2.locator('#verdict').count(), figures: await p2.locator('section.query figure svg').count(), print: await p2.locator('button[data-action="print"]').isVisible() };
  await plain.close();
  expect(still.verdict === 1 && still.figures >= 1 && !still.print, 'without JavaScript the report is whole, without the print button', JSON.stringify(still));
}

// The library's numeric ranges: molar mass (from the formula) and date acquired.
async function libraryRanges(page) {
  await page.goto(base + '/library');
  await page.fill('#mass_min', '58');
  await page.fill('#mass_max', '59');
  await Promise.all([page.waitForNavigation(), page.click('form[action="/library"] button[type=submit]')]);
  const rows = await page.$$eval('#spectra tbody tr', (rs) => rs.map((r) => [r.cells[1].textContent.trim(), Number(r.cells[4].textContent)]));
  // Acetone, C3H6O: 58.08 g/mol (CIAAW standard atomic weights; common practice).
  const acetone = rows.find((r) => r[0] === 'acetone');
  expect(rows.length > 0 && rows.every((r) => r[1] >= 58 && r[1] <= 59) && acetone && Math.abs(acetone[1] - 58.08) < 0.01,
    `the library filtered to molar mass 58..59 g/mol: ${rows.length} spectra, acetone at ${acetone ? acetone[1] : '?'}`, JSON.stringify(rows));
  await page.goto(base + '/library?acquired_from=2099-01-01');
  expect((await page.textContent('#count')).trim() === 'No spectrum matches.', 'acquired from 2099 on: none', await page.textContent('#count'));
  const r = await page.goto(base + '/library?mass_min=heavy');
  const msg = (await page.textContent('[role=alert]').catch(() => '')) || '';
  expect(r.status() === 400 && /mass from: 'heavy' is not a molar mass/.test(msg), 'a mass that is not a number is refused with the field named', `${r.status()} ${msg}`);
}

async function auditSteps(page) {
  // A signer sees the last check but cannot run one.
  await page.goto(base + '/audit');
  expect((await page.locator('#last-check').count()) === 1 && (await page.locator('#check-now').count()) === 0,
    `the audit trail shows the last check; ${signerName} (signer) has no button to run one`, 'wrong');
  await signOut(page);
  await signIn(page, curatorName, curatorPass);
  await page.goto(base + '/audit');
  const before = (await page.textContent('#check-result')).trim();
  await Promise.all([page.waitForNavigation(), page.click('#check-now button[type=submit]')]);
  const after = (await page.textContent('#check-result')).trim();
  expect(after.includes(curatorName) && /signed-in/.test(after) && /no inconsistency/.test(after) && after !== before,
    `the curator checks the library now: recorded with who, when and what was found ("${after}")`, `${before} -> ${after}`);
  const first = await page.$$eval('#events tbody tr', (rs) => rs.length ? [...rs[0].cells].map((c) => c.textContent.trim()) : []);
  expect(first[4] === 'check' && first[2] === curatorName && first[3] === 'signed-in' && /findings 0|0/.test(first.join(' ')),
    'the check is the newest event of the trail', JSON.stringify(first));
  await page.selectOption('#filter-action', 'check');
  await Promise.all([page.waitForNavigation(), page.click('form[action="/audit"] button[type=submit]')]);
  const checks = await page.$$eval('#events tbody tr', (rs) => rs.map((r) => r.cells[4].textContent.trim()));
  expect(checks.length >= 1 && checks.every((a) => a === 'check'), `the trail filtered by action check: ${checks.length} event(s)`, JSON.stringify(checks));
  await page.goto(base + '/audit');
  await page.screenshot({ path: path.join(shots, 'audit-checked.png'), fullPage: true });
  await axe(page, 'the audit trail with its last check');
}

async function main() {
  const browser = await chromium.launch({ executablePath: '/usr/bin/chromium', args: ['--no-sandbox'] });
  const errors = [];
  try {
    const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
    const page = await context.newPage();
    page.on('pageerror', (e) => errors.push(String(e)));
    page.on('console', (m) => { if (m.type() === 'error' && !m.text().startsWith('Failed to load resource')) errors.push(m.text()); });
    page.on('response', (r) => {
      const what = `${r.request().method()} ${new URL(r.url()).pathname} ${r.status()}`;
      if (r.status() >= 400 && !/^GET \/favicon\.ico 404$/.test(what) && !/^GET \/library 400$/.test(what)) errors.push(what);
    });
    await signIn(page, signerName, signerPass);
    await page.goto(base + '/search');
    await page.setInputFiles('#file', unknown);
    await page.fill('#sample', 'CASE-2026-0147');
    await Promise.all([page.waitForNavigation(), page.click('#search-form button[type=submit]')]);
    expect((await page.locator('#verdict').count()) === 1, 'search by upload for the report and the plot', page.url());
    await plotSteps(page);
    await page.screenshot({ path: path.join(shots, 'search-result-tools.png'), fullPage: true });
    await reportSteps(page, context);
    await libraryRanges(page);
    await auditSteps(page);
    expect(errors.length === 0, 'no script error, console error or refused request', errors.join('; '));
  } finally {
    await browser.close();
  }
}

main().then(() => { console.log(`report-and-plot: all ${step} steps passed`); },
  (e) => {
    if (e.message !== 'step failed') console.log(`FAILED ${step + 1} ${e.message.split('\n')[0]}`);
    process.exitCode = 1;
  });
