// Browser benchmark (prints figures, asserts nothing): reads the same generated CSV as
// `spinney bench read` in the page's worker (wasm) and prints the worker's read time,
// throughput and wasm memory. Run after `trunk build --offline --release` and
// `target/release/spinney bench read --mb 100` (which writes bench-data/read-100mb.csv):
//   node tests/e2e/bench-read.mjs [MB]
import { chromium } from 'playwright-core';
import { existsSync, statSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { serve } from '../../scripts/static-server.mjs';

const root = join(dirname(fileURLToPath(import.meta.url)), '..', '..');
const mb = process.argv[2] ?? '100';
const file = join(root, 'bench-data', `read-${mb}mb.csv`);
if (!existsSync(file)) {
  console.error(`${file} is missing: run target/release/spinney bench read --mb ${mb} first`);
  process.exit(2);
}
const size = statSync(file).size;
const server = await serve(join(root, 'dist'), 0);
const browser = await chromium.launch({
  executablePath: process.env.CHROMIUM ?? '/usr/bin/chromium',
  args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
    '--disable-background-networking', '--disable-component-update', '--disable-sync'],
});
try {
  const page = await browser.newPage();
  await page.goto(`http://127.0.0.1:${server.address().port}/index.html`);
  await page.waitForSelector('#app[data-ready=yes]');
  for (let run = 1; run <= 2; run++) {
    const t0 = Date.now();
    await page.setInputFiles('#file-input', file);
    await page.waitForFunction((n) => document.querySelector('#data-result')?.dataset.readSeconds
      && document.querySelector('.facts')?.textContent.includes(n), `read-${mb}mb.csv`, { timeout: 600000 });
    const wall = (Date.now() - t0) / 1000;
    const secs = Number(await page.getAttribute('#data-result', 'data-read-seconds'));
    const mem = Number(await page.getAttribute('#data-result', 'data-worker-memory'));
    console.log(`browser (wasm, worker) run ${run}: read ${secs.toFixed(3)} s = ${(size / 1e6 / secs).toFixed(0)} MB/s; ` +
      `whole load incl. transfer and summary ${wall.toFixed(2)} s; worker wasm memory ${(mem / 1e6).toFixed(0)} MB = ` +
      `${(mem / size).toFixed(2)} x the file (holds the file bytes and the table)`);
    await page.click('#demo-survey'); // load something else so the next run starts clean
    await page.waitForFunction(() => document.querySelector('.facts')?.textContent.includes('field-survey'));
  }
} finally {
  await browser.close();
  server.close();
}
