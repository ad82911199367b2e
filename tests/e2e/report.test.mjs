// Browser test of the printable report and the charts' PNG buttons (issue 7, step 8): grow a
// judged forest on the demo records, make the report, and check what it holds against
// outside sources: the fingerprint against Node's SHA-256 of the file (FIPS 180-4), the
// command line's `spinney inspect` and the saved study file; the data description against
// `spinney inspect --json`; the run's settings in effect and its figures with their 95%
// intervals against `spinney evaluate --json` on the same design, settings and seeds; the
// cautions and the version. Then print it to PDF (A4 and Letter) with Chromium's own printing
// (page.pdf), screenshot it under print media and check nothing spills past an A4 page's
// width, and save charts as PNG (the PNG signature and IHDR size from the PNG specification,
// ISO/IEC 15948, against the canvas's own size), including a chart added after start-up.
// Last, the one-file build makes the same report from file://.
// Outputs go to tests/out/e2e/ (report-a4.pdf, report-letter.pdf, report-print.png, *.png).
//   node tests/e2e/report.test.mjs   (after trunk build, scripts/build-single-file and
//                                     cargo build -p spinney-cli)
import { createHash } from 'node:crypto';
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { serve } from '../../scripts/static-server.mjs';
import { check, checkNothingLeft, chooseOutcome, expect, launch, openDemo, out, root, spinney, watchedPage, wrapUp } from './harness.mjs';

const demo = join(root, 'demo-data', 'surgery-complications.csv');
const server = await serve(join(root, 'dist'), 0);
const origin = `http://127.0.0.1:${server.address().port}`;
const browser = await launch();
const context = await browser.newContext({ viewport: { width: 1280, height: 900 }, acceptDownloads: true });
const { page, requests, consoleErrors } = await watchedPage(context);

/** Clicks, takes the download and keeps it in tests/out/e2e under its suggested name. */
async function download(p, click) {
  const [file] = await Promise.all([p.waitForEvent('download'), click()]);
  const path = join(out, file.suggestedFilename());
  await file.saveAs(path);
  return { name: file.suggestedFilename(), path, bytes: readFileSync(path) };
}

/** Width and height from a PNG's IHDR chunk, after checking its 8-byte signature. */
function pngSize(bytes) {
  const signature = [0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a];
  expect(signature.every((b, i) => bytes[i] === b), `not a PNG: ${[...bytes.subarray(0, 8)]}`);
  expect(bytes.toString('latin1', 12, 16) === 'IHDR', 'the first chunk is not IHDR');
  return { width: bytes.readUInt32BE(16), height: bytes.readUInt32BE(20) };
}

/** Pages in a PDF written by Chromium: its page objects (`/Type /Page`, not `/Pages`). */
function pdfPages(bytes) {
  expect(bytes.toString('latin1', 0, 5) === '%PDF-', 'not a PDF');
  return (bytes.toString('latin1').match(/\/Type\s*\/Page(?![s\w])/g) ?? []).length;
}

/** Clicks step 8's button and waits for the print dialog to be asked for. Headless Chromium
 *  has no dialog (and its window.print() would leave the page "being printed", refusing
 *  page.pdf), so window.print is replaced by a counter first. */
async function makeReport(p) {
  const before = await p.evaluate(() => {
    window.print = () => { window.printsAsked = (window.printsAsked ?? 0) + 1; };
    return window.printsAsked ?? 0;
  });
  await p.click('#report-print');
  await p.waitForFunction((b) => window.printsAsked > b, before);
  const composed = await p.$eval('#report', (r) => ({ text: r.innerText, images: [...r.querySelectorAll('img')].every((i) => i.complete && i.naturalWidth > 0) }));
  expect(composed.images, 'print asked before the report\'s images were ready');
  return composed.text;
}

