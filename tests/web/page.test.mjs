// The training-room page in a real browser: Debian's chromium driven by playwright-core against
// the real `droopline serve` on loopback. Run by ctest:
//   node --test tests/web/page.test.mjs   (DROOPLINE_BIN, DROOPLINE_SRC, SCREENSHOT_DIR set)
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { join } from 'node:path';
import { SRC, SHOTS, VIEWPORTS, size, freePort, tokenFile, startServer as serve, stopServer, launchBrowser, collectErrors } from './harness.mjs';

const TOKEN = 'page-test-token-0123456789abcdef';
const TOKEN_FILE = tokenFile(TOKEN);
let server, port, browser;

const startServer = () => serve(port, ['--scenario', join(SRC, 'scenarios', 'demo_three_areas.json'), '--token-file', TOKEN_FILE]);

async function openPage(viewport = VIEWPORTS[0]) {
  const page = await browser.newPage({ viewport });
  const errors = collectErrors(page);
  await page.goto(`http://127.0.0.1:${port}/`);
  await page.waitForFunction(() => window.droopline?.connected && window.droopline.data.freq[0].length > 5, null, { timeout: 10000 });
  return { page, errors };
}

// Unlocks the instructor controls with the session's token.
async function unlock(page) {
  await page.fill('#token', TOKEN);
  await page.click('#auth-form button');
  await page.waitForSelector('#controls:not([hidden])');
}

before(async () => {
  port = await freePort();
  server = await startServer();
  browser = await launchBrowser();
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
  await page.screenshot({ path: join(SHOTS, 'page-live.png'), fullPage: true });
  await page.close();
});

test('a load step from the instructor controls shows as a dip and a new disturbance', async () => {
  const { page, errors } = await openPage();
  await unlock(page);
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
  // Modes run on the server's workers: a viewer is told they are the instructor's, then unlocks.
  await page.click('#do-modes');
  await page.locator('[data-error-for="modes"]', { hasText: 'for the instructor' }).waitFor({ timeout: 5000 });
  await unlock(page);
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
  assert.deepEqual(errors.filter((e) => !e.includes('401')), []);  // the refused analysis logs its 401
  await page.locator('.studies').screenshot({ path: join(SHOTS, 'page-studies.png') });
  await page.close();
});

