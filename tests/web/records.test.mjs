// The records view in chromium: `droopline serve` with a journal and a records file runs two
// exercises (two trainees join, a seat acts, the instructor ends each), then `/?view=records` lists
// both runs with their trainees, narrows them by a trainee, draws each trainee's progress, opens a
// run's debrief in a new tab, exports the CSV with the filters, and keeps a hostile trainee name as
// text. Screenshots at 1366x768 and 1920x1080 (records-*.png). Run by ctest:
//   node --test tests/web/records.test.mjs   (DROOPLINE_BIN, DROOPLINE_SRC, SCREENSHOT_DIR set)
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { SRC, SHOTS, VIEWPORTS, size, freePort, tokenFile, scratchDir, startServer, stopServer, launchBrowser, collectErrors } from './harness.mjs';

const TOKEN = 'records-test-token-0123456789abcdef';
const HOSTILE = '<img src=x onerror=alert(1)>';
const FIRST = join(SRC, 'scenarios', 'exercises', 'peak_unit_loss.json');
const SECOND = join(SRC, 'scenarios', 'exercises', 'evening_ramp.json');
const nameOf = (file) => JSON.parse(readFileSync(file, 'utf8')).name;
let server, port, browser;

async function call(path, { method = 'GET', body, bearer = TOKEN } = {}) {
  const res = await fetch(`http://127.0.0.1:${port}${path}`, {
    method,
    headers: { Authorization: `Bearer ${bearer}`, ...(body ? { 'Content-Type': 'application/json' } : {}) },
    body: body == null ? undefined : typeof body === 'string' ? body : JSON.stringify(body),
    signal: AbortSignal.timeout(15000),
  });
  const text = await res.text();
  assert.ok(res.ok, `${method} ${path}: ${res.status} ${text}`);
  return text.startsWith('{') ? JSON.parse(text) : text;
}

const pause = (ms) => new Promise((r) => setTimeout(r, ms));

// One run: each seat joins with its trainee's name, the first seat changes a setpoint of its own
// area, some simulated time passes, the instructor ends the exercise.
async function run(trainees) {
  const { seats } = await call('/api/v1/seats');
  const scenario = await call('/api/v1/scenario');
  for (const [i, name] of trainees.entries()) await call('/api/v1/seats/join', { method: 'POST', body: { name }, bearer: seats[i].join_code });
  const unit = scenario.units.find((u) => u.area === seats[0].areas[0]);
  await call('/api/v1/commands', { method: 'POST', bearer: seats[0].join_code, body: { kind: 'setpoint', unit: unit.id, mw: unit.min_mw + 0.6 * (unit.max_mw - unit.min_mw) } });
  await pause(1500); // 30 simulated seconds at speed 20
  await call('/api/v1/control', { method: 'POST', body: { action: 'end' } });
  await pause(300);
}

before(async () => {
  const dir = scratchDir('droopline-records-');
  port = await freePort();
  server = await startServer(port, ['--exercise', FIRST, '--journal', join(dir, 'journal.jsonl'), '--records', join(dir, 'records.sqlite3'),
    '--speed', '20', '--token-file', tokenFile(TOKEN)]);
  await run(['Ilse Varda', 'Tomas Reel']);
  await call('/api/v1/exercise', { method: 'PUT', body: readFileSync(SECOND, 'utf8') });
  await run(['Ilse Varda', HOSTILE]);
  browser = await launchBrowser();
});

after(async () => {
  await browser?.close();
  if (server) await stopServer(server);
});

// The records view, unlocked with the instructor token as the instructor view is.
async function openRecords(viewport) {
  const context = await browser.newContext({ viewport, acceptDownloads: true });
  const page = await context.newPage();
  const errors = collectErrors(page);
  let alerted = false;
  page.on('dialog', (d) => { alerted = true; d.dismiss(); });
  await page.goto(`http://127.0.0.1:${port}/?view=records`);
  await page.fill('#token', TOKEN);
  await page.click('#auth-form button');
  await page.waitForFunction(() => document.querySelectorAll('#records-runs .record-run').length >= 2
    && document.querySelectorAll('#records-progress .trainee-progress').length >= 3, null, { timeout: 10000 });
  return { context, page, errors, alerted: () => alerted };
}

