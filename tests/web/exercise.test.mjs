// An exercise in three browsers at once: the instructor and two seats (each its own browser
// context, as on three laptops) at 1366x768 against `droopline serve --exercise`, and the wall view
// at the laptop's and the projector's size. Run by ctest:
//   node --test tests/web/exercise.test.mjs   (DROOPLINE_BIN, DROOPLINE_SRC, SCREENSHOT_DIR set)
// The exercise (tests/data/exercise_two_areas.json): seats "West desk" (area west: w1, w2) and
// "East desk" (area east: e1, e2); its script trips e2 at t = 5 s.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { join } from 'node:path';
import { readFileSync, writeFileSync } from 'node:fs';
import { SRC, SHOTS, VIEWPORTS, size, freePort, tokenFile, scratchDir, startServer, stopServer, launchBrowser, collectErrors } from './harness.mjs';

const TOKEN = 'exercise-test-token-0123456789abcdef';
const LAPTOP = VIEWPORTS[0];
let server, port, browser;
const pages = {}; // instructor, west, east: { page, errors }

const url = (view) => `http://127.0.0.1:${port}/${view ? `?view=${view}` : ''}`;

// A page of its own browser context (its own storage, as another machine), streaming.
async function open(view, viewport = LAPTOP) {
  const context = await browser.newContext({ viewport });
  const page = await context.newPage();
  const errors = collectErrors(page);
  await page.goto(url(view));
  await page.waitForFunction(() => window.droopline?.connected && window.droopline.last, null, { timeout: 10000 });
  return { page, errors };
}

// The trainees (invented names).
const TRAINEES = { 'west-desk': 'Tamsin Orrey', 'east-desk': 'Bram Yelland' };

// The test exercise with objectives for both seats (one of the east's own), in a file of its own.
function exerciseWithObjectives() {
  const ex = JSON.parse(readFileSync(join(SRC, 'tests', 'data', 'exercise_two_areas.json'), 'utf8'));
  ex.objectives = [
    { id: 'dev', measure: 'largest_deviation_hz', target: 0.05 },
    { id: 'band', measure: 'time_outside_standard_s', target: 5, weight: 2 },
    { id: 'ack', seat: 'east-desk', measure: 'alarm_to_ack_s', target: 10 },
  ];
  const path = join(scratchDir('droopline-web-'), 'exercise.json');
  writeFileSync(path, JSON.stringify(ex));
  return path;
}

// A seat joins with the code the instructor's page shows and the trainee's name.
async function joinSeat(seat) {
  const code = (await pages.instructor.page.locator(`#seats-table tr[data-seat="${seat}"] td.code`).textContent()).trim();
  const p = await open('seat');
  await p.page.fill('#seat-code', code.toLowerCase()); // typed as a trainee might
  await p.page.fill('#seat-name', `  ${TRAINEES[seat]} `);
  await p.page.click('#seat-join button');
  await p.page.waitForSelector('#seat-desk:not([hidden]) .desk-area .unit-row', { timeout: 8000 });
  return p;
}

const shot = (page, name) => page.screenshot({ path: join(SHOTS, `${name}.png`) });

before(async () => {
  port = await freePort();
  server = await startServer(port, ['--exercise', exerciseWithObjectives(), '--token-file', tokenFile(TOKEN)]);
  browser = await launchBrowser();
  pages.instructor = await open('instructor');
  await pages.instructor.page.fill('#token', TOKEN);
  await pages.instructor.page.click('#auth-form button');
  await pages.instructor.page.waitForSelector('#seats-table tbody tr[data-seat="east-desk"]', { timeout: 8000 });
  pages.west = await joinSeat('west-desk');
  pages.east = await joinSeat('east-desk');
});

after(async () => {
  await browser?.close();
  if (server) await stopServer(server);
});

test('the instructor sees each seat with a join code large enough to read out, and who has joined', async () => {
  const { page, errors } = pages.instructor;
  for (const seat of ['west-desk', 'east-desk']) {
    const row = page.locator(`#seats-table tr[data-seat="${seat}"]`);
    // The seats are read again every 2 s: both joined before this test began.
    await row.locator('td.joined').waitFor({ timeout: 8000 });
    // One evaluation reads the text and the size: the table is rebuilt every 2 s, and a handle
    // resolved before a rebuild would point at a detached cell (no computed style).
    const { text, px } = await page.evaluate((sel) => {
      const e = document.querySelector(sel);
      return { text: e.textContent, px: parseFloat(getComputedStyle(e).fontSize) };
    }, `#seats-table tr[data-seat="${seat}"] td.code`);
    assert.match(text.trim(), /^[A-Z2-9]{6}$/);
    assert.ok(px >= 24, `${seat}'s code in ${px}px type`);
  }
  assert.deepEqual(errors, []);
});

