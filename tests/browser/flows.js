// Drives whorl's web pages in Debian's chromium (playwright-core) and checks every page with
// axe-core. Started by scripts/browser-flows, which makes the library, the accounts and the
// server; this file gets them from the environment:
//   WHORL_URL      the server's base URL (loopback)
//   WHORL_FIRST    "name:password" of the account that submitted the pending spectrum
//   WHORL_SECOND   "name:password" of another account with the sign-off role
//   WHORL_PENDING  the pending spectrum's id
//   WHORL_UNKNOWN  the unknown's file to search
//   WHORL_SHOTS    the folder for the screenshots
//   WHORL_DOCS     "yes" to refresh docs/web-search.png and docs/web-review.png
// One line per step; the first failed step ends the run with a non-zero exit.
'use strict';
const path = require('path');
const fs = require('fs');
const { chromium } = require('playwright-core');

const env = (k) => {
  const v = process.env[k];
  if (!v) { console.error(`browser-flows: ${k} is not set`); process.exit(2); }
  return v;
};
const base = env('WHORL_URL');
const [firstName, firstPass] = env('WHORL_FIRST').split(':');
const [secondName, secondPass] = env('WHORL_SECOND').split(':');
const pending = env('WHORL_PENDING');
const unknown = env('WHORL_UNKNOWN');
const shots = env('WHORL_SHOTS');
const docs = process.env.WHORL_DOCS === 'yes';
// The page's Content-Security-Policy (script-src 'self') refuses page.addScriptTag's inline
// script, as it should; axe-core's source is evaluated through the DevTools protocol instead,
// which the policy does not govern, so the pages are checked under their real policy.
const axeSource = fs.readFileSync(require.resolve('axe-core'), 'utf8');

let step = 0;
const axeReport = [];
function ok(what) { step += 1; console.log(`ok ${step} ${what}`); }
function fail(what, why) {
  step += 1;
  console.log(`FAILED ${step} ${what}: ${why}`);
  throw new Error('step failed');
}
function expect(cond, what, why) { if (!cond) fail(what, why); ok(what); }

// axe-core on the page as it is now: any serious or critical violation fails the run.
async function axe(page, name) {
  await page.evaluate(axeSource);
  const result = await page.evaluate(async () => {
    // WCAG 2.0/2.1 A and AA rules plus axe's best practices.
    const r = await window.axe.run(document, { resultTypes: ['violations'] });
    return r.violations.map((v) => ({
      id: v.id, impact: v.impact, help: v.help,
      nodes: v.nodes.slice(0, 3).map((n) => n.target.join(' ') + ': ' + (n.failureSummary || '').split('\n').slice(0, 2).join(' ')),
    }));
  });
  const bad = result.filter((v) => v.impact === 'serious' || v.impact === 'critical');
  axeReport.push(`${name}: ${result.length} violation(s), ${bad.length} serious or critical` +
    (result.length ? ' [' + result.map((v) => `${v.id} (${v.impact})`).join(', ') + ']' : ''));
  if (bad.length) {
    fail(`axe-core on ${name}`, bad.map((v) => `${v.id} (${v.impact}): ${v.help}; ${v.nodes.join(' | ')}`).join('\n  '));
  }
  ok(`axe-core on ${name}: no serious or critical violation (${result.length} minor)`);
}

async function shoot(page, name) {
  await page.screenshot({ path: path.join(shots, `${name}.png`), fullPage: true });
}

// Every page is screenshotted and checked with axe-core.
async function visited(page, name) {
  await shoot(page, name);
  await axe(page, name);
}

async function signIn(page, name, pass) {
  await page.goto(base + '/sign-in');
  await page.fill('#name', name);
  await page.fill('#password', pass);
  await Promise.all([page.waitForNavigation(), page.click('form[action="/sign-in"] button[type=submit]')]);
  const who = await page.textContent('#account').catch(() => null);
  expect(who && who.trim().toLowerCase() === name.toLowerCase(), `sign in as ${name}`,
    `expected "${name}" in the header, found ${JSON.stringify(who)} at ${page.url()}`);
  const role = (await page.textContent('#role')).trim();
  expect(role.length > 0, `the header shows the role (${role})`, 'no role shown');
}