const runTexts = (page) => page.$$eval('#records-runs .record-run', (xs) => xs.map((x) => x.textContent));

test('the records view lists both runs with their trainees, newest first, and the file it reads', { timeout: 60000 }, async () => {
  const { context, page, errors, alerted } = await openRecords(VIEWPORTS[0]);
  assert.match(await page.textContent('#records-status'), /Records kept in .*records\.sqlite3/);
  const runs = await runTexts(page);
  assert.equal(runs.length, 2);
  assert.ok(runs[0].includes(nameOf(SECOND)) && runs[1].includes(nameOf(FIRST)), 'newest first');
  assert.ok(runs[1].includes('Ilse Varda') && runs[1].includes('Tomas Reel'), runs[1]);
  assert.ok(runs[0].includes(HOSTILE), 'the hostile name shows as its text');
  for (const r of runs) assert.match(r, /complete \(ended by the instructor\)/);
  assert.equal(await page.locator('#records-runs img, #records-progress img').count(), 0, 'no img element made of a name');
  assert.equal(await page.evaluate(() => document.querySelectorAll('img:not(#sweep-plot)').length), 0);
  // Every seat's score cell is a number under the "score / 100" head.
  const heads = await page.$$eval('table.record-seats thead th', (xs) => xs.map((x) => x.textContent));
  assert.deepEqual(heads.slice(0, 3), ['seat', 'trainee', 'score / 100']);
  const scores = await page.$$eval('table.record-seats tbody td:nth-child(3)', (xs) => xs.map((x) => x.textContent));
  assert.equal(scores.length, 4);
  for (const s of scores) assert.match(s, /^\d+\.\d$/, `a final score: ${s}`);
  assert.equal(alerted(), false);
  assert.deepEqual(errors, []);
  await context.close();
});

test('filtering by a trainee narrows the runs and the progress; the progress line has a labelled point per attempt', { timeout: 60000 }, async () => {
  const { context, page, errors } = await openRecords(VIEWPORTS[0]);
  await page.fill('#records-trainee', 'Tomas Reel');
  await page.click('#records-filter button[type=submit]');
  await page.waitForFunction(() => document.querySelectorAll('#records-runs .record-run').length === 1, null, { timeout: 5000 });
  assert.ok((await runTexts(page))[0].includes(nameOf(FIRST)));
  assert.equal(await page.locator('#records-progress .trainee-progress').count(), 1);
  await page.fill('#records-trainee', 'Ilse Varda');
  await page.click('#records-filter button[type=submit]');
  await page.waitForFunction(() => document.querySelectorAll('#records-runs .record-run').length === 2
    && document.querySelectorAll('#records-progress .trainee-progress').length === 1, null, { timeout: 5000 });
  // The runs and the progress are drawn from two answers: the old progress can still be there
  // when the runs are new (a run here once read no line at all), so wait for hers.
  const ilse = page.locator('.trainee-progress[data-trainee="Ilse Varda"]');
  await ilse.locator('svg.progress-line').first().waitFor({ timeout: 5000 });
  assert.equal(await ilse.locator('svg.progress-line').count(), 2, 'one line per exercise');
  assert.equal(await ilse.locator('svg.progress-line circle.point').count(), 2);
  const labels = await ilse.locator('svg.progress-line text.score').allTextContents();
  const table = await ilse.locator('table.attempts tbody td:nth-child(4)').allTextContents();
  assert.deepEqual(labels.map(Number), table.map((t) => Math.round(Number(t))), 'each point labelled with its attempt\'s score');
  await page.fill('#records-date-from', '2000-01-01');
  await page.fill('#records-date-to', '2000-12-31');
  await page.click('#records-filter button[type=submit]');
  await page.locator('#records-runs .empty', { hasText: 'no run matches these filters' }).waitFor({ timeout: 5000 });
  assert.deepEqual(errors, []);
  await context.close();
});