test('a seat is offered only its own area and units; a forged command for another area is refused in words', async () => {
  const { page, errors } = pages.west;
  assert.deepEqual(await page.$$eval('.desk-area', (xs) => xs.map((x) => x.dataset.area)), ['west']);
  assert.deepEqual(await page.$$eval('.unit-row', (xs) => xs.map((x) => x.dataset.unit)), ['w1', 'w2']);
  assert.equal(await page.locator('#seat-areas').getByText(/\be[12]\b/).count(), 0, 'no east unit named on the west desk');
  assert.equal(await page.locator('#seat-areas button').count(), 5 + 3 * 2, 'secondary control on and off, schedule, shed, restore; set, start, stop per unit');
  // Forged: the w1 row made to send for e1 (as a hand-made request would).
  await page.$eval('.unit-row[data-unit="w1"]', (row) => { row.dataset.unit = 'e1'; });
  const answer = page.waitForResponse((r) => r.url().endsWith('/api/v1/commands'), { timeout: 5000 });
  await page.locator('#seat-areas .unit-row').first().getByRole('button', { name: 'Set', exact: true }).click();
  assert.equal((await answer).status(), 403);
  const out = page.locator('[data-error-for="unit:w1"]');
  await out.filter({ hasText: 'does not answer for' }).waitFor({ timeout: 5000 });
  assert.match(await out.textContent(), /unit "e1" is in area "east", which seat "west-desk" does not answer for/);
  assert.equal(await page.locator('#applied .note').filter({ hasText: 'e1' }).count(), 0, 'no acknowledgement of a refused command');
  await page.$eval('.unit-row[data-unit="e1"]', (row) => { row.dataset.unit = 'w1'; });
  await page.locator('.unit-row[data-unit="w1"]').screenshot({ path: join(SHOTS, 'exercise-seat-refused.png') });
  assert.deepEqual(errors.filter((e) => !e.includes('403')), []); // the browser logs the refused request
  errors.length = 0;
});

test("a seat's action is acknowledged on the seat and shows in the instructor's feed under the seat's name", async () => {
  const west = pages.west.page;
  await west.fill('#seat-set-w2', '160');
  await west.fill('#seat-ramp-w2', '5');
  await west.locator('.unit-row[data-unit="w2"]').getByRole('button', { name: 'Set', exact: true }).click();
  await west.locator('#applied .note', { hasText: 'setpoint of w2 to 160.0 MW at 5.0 MW/s' }).waitFor({ timeout: 5000 });
  assert.equal(await west.locator('[data-error-for="unit:w2"]').textContent(), '');
  const feed = pages.instructor.page.locator('#action-feed li', { hasText: 'w2' });
  await feed.first().waitFor({ timeout: 8000 });
  assert.equal(await feed.first().locator('.by').textContent(), 'West desk');
  assert.equal(await feed.first().getAttribute('data-by'), 'west-desk');
  // Others see it with the name too: the east desk's event log.
  await pages.east.page.locator('#event-log li', { hasText: 'w2' }).locator('.by', { hasText: 'West desk' }).waitFor({ timeout: 8000 });
  assert.deepEqual(pages.west.errors, []);
});

test("a seat's area controls: load shed by hand shows in its figures and is restored", async () => {
  const west = pages.west.page;
  const shed = west.locator('.desk-area[data-area="west"] .figures .pair', { hasText: 'load shed' }).locator('dd');
  await west.fill('#seat-shed-west', '15');
  await west.locator('.desk-area[data-area="west"]').getByRole('button', { name: 'Shed', exact: true }).click();
  await west.locator('#applied .note', { hasText: 'shed 15.0 MW of load in area west' }).waitFor({ timeout: 5000 });
  await west.waitForFunction((el) => el.textContent === '15.0 MW', await shed.elementHandle(), { timeout: 5000 });
  await west.locator('.desk-area[data-area="west"]').getByRole('button', { name: 'Restore', exact: true }).click();
  await west.locator('#applied .note', { hasText: 'restore all shed load in area west' }).waitFor({ timeout: 5000 });
  await west.waitForFunction((el) => el.textContent === '0.0 MW', await shed.elementHandle(), { timeout: 5000 });
  assert.equal(await west.locator('[data-error-for="area:west"]').textContent(), '');
  assert.deepEqual(pages.west.errors, []);
});

