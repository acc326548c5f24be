// An exercise in three browsers at once: the instructor and two seats (each its own browser
// context, as on three laptops) at 1366x768 against `droopline serve --exercise`, and the wall view
// at the laptop's and the projector's size. Run by ctest:
//   node --test tests/web/exercise.test.mjs   (DROOPLINE_BIN, DROOPLINE_SRC, SCREENSHOT_DIR set)
// The exercise (tests/data/exercise_two_areas.json): seats "West desk" (area west: w1, w2) and
// "East desk" (area east: e1, e2); its script trips e2 at t = 5 s.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { join } from 'node:path';
import { SRC, SHOTS, VIEWPORTS, size, freePort, tokenFile, startServer, stopServer, launchBrowser, collectErrors } from './harness.mjs';

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

// A seat joins with the code the instructor's page shows.
async function joinSeat(seat) {
  const code = (await pages.instructor.page.locator(`#seats-table tr[data-seat="${seat}"] td.code`).textContent()).trim();
  const p = await open('seat');
  await p.page.fill('#seat-code', code.toLowerCase()); // typed as a trainee might
  await p.page.click('#seat-join button');
  await p.page.waitForSelector('#seat-desk:not([hidden]) .desk-area .unit-row', { timeout: 8000 });
  return p;
}

const shot = (page, name) => page.screenshot({ path: join(SHOTS, `${name}.png`) });

before(async () => {
  port = await freePort();
  server = await startServer(port, ['--exercise', join(SRC, 'tests', 'data', 'exercise_two_areas.json'), '--token-file', tokenFile(TOKEN)]);
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
    const code = row.locator('td.code');
    assert.match((await code.textContent()).trim(), /^[A-Z2-9]{6}$/);
    const px = await code.evaluate((e) => parseFloat(getComputedStyle(e).fontSize));
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
