// The model-validation panel in chromium: `droopline serve` with the invented Quarnholt plant
// (scenarios/validation/plant.json); the instructor uploads its recorded event as CSV, fits three
// parameters of QH1, and the table, the fit quality, the warnings, the plot and the downloads are
// checked against the JSON the server gives for the same job (no figure written into this test);
// the COMTRADE copy (ASCII, then the same record rewritten here as BINARY) runs a second fit that
// replaces the first result; a CSV without the frequency column shows the server's message naming
// it; the injection profile's table shows each test's pass or fail as the server's JSON has it.
// Screenshots at 1366x768 and 1920x1080 (validation-*.png). Run by ctest:
//   node --test tests/web/validation.test.mjs   (DROOPLINE_BIN, DROOPLINE_SRC, SCREENSHOT_DIR set)
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { SRC, SHOTS, VIEWPORTS, size, freePort, tokenFile, scratchDir, startServer, stopServer, launchBrowser, collectErrors } from './harness.mjs';

const TOKEN = 'validation-test-token-0123456789abcdef';
const DIR = join(SRC, 'scenarios', 'validation');
const CSV = join(DIR, 'recorded_event.csv');
const CFG = join(DIR, 'recorded_event.cfg');
const DAT = join(DIR, 'recorded_event.dat');
const PROFILE = join(DIR, 'injection_profile.json');
// The README's fit example ("Fitting a unit model"), with two starts so it ends in seconds.
const FIT = [['governor.droop', '0.02', '0.1'], ['governor.lag_s', '0.05', '1'], ['turbine.reheat_s', '2', '12']];
const STARTS = '2';
const CAUTION = 'A fitted model is a study result, not a plant setting: real settings are for qualified engineers to validate against plant-specific models and the local grid code.';
let server, port, browser, work;

async function call(path, { method = 'GET', body } = {}) {
  const res = await fetch(`http://127.0.0.1:${port}${path}`, {
    method,
    headers: { Authorization: `Bearer ${TOKEN}`, ...(body ? { 'Content-Type': 'application/json' } : {}) },
    body: body == null ? undefined : JSON.stringify(body),
    signal: AbortSignal.timeout(60000),
  });
  const text = await res.text();
  return { status: res.status, text, json: text.startsWith('{') ? JSON.parse(text) : null };
}

// The same record as BINARY (IEEE C37.111: per sample a 4-byte sample number, a 4-byte time stamp
// and a 2-byte signed value per analog channel, little-endian; from memory of the standard). The
// ASCII record's integers reach +-99999, so each is divided by 4 and its channel's factor a
// multiplied by 4: the values are the same within a quantization step.
function binaryCopy() {
  const cfg = readFileSync(CFG, 'utf8').split(/\r?\n/);
  const analog = Number(cfg[1].split(',')[1].replace(/A$/i, ''));
  for (let k = 0; k < analog; k++) {
    const f = cfg[2 + k].split(',');
    f[5] = String(Number(f[5]) * 4);
    [f[8], f[9]] = ['-25000', '25000'];
    cfg[2 + k] = f.join(',');
  }
  const typeLine = cfg.findIndex((l) => l.trim().toUpperCase() === 'ASCII');
  assert.ok(typeLine > 0, 'the shipped .cfg names its file type');
  cfg[typeLine] = 'BINARY';
  const rows = readFileSync(DAT, 'utf8').trim().split(/\r?\n/).map((l) => l.split(',').map(Number));
  const buf = Buffer.alloc(rows.length * (8 + 2 * analog));
  rows.forEach((r, i) => {
    const at = i * (8 + 2 * analog);
    buf.writeUInt32LE(r[0], at);
    buf.writeUInt32LE(r[1], at + 4);
    for (let k = 0; k < analog; k++) buf.writeInt16LE(Math.round(r[2 + k] / 4), at + 8 + 2 * k);
  });
  writeFileSync(join(work, 'binary_event.cfg'), cfg.join('\r\n'));
  writeFileSync(join(work, 'binary_event.dat'), buf);
  return [join(work, 'binary_event.cfg'), join(work, 'binary_event.dat')];
}