test('an alarm acknowledged by a seat shows as acknowledged for the instructor', async () => {
  const east = pages.east.page;
  // e2 trips at t = 5 s: an alarm of the east area with an Acknowledge button.
  const alarm = east.locator('#seat-alarms li.alarm', { hasText: 'e2' }).filter({ has: east.locator('button.ack') }).first();
  await alarm.waitFor({ timeout: 15000 });
  const id = await alarm.getAttribute('data-alarm');
  // It is the east's alone: the west desk does not list it.
  assert.equal(await pages.west.page.locator(`#seat-alarms li[data-alarm="${id}"]`).count(), 0);
  await alarm.locator('button.ack').click();
  // On the seat it is acknowledged (or gone: a trip's alarm clears once acknowledged).
  await east.waitForFunction((x) => {
    const li = document.querySelector(`#seat-alarms li[data-alarm="${x}"]`);
    return !li || (!li.querySelector('button.ack') && li.textContent.includes('acknowledged by East desk'));
  }, id, { timeout: 5000 });
  assert.equal(await east.locator('#seat-alarms .error').filter({ hasText: /./ }).count(), 0, 'no refusal shown');
  const there = pages.instructor.page.locator(`#desk-alarms li[data-alarm="${id}"] .state`);
  await there.filter({ hasText: 'acknowledged by East desk' }).waitFor({ timeout: 8000 });
  assert.equal(await pages.instructor.page.locator(`#desk-alarms li[data-alarm="${id}"] button.ack`).count(), 0);
  assert.equal(await east.locator('#alarm-tone').isChecked(), false, 'the alarm tone is off until asked for');
  await shot(east, `exercise-seat-east-${size(LAPTOP)}`);
  assert.deepEqual(pages.east.errors, []);
});

// Readable from the back of a room: a common signage rule of thumb (common practice) asks for
// about 25 mm of letter height per 10 m of viewing distance. A figure of 1/16 of the screen's height
// (48 px of 768 lines) has digits about 0.7 of that tall; on a picture 2 m high that is 8-9 cm,
// enough for 30 m. So: every frequency figure at least 1/16 of the viewport's height.
for (const vp of VIEWPORTS) {
  test(`the wall view is readable: large figures, each under its own label, nothing clipped (${size(vp)})`, async () => {
    const { page, errors } = await open('wall', vp);
    await page.waitForFunction(() => document.querySelectorAll('#wall-areas .tile .figure').length === 2
      && [...document.querySelectorAll('#wall-areas .figure')].every((f) => /^\d+\.\d{3}$/.test(f.textContent)), null, { timeout: 8000 });
    const tiles = await page.$$eval('#wall-areas .tile', (ts) => ts.map((t) => {
      const box = (e) => { const r = e.getBoundingClientRect(); return { left: r.left, right: r.right, top: r.top, bottom: r.bottom, height: r.height }; };
      const figure = t.querySelector('.figure');
      return { area: t.dataset.area, tile: box(t), label: box(t.querySelector('.tile-label')), labelText: t.querySelector('.tile-label').textContent,
        figure: box(figure), unit: box(t.querySelector('.unit')), px: parseFloat(getComputedStyle(figure).fontSize),
        clipped: t.querySelector('.tile-figure').scrollWidth > t.querySelector('.tile-figure').clientWidth };
    }));
    assert.deepEqual(tiles.map((t) => t.labelText), ['west', 'east']);
    for (const t of tiles) {
      assert.ok(t.px >= vp.height / 16, `${t.area}: figure in ${t.px}px type, at least ${vp.height / 16}`);
      assert.ok(t.figure.top >= t.label.bottom - 1, `${t.area}: the figure (top ${t.figure.top}) below its label (bottom ${t.label.bottom})`);
      assert.ok(t.figure.left >= t.label.left - 1 && t.figure.left - t.label.left < 20, `${t.area}: the figure under its label`);
      for (const part of [t.label, t.figure, t.unit])
        assert.ok(part.left >= t.tile.left && part.right <= t.tile.right && part.bottom <= t.tile.bottom, `${t.area}: inside its tile`);
      assert.equal(t.clipped, false, `${t.area}: the figure is not cut off`);
    }
    assert.ok(tiles[0].tile.right <= tiles[1].tile.left, 'the tiles stand apart');
    // One screen: chart, clock, alarms and tie flows all within the viewport, no scrolling.
    for (const sel of ['#chart-freq', '.wall-clock', '#wall-alarms', '#wall-ties']) {
      const b = await page.locator(sel).boundingBox();
      assert.ok(b && b.y >= 0 && b.y + b.height <= vp.height && b.x + b.width <= vp.width, `${sel} within the screen: ${JSON.stringify(b)}`);
    }
    // The alarm list ends at the foot of the screen: every line shown is whole (the rest are counted).
    const cut = await page.$eval('#wall-alarms', (list) => {
      const bottom = list.getBoundingClientRect().bottom;
      return [...list.children].filter((li) => !li.hidden && li.getBoundingClientRect().bottom > bottom + 0.5).map((li) => li.textContent);
    });
    assert.deepEqual(cut, [], 'no alarm line cut off');
    const clock = await page.locator('#wall-time').evaluate((e) => parseFloat(getComputedStyle(e).fontSize));
    assert.ok(clock >= vp.height / 16, `clock in ${clock}px type`);
    assert.match(await page.locator('#wall-limit').textContent(), /^of 10:00/);
    assert.equal(await page.locator('#wall-ties tbody tr').count(), 1);
    assert.equal(await page.locator('.wall button, .wall input, .wall select').count(), 0, 'no controls on the wall');
    assert.deepEqual(errors, []);
    await shot(page, `exercise-wall-${size(vp)}`);
    await page.context().close();
  });
}

