// The training-room page in a real browser: Debian's chromium driven by playwright-core against
// the real `droopline serve` on loopback. Run by ctest:
//   node --test tests/web/page.test.mjs   (DROOPLINE_BIN, DROOPLINE_SRC, SCREENSHOT_DIR set)
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { spawn } from 'node:child_process';
import { mkdtempSync, writeFileSync, mkdirSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { createRequire } from 'node:module';

const SRC = process.env.DROOPLINE_SRC;
const BIN = process.env.DROOPLINE_BIN;
const SHOTS = process.env.SCREENSHOT_DIR || tmpdir();
const require = createRequire(join(SRC, 'web', 'package.json'));
const { chromium } = require('playwright-core');
const TOKEN = 'page-test-token-0123456789abcdef';

let server, port, browser;
const dir = mkdtempSync(join(tmpdir(), 'droopline-page-'));
writeFileSync(join(dir, 'token'), TOKEN + '\n');

function freePort() {
  return new Promise((resolve) => {
    const s = createServer();
    s.listen(0, '127.0.0.1', () => { const p = s.address().port; s.close(() => resolve(p)); });
  });
}

function startServer() {
  return new Promise((resolve, reject) => {
    const p = spawn(BIN, ['serve', '--scenario', join(SRC, 'scenarios', 'demo_three_areas.json'),
      '--listen', `127.0.0.1:${port}`, '--token-file', join(dir, 'token'), '--log-level', 'warn'],
    { stdio: ['ignore', 'pipe', 'inherit'] });
    const timer = setTimeout(() => reject(new Error('server did not start')), 10000);
    p.stdout.on('data', (d) => { if (String(d).includes('listening on')) { clearTimeout(timer); resolve(p); } });
    p.on('exit', (code) => reject(new Error(`server exited ${code}`)));
  });
}

function stopServer(p) {
  return new Promise((resolve) => { p.once('exit', resolve); p.kill('SIGTERM'); });
}

async function openPage() {
  const page = await browser.newPage({ viewport: { width: 1366, height: 768 } });
  const errors = [];
  page.on('console', (m) => { if (m.type() === 'error') errors.push(m.text()); });
  page.on('pageerror', (e) => errors.push(e.message));
  await page.goto(`http://127.0.0.1:${port}/`);
  await page.waitForFunction(() => window.droopline?.connected && window.droopline.data.freq[0].length > 5, null, { timeout: 10000 });
  return { page, errors };
}

before(async () => {
  port = await freePort();
  server = await startServer();
  browser = await chromium.launch({
    executablePath: '/usr/bin/chromium',
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-dev-shm-usage'],
  });
});

after(async () => {
  await browser?.close();
  if (server) await stopServer(server);
});

test('the page loads with no console error and the frequency chart receives points', async () => {
  const { page, errors } = await openPage();
  const n0 = await page.evaluate(() => window.droopline.data.freq[0].length);
  await page.waitForTimeout(1000);
  const n1 = await page.evaluate(() => window.droopline.data.freq[0].length);
  assert.ok(n1 >= n0 + 10, `points grew from ${n0} to ${n1} in 1 s`);
  assert.equal(await page.locator('#link-text').textContent(), 'live');
  assert.equal((await page.locator('#unit-table tbody tr').count()), 9);
  assert.deepEqual(errors, []);
  mkdirSync(SHOTS, { recursive: true });
  await page.screenshot({ path: join(SHOTS, 'page-live.png'), fullPage: true });
  await page.close();
});

test('a load step from the instructor controls shows as a dip and a new disturbance', async () => {
  const { page, errors } = await openPage();
  await page.fill('#token', TOKEN);
  await page.click('#auth-form button');
  await page.waitForSelector('#controls:not([hidden])');
  await page.selectOption('#area-select', 'oskany');
  await page.fill('#step-mw', '200');
  const tCmd = await page.evaluate(() => window.droopline.last.t_s);
  await page.click('#do-step');
  // (the scenario has its own load step at t = 10 s: look for this one among them)
  await page.locator('#disturbances .disturbance .head', { hasText: 'load step 200 MW in area oskany' })
    .waitFor({ timeout: 8000 });
  // The dip: the oskany frequency on the chart falls well below nominal after the step.
  await page.waitForFunction((t0) => {
    const d = window.droopline.data.freq;
    const i = window.droopline.scenario.areas.findIndex((a) => a.id === 'oskany');
    let low = Infinity;
    for (let k = 0; k < d[0].length; k++) if (d[0][k] > t0) low = Math.min(low, d[1 + i][k]);
    return low < 49.9;
  }, tCmd, { timeout: 8000 });
  assert.equal(await page.locator('[data-error-for="area"]').textContent(), '');
  assert.deepEqual(errors, []);
  await page.screenshot({ path: join(SHOTS, 'page-after-step.png'), fullPage: true });
  await page.close();
});

test('the studies: the modes table highlights the least-damped mode, and the record links download COMTRADE', async () => {
  const { page, errors } = await openPage();
  await page.click('#do-modes');
  await page.waitForSelector('#modes-table:not([hidden])');
  const least = page.locator('#modes-table tbody tr.least');
  assert.equal(await least.count(), 1);
  assert.equal(await least.locator('td').nth(1).textContent(), 'oscillatory');
  assert.ok((await page.locator('#modes-table tbody tr').count()) > 5);
  assert.ok((await page.locator('#modes-notes li').count()) >= 1);
  await page.fill('#rec-from', '0');
  await page.fill('#rec-to', '1');
  const href = await page.locator('#rec-cfg').getAttribute('href');
  assert.equal(href, '/api/v1/record?from_s=0&to_s=1&part=cfg');
  const cfg = await page.evaluate(async (h) => (await fetch(h)).text(), href);
  assert.match(cfg.split('\r\n')[0], /,droopline,1999$/);
  assert.deepEqual(errors, []);
  await page.locator('.studies').screenshot({ path: join(SHOTS, 'page-studies.png') });
  await page.close();
});

test('the studies: requirement table from a file, and a sweep with its table and plot', async () => {
  const { page, errors } = await openPage();
  await page.setInputFiles('#assess-file', join(SRC, 'scenarios', 'requirements', 'grid_code_example.json'));
  await page.waitForSelector('#assess-table:not([hidden])', { timeout: 20000 });
  assert.ok((await page.locator('#assess-table tbody tr').count()) >= 4);
  assert.match(await page.locator('#assess-verdict').textContent(), /requirements/i);
  assert.equal(await page.locator('#assess-table tbody tr').first().locator('td').nth(4).textContent(), 'pass');
  // Sweeps need the instructor: refused with the reason first, then run once unlocked.
  await page.fill('#sweep-vary', 'units[V1].governor.droop=0.03,0.06');
  await page.click('#do-sweep');
  await page.locator('[data-error-for="sweep"]', { hasText: 'instructor token' }).waitFor({ timeout: 5000 });
  await page.fill('#token', TOKEN);
  await page.click('#auth-form button');
  await page.waitForSelector('#controls:not([hidden])');
  await page.click('#do-sweep');
  await page.waitForSelector('#sweep-table:not([hidden])', { timeout: 30000 });
  assert.equal(await page.locator('#sweep-table tbody tr').count(), 2);
  await page.waitForFunction(() => { const i = document.getElementById('sweep-plot'); return !i.hidden && i.complete && i.naturalWidth > 0; });
  assert.match(await page.locator('#sweep-progress').textContent(), /^done: 2 runs/);
  assert.deepEqual(errors.filter((e) => !e.includes('401')), []);  // the refused sweep logs its 401
  await page.locator('.studies').screenshot({ path: join(SHOTS, 'page-studies-sweep.png') });
  await page.close();
});

test('a wrong token is refused with a message, and server errors show beside their control', async () => {
  const { page } = await openPage();
  await page.fill('#token', 'not-the-token-not-the-token-xx');
  await page.click('#auth-form button');
  await page.waitForFunction(() => document.getElementById('auth-error').textContent.length > 0);
  assert.match(await page.locator('#auth-error').textContent(), /refused/);
  assert.equal(await page.locator('#controls').isHidden(), true);
  // With the right token, a setpoint outside the unit's range comes back as words next to it.
  await page.fill('#token', TOKEN);
  await page.click('#auth-form button');
  await page.waitForSelector('#controls:not([hidden])');
  await page.selectOption('#unit-select', 'V1');
  await page.fill('#set-mw', '5000');
  await page.click('#do-setpoint');
  await page.waitForFunction(() => document.querySelector('[data-error-for="unit"]').textContent.length > 0);
  assert.match(await page.locator('[data-error-for="unit"]').textContent(), /must lie within \[min_mw, max_mw\]/);
  await page.close();
});

test('after the server restarts the page reconnects and restores the charts from history', async () => {
  const { page } = await openPage();
  await stopServer(server);
  server = null;
  await page.waitForFunction(() => !window.droopline.connected, null, { timeout: 5000 });
  assert.match(await page.locator('#link-text').textContent(), /disconnected|reconnecting/);
  server = await startServer();
  await page.waitForTimeout(2500); // the restarted session builds up some history
  await page.waitForFunction(() => window.droopline.connected, null, { timeout: 15000 });
  const n = await page.evaluate(() => window.droopline.data.freq[0].length);
  assert.ok(n > 10, `history restored: ${n} points`);
  assert.equal(await page.locator('#link-text').textContent(), 'live');
  await page.screenshot({ path: join(SHOTS, 'page-reconnected.png'), fullPage: true });
  await page.close();
});