before(async () => {
  work = scratchDir('droopline-validation-');
  port = await freePort();
  server = await startServer(port, ['--scenario', join(DIR, 'plant.json'), '--token-file', tokenFile(TOKEN)]);
  browser = await launchBrowser();
});

after(async () => {
  await browser?.close();
  if (server) await stopServer(server);
});

async function openPanel(viewport) {
  const page = await browser.newPage({ viewport, acceptDownloads: true });
  const errors = collectErrors(page);
  await page.goto(`http://127.0.0.1:${port}/`);
  await page.waitForFunction(() => window.droopline?.connected && document.querySelectorAll('#fit-unit option').length === 2, null, { timeout: 10000 });
  await page.fill('#token', TOKEN);
  await page.click('#auth-form button');
  await page.waitForSelector('#controls:not([hidden])');
  return { page, errors };
}

// The parameter rows: one per [path, low, high], made with the panel's own buttons.
async function setParams(page, params) {
  while (await page.locator('#fit-params tbody tr').count() > 0) await page.locator('#fit-params tbody tr button').first().click();
  for (const [i, [path, lo, hi]] of params.entries()) {
    await page.click('#fit-add-param');
    const row = page.locator('#fit-params tbody tr').nth(i);
    await row.locator('select').selectOption(path);
    await row.locator('input').nth(0).fill(lo);
    await row.locator('input').nth(1).fill(hi);
  }
}

// A table as { heads, rows: [{ head: text }] }, each cell read under the head of its own column
// (and the cell and head sharing their left and right edges), plus any cell whose text is cut.
function readTable(page, selector) {
  return page.$eval(selector, (t) => {
    const heads = [...t.tHead.rows[0].cells].map((c) => ({ text: c.textContent, box: c.getBoundingClientRect() }));
    const problems = [];
    const rows = [...t.tBodies[0].rows].map((tr, r) => Object.fromEntries([...tr.cells].map((c, i) => {
      const b = c.getBoundingClientRect(), h = heads[i];
      if (!h) problems.push(`row ${r} cell ${i} has no head`);
      else if (Math.abs(b.left - h.box.left) > 1 || Math.abs(b.right - h.box.right) > 1) problems.push(`row ${r} "${c.textContent}" not under "${h.text}"`);
      if (c.scrollWidth > c.clientWidth + 1) problems.push(`row ${r} "${c.textContent}" cut`);
      return [h?.text, c.textContent];
    })));
    return { heads: heads.map((h) => h.text), rows, problems };
  });
}

// A figure shown with `digits` significant digits, against the server's value.
function sameFigure(text, value, digits, what) {
  const shown = Number(text.replace(/^± /, ''));
  assert.ok(Number.isFinite(shown), `${what}: "${text}" is a number`);
  const step = 10 ** (Math.floor(Math.log10(Math.abs(value))) - digits + 1);
  assert.ok(Math.abs(shown - value) <= step / 2 * (1 + 1e-9), `${what}: shown ${text}, the server's ${value}`);
}