test("the instructor's controls stay in view, a trip waits for a confirmation and is acknowledged", async () => {
  const { page, errors } = pages.instructor;
  await page.evaluate(() => window.scrollTo(0, document.body.scrollHeight));
  const b = await page.locator('#do-tie-trip').boundingBox();
  assert.ok(b.y >= 0 && b.y + b.height <= LAPTOP.height, `the tie trip button in view at the foot of the page: ${JSON.stringify(b)}`);
  const sent = [];
  page.on('request', (r) => { if (r.url().endsWith('/api/v1/commands')) sent.push(r.postData()); });
  await page.selectOption('#tie-select', 'wx');
  await page.click('#do-tie-trip');
  assert.match(await page.locator('#confirm-text').textContent(), /^Trip tie wx\?/);
  await page.click('#confirm-no');
  await page.waitForTimeout(300);
  assert.deepEqual(sent, [], 'cancelled: nothing sent');
  await page.click('#do-tie-trip');
  await page.click('#confirm-yes');
  await page.locator('#applied .note', { hasText: /^Applied at t = [\d.]+ s: trip tie wx$/ }).waitFor({ timeout: 5000 });
  assert.equal(sent.length, 1);
  await page.locator('#action-feed li', { hasText: 'wx' }).locator('.by', { hasText: 'instructor' }).first().waitFor({ timeout: 5000 });
  await shot(page, `exercise-instructor-scrolled-${size(LAPTOP)}`);
  await page.evaluate(() => window.scrollTo(0, 0));
  assert.deepEqual(errors, []);
});

test('a seat must give a name to join, and then sees its own objectives only', async () => {
  const p = await open('seat');
  await p.page.fill('#seat-code', 'ABCDEF');
  await p.page.evaluate(() => { document.getElementById('seat-name').required = false; }); // past the browser's own check
  await p.page.click('#seat-join button');
  assert.match(await p.page.locator('#seat-error').textContent(), /Enter your name/);
  assert.deepEqual(p.errors, []);
  await p.page.context().close();

  const { page, errors } = pages.east;
  const block = page.locator('#seat-objectives-body .objectives-seat');
  await block.first().waitFor({ timeout: 8000 });
  assert.deepEqual(await block.evaluateAll((xs) => xs.map((x) => x.dataset.seat)), ['east-desk']);
  const rows = await block.locator('tbody tr').evaluateAll((trs) => trs.map((tr) => [...tr.cells].map((c) => c.textContent)));
  assert.equal(rows.length, 3, 'dev, band and the east\'s own ack objective');
  for (const [label, measured, target, score, word] of rows) {
    assert.ok(label.length > 3, label);
    assert.match(target, /^[\d.]+ (Hz|s)$/);
    assert.match(measured, /^([\d.]+ (Hz|s)|not yet)$/);
    assert.match(score, /^\d+$/);
    assert.ok(['met', 'not met'].includes(word), word);
  }
  assert.match(await block.locator('.seat-score').textContent(), /^score [\d.]+ \/ 100$/);
  // The west desk has no ack objective of its own, and sees nothing of the east's.
  const west = pages.west.page.locator('#seat-objectives-body .objectives-seat');
  await west.first().waitFor({ timeout: 8000 });
  assert.deepEqual(await west.evaluateAll((xs) => xs.map((x) => x.dataset.seat)), ['west-desk']);
  assert.equal(await west.locator('tbody tr').count(), 2);
  assert.deepEqual(errors, []);
});

