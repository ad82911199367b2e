// Page benchmark (prints figures, asserts nothing): page load to interactive with the wasm
// cached, the wasm's compressed size, and fitting in the page's worker (wasm) against the
// native command line on the same generated file: a 300-tree random forest and 200 rounds of
// gradient boosting (31 leaves, learning rate 0.1, 255 bins); the forest on one worker and on
// as many as the machine offers (the page's worker count), native on one thread. Run after
// `trunk build --offline --release` and `cargo build --release -p spinney-cli`. The tab's
// memory is sampled every 200 ms while each fit runs: the resident memory of Chromium's
// renderer processes (the page, its workers and their wasm memories live there; Linux only),
// and the peak is printed beside each fit.
//
//   node tests/e2e/bench-page.mjs [ROWS] [forest|boosting]   (scripts/bench page [ROWS] builds first)
import { chromium } from 'playwright-core';
import { execFileSync } from 'node:child_process';
import { existsSync, mkdirSync, readdirSync, readFileSync, statSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { gzipSync } from 'node:zlib';
import { serve } from '../../scripts/static-server.mjs';

const root = join(dirname(fileURLToPath(import.meta.url)), '..', '..');
const rows = Number(process.argv[2] ?? '50000');
// 'boosting' or 'forest' runs that method only (issue 4's 500,000-row workload is boosting).
const only = process.argv[3];
const bin = join(process.env.CARGO_TARGET_DIR ?? join(root, 'target'), 'release', 'spinney');

// The generated file: 28 number predictors and a two-class outcome from a seeded formula
// (an invented workload; the same file every time).
mkdirSync(join(root, 'bench-data'), { recursive: true });
const file = join(root, 'bench-data', `page-${rows}.csv`);
if (!existsSync(file)) {
  let s = 12345;
  const next = () => { s = (s * 1103515245 + 12345) % 2147483648; return s / 2147483648; };
  const lines = [Array.from({ length: 28 }, (_, j) => `x${j + 1}`).concat('y').join(',')];
  for (let i = 0; i < rows; i++) {
    const x = Array.from({ length: 28 }, () => next() * 2 - 1);
    const z = 1.5 * x[0] - x[1] + x[2] * x[3] * 2 + Math.sin(3 * x[4]) + 0.5 * x[5] * x[5] + (next() - 0.5) * 2;
    lines.push(x.map((v) => v.toFixed(5)).concat(z > 0.3 ? 'yes' : 'no').join(','));
  }
  writeFileSync(file, lines.join('\n') + '\n');
}
console.log(`data: ${file} (${rows} rows x 28 predictors, ${(statSync(file).size / 1e6).toFixed(1)} MB)`);

const wasm = readdirSync(join(root, 'dist')).filter((f) => f.endsWith('.wasm'));
for (const w of wasm) {
  const bytes = readFileSync(join(root, 'dist', w));
  console.log(`wasm ${w}: ${(bytes.length / 1e6).toFixed(2)} MB, ${(gzipSync(bytes, { level: 9 }).length / 1e6).toFixed(2)} MB gzipped`);
}

const native = (args) => {
  const out = JSON.parse(execFileSync(bin, ['fit', file, '--outcome', 'y', '--threads', '1', '--json', ...args],
    { maxBuffer: 1 << 30 }).toString());
  return out.fit_seconds;
};

// Resident memory of every Chromium renderer process, in bytes (Linux /proc; 0 elsewhere).
function tabMemory() {
  let total = 0;
  for (const pid of readdirSync('/proc').filter((d) => /^\d+$/.test(d))) {
    try {
      const cmd = readFileSync(`/proc/${pid}/cmdline`, 'utf8');
      if (!cmd.includes('chrom') || !cmd.includes('--type=renderer')) continue;
      const rss = readFileSync(`/proc/${pid}/status`, 'utf8').match(/VmRSS:\s+(\d+) kB/);
      if (rss) total += Number(rss[1]) * 1024;
    } catch { /* the process ended meanwhile */ }
  }
  return total;
}
let peak = 0;
const sampler = setInterval(() => { peak = Math.max(peak, tabMemory()); }, 200);

const server = await serve(join(root, 'dist'), 0);
const browser = await chromium.launch({
  executablePath: process.env.CHROMIUM ?? '/usr/bin/chromium',
  args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
    '--disable-background-networking', '--disable-component-update', '--disable-sync'],
});
try {
  const page = await browser.newPage();
  const url = `http://127.0.0.1:${server.address().port}/index.html`;
  await page.goto(url);
  await page.waitForSelector('#app[data-ready=yes]');
  // Load to interactive, with the files in the browser's cache.
  const loads = [];
  for (let k = 0; k < 3; k++) {
    const t0 = Date.now();
    await page.reload();
    await page.waitForSelector('#app[data-ready=yes]');
    loads.push(Date.now() - t0);
  }
  console.log(`page load to interactive (cached): ${Math.min(...loads)} ms best of 3 (${loads.join(', ')} ms)`);

  peak = tabMemory();
  await page.setInputFiles('#file-input', file);
  await page.waitForFunction((n) => document.querySelector('.facts')?.textContent.includes(n), `page-${rows}.csv`, { timeout: 600000 });
  const readSeconds = Number(await page.getAttribute('#data-result', 'data-read-seconds'));
  console.log(`page read: ${readSeconds.toFixed(2)} s; tab at peak ${(peak / 1e6).toFixed(0)} MB resident`);
  const names = await page.$$eval('table.columns tbody th[scope=row]', (s) => s.map((x) => x.textContent));
  await page.selectOption(`select[data-field=role][data-col="${names.indexOf('y')}"]`, 'outcome');
  await page.waitForSelector('#step-runs:not([hidden]) #run-start');

  const most = await page.$$eval('#workers option', (o) => Math.max(...o.map((x) => Number(x.value))));
  const forest = { method: 'forest', set: { trees: '300' }, cli: ['--method', 'forest', '--set', 'trees=300'] };
  const fits = [
    { ...forest, name: 'random forest, 300 trees, 1 worker', workers: '1' },
    // The first run on several workers starts them and reads the table into each.
    { ...forest, name: `random forest, 300 trees, ${most} workers (first: starting them)`, workers: String(most) },
    { ...forest, name: `random forest, 300 trees, ${most} workers`, workers: String(most) },
    { name: 'gradient boosting, 200 rounds, 31 leaves', method: 'boosting', set: { rounds: '200', leaves: '31', learning_rate: '0.1' },
      cli: ['--method', 'boosting', '--set', 'rounds=200', '--set', 'leaves=31', '--set', 'learning_rate=0.1'] },
  ];
  let done = 0;
  const nativeSeconds = {};
  for (const f of fits.filter((x) => !only || x.method === only)) {
    await page.check(`input[name=method][value=${f.method}]`);
    for (const [k, v] of Object.entries(f.set)) await page.fill(`#set-${k}`, v);
    if (f.workers) await page.selectOption('#workers', f.workers);
    // Fit time only: no validation refits.
    await page.selectOption('#judging', 'none');
    await page.waitForFunction(() => !document.querySelector('#run-start').disabled);
    peak = tabMemory();
    await page.click('#run-start');
    done += 1;
    await page.waitForSelector(`#step-runs[data-runs="${done}"]`, { timeout: 1800000 });
    const seconds = await page.$$eval('table.runs tbody tr', (r) => Number(r[r.length - 1].dataset.fitSeconds));
    const memory = await page.$$eval('table.runs tbody tr', (r) => Number(r[r.length - 1].dataset.workerMemory));
    const key = f.cli.join(' ');
    nativeSeconds[key] ??= native(f.cli);
    const nat = nativeSeconds[key];
    console.log(`${f.name}: page ${seconds.toFixed(2)} s, native (1 thread) ${nat.toFixed(2)} s, ` +
      `ratio ${(seconds / nat).toFixed(2)}; main worker wasm memory ${(memory / 1e6).toFixed(0)} MB; ` +
      `tab at peak ${(peak / 1e6).toFixed(0)} MB resident`);
  }
} finally {
  clearInterval(sampler);
  await browser.close();
  server.close();
}