// Runs the fit the form holds and waits for its result; answers the server's JSON of that job.
async function fitAndCompareCore(page, name, params) {
  const before = await page.evaluate(() => window.droopline.fitJob ?? null);
  await page.click('#do-fit');
  await page.waitForFunction((b) => window.droopline.fitJob && window.droopline.fitJob !== b, before, { timeout: 20000 });
  assert.equal(await page.isVisible('#fit-result'), false, 'the previous result goes as soon as a fit starts');
  await page.locator('#fit-result-title', { hasText: name }).waitFor({ state: 'visible', timeout: 150000 });
  const id = await page.evaluate(() => window.droopline.fitJob);
  const job = (await call(`/api/v1/fits/${id}`)).json;
  assert.equal(job.status, 'done');
  const r = (await call(`/api/v1/fits/${id}/result?format=json`)).json;
  assert.deepEqual(Object.keys(r.params).sort(), params.map((p) => p[0]).sort());

  const table = await readTable(page, '#fit-table');
  assert.deepEqual(table.problems, []);
  assert.deepEqual(table.heads, ['parameter', 'range searched', 'initial (scenario)', 'fitted', '± 1 sigma']);
  assert.equal(table.rows.length, params.length, 'one row per parameter of this fit, none left from before');
  for (const row of table.rows) {
    const p = row.parameter;
    sameFigure(row.fitted, r.params[p], 5, `${p} fitted`);
    sameFigure(row['initial (scenario)'], r.initial[p], 5, `${p} initial`);
    if (r.uncertainty[p] == null) assert.equal(row['± 1 sigma'], 'not given');
    else sameFigure(row['± 1 sigma'], r.uncertainty[p], 2, `${p} sigma`);
    const [, lo, hi] = params.find((x) => x[0] === p);
    assert.equal(row['range searched'], `${Number(lo)} to ${Number(hi)}`);
  }
  const quality = await readTable(page, '#fit-quality');
  assert.deepEqual(quality.problems, []);
  const rmse = quality.rows.find((q) => q['fit quality'] === 'RMSE, MW');
  sameFigure(rmse['before (scenario values)'], r.rmse_before, 4, 'RMSE before');
  sameFigure(rmse['after (fitted)'], r.rmse_after, 4, 'RMSE after');
  const r2 = quality.rows.find((q) => q['fit quality'] === 'R²');
  assert.ok(Math.abs(Number(r2['after (fitted)']) - r.r2_after) <= 5e-6, 'R² after');
  assert.ok(Math.abs(Number(r2['before (scenario values)']) - r.r2_before) <= 5e-6, 'R² before');
  assert.ok(r.rmse_after < r.rmse_before, 'the fit improved on the scenario\'s values');
  const correlation = await readTable(page, '#fit-correlation');
  assert.deepEqual(correlation.problems, []);
  for (const row of correlation.rows)
    for (const b of Object.keys(r.params))
      assert.ok(Math.abs(Number(row[b]) - r.correlation[row.correlation][b]) <= 5e-4, `correlation ${row.correlation} ${b}`);
  const warnings = await page.$$eval('#fit-warnings li:not(.empty)', (xs) => xs.map((x) => x.textContent));
  assert.deepEqual(warnings, r.warnings.map((w) => `Warning: ${w}`));
  // The plot holds the result's series as they are.
  const plotted = await page.evaluate(() => window.droopline.fitChart.data.map((s) => [...s]));
  assert.deepEqual(plotted, [r.series.t_s, r.series.measured_mw, r.series.initial_mw, r.series.fitted_mw]);
  assert.equal(await page.textContent('#fit-result .caution'), CAUTION);
  return { r };
}