test('the studies: requirement table from a file, and a sweep with its table and plot', async () => {
  const { page, errors } = await openPage();
  await unlock(page);  // requirement checks run on the server's workers: the instructor's
  await page.setInputFiles('#assess-file', join(SRC, 'scenarios', 'requirements', 'grid_code_example.json'));
  await page.waitForSelector('#assess-table:not([hidden])', { timeout: 20000 });
  assert.ok((await page.locator('#assess-table tbody tr').count()) >= 4);
  assert.match(await page.locator('#assess-verdict').textContent(), /requirements/i);
  assert.equal(await page.locator('#assess-table tbody tr').first().locator('td').nth(4).textContent(), 'pass');
  await page.fill('#sweep-vary', 'units[V1].governor.droop=0.03,0.06');
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
  await unlock(page);
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

// ------------------------------------------------------------------ page fixes, at both sizes

// A load step of `mw` in oskany from the instructor controls; resolves once its box shows.
async function loadStep(page, mw) {
  await page.selectOption('#area-select', 'oskany');
  await page.fill('#step-mw', String(mw));
  await page.click('#do-step');
  const box = page.locator('#disturbances .disturbance', { hasText: `load step ${mw} MW in area oskany` });
  await box.waitFor({ timeout: 8000 });
  return box;
}

async function control(page, body) {
  const status = await page.evaluate(async ([b, token]) => (await fetch('/api/v1/control', {
    method: 'POST', headers: { Authorization: `Bearer ${token}` }, body: JSON.stringify(b),
  })).status, [body, TOKEN]);
  assert.equal(status, 200, `control ${JSON.stringify(body)}`);
}

// Rectangles of the elements matching `selector` (page coordinates).
const rects = (page, selector) => page.evaluate((sel) => [...document.querySelectorAll(sel)].map((e) => {
  const r = e.getBoundingClientRect();
  return { left: r.left, right: r.right, top: r.top, bottom: r.bottom, width: r.width, text: e.textContent };
}), selector);

const logTimes = (page) => page.$$eval('#event-log li', (lis) => lis.map((li) => Number(li.dataset.t)));
const logTexts = (page) => page.$$eval('#event-log li', (lis) => lis.map((li) => li.textContent));

for (const vp of VIEWPORTS) {
  test(`disturbance panel: every value stands under its own label (${size(vp)})`, async () => {
    const { page, errors } = await openPage(vp);
    await unlock(page);
    await loadStep(page, 60 + vp.width / 100); // 73.66 or 79.2 MW: this test's own disturbance
    const lists = await page.$$eval('#disturbances .disturbance dl', (dls) => dls.map((dl) => [...dl.children].map((pair) => {
      const box = (e) => { const r = e.getBoundingClientRect(); return { left: r.left, right: r.right, top: r.top, bottom: r.bottom }; };
      return { tag: pair.tagName, kids: [...pair.children].map((k) => k.tagName), pair: box(pair),
        dt: box(pair.querySelector('dt')), dd: box(pair.querySelector('dd')), label: pair.querySelector('dt').textContent };
    })));
    const pairs = lists.flat();
    assert.ok(pairs.length >= 6, `${pairs.length} label/value pairs`);
    for (const p of pairs) {
      // One <div> per pair holding exactly its <dt> and <dd>: they cannot flow apart.
      assert.equal(p.tag, 'DIV');
      assert.deepEqual(p.kids, ['DT', 'DD']);
      // The value directly below its label, in the same cell.
      assert.ok(Math.abs(p.dd.left - p.dt.left) <= 1, `${p.label}: value at x ${p.dd.left}, label at ${p.dt.left}`);
      assert.ok(p.dd.top >= p.dt.bottom - 1 && p.dd.top - p.dt.bottom < 6, `${p.label}: value ${p.dd.top - p.dt.bottom}px below its label`);
      for (const b of [p.dt, p.dd]) assert.ok(b.left >= p.pair.left - 0.5 && b.right <= p.pair.right + 0.5, `${p.label}: inside its cell`);
    }
    // The cells of one disturbance never overlap.
    for (const list of lists) for (let i = 0; i < list.length; i++) for (let j = i + 1; j < list.length; j++) {
      const a = list[i].pair, b = list[j].pair;
      const apart = a.right <= b.left + 0.5 || b.right <= a.left + 0.5 || a.bottom <= b.top + 0.5 || b.bottom <= a.top + 0.5;
      assert.ok(apart, `cells ${list[i].label} and ${list[j].label} overlap`);
    }
    assert.deepEqual(errors, []);
    await page.locator('#disturbances').screenshot({ path: join(SHOTS, `disturbances-${size(vp)}.png`) });
    await page.close();
  });

  test(`a blank or non-numeric number field is refused beside it and nothing is sent (${size(vp)})`, async () => {
    const { page, errors } = await openPage(vp);
    await unlock(page);
    const sent = [];
    page.on('request', (r) => { if (/\/api\/v1\/(commands|record|fits)/.test(r.url())) sent.push(r.url()); });
    // Every number field of the page, with the button that would send it; '' (blank) or '-' (typed, not a number).
    const cases = [
      ['step-mw', '#do-step', ''], ['ramp-mw', '#do-ramp', ''], ['ramp-s', '#do-ramp', '-'],
      ['set-mw', '#do-setpoint', ''], ['set-ramp', '#do-setpoint', '-'], ['gov-droop', '#do-governor', ''],
      ['gov-db', '#do-governor', '-'], ['start-mw', '#do-start', ''], ['rec-from', '#rec-cfg', ''], ['rec-to', '#rec-dat', '-'],
      ['sched-mw', '#do-schedule', ''], ['sched-s', '#do-schedule', '-'], ['shed-mw', '#do-shed', ''],
      ['fit-base-mw', '#do-fit', '-'], ['fit-base-hz', '#do-fit', '-'], ['fit-starts', '#do-fit', ''], ['fit-seed', '#do-fit', '-'],
      ['fit-lo-1', '#do-fit', ''], ['fit-hi-1', '#do-fit', '-'],
    ];
    const all = await page.$$eval('input[type=number]', (xs) => xs.map((x) => x.id).sort());
    assert.deepEqual([...new Set(cases.map((c) => c[0]))].sort(), all, 'every number field is covered');
    for (const [id, button, bad] of cases) {
      const field = page.locator(`#${id}`);
      const keep = await field.inputValue();
      await field.fill('');
      if (bad) await field.pressSequentially(bad);
      await page.click(button);
      const note = page.locator(`#${id}-error`);
      await note.waitFor({ state: 'visible', timeout: 2000 });
      assert.match(await note.textContent(), /enter a number|not a number/, id);
      assert.equal(await field.getAttribute('aria-invalid'), 'true', id);
      // Beside the field: inside its label, just below the input.
      const [f, n, l] = await Promise.all([field, note, page.locator(`label:has(#${id})`)].map((x) => x.boundingBox()));
      assert.ok(n.y >= f.y + f.height - 1 && n.y - (f.y + f.height) < 8, `${id}: message ${n.y - f.y - f.height}px below the field`);
      assert.ok(n.x >= l.x - 0.5 && n.x + n.width <= l.x + l.width + 0.5 && n.y + n.height <= l.y + l.height + 0.5, `${id}: message inside the field's label`);
      if (id === 'step-mw' || id === 'rec-from') await page.locator(`fieldset:has(#${id})`).screenshot({ path: join(SHOTS, `field-refused-${id}-${size(vp)}.png`) });
      await page.waitForTimeout(300);
      assert.deepEqual(sent, [], `${id}: nothing sent`);
      await field.fill(keep || '1');
      assert.equal(await field.getAttribute('aria-invalid'), null, `${id}: the message goes once edited`);
      assert.equal(await note.isVisible(), false, id);
    }
    // A valid value goes out as before.
    await page.fill('#step-mw', '5');
    await page.click('#do-step');
    await page.waitForTimeout(500);
    assert.equal(sent.length, 1);
    assert.deepEqual(errors, []);
    await page.close();
  });

  test(`after a reset the disturbance panel and event log hold only the new run (${size(vp)})`, async () => {
    const { page, errors } = await openPage(vp);
    await unlock(page);
    const mw = 90 + vp.width / 100;
    await loadStep(page, mw);
    await page.click('[data-control="reset"]');
    // A reset waits for a confirmation that says what will happen.
    assert.match(await page.locator('#confirm-text').textContent(), /Reset the session to t = 0/);
    await page.click('#confirm-yes');
    // The page rejoins: the new run's clock starts again from 0.
    await page.waitForFunction(() => window.droopline.connected && window.droopline.last?.t_s < 5 && window.droopline.data.freq[0][0] === 0, null, { timeout: 8000 });
    // The note of the step applied before the reset goes with its run (notes otherwise stay 8 s);
    // the reset's own stays.
    const notes = await page.locator('#applied .note').allTextContents();
    assert.ok(!notes.some((t) => /load step/.test(t)), `the old run's note is gone: ${notes}`);
    assert.ok(notes.some((t) => /reset to t = 0/.test(t)), `the reset is acknowledged: ${notes}`);
    await page.waitForTimeout(500);
    const check = async (p, where) => {
      const texts = await logTexts(p);
      const times = await logTimes(p);
      const starts = await p.evaluate(() => [...window.droopline.disturbances.values()].map((x) => x.d.at_s));
      const old = await p.locator('#disturbances .disturbance', { hasText: `${mw} MW` }).count();
      // The clock is read last: what was read above was there by then, so none of it may lie
      // later (read first, a slow machine let the run's 10 s event in between the reads).
      const now = await p.evaluate(() => window.droopline.last.t_s);
      assert.ok(!texts.some((t) => t.includes(`${mw} MW`)), `${where}: the old run's step is gone from the log: ${texts}`);
      assert.match(texts[texts.length - 1], /session reset to t = 0/, `${where}: the log starts at the reset`);
      assert.ok(times.every((t) => t <= now + 0.1), `${where}: no entry later than t = ${now}`);
      assert.equal(old, 0, `${where}: the old disturbance is gone`);
      for (const d of starts) assert.ok(d <= now + 0.1, `${where}: a disturbance at ${d} s after t = ${now}`);
    };
    await check(page, 'the page that saw the reset');
    // A page that joins after the reset gets the same clean start from its greeting.
    const late = await openPage(vp);
    await check(late.page, 'a page joining later');
    await page.locator('.side').screenshot({ path: join(SHOTS, `after-reset-${size(vp)}.png`) });
    assert.deepEqual([...errors, ...late.errors], []);
    await late.page.close();
    await page.close();
  });

  test(`the event log shows each event once, in time order, for a page joining mid-disturbance (${size(vp)})`, async () => {
    const { page, errors } = await openPage(vp);
    await unlock(page);
    const mw = 30 + vp.width / 100;
    try {
      await control(page, { action: 'speed', speed: 10 }); // the 52 s measuring window in about 5 s
      await loadStep(page, mw);
      // Joins while the disturbance is still being measured: its greeting holds the opening. The
      // session is held meanwhile, so a slow machine cannot let the window close first.
      await control(page, { action: 'pause' });
      const late = await openPage(vp);
      assert.equal(await late.page.locator('#disturbances .disturbance .open').count() >= 1, true, 'joined mid-disturbance');
      await control(page, { action: 'resume' });
      await late.page.locator('#disturbances .disturbance', { hasText: `load step ${mw} MW` }).locator('.open').waitFor({ state: 'detached', timeout: 20000 });
      await late.page.waitForTimeout(300);
      for (const [p, who] of [[page, 'the instructor'], [late.page, 'the late joiner']]) {
        const texts = await logTexts(p);
        assert.equal(texts.filter((t) => t.includes(`disturbance: load step ${mw} MW`)).length, 1, `${who}: one entry for the disturbance: ${texts}`);
        assert.ok(!texts.some((t) => t.includes(`${mw} MW`) && t.includes('being measured')), `${who}: the entry was updated in place`);
        const seen = new Set();
        for (const t of texts) { assert.ok(!seen.has(t), `${who}: "${t}" twice`); seen.add(t); }
        const times = await logTimes(p);
        for (let i = 1; i < times.length; i++) assert.ok(times[i] <= times[i - 1], `${who}: entry ${i} at ${times[i]} s below one at ${times[i - 1]} s`);
      }
      await late.page.locator('#event-log').screenshot({ path: join(SHOTS, `event-log-late-joiner-${size(vp)}.png`) });
      assert.deepEqual([...errors, ...late.errors], []);
      await late.page.close();
    } finally {
      await control(page, { action: 'resume' });
      await control(page, { action: 'speed', speed: 1 });
    }
    await page.close();
  });

  test(`each unit's share stays open while its disturbance is being measured (${size(vp)})`, async () => {
    const { page, errors } = await openPage(vp);
    await unlock(page);
    const box = await loadStep(page, 40 + vp.width / 100);
    await box.locator('.open').waitFor();
    await box.locator('summary').click();
    await page.evaluate(() => { window.updates = 0; window.droopline.ws.addEventListener('message', (m) => { if (m.data.includes('"disturbance"')) window.updates += 1; }); });
    await page.waitForTimeout(2000);
    assert.ok(await page.evaluate(() => window.updates) >= 2, 'the disturbance was updated meanwhile');
    assert.equal(await box.locator('.open').count(), 1, 'still being measured');
    assert.equal(await box.locator('details').evaluate((d) => d.open), true, 'still open after 2 s of updates');
    assert.equal(await box.locator('details tbody tr').count(), 9);
    assert.deepEqual(errors, []);
    await box.screenshot({ path: join(SHOTS, `unit-shares-open-${size(vp)}.png`) });
    await page.close();
  });

  test(`no hidden element shows and no broken image appears (${size(vp)})`, async () => {
    const { page, errors } = await openPage(vp);
    const broken = await page.$$eval('img', (imgs) => imgs.filter((i) => i.checkVisibility() && i.naturalWidth === 0).map((i) => i.id || i.alt));
    assert.deepEqual(broken, []);
    const shown = await page.$$eval('[hidden]', (xs) => xs.filter((x) => getComputedStyle(x).display !== 'none').map((x) => x.id || x.tagName));
    assert.deepEqual(shown, []);
    assert.deepEqual(errors, []);
    await page.locator('.studies').screenshot({ path: join(SHOTS, `studies-on-load-${size(vp)}.png`) });
    await page.close();
  });

  test(`the units and areas tables fit their column, every column shown (${size(vp)})`, async () => {
    const { page, errors } = await openPage(vp);
    for (const id of ['unit-table', 'area-table']) {
      const cells = await rects(page, `#${id} thead th`);
      const [box] = await rects(page, `.table-box:has(#${id})`);
      const [side] = await rects(page, '.side');
      const last = cells[cells.length - 1];
      const scrolls = await page.$eval(`.table-box:has(#${id})`, (b) => b.scrollWidth > b.clientWidth);
      assert.ok(last.right <= box.right + 0.5 || scrolls, `${id}: last column ends at ${last.right}, its box at ${box.right}`);
      assert.ok(box.right <= side.right + 0.5 && box.right <= vp.width, `${id}: box ends at ${box.right}, column ${side.right}, viewport ${vp.width}`);
      // At these sizes it fits without scrolling.
      assert.equal(scrolls, false, `${id}: fits without a scroll bar`);
      assert.ok(last.right <= vp.width, `${id}: "${last.text}" within the viewport`);
    }
    assert.equal(await page.$eval('.side', (s) => s.scrollWidth <= s.clientWidth), true, 'the column itself does not scroll');
    assert.deepEqual(errors, []);
    await page.screenshot({ path: join(SHOTS, `tables-${size(vp)}.png`) });
    await page.close();
  });

  test(`the frequency chart's reference labels stay inside the plot, apart (${size(vp)})`, async () => {
    const { page, errors } = await openPage(vp);
    const { boxes, bbox } = await page.evaluate(() => {
      const u = window.droopline.charts.freq;
      return { boxes: u.refLabels, bbox: { left: u.bbox.left, top: u.bbox.top, right: u.bbox.left + u.bbox.width, bottom: u.bbox.top + u.bbox.height } };
    });
    assert.ok(boxes.length >= 2, `${boxes.length} labels drawn`);
    for (const b of boxes) {
      assert.ok(b.left >= bbox.left && b.right <= bbox.right && b.top >= bbox.top && b.bottom <= bbox.bottom, `"${b.label}" inside the plot area`);
    }
    for (let i = 0; i < boxes.length; i++) for (let j = i + 1; j < boxes.length; j++) {
      const a = boxes[i], b = boxes[j];
      assert.ok(a.bottom <= b.top || b.bottom <= a.top || a.right <= b.left || b.right <= a.left, `"${a.label}" and "${b.label}" overlap`);
    }
    assert.deepEqual(errors, []);
    await page.locator('#chart-freq').screenshot({ path: join(SHOTS, `chart-freq-${size(vp)}.png`) });
    await page.close();
  });

  test(`a viewer pressing Run sweep is told it is for the instructor, and nothing is sent (${size(vp)})`, async () => {
    const { page, errors } = await openPage(vp);
    const sent = [];
    page.on('request', (r) => { if (r.url().includes('/api/v1/sweeps')) sent.push(r.url()); });
    await page.click('#do-sweep');
    const note = page.locator('[data-error-for="sweep"]');
    await note.waitFor({ state: 'visible' });
    assert.equal(await note.textContent(), 'Sweeps are for the instructor: unlock with the instructor token to run one.');
    await page.waitForTimeout(300);
    assert.deepEqual(sent, []);
    const [b, n] = await Promise.all([page.locator('#do-sweep').boundingBox(), note.boundingBox()]);
    assert.ok(n.y >= b.y && n.y - (b.y + b.height) < 60 && n.x + n.width <= vp.width, 'the message shows by the button');
    await page.locator('#sweep-study').screenshot({ path: join(SHOTS, `sweep-viewer-${size(vp)}.png`) });
    // Once unlocked the message goes.
    await unlock(page);
    assert.equal(await note.textContent(), '');
    assert.deepEqual(errors, []);
    await page.close();
  });
}
