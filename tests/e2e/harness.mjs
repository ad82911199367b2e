// What every browser test file shares: counting checks, Debian's Chromium through
// playwright-core (never a downloaded browser), the screenshot folder, and a record of every
// request and console error of a browser context.
import { chromium } from 'playwright-core';
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

export const root = join(dirname(fileURLToPath(import.meta.url)), '..', '..');
export const fixtures = join(root, 'tests', 'fixtures');
export const out = join(root, 'tests', 'out', 'e2e');
mkdirSync(out, { recursive: true });

/** The command-line program, for checks that compare the page with it. */
export const spinneyBin = process.env.SPINNEY_BIN
  ?? join(process.env.CARGO_TARGET_DIR ?? join(root, 'target'), 'debug', 'spinney');

/** Runs `spinney ARGS...`; fails the check if the program is missing. */
export function spinney(args) {
  if (!existsSync(spinneyBin)) throw new Error(`${spinneyBin} is missing: run cargo build -p spinney-cli first (or set SPINNEY_BIN)`);
  const r = spawnSync(spinneyBin, args, { encoding: 'utf8', maxBuffer: 256 * 1024 * 1024 });
  if (r.error) throw new Error(`cannot run ${spinneyBin}: ${r.error}`);
  return { status: r.status, stdout: r.stdout, stderr: r.stderr };
}

let passed = 0, failed = 0;
export async function check(name, body) {
  try {
    await body();
    passed++;
    console.log(`PASS ${name}`);
  } catch (e) {
    failed++;
    console.log(`FAIL ${name}: ${String(e?.message ?? e).split('\n')[0]}`);
  }
}
export function expect(cond, what) { if (!cond) throw new Error(what); }

/** Prints the summary line scripts/test reads and exits with its status. */
export function finish() {
  console.log(`${passed} passed, ${failed} failed`);
  process.exit(failed ? 1 : 0);
}

export function launch() {
  return chromium.launch({
    executablePath: process.env.CHROMIUM ?? '/usr/bin/chromium',
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
      '--disable-background-networking', '--disable-component-update', '--disable-sync'],
    // playwright gives every launch a fresh temporary profile (the --user-data-dir of toolchain.md).
  });
}

/** Records every long task of the main thread of `context`'s pages (over 50 ms each, as the
 *  browser reports them: PerformanceObserver 'longtask'). Call before opening the page. */
export function watchLongTasks(context) {
  return context.addInitScript(() => {
    window.__longTasks = [];
    new PerformanceObserver((list) => {
      for (const e of list.getEntries()) window.__longTasks.push({ start: e.startTime, duration: e.duration });
    }).observe({ entryTypes: ['longtask'] });
  });
}

/** The page's own clock (performance.now()), to bracket a span for `longestTask`. */
export const mainThreadNow = (page) => page.evaluate(() => performance.now());

/** The longest main-thread task that began between two `mainThreadNow` readings. */
export const longestTask = (page, from, to) => page.evaluate(([a, b]) => Math.max(0, ...window.__longTasks
  .filter((t) => t.start >= a && t.start <= b).map((t) => t.duration)), [from, to]);

/** A page in `context` whose requests (its workers' and service worker's included) and
 *  console errors are recorded. */
export async function watchedPage(context) {
  const page = await context.newPage();
  const requests = [];
  const consoleErrors = [];
  context.on('request', (r) => requests.push(r.url()));
  page.on('console', (m) => { if (m.type() === 'error') consoleErrors.push(m.text()); });
  page.on('pageerror', (e) => consoleErrors.push(String(e)));
  return { page, requests, consoleErrors };
}

/** The closing check of a served page: nothing asked of another origin, no console errors
 *  (Content-Security-Policy violations among them). */
export function checkNothingLeft(requests, origin, consoleErrors) {
  return check('no request left the page\'s own origin, and no console errors', async () => {
    const away = foreign(requests, origin);
    expect(away.length === 0, `foreign requests: ${away.slice(0, 3)}`);
    expect(consoleErrors.length === 0, consoleErrors.slice(0, 3).join(' | '));
  });
}

/** Opens the page at `origin` and loads the surgical demo records. */
export async function openDemo(page, origin) {
  await page.goto(`${origin}/`);
  await page.waitForSelector('#app[data-ready=yes]', { timeout: 30000 });
  await page.click('#demo-surgery');
  await page.waitForFunction(() => document.querySelector('.facts')?.textContent.includes('surgery-complications.csv'));
}

/** Sets the demo records' complication_30d as the outcome. */
export async function chooseOutcome(page, name = 'complication_30d') {
  const names = await page.$$eval('table.columns tbody th[scope=row]', (s) => s.map((x) => x.textContent));
  await page.selectOption(`select[data-field=role][data-col="${names.indexOf(name)}"]`, 'outcome');
}

/** Closes the browser and the server, prints the summary and exits. */
export async function wrapUp(browser, server) {
  await browser.close();
  server.close();
  finish();
}

/** Requests to anything but `origin` (or data:/blob: URLs, which never leave the tab). */
export function foreign(requests, origin) {
  return requests.filter((u) => !u.startsWith(origin) && !u.startsWith('data:') && !u.startsWith('blob:'));
}