test('bad bounds and a bad file refused in words; a BINARY record cancelled; fits from the COMTRADE pair and the CSV; injection tests', { timeout: 280000 }, async () => {
  const { page, errors } = await openPanel(VIEWPORTS[0]);
  assert.equal(await page.locator('#fit-picked').textContent(), 'nothing picked yet');
  await page.setInputFiles('#fit-file', CSV);
  await page.waitForSelector('#fit-columns:not([hidden])');
  const picked = await page.locator('#fit-picked li').allTextContents();
  assert.match(picked[0], /^recorded_event\.csv, \d+\.\d kB$/);
  assert.equal(picked[1], `CSV with ${readFileSync(CSV, 'utf8').split('\n', 1)[0].split(',').length} columns`);
  await page.selectOption('#fit-unit', 'QH1');
  assert.deepEqual(await Promise.all(['#fit-time-col', '#fit-freq-col', '#fit-power-col'].map((s) => page.inputValue(s))),
    ['t_s', 'quarnholt.f_hz', 'QH1.p_mw'], 'the command line\'s default columns');
  await setParams(page, FIT);
  await page.fill('#fit-starts', STARTS);
  await page.fill('#fit-seed', '1');

  // Bounds the wrong way round are refused beside the field, and nothing is sent.
  const sent = [];
  page.on('request', (q) => { if (q.url().includes('/api/v1/fits') && q.method() === 'POST') sent.push(q.postDataJSON()); });
  await page.locator('#fit-params tbody tr').nth(1).locator('input').nth(1).fill('0.01');
  await page.click('#do-fit');
  assert.deepEqual(await page.locator('#fit-params .field-error:visible').allTextContents(), ['must be above low']);
  assert.equal(sent.length, 0);
  await setParams(page, FIT);
  // So is one per-unit base without the other.
  await page.fill('#fit-base-mw', '400');
  await page.click('#do-fit');
  assert.equal(await page.textContent('#fit-base-hz-error'), 'give both bases, or neither');
  assert.equal(sent.length, 0);
  await page.fill('#fit-base-mw', '');

  // A CSV without the frequency column: the page offers no such column and the server names it.
  const lines = readFileSync(CSV, 'utf8').trim().split('\n');
  const bad = join(work, 'no_frequency.csv');
  writeFileSync(bad, lines.map((l) => l.split(',').filter((_, i) => i !== 1).join(',')).join('\n') + '\n');
  await page.setInputFiles('#fit-file', bad);
  await page.locator('#fit-picked li', { hasText: 'no_frequency.csv' }).waitFor();
  assert.equal(await page.inputValue('#fit-freq-col'), '');
  assert.equal(await page.locator('#fit-freq-col option:checked').textContent(), 'quarnholt.f_hz: not in this file');
  await page.click('#do-fit');
  const out = page.locator('[data-error-for="fit"]');
  await out.locator('.line').first().waitFor({ timeout: 10000 });
  const shown = await out.locator('.line').allTextContents();
  const server = await call('/api/v1/fits', { method: 'POST', body: sent.at(-1) });
  assert.equal(server.status, 400, server.text);
  const expected = [server.json.error, ...(server.json.details ?? server.json.issues ?? [])];
  assert.deepEqual(shown, expected, 'the server\'s message and every detail, one a line');
  assert.ok(shown.join(' ').includes('quarnholt.f_hz'), `the message names the column: ${shown.join(' | ')}`);
  assert.ok(!/object Object|Error:|at \S+:\d+/.test(shown.join(' ')));
  await page.locator('.validation-steps').screenshot({ path: join(SHOTS, `validation-refused-${size(VIEWPORTS[0])}.png`) });
  const refused = errors.filter((e) => /status of 400/.test(e)); // the browser logs the refused request
  assert.equal(refused.length, 1, errors.join('\n'));
  assert.deepEqual(errors.filter((e) => !refused.includes(e)), []);

  // A BINARY copy of the COMTRADE record goes as base64; this run is cancelled from the page.
  await page.setInputFiles('#fit-file', binaryCopy());
  await page.locator('#fit-picked li', { hasText: 'COMTRADE, BINARY data (sent in base64)' }).waitFor();
  await page.fill('#fit-starts', '16');
  await page.click('#do-fit');
  await page.locator('#do-fit-cancel').waitFor({ state: 'visible', timeout: 20000 });
  assert.equal(await out.textContent(), '', 'the last refusal goes when a fit starts');
  assert.ok(sent.at(-1).recording.dat_base64 && !sent.at(-1).recording.dat);
  await page.click('#do-fit-cancel');
  await page.locator('#fit-progress', { hasText: /^cancelled/ }).waitFor({ timeout: 20000 });
  assert.equal(await page.isVisible('#fit-result'), false);
  await page.fill('#fit-starts', STARTS);

  // The COMTRADE pair: picked together, the ASCII data sent as text, two parameters.
  await page.setInputFiles('#fit-file', [CFG, DAT]);
  await page.locator('#fit-picked li', { hasText: 'COMTRADE, ASCII data (sent as text)' }).waitFor();
  assert.deepEqual(await Promise.all(['#fit-freq-col', '#fit-power-col'].map((s) => page.inputValue(s))), ['quarnholt.f_hz', 'QH1.p_mw']);
  assert.equal(await page.isVisible('#fit-time-box'), false, 'COMTRADE has no time column to choose');
  const two = FIT.slice(0, 2);
  await setParams(page, two);
  const comtrade = await fitAndCompareWithDownloads(page, 'recorded_event.cfg', two);
  assert.equal(sent.at(-1).recording.format, 'comtrade');
  assert.ok(sent.at(-1).recording.dat && !sent.at(-1).recording.dat_base64);

  // The CSV with three parameters: its result replaces the first, nothing of it left.
  await page.setInputFiles('#fit-file', CSV);
  await page.waitForFunction(() => document.querySelector('#fit-freq-col').value === 'quarnholt.f_hz');
  await setParams(page, FIT);
  const csvRun = await fitAndCompareWithDownloads(page, 'recorded_event.csv', FIT);
  assert.equal(sent.at(-1).recording.format, 'csv');
  assert.equal(sent.at(-1).starts, Number(STARTS));
  assert.deepEqual(sent.at(-1).params, FIT.map(([p, lo, hi]) => `${p}=${Number(lo)}:${Number(hi)}`));
  assert.notDeepEqual(Object.keys(comtrade.r.params), Object.keys(csvRun.r.params));

  // Injection tests of the shipped profile: the table's pass or fail is the server's.
  await page.setInputFiles('#inject-file', PROFILE);
  await page.selectOption('#inject-unit', 'QH1');
  await page.click('#do-inject');
  await page.waitForSelector('#inject-table:not([hidden])', { timeout: 60000 });
  const injected = await call('/api/v1/injections', { method: 'POST', body: { unit: 'QH1', profile: JSON.parse(readFileSync(PROFILE, 'utf8')) } });
  assert.equal(injected.status, 200, injected.text);
  const tests = injected.json.tests;
  const table = await readTable(page, '#inject-table');
  assert.deepEqual(table.problems, []);
  assert.equal(table.rows.length, tests.length);
  table.rows.forEach((row, i) => {
    assert.equal(row.test, tests[i].name);
    assert.equal(row.result, tests[i].passed ? 'pass' : 'FAIL', tests[i].name);
    assert.equal(row['source of the requirement'], tests[i].require.source);
    assert.equal(row['within s'], tests[i].require.within_s.toFixed(1));
    assert.equal(row['max delay s'], tests[i].require.max_delay_s.toFixed(1));
    if (tests[i].delay_s == null) assert.equal(row['measured delay s'], 'not reached');
    else assert.ok(Math.abs(Number(row['measured delay s']) - tests[i].delay_s) <= 0.005 + 1e-9);
  });
  const passed = tests.filter((t) => t.passed).length;
  assert.ok((await page.textContent('#inject-verdict')).includes(`${passed} of ${tests.length} tests passed`));
  const plots = await page.$$eval('#inject-plots img', (xs) => xs.map((x) => ({ src: x.src, w: x.naturalWidth })));
  assert.equal(plots.length, injected.json.plots.length);
  for (const p of plots) assert.ok(p.src.startsWith('blob:') && p.w > 0, 'each plot loads from a Blob URL');

  // The same tests on the fitted values: the page posts the loaded scenario with the fitted
  // governor and turbine, and its table is the server's answer to that body.
  await page.selectOption('#inject-model', 'fitted');
  const [request] = await Promise.all([
    page.waitForRequest((q) => q.url().endsWith('/api/v1/injections') && q.method() === 'POST'),
    page.click('#do-inject'),
  ]);
  const onFitted = request.postDataJSON();
  const fittedUnit = onFitted.scenario.units.find((u) => u.id === 'QH1');
  assert.equal(fittedUnit.governor.droop, csvRun.r.params['governor.droop'], 'the fitted droop is the one tested');
  assert.equal(fittedUnit.turbine.reheat_s, csvRun.r.params['turbine.reheat_s'], 'the fitted reheat time is the one tested');
  await page.waitForFunction(() => document.querySelector('#inject-verdict').textContent.includes('fitted values'), null, { timeout: 60000 });
  const again = await call('/api/v1/injections', { method: 'POST', body: onFitted });
  assert.equal(again.status, 200, again.text);
  const fittedTable = await readTable(page, '#inject-table');
  assert.equal(fittedTable.rows.length, again.json.tests.length);
  fittedTable.rows.forEach((row, i) => {
    const t = again.json.tests[i];
    assert.equal(row.result, t.passed ? 'pass' : 'FAIL', t.name);
    if (t.delay_s == null) assert.equal(row['measured delay s'], 'not reached');
    else assert.ok(Math.abs(Number(row['measured delay s']) - t.delay_s) <= 0.005 + 1e-9);
  });

  // The panel with its results at the laptop's and the projector's size: nothing cut or wider
  // than its card, every figure under its head.
  for (const vp of VIEWPORTS) {
    await page.setViewportSize(vp);
    await page.waitForTimeout(300);
    await page.locator('#validation-study').screenshot({ path: join(SHOTS, `validation-${size(vp)}.png`) });
    const facts = await page.$eval('#validation-study', (card) => {
      const right = card.getBoundingClientRect().right;
      return {
        scroll: card.scrollWidth - card.clientWidth,
        page: document.documentElement.scrollWidth - document.documentElement.clientWidth,
        wide: [...card.querySelectorAll('*')].filter((e) => e.getClientRects().length && e.getBoundingClientRect().right > right + 0.5)
          .map((e) => `${e.tagName}#${e.id}.${e.className} ${Math.round(e.getBoundingClientRect().right - right)} px`),
      };
    });
    assert.deepEqual(facts, { scroll: 0, page: 0, wide: [] }, size(vp));
    for (const t of ['#fit-table', '#fit-quality', '#fit-correlation', '#inject-table']) assert.deepEqual((await readTable(page, t)).problems, [], `${t} at ${size(vp)}`);
  }
  assert.deepEqual(errors.filter((e) => !refused.includes(e)), []);
  await page.close();
});