async function signOut(page) {
  await Promise.all([page.waitForNavigation(), page.click('form[action="/sign-out"] button')]);
  const h1 = (await page.textContent('h1')).trim();
  expect(h1 === 'Sign in' && (await page.$('#password')) !== null, 'sign out: the sign-in page is shown',
    `found "${h1}" at ${page.url()}`);
}

async function caution(page, name) {
  const text = await page.textContent('.caution').catch(() => '');
  expect(/evidence, not proof of identity/.test(text || ''), `the caution is on ${name}`, 'no caution line');
}

// The interactive plot (assets/plot.js) on the search result's first figure: drawn in place of
// the static SVG, x by the trade's direction, zoom by dragging and by keys, pan, reset; and the
// static SVG without JavaScript.
async function zoomPlot(page, context, browser) {
  const fig = page.locator('figure.plot').first();
  const range = async () => [Number(await fig.getAttribute('data-x-from')), Number(await fig.getAttribute('data-x-to'))];
  expect(await fig.locator('.plot-live svg').isVisible() && !(await fig.locator('.plot-static').isVisible()),
    'the interactive plot replaces the static SVG', 'no .plot-live or the static SVG still shown');
  const whole = await range();
  expect(whole[1] > whole[0], `the plot shows x ${whole[0]} to ${whole[1]}`, JSON.stringify(whole));
  // The x ticks (numbers above 100 on an IR plot) in the order they stand on screen.
  const xs = await fig.locator('.plot-live svg .plot-axes text').evaluateAll((ts) => ts
    .map((t) => ({ v: Number(t.textContent), left: t.getBoundingClientRect().left }))
    .filter((t) => Number.isFinite(t.v) && t.v > 100)
    .sort((a, b) => a.left - b.left).map((t) => t.v));
  expect(xs.length > 3 && xs.every((v, i) => i === 0 || v < xs[i - 1]),
    `wavenumber decreases to the right on screen (${xs.join(', ')})`, JSON.stringify(xs));
  expect((await fig.locator('.plot-live').getAttribute('tabindex')) === '0' &&
    ((await fig.locator('.plot-live').getAttribute('aria-label')) || '').length > 10,
    'the plot is focusable and labelled', 'no tabindex or aria-label');

  // Drag from 40 % to 60 % of the plot's width.
  await fig.locator('.plot-live svg').scrollIntoViewIfNeeded();
  const box = await fig.locator('.plot-live svg').boundingBox();
  const y = box.y + box.height / 2;
  await page.mouse.move(box.x + box.width * 0.4, y);
  await page.mouse.down();
  await page.mouse.move(box.x + box.width * 0.5, y, { steps: 4 });
  await page.mouse.move(box.x + box.width * 0.6, y, { steps: 4 });
  await page.mouse.up();
  const dragged = await range();
  const span = (r) => r[1] - r[0];
  expect(span(dragged) < span(whole) * 0.3 && dragged[0] > whole[0] && dragged[1] < whole[1],
    `drag to zoom: x ${whole[0]}..${whole[1]} became ${dragged[0].toFixed(0)}..${dragged[1].toFixed(0)}`, JSON.stringify(dragged));

  // Keys: 0 resets, + zooms in, the right arrow moves to lower wavenumbers, - zooms out.
  await fig.locator('.plot-live').focus();
  const ring = await fig.locator('.plot-live').evaluate((e) => getComputedStyle(e).outlineStyle + ' ' + getComputedStyle(e).outlineWidth);
  expect(/solid 3px/.test(ring), `the focused plot shows a focus ring (${ring})`, ring);
  await page.keyboard.press('0');
  const reset = await range();
  expect(reset[0] === whole[0] && reset[1] === whole[1], 'key 0: the whole range again', JSON.stringify(reset));
  await page.keyboard.press('+');
  const zoomed = await range();
  expect(Math.abs(span(zoomed) - span(whole) / 2) < 1e-6 * span(whole), 'key +: half the range', JSON.stringify(zoomed));
  await page.keyboard.press('ArrowRight');
  const panned = await range();
  expect(panned[0] < zoomed[0] && Math.abs(span(panned) - span(zoomed)) < 1e-6 * span(whole),
    'right arrow: pans to lower wavenumbers (rightwards on screen)', JSON.stringify(panned));
  await page.keyboard.press('-');
  await page.keyboard.press('-');
  const out = await range();
  expect(out[0] === whole[0] && out[1] === whole[1], 'key -: zooms out, no further than the whole range', JSON.stringify(out));
  await page.keyboard.press('+');
  await fig.getByRole('button', { name: 'Whole range' }).click();
  const button = await range();
  expect(button[0] === whole[0] && button[1] === whole[1], 'the Whole range button resets the plot', JSON.stringify(button));
  // Left zoomed into the fingerprint region by keys alone (about 1600..1150 cm-1) for the
  // screenshot and the axe run.
  await fig.locator('.plot-live').focus();
  for (const k of ['+', '+', ...Array(9).fill('ArrowRight'), '+']) await page.keyboard.press(k);

  // Without JavaScript the static SVG is the plot.
  const plain = await browser.newContext({ javaScriptEnabled: false, storageState: await context.storageState(), viewport: { width: 1280, height: 900 } });
  const p2 = await plain.newPage();
  await p2.goto(page.url());
  const staticShown = await p2.locator('figure.plot .plot-static svg').first().isVisible();
  const liveCount = await p2.locator('.plot-live').count();
  await plain.close();
  expect(staticShown && liveCount === 0, 'without JavaScript the static SVG is shown', `static ${staticShown}, live ${liveCount}`);
}