let report = '';
try {
  await check('a judged forest on the demo records, then the report made from step 8', async () => {
    await openDemo(page, origin);
    await page.waitForSelector('#step-report:not([hidden])');
    await chooseOutcome(page);
    await page.check('input[name=method][value=forest]');
    await page.fill('#set-trees', '60');
    await page.click('#run-start');
    await page.waitForSelector('#step-runs[data-runs="1"]', { timeout: 90000 });
    await page.waitForSelector('#compare-charts:not([hidden])');
    await page.waitForSelector('#step-threshold:not([hidden]) .threshold-tables', { timeout: 30000 });
    report = await makeReport(page);
    const status = await page.textContent('#report-status');
    // The run's error chart (step 3), and ROC, calibration, decision and error by size (step 4).
    expect(/1 run\(s\), 5 chart\(s\)/.test(status) && /Save as PDF/.test(status), status);
    // Nothing of the report shows on screen; the print stylesheet shows it.
    expect(await page.$eval('#report', (r) => getComputedStyle(r).display) === 'none', 'the report shows on screen');
  });

  await check('the fingerprint is the file\'s SHA-256, the one `spinney inspect` prints and the study file holds', async () => {
    const shown = await page.textContent('#report [data-report=fingerprint]');
    const sha = createHash('sha256').update(readFileSync(demo)).digest('hex');
    expect(shown === sha, `report ${shown} vs Node ${sha}`);
    const line = spinney(['inspect', demo]).stdout.split('\n').find((l) => l.startsWith('fingerprint (SHA-256):'));
    expect(line?.endsWith(sha), `inspect: ${line}`);
    const study = await download(page, () => page.click('#study-save'));
    expect(JSON.parse(study.bytes.toString('utf8')).data.fingerprint === shown, 'the study file holds another fingerprint');
  });

  await check('the data description: rows, columns, kinds, uses and missing values as `spinney inspect --json` gives them', async () => {
    const inspected = JSON.parse(spinney(['inspect', demo, '--json']).stdout);
    expect(report.includes(`surgery-complications.csv: ${inspected.rows} rows, ${inspected.columns.length} columns`), report.slice(0, 400));
    const rows = await page.$$eval('#report table.report-columns tbody tr', (r) => r.map((x) => [...x.children].map((c) => c.textContent)));
    expect(rows.length === inspected.columns.length, `${rows.length} column rows`);
    inspected.columns.forEach((c, i) => {
      expect(rows[i][0] === c.name && rows[i][1] === c.kind && rows[i][3].startsWith(`${c.missing} `), `${rows[i]} vs ${c.name} ${c.kind} ${c.missing}`);
    });
    expect(rows.find((r) => r[0] === 'complication_30d')[2].startsWith('outcome'), 'the outcome is not marked');
    const missing = inspected.columns.reduce((s, c) => s + c.missing, 0);
    expect(Number(await page.$eval('#report [data-report=missing]', (m) => m.dataset.missingCells)) === missing, `missing cells vs ${missing}`);
  });

  await check('the run\'s settings in effect and figures with 95% intervals equal `spinney evaluate`\'s', async () => {
    const run = await page.$eval('#report .report-run[data-run="1"]', (r) => ({
      settings: Object.fromEntries([...r.querySelectorAll('[data-setting]')].map((s) => [s.dataset.setting, s.dataset.value])),
      predictors: r.querySelector('[data-report=predictors]').textContent,
      group: r.querySelector('[data-report=group]')?.textContent,
      seed: r.querySelector('[data-report=seed]').textContent,
      scheme: r.querySelector('[data-report=scheme]').textContent,
      figures: Object.fromEntries([...r.querySelectorAll('tr[data-figure]')].map((f) => [f.dataset.figure,
        { value: Number(f.dataset.value), low: f.dataset.low, high: f.dataset.high, shown: [...f.querySelectorAll('td')].map((d) => d.textContent) }])),
    }));
    expect(run.settings.trees === '60', `trees ${run.settings.trees}`);
    expect(run.seed === run.settings.seed, `seed ${run.seed} vs ${run.settings.seed}`);
    expect(run.scheme === 'out-of-bag records', run.scheme);
    const args = ['evaluate', demo, '--outcome', 'complication_30d', '--method', 'forest', '--set', 'trees=60',
      '--validate', 'oob', '--baseline', '--resamples', '500', '--predictors', run.predictors.split(', ').join(','), '--json'];
    if (run.group) args.push('--group', run.group);
    const cli = spinney(args);
    expect(cli.status === 0, cli.stderr);
    const e = JSON.parse(cli.stdout);
    for (const [name, value] of Object.entries(e.settings)) expect(run.settings[name] === value, `${name}: report ${run.settings[name]} vs command line ${value}`);
    expect(Object.keys(run.settings).length === Object.keys(e.settings).length, 'settings differ in number');
    // DeLong and Wilson intervals are closed forms; the bootstrap ones share the seed and the
    // 500 resamples, so every figure should agree.
    let compared = 0;
    for (const [name, m] of Object.entries(e.metrics)) {
      const f = run.figures[name];
      expect(f, `${name} missing from the report`);
      const close = (a, b) => Math.abs(a - b) <= 1e-9 * Math.max(1, Math.abs(b));
      expect(close(f.value, m.value), `${name}: ${f.value} vs ${m.value}`);
      if (m.low !== null && m.low !== undefined) {
        expect(close(Number(f.low), m.low) && close(Number(f.high), m.high), `${name} (${m.interval}): ${f.low} to ${f.high} vs ${m.low} to ${m.high}`);
        expect(/ to /.test(f.shown[1]), `${name}: interval not shown (${f.shown})`);
        compared++;
      }
    }
    expect(compared >= 5 && run.figures.auc.shown[1].includes(' to '), `${compared} intervals compared`);
    // The same figure as the comparison table shows.
    const table = await page.$eval('#compare-table tr[data-run="1"] [data-figure=auc]', (c) => c.textContent);
    expect(table.startsWith(run.figures.auc.shown[0]), `comparison ${table} vs report ${run.figures.auc.shown[0]}`);
  });

  await check('the report holds the cautions, warnings, threshold figures, date and the version', async () => {
    const caution = await page.textContent('#caution');
    expect(report.includes(caution.trim()), 'the page\'s caution is missing');
    for (const words of ['For research use', 'external validation', 'not a substitute for clinical judgement']) {
      expect(report.includes(words), `no "${words}"`);
    }
    const version = await page.textContent('#version');
    expect(version.length > 0 && await page.textContent('#report [data-report=version]') === version, `version ${version}`);
    expect(spinney(['--version']).stdout.includes(version), 'the command line has another version');
    expect(/Made on \d{1,2} \w+ \d{4} at \d\d:\d\d UTC/.test(report), 'no date');
    expect(await page.$('#report [data-report=warnings]'), 'no warnings section');
    const threshold = await page.$eval('#report [data-report=threshold] .threshold-tables', (t) => t.dataset.threshold);
    expect(threshold === '0.5', `threshold ${threshold}`);
    expect(await page.$('#report [data-report=comparison] tr[data-run="1"]'), 'no comparison table');
  });

  await check('every chart is in the report as its canvas\'s image with its numbers table', async () => {
    const charts = await page.$$eval('#report figure.report-figure', (fs) => fs.map((f) => ({
      chart: f.dataset.chart, width: Number(f.querySelector('img').dataset.width),
      natural: f.querySelector('img').naturalWidth, alt: f.querySelector('img').alt,
      table: !!f.nextElementSibling?.querySelector('table'),
    })));
    const canvases = await page.$$eval('.notebook figure.curve canvas', (cs) => cs.filter((c) => !c.closest('[hidden]')).map((c) => c.width));
    expect(charts.length === 5 && canvases.length === 5, `${charts.length} charts in the report, ${canvases.length} on the page`);
    charts.forEach((c, i) => {
      expect(c.width === canvases[i] && c.natural === canvases[i], `${c.chart}: image ${c.natural} px vs canvas ${canvases[i]} px`);
      expect(c.alt.length > 10 && c.table, `${c.chart}: no text alternative`);
    });
    expect(charts.map((c) => c.chart).join() === 'error-curves-run-1,roc-curves-run-1,calibration-run-1,decision-curves-run-1,error-by-size-run-1', charts.map((c) => c.chart).join());
  });

  await check('printed to PDF on A4 and Letter, with pages', async () => {
    const a4 = join(out, 'report-a4.pdf');
    await page.pdf({ path: a4, format: 'A4' });
    const letter = join(out, 'report-letter.pdf');
    await page.pdf({ path: letter, format: 'Letter' });
    const pages = [pdfPages(readFileSync(a4)), pdfPages(readFileSync(letter))];
    // Data, one run, comparison, threshold and five charts with their numbers: several pages.
    expect(pages.every((n) => n >= 3 && n < 40), `pages: A4 ${pages[0]}, Letter ${pages[1]}`);
    console.log(`  report pages: A4 ${pages[0]}, Letter ${pages[1]}`);
  });

  await check('under print media only the report shows, and nothing is wider than an A4 page', async () => {
    await page.emulateMedia({ media: 'print' });
    // A4's printable width at these margins (210 - 26 mm) in CSS pixels, about 695.
    await page.setViewportSize({ width: 695, height: 1000 });
    const seen = await page.evaluate(() => {
      const r = document.querySelector('#report');
      const wide = [...r.querySelectorAll('table, img, figure, dl, p')].filter((e) => e.getBoundingClientRect().right > r.getBoundingClientRect().right + 1);
      return {
        report: getComputedStyle(r).display, notebook: getComputedStyle(document.querySelector('.notebook')).display,
        caution: getComputedStyle(document.querySelector('#caution')).display,
        wide: wide.map((e) => `${e.tagName}.${e.className}`).slice(0, 3), scroll: r.scrollWidth, width: r.clientWidth,
      };
    });
    await page.screenshot({ path: join(out, 'report-print.png'), fullPage: true });
    await page.emulateMedia({ media: 'screen' });
    await page.setViewportSize({ width: 1280, height: 900 });
    expect(seen.report === 'block' && seen.notebook === 'none' && seen.caution === 'none', JSON.stringify(seen));
    expect(seen.wide.length === 0 && seen.scroll <= seen.width, `too wide: ${seen.wide} (${seen.scroll} > ${seen.width})`);
  });

  await check('each chart\'s button saves its canvas as a PNG of the canvas\'s size, named after chart and run', async () => {
    const buttons = await page.$$eval('.notebook figure.curve canvas', (cs) => cs.map((c) => c.nextElementSibling?.querySelectorAll('[data-save-png]').length ?? 0));
    expect(buttons.every((n) => n === 1), `buttons per canvas: ${buttons}`);
    for (const [chart, canvas, name] of [
      ['roc-curves', '#roc-canvas', 'spinney-roc-curves-run-1.png'],
      ['error-curves', '#curve-canvas', 'spinney-error-curves-run-1.png'],
    ]) {
      const size = await page.$eval(canvas, (c) => ({ width: c.width, height: c.height, css: c.clientWidth }));
      const saved = await download(page, () => page.click(`figure[data-chart=${chart}] [data-save-png]`));
      const png = pngSize(saved.bytes);
      expect(saved.name === name, `named ${saved.name}`);
      expect(png.width === size.width && png.height === size.height, `${name}: PNG ${png.width}x${png.height} vs canvas ${size.width}x${size.height}`);
      // Drawn at the device pixel ratio: the pixels are the CSS width times the ratio.
      const ratio = await page.evaluate(() => window.devicePixelRatio);
      expect(Math.abs(size.width - size.css * ratio) <= 1, `canvas ${size.width} px for ${size.css} CSS px at ratio ${ratio}`);
    }
  });

  await check('a chart figure added later (as another step would) gets its PNG button too', async () => {
    await page.evaluate(() => {
      const f = document.createElement('figure');
      f.className = 'curve';
      f.id = 'late-figure';
      f.innerHTML = '<figcaption>Run 1: a chart drawn later</figcaption><canvas width="320" height="200"></canvas>';
      document.querySelector('#step-compare').append(f);
      const g = f.querySelector('canvas').getContext('2d');
      g.fillStyle = '#4d7c55';
      g.fillRect(10, 10, 100, 50);
    });
    await page.waitForSelector('#late-figure [data-save-png]');
    const saved = await download(page, () => page.click('#late-figure [data-save-png]'));
    const png = pngSize(saved.bytes);
    expect(saved.name === 'spinney-run-1-a-chart-drawn-later.png', saved.name);
    expect(png.width === 320 && png.height === 200, `${png.width}x${png.height}`);
    await page.evaluate(() => document.querySelector('#late-figure').remove());
  });

  await check('the browser\'s own print command makes the report afresh, with a run grown since', async () => {
    await page.check('input[name=method][value=tree]');
    await page.fill('#set-depth', '3');
    await page.click('#run-start');
    await page.waitForSelector('#step-runs[data-runs="2"]', { timeout: 60000 });
    await page.evaluate(() => window.dispatchEvent(new Event('beforeprint')));
    const runs = await page.$$eval('#report .report-run', (r) => r.map((x) => x.querySelector('h3').textContent));
    expect(runs.length === 2 && /Single tree/.test(runs[1]), runs.join(' | '));
    expect(/2 run\(s\)/.test(await page.textContent('#report-status')), 'the status line describes the report before');
    await page.screenshot({ path: join(out, 'report-step.png'), fullPage: true });
  });

  await checkNothingLeft(requests, origin, consoleErrors);

  const single = join(root, 'dist-single', 'spinney.html');
  await check('the one-file build makes the report from file://, fetching nothing', async () => {
    expect(existsSync(single), `${single} is missing; run scripts/build-single-file first`);
    const ctx = await browser.newContext({ viewport: { width: 1280, height: 900 }, acceptDownloads: true });
    const w = await watchedPage(ctx);
    const url = pathToFileURL(single).href;
    await w.page.goto(url);
    await w.page.waitForSelector('#app[data-ready=yes]', { timeout: 30000 });
    await w.page.click('#demo-surgery');
    await w.page.waitForFunction(() => document.querySelector('.facts')?.textContent.includes('surgery-complications.csv'), null, { timeout: 30000 });
    await chooseOutcome(w.page);
    await w.page.check('input[name=method][value=forest]');
    await w.page.fill('#set-trees', '20');
    await w.page.click('#run-start');
    await w.page.waitForSelector('#step-runs[data-runs="1"]', { timeout: 90000 });
    await w.page.waitForSelector('#compare-charts:not([hidden])');
    const text = await makeReport(w.page);
    const sha = createHash('sha256').update(readFileSync(demo)).digest('hex');
    expect(text.includes(sha) && text.includes('For research use'), text.slice(0, 300));
    expect(await w.page.$$eval('#report img.report-chart', (i) => i.filter((x) => x.naturalWidth > 0).length) === 5, 'charts missing');
    const pdf = join(out, 'report-single-file.pdf');
    await w.page.pdf({ path: pdf, format: 'A4' });
    expect(pdfPages(readFileSync(pdf)) >= 2, 'no pages');
    const saved = await download(w.page, () => w.page.click('figure[data-chart=calibration] [data-save-png]'));
    const png = pngSize(saved.bytes);
    expect(png.width === await w.page.$eval('#calibration-canvas', (c) => c.width), 'PNG size');
    const away = w.requests.filter((u) => u !== url && !u.startsWith('data:') && !u.startsWith('blob:'));
    expect(away.length === 0, `requests beyond the file: ${away.slice(0, 3)}`);
    expect(w.consoleErrors.length === 0, w.consoleErrors.slice(0, 3).join(' | '));
    await ctx.close();
  });
} finally {
  await wrapUp(browser, server);
}