// fitAndCompareCore, and the two download links give the server's fragment and plot of the same job.
async function fitAndCompareWithDownloads(page, name, params) {
  const { r } = await fitAndCompareCore(page, name, params);
  const id = await page.evaluate(() => window.droopline.fitJob);
  const download = async (selector) => {
    const [d] = await Promise.all([page.waitForEvent('download', { timeout: 10000 }), page.click(selector)]);
    return { name: d.suggestedFilename(), text: readFileSync(await d.path(), 'utf8') };
  };
  const fragment = await download('#fit-fragment');
  assert.equal(fragment.name, `fit_${r.unit}.fragment.json`);
  assert.deepEqual(JSON.parse(fragment.text), JSON.parse((await call(`/api/v1/fits/${id}/result?format=fragment`)).text));
  const svg = await download('#fit-svg');
  assert.equal(svg.name, `fit_${r.unit}.svg`);
  assert.equal(svg.text, (await call(`/api/v1/fits/${id}/result?format=svg`)).text);
  return { r };
}

test('a viewer pressing Fit or Run tests is told they are the instructor\'s, in words', { timeout: 60000 }, async () => {
  const page = await browser.newPage({ viewport: VIEWPORTS[0] });
  const errors = collectErrors(page);
  await page.goto(`http://127.0.0.1:${port}/`);
  await page.waitForFunction(() => window.droopline?.connected && document.querySelectorAll('#fit-unit option').length === 2, null, { timeout: 10000 });
  await page.setInputFiles('#fit-file', CSV);
  await page.waitForSelector('#fit-columns:not([hidden])');
  await page.click('#do-fit');
  await page.locator('[data-error-for="fit"]', { hasText: 'for the instructor' }).waitFor({ timeout: 10000 });
  await page.setInputFiles('#inject-file', PROFILE);
  await page.click('#do-inject');
  await page.locator('[data-error-for="inject"]', { hasText: 'for the instructor' }).waitFor({ timeout: 10000 });
  assert.equal(await page.isVisible('#fit-result'), false);
  assert.equal(await page.isVisible('#inject-table'), false);
  const refused = errors.filter((e) => /status of 401/.test(e)); // the browser logs each refused request
  assert.equal(refused.length, 2, errors.join('\n'));
  assert.deepEqual(errors.filter((e) => !refused.includes(e)), []);
  await page.close();
});
