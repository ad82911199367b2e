// What every browser test file shares: counting checks, Debian's Chromium through
// playwright-core (never a downloaded browser), the screenshot folder, and a record of every
// request and console error of a browser context.
import { chromium } from 'playwright-core';
import { mkdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

export const root = join(dirname(fileURLToPath(import.meta.url)), '..', '..');
export const fixtures = join(root, 'tests', 'fixtures');
export const out = join(root, 'tests', 'out', 'e2e');
mkdirSync(out, { recursive: true });

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

/** Requests to anything but `origin` (or data:/blob: URLs, which never leave the tab). */
export function foreign(requests, origin) {
  return requests.filter((u) => !u.startsWith(origin) && !u.startsWith('data:') && !u.startsWith('blob:'));
}
