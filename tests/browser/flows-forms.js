// The submit, identify and accounts pages in Debian's chromium (playwright-core), each checked
// with axe-core; run by scripts/browser-flows after flows.js, on the same server. From the
// environment:
//   WHORL_URL       the server's base URL (loopback)
//   WHORL_ADMIN     "name:password" of an administrator (who may also submit)
//   WHORL_FIRST     "name:password" of an account with the sign-off role only
//   WHORL_SUBMIT    a spectrum file to submit (IR)
//   WHORL_IDENTIFY  "IR file:1H NMR file" of one sample, in CDCl3
//   WHORL_SHOTS     the folder for the screenshots
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
const [adminName, adminPass] = env('WHORL_ADMIN').split(':');
const [firstName, firstPass] = env('WHORL_FIRST').split(':');
const submitFile = env('WHORL_SUBMIT');
const [irFile, nmrFile] = env('WHORL_IDENTIFY').split(':');
const shots = env('WHORL_SHOTS');
// Evaluated through the DevTools protocol, which the pages' CSP does not govern (see flows.js).
const axeSource = fs.readFileSync(require.resolve('axe-core'), 'utf8');

let step = 0;
const axeReport = [];
function ok(what) { step += 1; console.log(`ok forms ${step} ${what}`); }
function fail(what, why) {
  step += 1;
  console.log(`FAILED forms ${step} ${what}: ${why}`);
  throw new Error('step failed');
}
function expect(cond, what, why) { if (!cond) fail(what, why); ok(what); }

