// The debrief report in chromium: a journal written by the test (the test exercise, a script trip,
// seat actions, an acknowledgement, a rewind, a trainee, a note), `droopline debrief` run on it, the
// file opened at both viewports (charts with lines, objective and timeline tables visible and not
// clipped), screenshots in the build folder and a PDF print; then the same report from a real
// server's journal through GET /api/v1/debrief.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { execFileSync } from 'node:child_process';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { SRC, BIN, SHOTS, VIEWPORTS, size, freePort, tokenFile, scratchDir, startServer, stopServer, launchBrowser, collectErrors } from './harness.mjs';

const DIR = scratchDir('droopline-debrief-');
const RUN = '0123456789abcdef0123456789abcdef';
let browser;

// The journal of one run of the test exercise, as the live session writes it (times in steps of its
// 0.01 s step): the script trips e2 at 5 s, the east desk acknowledges the trip's alarm (the third:
// both low-reserve warnings come first) and acts, the west desk acts at 20 s and is rewound away.
function writeJournal(path) {
  const x = JSON.parse(readFileSync(join(SRC, 'tests', 'data', 'exercise_two_areas.json'), 'utf8'));
  x.objectives = [
    { measure: 'largest_deviation_hz', target: 0.3, zero_at: 0.9 },
    { measure: 'time_outside_standard_s', target: 5, zero_at: 60, weight: 2 },
    { seat: 'east-desk', measure: 'alarm_to_ack_s', target: 1, zero_at: 5 },
  ];
  const at = (s) => Math.round(s / 0.01);
  const batch = (t, command, by) => ({ type: 'commands', step: at(t), commands: [command], by });
  const lines = [
    { type: 'scenario', step: 0, run: RUN, scenario: x.scenario },
    { type: 'exercise', step: 0, run: RUN, exercise: x },
    { type: 'trainee', step: 0, seat: 'east-desk', name: 'Ilse Varrow' },
    { type: 'trainee', step: 0, seat: 'west-desk', name: 'Rafe <b>Munro</b>' },
    batch(5, { kind: 'unit_trip', unit: 'e2' }, 'script'),
    { type: 'ack', step: at(7), alarm: 3, by: 'east-desk' },
    batch(10, { kind: 'setpoint', unit: 'e1', mw: 350 }, 'east-desk'),
    batch(20, { kind: 'load_step', area: 'west', mw: -20 }, 'west-desk'),
    { type: 'rewind', step: at(25), taken: 3, to_step: at(15), by: 'instructor' },
    { type: 'note', step: at(16), by: 'instructor', text: 'The west desk waited for the east to act first.' },
    batch(18, { kind: 'setpoint', unit: 'e1', mw: 380 }, 'east-desk'),
    batch(40, { kind: 'setpoint', unit: 'w1', mw: 190 }, 'west-desk'),
    { type: 'end', step: at(90), complete: true, why: 'time limit reached' },
  ];
  writeFileSync(path, lines.map((l) => JSON.stringify(l)).join('\n') + '\n');
}