test("the instructor sees every seat's objectives under its trainee's name, keeps notes and opens the debrief", async () => {
  const { page, errors } = pages.instructor;
  for (const [seat, name] of Object.entries(TRAINEES)) {
    await page.locator(`#seats-table tr[data-seat="${seat}"] td.trainee`, { hasText: name }).waitFor({ timeout: 8000 });
    await page.locator(`#desk-objectives .objectives-seat[data-seat="${seat}"] h3`, { hasText: name }).waitFor({ timeout: 8000 });
  }
  assert.equal(await page.locator('#desk-objectives .objectives-seat').count(), 2);

  await page.fill('#note-text', 'West waited for the east\nbefore raising w1');
  await page.click('#do-note');
  await page.locator('#notes-list li', { hasText: 'West waited for the east' }).waitFor({ timeout: 5000 });
  assert.equal(await page.locator('#note-text').inputValue(), '');
  // Never on a seat's page.
  assert.equal(await pages.west.page.getByText('West waited for the east').count(), 0);

  // The debrief is served by the debrief branch's route: before that is merged the server answers
  // 404, which the page must show in words (and which the browser logs as a failed load: that one
  // console error is expected then, and only then).
  const answer = page.waitForResponse((r) => r.url().endsWith('/api/v1/debrief'), { timeout: 5000 });
  const popup = page.context().waitForEvent('page', { timeout: 5000 }).catch(() => null);
  await page.click('#do-debrief');
  const status = (await answer).status();
  if (status === 404) {
    await page.locator('[data-error-for="debrief"]', { hasText: 'No debrief' }).waitFor({ timeout: 5000 });
    const i = errors.findIndex((e) => /status of 404/.test(e));
    if (i >= 0) errors.splice(i, 1);
  } else {
    assert.equal(status, 200);
    const report = await popup;
    assert.ok(report, 'the debrief opened in a new tab');
    assert.match(report.url(), /^blob:/);
    await page.locator('#debrief-save:not([hidden])').waitFor({ timeout: 5000 });
    await report.close();
  }
  assert.deepEqual(errors, []);
});

test('screenshots of every view at both sizes', async () => {
  const overview = await open('');
  for (const vp of VIEWPORTS) {
    for (const [name, page] of [['overview', overview.page], ['instructor', pages.instructor.page], ['seat-west', pages.west.page]]) {
      await page.setViewportSize(vp);
      await page.waitForTimeout(300); // the charts follow the window's size
      await shot(page, `exercise-${name}-${size(vp)}`);
      await page.screenshot({ path: join(SHOTS, `exercise-${name}-${size(vp)}-full.png`), fullPage: true });
    }
  }
  assert.deepEqual(overview.errors, []);
});

test('the instructor ends the exercise: every seat sees it ended and its commands are refused', async () => {
  const { page, errors } = pages.instructor;
  await page.setViewportSize(LAPTOP);
  await page.click('#do-end');
  await page.click('#confirm-yes');
  for (const p of [pages.instructor, pages.west, pages.east]) {
    await p.page.locator('#exercise-ended:not([hidden])').waitFor({ timeout: 8000 });
    assert.match(await p.page.locator('#exercise-ended').textContent(), /Exercise ended\..*ended by the instructor/);
  }
  const west = pages.west.page;
  await west.setViewportSize(LAPTOP);
  await west.click('.area-controls button:has-text("On")');
  await west.locator('[data-error-for="area:west"]', { hasText: 'the exercise has ended' }).waitFor({ timeout: 5000 });
  for (const vp of VIEWPORTS) {
    await west.setViewportSize(vp);
    await west.evaluate(() => window.scrollTo(0, 0)); // the banner, at the top
    await west.waitForTimeout(300);
    await shot(west, `exercise-seat-ended-${size(vp)}`);
  }
  await page.locator('#do-end[disabled]').waitFor({ timeout: 5000 });
  const refused = pages.west.errors.filter((e) => /status of 409/.test(e)); // the refused command, logged by the browser
  assert.deepEqual(pages.west.errors.filter((e) => !refused.includes(e)), []);
  assert.deepEqual(errors, []);
});