async function axe(page, name) {
  await page.evaluate(axeSource);
  const result = await page.evaluate(async () => {
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

async function visited(page, name) {
  const text = await page.textContent('.caution').catch(() => '');
  expect(/evidence, not proof of identity/.test(text || ''), `the caution is on ${name}`, 'no caution line');
  await page.screenshot({ path: path.join(shots, `${name}.png`), fullPage: true });
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
}

async function signOut(page) {
  await Promise.all([page.waitForNavigation(), page.click('form[action="/sign-out"] button')]);
  expect((await page.$('#password')) !== null, 'sign out', page.url());
}

async function navLinks(page) {
  return page.$$eval('header nav a', (as) => as.map((a) => a.getAttribute('href')));
}

async function main() {
  fs.mkdirSync(shots, { recursive: true });
  const browser = await chromium.launch({ executablePath: '/usr/bin/chromium', args: ['--no-sandbox'] });
  try {
    const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
    const page = await context.newPage();
    const errors = [];
    page.on('pageerror', (e) => errors.push(String(e)));
    page.on('console', (m) => {
      if (m.type() === 'error' && !m.text().startsWith('Failed to load resource')) errors.push(m.text());
    });
    // Refused requests: only the two pages a signer is refused, and the discarded preview
    // asked for again (404, no longer held). No /favicon.ico 404: the pages declare an icon
    // of their own.
    const expected = [/^GET \/accounts 403$/, /^GET \/submit 403$/, /^GET \/submit\/[0-9a-f]{32} 404$/];
    const icons = [];
    page.on('response', (r) => {
      const p = new URL(r.url()).pathname;
      if (/favicon/.test(p)) icons.push(`${p} ${r.status()}`);
      if (r.status() < 400) return;
      const what = `${r.request().method()} ${p} ${r.status()}`;
      if (!expected.some((e) => e.test(what))) errors.push(what);
    });

    await signIn(page, adminName, adminPass);
    const links = await navLinks(page);
    expect(['/submit', '/identify', '/accounts'].every((l) => links.includes(l)),
      `an administrator's navigation links the submit, identify and accounts pages`, JSON.stringify(links));

    // Submit one file: the preview first, nothing saved; then the confirmation saves it pending.
    const name = 'toluene, in-house measurement ' + Date.now().toString(36);
    await page.goto(base + '/submit');
    await visited(page, 'submit');
    await page.setInputFiles('#file', submitFile);
    await page.selectOption('#technique', 'ir');
    await page.fill('#name', name);
    await page.fill('#formula', 'C7H8');
    await page.fill('#tags', 'in-house, browser-flow');
    await Promise.all([page.waitForNavigation(), page.click('#submit-form button[type=submit]')]);
    const notSaved = (await page.textContent('#not-saved').catch(() => '')) || '';
    expect(/Not saved yet/.test(notSaved) && /^\/submit\/[0-9a-f]{32}$/.test(new URL(page.url()).pathname),
      'submit: the preview says nothing is saved yet', `${page.url()}: ${notSaved}`);
    const previewUrl = page.url();
    const figures = await page.$$eval('figure.plot svg', (s) => s.filter((e) => e.getBoundingClientRect().width > 300).length);
    expect(figures >= 1, 'submit: the preview plots the prepared spectrum', `${figures} plots`);
    const warned = (await page.$('#warnings')) !== null || (await page.$('#warnings-none')) !== null;
    expect(warned, 'submit: the preview states its warnings (or that there are none)', 'no warnings section');
    await visited(page, 'submit-preview');
    const pendingBefore = await page.goto(base + '/library?status=pending').then(() => page.textContent('#spectra'));
    expect(!pendingBefore.includes(name), 'submit: before confirming, the library does not hold it', 'already listed');
    await page.goto(previewUrl);
    await Promise.all([page.waitForNavigation(), page.click('#confirm button[type=submit]')]);
    const saved = (await page.textContent('main')) || '';
    expect(/^\/spectra\/\d+$/.test(new URL(page.url()).pathname) && /Saved: spectrum \d+ is pending/.test(saved) &&
      saved.includes(name), 'submit: confirmed, the spectrum page says it is saved and pending', page.url());
    const submitted = (await page.textContent('#metadata')) || '';
    expect(submitted.includes(adminName), `submit: recorded as submitted by ${adminName}`, submitted);
    await page.goto(base + '/library?status=pending');
    const pendingAfter = (await page.textContent('#spectra')) || '';
    expect(pendingAfter.includes(name), 'submit: the library lists it among the pending spectra', 'not listed');

    // A second preview discarded: the server lets go of it at once and says so; nothing saved.
    const dropped = 'discarded preview ' + Date.now().toString(36);
    await page.goto(base + '/submit');
    await page.setInputFiles('#file', submitFile);
    await page.selectOption('#technique', 'ir');
    await page.fill('#name', dropped);
    await Promise.all([page.waitForNavigation(), page.click('#submit-form button[type=submit]')]);
    const droppedUrl = page.url();
    await Promise.all([page.waitForNavigation(), page.click('#discard button[type=submit]')]);
    const discardNotice = (await page.textContent('#discarded').catch(() => '')) || '';
    expect(new URL(page.url()).pathname === '/submit' && /discarded/.test(discardNotice),
      'submit: a preview discarded, the submit page says so', `${page.url()}: ${discardNotice}`);
    await visited(page, 'submit-discarded');
    const gone = await page.goto(droppedUrl);
    expect(gone.status() === 404, 'submit: the discarded preview is no longer held', String(gone.status()));
    await page.goto(base + '/library?status=pending');
    const stillPending = (await page.textContent('#spectra')) || '';
    expect(!stillPending.includes(dropped), 'submit: the discarded file was not saved', 'listed');

    // Identify with two files of one sample.
    await page.goto(base + '/identify');
    await visited(page, 'identify');
    await page.setInputFiles('#file-ir', irFile);
    await page.setInputFiles('#file-nmr-1h', nmrFile);
    await page.fill('#solvent', 'CDCl3');
    await Promise.all([page.waitForNavigation(), page.click('#identify-form button[type=submit]')]);
    const verdict = (await page.textContent('#verdict').catch(() => '')) || '';
    expect(/^Criteria (not )?met:/.test(verdict.trim()), `identify: the verdict comes first (${verdict.trim().slice(0, 60)}...)`,
      JSON.stringify(verdict));
    const order = await page.evaluate(() => {
      const v = document.querySelector('#verdict');
      const f = document.querySelector('#fused');
      return v && f && (v.compareDocumentPosition(f) & Node.DOCUMENT_POSITION_FOLLOWING) !== 0;
    });
    expect(order, 'identify: the verdict stands above the fused list', 'fused list first');
    const heads = await page.$$eval('#fused thead th', (ths) => ths.map((t) => t.textContent.trim()));
    const fused = await page.$$eval('#fused tbody tr', (rows) => rows.map((r) => r.textContent));
    expect(heads.includes('IR') && heads.some((h) => /H NMR/.test(h)) && fused.length >= 2,
      `identify: a fused list of ${fused.length} compounds with a column per technique (${heads.join(', ')})`, JSON.stringify(heads));
    const disagreements = (await page.$('#disagreements')) !== null || (await page.$('#disagreements-none')) !== null;
    expect(disagreements, 'identify: the disagreements are stated', 'no disagreements section');
    await visited(page, 'identify-result');

    // The accounts page: listed with role and state; an account added through the form.
    await page.goto(base + '/accounts');
    const accounts = await page.$$eval('#accounts tbody tr', (rows) => rows.map((r) => [r.cells[0].textContent.trim(), r.cells[1].textContent.trim()]));
    expect(accounts.some((a) => a[0] === adminName && a[1] === 'admin') && accounts.some((a) => a[0] === firstName && a[1] === 'signer'),
      `accounts: ${accounts.length} accounts listed with their roles`, JSON.stringify(accounts));
    await visited(page, 'accounts');
    await page.fill('#new-name', 't.trainee');
    await page.selectOption('#new-role', 'reader');
    await Promise.all([page.waitForNavigation(), page.click('#add-account button[type=submit]')]);
    const notice = (await page.textContent('#notice').catch(() => '')) || '';
    expect(/t\.trainee added with the role reader/.test(notice), 'accounts: an account added with a role', notice);
    const row = await page.$$eval('#accounts tbody tr', (rows) => rows.map((r) => r.textContent).find((t) => t.includes('t.trainee')));
    const id = await page.$eval('#accounts tbody tr:last-child form[action$="/role"]', (f) => f.getAttribute('action'));
    expect(row && /none/.test(row), 'accounts: the new account has no password until it sets one', row);
    await page.selectOption(`select[id="role-${id.split('/')[2]}"]`, 'signer');
    await page.fill(`input[id="role-reason-${id.split('/')[2]}"]`, 'signs off for the GC group');
    await Promise.all([page.waitForNavigation(), page.click(`form[action="${id}"] button[type=submit]`)]);
    const changed = (await page.textContent('#notice').catch(() => '')) || '';
    expect(/t\.trainee now has the role signer/.test(changed), 'accounts: a role changed with a reason', changed);
    await visited(page, 'accounts-changed');
    await signOut(page);

    // Refused to an account without the administrator's role, which is not offered the link.
    await signIn(page, firstName, firstPass);
    const theirs = await navLinks(page);
    expect(!theirs.includes('/accounts') && !theirs.includes('/submit') && theirs.includes('/identify'),
      `a signer's navigation has identify but neither accounts nor submit`, JSON.stringify(theirs));
    const refused = await page.goto(base + '/accounts');
    const h1 = ((await page.textContent('h1')) || '').trim();
    expect(refused.status() === 403 && h1 === 'Not allowed' && (await page.$('#accounts')) === null,
      'the accounts page is refused to a signer', `${refused.status()} ${h1}`);
    await visited(page, 'accounts-refused');
    const noSubmit = await page.goto(base + '/submit');
    expect(noSubmit.status() === 403, 'the submit page is refused to a signer', String(noSubmit.status()));
    // The refusal page is drawn without the account's header; sign out from a page of theirs.
    await page.goto(base + '/identify');
    await signOut(page);

    const icon = await page.goto(base + '/static/favicon.svg');
    expect(icon.status() === 200 && /image\/svg\+xml/.test(icon.headers()['content-type'] || ''),
      'the icon is served as SVG', `${icon.status()} ${icon.headers()['content-type']}`);
    expect(!icons.some((i) => / 404$/.test(i)), `no icon request failed (${icons.length} made: ${[...new Set(icons)].join(', ') || 'none'})`, icons.join(', '));
    expect(errors.length === 0, 'no script error, console error or unexpected refusal on these pages', errors.join('; '));
  } finally {
    await browser.close();
  }
  console.log('axe-core ' + require('axe-core/package.json').version + ' (forms):');
  for (const line of axeReport) console.log('  ' + line);
}

main().then(() => { console.log(`browser-flows forms: all ${step} steps passed`); },
  (e) => {
    if (e.message !== 'step failed') console.log(`FAILED forms ${step + 1} ${e.message.split('\n')[0]}`);
    for (const line of axeReport) console.log('  ' + line);
    process.exitCode = 1;
  });