// Opens `file` at each viewport: charts and tables visible, nothing wider than the page; screenshots.
async function checkReport(file, name, { objectives, timeline }) {
  for (const vp of VIEWPORTS) {
    const page = await browser.newPage({ viewport: vp });
    const errors = collectErrors(page);
    const requests = [];
    page.on('request', (r) => { if (!r.url().startsWith('file:')) requests.push(r.url()); });
    await page.goto(pathToFileURL(file).href);
    const facts = await page.evaluate(() => {
      const wide = [...document.querySelectorAll('svg, table, h1, h2, h3, p')]
        .filter((e) => e.getBoundingClientRect().right > document.documentElement.clientWidth + 1)
        .map((e) => e.tagName + (e.className ? '.' + e.className : ''));
      const charts = [...document.querySelectorAll('figure > svg')];
      return {
        scrollWidth: document.documentElement.scrollWidth,
        clientWidth: document.documentElement.clientWidth,
        wide,
        charts: charts.length,
        chartsWithLines: charts.filter((s) => s.querySelector('polyline')?.getAttribute('points').trim().split(' ').length > 10).length,
        chartHeights: charts.map((s) => s.getBoundingClientRect().height),
        objectiveRows: document.querySelectorAll('table.objectives tbody tr').length,
        timelineRows: document.querySelectorAll('table.timeline tbody tr').length,
        scripts: document.querySelectorAll('script').length,
      };
    });
    assert.deepEqual(errors, []);
    assert.deepEqual(requests, [], 'the report fetched something');
    assert.equal(facts.scripts, 0);
    assert.ok(facts.scrollWidth <= facts.clientWidth, `clipped horizontally at ${size(vp)}: ${facts.scrollWidth} > ${facts.clientWidth}`);
    assert.deepEqual(facts.wide, []);
    assert.ok(facts.charts >= 2 && facts.chartsWithLines === facts.charts, JSON.stringify(facts));
    for (const h of facts.chartHeights) assert.ok(h > 150, `a chart ${h} px high`);
    if (objectives) assert.ok(facts.objectiveRows >= 3, JSON.stringify(facts));
    assert.ok(facts.timelineRows >= timeline, JSON.stringify(facts));
    for (const sel of ['#charts figure', 'table.timeline'])
      assert.ok(await page.locator(sel).first().isVisible(), sel);
    await page.screenshot({ path: join(SHOTS, `debrief-${name}-${size(vp)}.png`), fullPage: true });
    await page.close();
  }
  // Printed: A4 pages, and the PDF holds more than one of them (the report is long).
  const page = await browser.newPage();
  await page.goto(pathToFileURL(file).href);
  await page.emulateMedia({ media: 'print' });
  const pdf = await page.pdf({ format: 'A4', printBackground: true });
  await page.close();
  assert.equal(pdf.subarray(0, 5).toString(), '%PDF-');
  const pages = (pdf.toString('latin1').match(/\/Type\s*\/Page[^s]/g) || []).length;
  assert.ok(pages >= 2, `the PDF has ${pages} page(s)`);
  writeFileSync(join(SHOTS, `debrief-${name}.pdf`), pdf);
}

before(async () => { browser = await launchBrowser(); });
after(async () => { await browser?.close(); });

test('droopline debrief writes a report that shows its charts and tables and prints', { timeout: 120000 }, async () => {
  const journal = join(DIR, 'journal.jsonl');
  writeJournal(journal);
  const out = join(DIR, 'debrief.html');
  execFileSync(BIN, ['debrief', journal, '--out', out, '--quiet'], { timeout: 60000 });
  const html = readFileSync(out, 'utf8');
  assert.ok(html.includes('Rafe &lt;b&gt;Munro&lt;/b&gt;'), 'the trainee name is escaped');
  assert.ok(html.includes('Ilse Varrow'));
  assert.ok(html.includes('The west desk waited for the east to act first.'));
  assert.ok(!/https?:\/\//.test(html));
  await checkReport(out, 'cli', { objectives: true, timeline: 10 });
});

test('GET /api/v1/debrief answers the instructor with the report of the session\'s journal', { timeout: 120000 }, async () => {
  const port = await freePort();
  const TOKEN = 'debrief-test-token-0123456789';
  const journal = join(DIR, 'served.jsonl');
  const server = await startServer(port, ['--exercise', join(SRC, 'tests', 'data', 'exercise_two_areas.json'),
    '--token-file', tokenFile(TOKEN), '--journal', journal, '--speed', '10']);
  try {
    const url = `http://127.0.0.1:${port}/api/v1/debrief`;
    const viewer = await fetch(url, { signal: AbortSignal.timeout(10000) });
    assert.equal(viewer.status, 401);
    await new Promise((r) => setTimeout(r, 1500));  // some simulated time (15 s at speed 10)
    const reply = await fetch(url, { headers: { Authorization: `Bearer ${TOKEN}` }, signal: AbortSignal.timeout(30000) });
    const body = await reply.text();
    assert.equal(reply.status, 200, body);
    assert.match(reply.headers.get('content-type'), /^text\/html/);
    const file = join(DIR, 'served.html');
    writeFileSync(file, body);
    await checkReport(file, 'served', { objectives: false, timeline: 1 });
    const missing = await fetch(`${url}?run=feedface`, { headers: { Authorization: `Bearer ${TOKEN}` } });
    assert.equal(missing.status, 404);
  } finally {
    await stopServer(server);
  }
});
