// What the browser tests share: the real `droopline serve` on a free loopback port, Debian's
// chromium through playwright-core, the viewports, and a page's console errors.
//   DROOPLINE_BIN, DROOPLINE_SRC, SCREENSHOT_DIR come from ctest (tests/CMakeLists.txt).
import { spawn } from 'node:child_process';
import { mkdtempSync, writeFileSync, mkdirSync, rmSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { createRequire } from 'node:module';

export const SRC = process.env.DROOPLINE_SRC;
export const BIN = process.env.DROOPLINE_BIN;
export const SHOTS = process.env.SCREENSHOT_DIR || tmpdir();
mkdirSync(SHOTS, { recursive: true });
const require = createRequire(join(SRC, 'web', 'package.json'));
export const { chromium } = require('playwright-core');

// The trainee's laptop and the training room's projector.
export const VIEWPORTS = [{ width: 1366, height: 768 }, { width: 1920, height: 1080 }];
export const size = (vp) => `${vp.width}x${vp.height}`;

export function freePort() {
  return new Promise((resolve) => {
    const s = createServer();
    s.listen(0, '127.0.0.1', () => { const p = s.address().port; s.close(() => resolve(p)); });
  });
}

// Scratch folders go when the test process ends (after every server it started has stopped).
const scratch = [];
process.on('exit', () => { for (const dir of scratch) rmSync(dir, { recursive: true, force: true }); });

/** A fresh folder under the system's temporary folder, removed when the test process exits. */
export function scratchDir(prefix) {
  const dir = mkdtempSync(join(tmpdir(), prefix));
  scratch.push(dir);
  return dir;
}

/** A folder with the instructor token's file in it. */
export function tokenFile(token) {
  const dir = scratchDir('droopline-web-');
  writeFileSync(join(dir, 'token'), token + '\n');
  return join(dir, 'token');
}

/** Starts `droopline serve` with `args` (besides --listen) and resolves once it listens (10 s at most). */
export function startServer(port, args) {
  return new Promise((resolve, reject) => {
    const p = spawn(BIN, ['serve', ...args, '--listen', `127.0.0.1:${port}`, '--log-level', 'warn'],
      { stdio: ['ignore', 'pipe', 'inherit'] });
    const timer = setTimeout(() => reject(new Error('server did not start')), 10000);
    p.stdout.on('data', (d) => { if (String(d).includes('listening on')) { clearTimeout(timer); resolve(p); } });
    p.on('exit', (code) => reject(new Error(`server exited ${code}`)));
  });
}

export function stopServer(p) {
  return new Promise((resolve) => { p.once('exit', resolve); p.kill('SIGTERM'); });
}

export function launchBrowser() {
  return chromium.launch({
    executablePath: '/usr/bin/chromium',
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-dev-shm-usage'],
  });
}

/** The console errors and uncaught exceptions of `page`, as they come. */
export function collectErrors(page) {
  const errors = [];
  page.on('console', (m) => { if (m.type() === 'error') errors.push(m.text()); });
  page.on('pageerror', (e) => errors.push(e.message));
  return errors;
}