async function main() {
  fs.mkdirSync(shots, { recursive: true });
  const browser = await chromium.launch({ executablePath: '/usr/bin/chromium', args: ['--no-sandbox'] });
  try {
    const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
    const page = await context.newPage();
    const errors = [];
    page.on('pageerror', (e) => errors.push(String(e)));
    // Console errors, except the browser's note of a refused request (checked just below).
    page.on('console', (m) => {
      if (m.type() === 'error' && !m.text().startsWith('Failed to load resource')) errors.push(m.text());
    });
    // Refused requests: only those the flow provokes (a wrong password, a self-review).
    const expected = [/^POST \/sign-in 401$/, /^POST \/review\/\d+ 4\d\d$/];
    page.on('response', (r) => {
      if (r.status() < 400) return;
      const what = `${r.request().method()} ${new URL(r.url()).pathname} ${r.status()}`;
      if (!expected.some((e) => e.test(what))) errors.push(what);
    });

    // Not signed in: the sign-in page.
    await page.goto(base + '/');
    expect((await page.$('#password')) !== null, 'a browser not signed in is sent to the sign-in page', page.url());
    await caution(page, 'the sign-in page');
    await visited(page, 'sign-in');

    // A wrong password is refused plainly.
    await page.fill('#name', firstName);
    await page.fill('#password', 'not the password at all');
    await Promise.all([page.waitForNavigation(), page.click('form[action="/sign-in"] button[type=submit]')]);
    const refusal = await page.textContent('[role=alert]').catch(() => '');
    expect(refusal && refusal.trim().length > 0, 'a wrong password is refused with a message', 'no message');
    await visited(page, 'sign-in-refused');

    await signIn(page, firstName, firstPass);

    // Search by upload.
    await page.goto(base + '/search');
    await caution(page, 'the search page');
    await visited(page, 'search');
    await page.setInputFiles('#file', unknown);
    await Promise.all([page.waitForNavigation(), page.click('#search-form button[type=submit]')]);
    const verdict = await page.getAttribute('#verdict', 'data-verdict').catch(() => null);
    const verdictText = (await page.textContent('#verdict').catch(() => '')) || '';
    expect(verdict && verdictText.trim().length > 20, `search by upload: the verdict is stated (${verdict})`,
      `no verdict at ${page.url()}`);
    const hits = await page.$$eval('#hits tbody tr', (rows) => rows.map((r) => r.textContent));
    expect(hits.length >= 1 && /spectrum \d+/.test(hits[0]), `search by upload: ${hits.length} hits listed`,
      JSON.stringify(hits));
    // Each figure: the server's static SVG with its lines, and the plot on screen (the
    // interactive one drawn over the same spectra) at a readable size.
    const plots = await page.$$eval('figure.plot', (figs) => figs.map((f) => {
      const still = f.querySelector('.plot-static svg');
      const shown = [...f.querySelectorAll('svg')].find((s) => s.getBoundingClientRect().width > 0 && s.closest('.plot-live, .plot-static'));
      const b = shown ? shown.getBoundingClientRect() : { width: 0, height: 0 };
      return { w: b.width, h: b.height, paths: still ? still.querySelectorAll('path,polyline,line').length : 0,
        drawn: shown ? shown.querySelectorAll('path,polyline').length : 0 };
    }));
    expect(plots.length >= 1 && plots.every((p) => p.w > 300 && p.h > 100 && p.paths > 2 && p.drawn >= 2),
      `search by upload: ${plots.length} plots drawn (first ${Math.round(plots[0] ? plots[0].w : 0)} px wide)`,
      JSON.stringify(plots));
    await zoomPlot(page, context, browser);
    await caution(page, 'the search result');
    await visited(page, 'search-result');
    if (docs) await page.screenshot({ path: 'docs/web-search.png', fullPage: true, clip: { x: 0, y: 0, width: 1280, height: 1780 } });

    // The library and a spectrum page.
    await page.goto(base + '/library');
    const rows = await page.$$('table.list tbody tr');
    expect(rows.length > 1, `the library lists ${rows.length} spectra on its first page`, 'empty');
    await visited(page, 'library');
    // Sorting by keyboard alone: the compound heading is a link; focused and Enter sorts by
    // name, and the same heading then turns the order round.
    for (const order of ['ascending', 'descending']) {
      await page.focus('#spectra th a[href*="sort=name"]');
      await Promise.all([page.waitForNavigation(), page.keyboard.press('Enter')]);
      const names = await page.$$eval('#spectra tbody tr', (rs) => rs.map((r) => r.cells[1].textContent.trim().toLowerCase()));
      const sorted = [...names].sort();
      if (order === 'descending') sorted.reverse();
      const sort = await page.getAttribute('#spectra th[aria-sort]', 'aria-sort');
      expect(JSON.stringify(names) === JSON.stringify(sorted) && sort === order,
        `the library sorted by compound name, ${order}, by keyboard (${names[0]} first)`, `${sort}: ${names.slice(0, 5)}`);
    }
    await visited(page, 'library-sorted');
    await page.goto(base + `/spectra/${pending}`);
    const title = (await page.textContent('h1')) || '';
    expect(title.includes(pending) || title.length > 0, `the spectrum page of ${pending} opens`, page.url());
    await visited(page, 'spectrum');

    // The review queue, and the submitter's own sign-off refused (four-eyes rule).
    await page.goto(base + '/review');
    const queued = await page.$$eval('#queue tbody a', (as) => as.map((a) => a.getAttribute('href')));
    expect(queued.includes(`/review/${pending}`), `the review queue lists spectrum ${pending}`, JSON.stringify(queued));
    await visited(page, 'review-queue');
    await Promise.all([page.waitForNavigation(), page.click(`#queue a[href="/review/${pending}"]`)]);
    expect((await page.$('#sign-off')) !== null, `open pending spectrum ${pending}: the sign-off form is there`, page.url());
    await visited(page, 'review');
    await page.check('#verify');
    await page.fill('#password', firstPass);
    await Promise.all([page.waitForNavigation(), page.click('#sign-off button[type=submit]')]);
    const problem = (await page.textContent('#problem').catch(() => '')) || '';
    expect(/four-eyes|someone else/i.test(problem), 'a self-review is refused with a clear message',
      `found ${JSON.stringify(problem)}`);
    expect((await page.textContent('#metadata')).includes('pending'), 'after the refusal the spectrum is still pending', 'status changed');
    await visited(page, 'review-refused');
    await signOut(page);

    // Another account approves it with its password.
    await signIn(page, secondName, secondPass);
    await page.goto(base + `/review/${pending}`);
    if (docs) await page.screenshot({ path: 'docs/web-review.png', fullPage: true, clip: { x: 0, y: 0, width: 1280, height: 1300 } });
    await page.check('#verify');
    await page.fill('#password', secondPass);
    await page.fill('#note', 'Bands checked against the lab\'s own measurement.');
    await Promise.all([page.waitForNavigation(), page.click('#sign-off button[type=submit]')]);
    const after = (await page.textContent('main')) || '';
    expect(page.url().includes(`/spectra/${pending}`) && /verified/.test(after),
      `approve spectrum ${pending} with the password as ${secondName}: it is verified`, `at ${page.url()}`);
    await visited(page, 'spectrum-signed');
    await page.goto(base + '/review');
    const left = await page.$$eval('#queue tbody a', (as) => as.map((a) => a.getAttribute('href'))).catch(() => []);
    expect(!left.includes(`/review/${pending}`), `spectrum ${pending} has left the review queue`, JSON.stringify(left));

    // The audit trail: the spectrum's events, newest first; filtered by account and action
    // through the form; a date range after today holds nothing.
    await page.goto(base + `/audit?spectrum=${pending}`);
    const events = await page.$$eval('#events tbody tr', (rows) => rows.map((r) => [...r.cells].map((c) => c.textContent.trim())));
    expect(events.length === 2 && events[0][4] === 'review' && events[0][2] === secondName && events[0][3] === 'signed-in' &&
      events[1][4] === 'add', `the audit trail of spectrum ${pending}: the add, then the sign-off by ${secondName}, signed in`,
      JSON.stringify(events));
    await visited(page, 'audit');
    await page.fill('#filter-spectrum', '');
    await page.fill('#filter-account', secondName);
    await page.selectOption('#filter-action', 'review');
    await Promise.all([page.waitForNavigation(), page.click('form[action="/audit"] button[type=submit]')]);
    const mine = await page.$$eval('#events tbody tr', (rows) => rows.map((r) => [r.cells[2].textContent.trim(), r.cells[4].textContent.trim()]));
    expect(mine.length === 1 && mine[0][0] === secondName && mine[0][1] === 'review',
      `the audit trail filtered by account ${secondName} and action review: 1 event`, JSON.stringify(mine));
    const tomorrow = new Date(Date.now() + 86400000).toISOString().slice(0, 10);
    await page.goto(base + `/audit?from=${tomorrow}`);
    const none = (await page.textContent('#count')).trim();
    expect(none === 'No event matches.' && (await page.$$('#events tbody tr')).length === 0,
      `the audit trail from ${tomorrow}: no event`, none);

    await signOut(page);
    await visited(page, 'signed-out');
    expect(errors.length === 0, 'no script error or console error on any page', errors.join('; '));
  } finally {
    await browser.close();
  }
  console.log('axe-core ' + require('axe-core/package.json').version + ':');
  for (const line of axeReport) console.log('  ' + line);
}

main().then(() => { console.log(`browser-flows: all ${step} steps passed`); },
  (e) => {
    if (e.message !== 'step failed') console.log(`FAILED ${step + 1} ${e.message.split('\n')[0]}`);
    for (const line of axeReport) console.log('  ' + line);
    process.exitCode = 1;
  });