test("a run's Debrief opens its report in a new tab, with a save link", { timeout: 90000 }, async () => {
  const { context, page, errors } = await openRecords(VIEWPORTS[0]);
  const card = page.locator('.record-run').nth(1); // the first run
  const [popup] = await Promise.all([context.waitForEvent('page', { timeout: 60000 }), card.getByRole('button', { name: 'Debrief' }).click()]);
  await popup.waitForLoadState();
  const html = await popup.content();
  assert.ok(html.includes(nameOf(FIRST)), 'the report names the exercise');
  assert.ok(html.includes('Tomas Reel'));
  assert.match(await card.locator('a', { hasText: 'save report' }).getAttribute('download'), /^debrief-Evening-peak-the-largest-unit-[A-Za-z-]*\.html$/);
  // A note after the session shows on the run.
  await card.locator('summary', { hasText: 'Add note' }).click();
  await card.locator('textarea').fill('Tomas waited for the alarm before acting.');
  await card.getByRole('button', { name: 'Add note' }).click();
  await card.locator('.run-notes li', { hasText: 'Tomas waited' }).waitFor({ timeout: 5000 });
  assert.deepEqual(errors, []);
  await context.close();
});

test('Export CSV downloads the filtered runs: one row per run and seat under the header', { timeout: 60000 }, async () => {
  const { context, page, errors } = await openRecords(VIEWPORTS[0]);
  const read = async () => {
    const [download] = await Promise.all([page.waitForEvent('download', { timeout: 10000 }), page.click('#records-export')]);
    assert.match(download.suggestedFilename(), /^droopline-records-\d{4}-\d{2}-\d{2}\.csv$/);
    return readFileSync(await download.path(), 'utf8').trim().split(/\r?\n/);
  };
  let lines = await read();
  assert.match(lines[0], /^date,exercise,run_id,status,seat,trainee,score/);
  assert.equal(lines.length, 1 + 4, lines.join('\n'));
  const runIds = await page.$$eval('.record-run', (xs) => xs.map((x) => x.dataset.run));
  for (const id of runIds) assert.equal(lines.filter((l) => l.includes(id)).length, 2);
  assert.ok(lines.some((l) => l.includes('Tomas Reel')) && lines.some((l) => l.includes(HOSTILE)));
  // A trainee's part of a name, in another case: only the seat that trainee sat at.
  await page.fill('#records-trainee', 'tomas');
  lines = await read();
  assert.equal(lines.length, 1 + 1, lines.join('\n'));
  assert.ok(lines[1].includes(runIds[1]) && lines[1].includes('Tomas Reel'), lines[1]);
  assert.deepEqual(errors, []);
  await context.close();
});

test('the records view at the laptop and the projector: nothing clipped, every figure under its label', { timeout: 60000 }, async () => {
  for (const vp of VIEWPORTS) {
    const { context, page, errors } = await openRecords(vp);
    const facts = await page.evaluate(() => ({
      scrollWidth: document.documentElement.scrollWidth,
      clientWidth: document.documentElement.clientWidth,
      wide: [...document.querySelectorAll('.records *')].filter((e) => e.getBoundingClientRect().right > document.documentElement.clientWidth + 1).map((e) => e.tagName + '.' + e.className),
      svgWidths: [...document.querySelectorAll('svg.progress-line')].map((s) => s.getBoundingClientRect().width),
    }));
    assert.ok(facts.scrollWidth <= facts.clientWidth, `clipped at ${size(vp)}: ${facts.scrollWidth} > ${facts.clientWidth}`);
    assert.deepEqual(facts.wide, []);
    for (const w of facts.svgWidths) assert.ok(w >= 180, `a progress line ${w} px wide`);
    await page.screenshot({ path: join(SHOTS, `records-${size(vp)}.png`) });
    await page.screenshot({ path: join(SHOTS, `records-${size(vp)}-full.png`), fullPage: true });
    assert.deepEqual(errors, []);
    await context.close();
  }
});
