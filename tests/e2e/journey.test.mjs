// Browser test of the whole job in one sitting, as issue 7 words it, at 1280x720: load the
// demo records, set the outcome, grow a random forest judged out-of-bag and a gradient
// boosting run judged by 5-fold cross-validation, compare them (table and charts), look into
// one run, move the threshold, score a second file and download the predictions, compose
// the printable report (and print it to PDF), save the study, reload (the browser's copy restores the notebook to the same figures), clear that
// copy, open the saved study with the same data (the same figures again), then cancel a long
// run (stopped within 1 s) and read a malformed file (its message; the notebook intact).
// Throughout: no request leaves the page's origin, no console error, and no main-thread task
// over 200 ms while a model grows (PerformanceObserver 'longtask'). Then a keyboard-only
// pass over every control of the page (reached by Tab, and named), and the layout at
// 390x844 (a phone) as at 1280x720: nothing wider than the screen but the scrolling tables.
// A screenshot of each step goes to tests/out/e2e/journey-*.png.
//   node tests/e2e/journey.test.mjs    (after trunk build)
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { serve } from '../../scripts/static-server.mjs';
import { check, checkNothingLeft, chooseOutcome, expect, fixtures, launch, longestTask, mainThreadNow, openDemo, out, root, watchedPage, watchLongTasks, wrapUp } from './harness.mjs';

const demo = join(root, 'demo-data', 'surgery-complications.csv');
const lines = readFileSync(demo, 'utf8').trimEnd().split('\n');
const header = lines[0].split(',');
const outcomeAt = header.indexOf('complication_30d');
// New records to score: 200 rows of the demo file without their outcome.
const fresh = join(out, 'journey-new-records.csv');
writeFileSync(fresh, lines.slice(0, 201).map((l) => l.split(',').filter((_, i) => i !== outcomeAt).join(',')).join('\n') + '\n');
const manifest = JSON.parse(readFileSync(join(fixtures, 'manifest.json'), 'utf8'));

const server = await serve(join(root, 'dist'), 0);
const origin = `http://127.0.0.1:${server.address().port}`;
const browser = await launch();
const context = await browser.newContext({ viewport: { width: 1280, height: 720 }, acceptDownloads: true });
await watchLongTasks(context);
const { page, requests, consoleErrors } = await watchedPage(context);

const now = () => mainThreadNow(page);
const shot = (name) => page.screenshot({ path: join(out, `journey-${name}.png`), fullPage: true });
const stepShot = (id, name) => page.locator(`#${id}`).screenshot({ path: join(out, `journey-${name}.png`) });
// Each judged run's figures to the last digit, from the comparison table.
const exactFigures = () => page.$$eval('#compare-table tbody tr[data-run]', (r) => r.map((x) =>
  [...x.querySelectorAll('[data-figure]')].map((c) => `${c.dataset.figure}=${c.dataset.value}`).join(' ')));
const runCount = () => page.$$eval('table.runs tbody tr', (r) => r.length);
async function grow(setUp, n) {
  await setUp();
  const t0 = await now();
  await page.click('#run-start');
  await page.waitForSelector(`#step-runs[data-runs="${n}"]`, { timeout: 120000 });
  return longestTask(page, t0, await now());
}
async function regrown(n) {
  await page.waitForFunction((k) => document.querySelectorAll('table.runs tbody tr').length === k
    && document.querySelector('#study-status').dataset.regrown !== undefined
    && document.querySelector('#fit-status').hidden
    && document.querySelectorAll('#compare-table tbody tr[data-run][data-judged=yes]').length === k, n, { timeout: 120000 });
}

let figures, saved;
try {
  await check('step 1: the demo records load, with their preview and column kinds', async () => {
    await openDemo(page, origin);
    const facts = await page.textContent('.facts');
    expect(/4000 rows/.test(facts), facts);
    await shot('1-data');
  });

  await check('step 2: the outcome is set; predictors and warnings follow', async () => {
    await chooseOutcome(page);
    await page.waitForSelector('#step-runs:not([hidden])');
    const summary = await page.textContent('#roles-summary');
    expect(/complication_30d/.test(summary), summary);
    // The sample-size and leakage checks, computed from the records by the worker.
    await page.waitForFunction(() => /Checked on the records/.test(document.querySelector('#roles-checks').textContent), null, { timeout: 30000 });
    console.log(`  step 2 checks: ${(await page.textContent('#roles-checks')).slice(0, 300)}`);
    // Which class every figure treats as the event: the yes/no outcome's "yes".
    const event = await page.$eval('#roles-checks .event-note', (e) => e.dataset.event);
    expect(event === 'yes', `event class shown: ${event}`);
    // The other class can be called positive, and back.
    await page.selectOption('#positive-class', 'no');
    await page.waitForFunction(() => document.querySelector('#roles-checks .event-note')?.dataset.event === 'no', null, { timeout: 30000 });
    await page.selectOption('#positive-class', 'yes');
    await page.waitForFunction(() => document.querySelector('#roles-checks .event-note')?.dataset.event === 'yes', null, { timeout: 30000 });
    await stepShot('step-roles', '2-roles');
  });

  await check('step 3: a random forest judged out-of-bag grows without a main-thread task over 200 ms', async () => {
    const longest = await grow(async () => {
      await page.check('input[name=method][value=forest]');
      await page.fill('#set-trees', '100');
      await page.selectOption('#judging', 'oob');
    }, 1);
    expect(longest <= 200, `the main thread was busy ${longest} ms at once`);
  });

  await check('step 3: gradient boosting judged by 5-fold cross-validation grows the same way', async () => {
    const longest = await grow(async () => {
      await page.check('input[name=method][value=boosting]');
      await page.fill('#set-rounds', '60');
      await page.selectOption('#judging', 'folds:5');
    }, 2);
    expect(longest <= 200, `the main thread was busy ${longest} ms at once`);
    await stepShot('step-runs', '3-runs');
  });

  await check('step 4: the comparison table shows both runs with AUC intervals, the baseline beside them, and the charts', async () => {
    await page.waitForSelector('#compare-table tbody tr[data-run="2"][data-judged=yes]', { timeout: 30000 });
    const rows = await page.$$eval('#compare-table tbody tr[data-run]', (r) => r.map((x) => x.textContent));
    expect(/out-of-bag/.test(rows[0]) && /5-fold cross-validation/.test(rows[1]), rows.join(' | '));
    const auc = await page.$$eval('#compare-table [data-figure=auc]', (c) => c.map((x) => x.textContent));
    expect(auc.every((a) => /^0\.\d+ \(0\.\d+ to 0\.\d+\)$/.test(a)), `AUC cells ${auc}`);
    expect((await page.$$('#compare-table tr.baseline')).length === 2, 'no baseline rows');
    // Error by size, both runs on one chart: each one's out-of-sample curve and its training
    // curve (the "boosting still improving after training error reaches zero").
    const heads = await page.$$eval('#sizes-numbers table thead th', (h) => h.map((x) => x.textContent));
    for (const want of ['run 1: out-of-bag', 'run 1: training', 'run 2: held out', 'run 2: training']) {
      expect(heads.includes(want), `no '${want}' among ${heads.join(' | ')}`);
    }
    expect(/number of trees or rounds/.test(heads[0]), heads[0]);
    for (const id of ['roc-canvas', 'calibration-canvas', 'decision-canvas', 'sizes-canvas']) {
      const ink = await page.$eval(`#${id}`, (c) => {
        const d = c.getContext('2d').getImageData(0, 0, c.width, c.height).data;
        let n = 0;
        for (let i = 0; i < d.length; i += 4) if (d[i] < 200 || d[i + 1] < 200 || d[i + 2] < 200) n++;
        return n;
      });
      expect(ink > 1000, `${id} nearly blank (${ink} inked pixels)`);
    }
    figures = await exactFigures();
    await stepShot('step-compare', '4-compare');
  });

  await check('step 5: insight into the forest: importance, dependence, a record\'s contributions and a tree', async () => {
    await page.waitForSelector('#step-insight:not([hidden])');
    await page.selectOption('#insight-run', { index: 0 });
    await page.click('#insight-go');
    await page.waitForSelector('#importance-numbers table', { state: 'attached', timeout: 120000 });
    await page.waitForSelector('#insight-dependence[data-predictor]', { timeout: 120000 });
    await page.waitForFunction(() => document.querySelector('#insight-status').hidden, null, { timeout: 120000 });
    const rows = await page.$$eval('#importance-numbers tbody tr', (r) => r.length);
    expect(rows >= 10, `${rows} predictors ranked`);
    await page.click('button[data-record="2"]');
    await page.waitForFunction(() => document.querySelector('#insight-record-facts .facts')?.dataset.record === '3', null, { timeout: 60000 });
    await stepShot('step-insight', '5-insight');
  });

  await check('step 6: moving the threshold updates the counts, on out-of-sample predictions', async () => {
    await page.waitForSelector('#step-threshold:not([hidden]) .threshold-tables', { timeout: 30000 });
    const tp = () => page.$eval('.threshold-tables', (t) => Number(t.dataset.tp));
    const before = await tp();
    await page.fill('#threshold-number', '0.2');
    await page.waitForFunction(() => Number(document.querySelector('.threshold-tables')?.dataset.threshold) === 0.2);
    expect(await tp() >= before, 'a lower threshold called fewer records positive');
    expect(await page.$eval('.threshold-tables', (t) => t.dataset.outOfSample) === 'true', 'threshold figures are not out-of-sample');
    await stepShot('step-threshold', '6-threshold');
  });

  await check('step 7: a second file is scored and its predictions downloaded as CSV', async () => {
    await page.setInputFiles('#score-input', fresh);
    await page.waitForSelector('#score-download', { timeout: 60000 });
    const [file] = await Promise.all([page.waitForEvent('download'), page.click('#score-download')]);
    const path = join(out, 'journey-predictions.csv');
    await file.saveAs(path);
    const got = readFileSync(path, 'utf8').trimEnd().split('\n');
    expect(got.length === 201, `${got.length} lines for 200 records`);
    await stepShot('step-score', '7-score');
  });

  await check('step 8: the report is composed for printing, with both runs, the cautions and the fingerprint, and prints to PDF', async () => {
    // Headless Chromium has no print dialog: window.print is counted instead (as report.test.mjs does).
    await page.evaluate(() => { window.print = () => { window.printsAsked = (window.printsAsked ?? 0) + 1; }; });
    await page.click('#report-print');
    await page.waitForFunction(() => window.printsAsked > 0, null, { timeout: 30000 });
    const text = await page.$eval('#report', (r) => r.innerText);
    expect(/out-of-bag/.test(text) && /5-fold cross-validation/.test(text), 'the runs\' validation is missing');
    expect(/[0-9a-f]{64}/.test(text), 'no fingerprint');
    expect(/external validation/.test(text) && /clinical judgement/.test(text), 'no cautions');
    await page.pdf({ path: join(out, 'journey-report.pdf'), format: 'A4' });
    await page.emulateMedia({ media: 'print' });
    await shot('8-report');
    await page.emulateMedia({ media: 'screen' });
  });

  await check('the study is saved, and a reload restores the notebook from the browser\'s copy to the same figures', async () => {
    const [file] = await Promise.all([page.waitForEvent('download'), page.click('#study-save')]);
    saved = join(out, 'journey.spinney-study.json');
    await file.saveAs(saved);
    const s = JSON.parse(readFileSync(saved, 'utf8'));
    expect(s.runs.length === 2 && s.runs[0].validation === 'oob' && s.runs[1].validation === 'folds:5', JSON.stringify(s.runs.map((r) => r.validation)));
    await page.waitForFunction(() => Number(document.querySelector('#autosave-status').dataset.saves) > 0);
    await page.reload();
    await page.waitForSelector('#app[data-ready=yes]', { timeout: 30000 });
    await regrown(2);
    const again = await exactFigures();
    expect(JSON.stringify(again) === JSON.stringify(figures), `after reload: ${again} vs ${figures}`);
    // The threshold step's choice is part of the notebook too (study format 1.1).
    await page.waitForFunction(() => Number(document.querySelector('.threshold-tables')?.dataset.threshold) === 0.2, null, { timeout: 30000 });
    expect(s.threshold?.value === 0.2 && s.threshold?.run === 1, `saved threshold ${JSON.stringify(s.threshold)}`);
    await shot('restored');
  });

  await check('the saved study opened on the same data gives the same figures to the last digit', async () => {
    await page.click('#study-forget');
    await page.waitForSelector('#autosave-status[data-saves=cleared]');
    await page.reload();
    await page.waitForSelector('#app[data-ready=yes]', { timeout: 30000 });
    await page.setInputFiles('#study-input', saved);
    await page.waitForFunction(() => /choose or drop that same data file/.test(document.querySelector('#study-status').textContent));
    await page.setInputFiles('#file-input', demo);
    await regrown(2);
    const again = await exactFigures();
    expect(JSON.stringify(again) === JSON.stringify(figures), `reopened: ${again} vs ${figures}`);
    await shot('reopened');
  });

  await check('cancel stops a long run within 1 s; the runs stay', async () => {
    await page.check('input[name=method][value=forest]');
    await page.fill('#set-trees', '3000');
    await page.selectOption('#judging', 'oob');
    await page.click('#run-start');
    await page.waitForFunction(() => Number(document.querySelector('#fit-progress').value) > 0, null, { timeout: 30000 });
    const t0 = Date.now();
    await page.click('#cancel-fit');
    await page.waitForSelector('#fit-status', { state: 'hidden', timeout: 1000 });
    expect(Date.now() - t0 < 1000, `cancel took ${Date.now() - t0} ms`);
    expect(await runCount() === 2, 'runs lost by the cancel');
    expect(JSON.stringify(await exactFigures()) === JSON.stringify(figures), 'figures changed by the cancel');
  });

  await check('a malformed file shows its message and keeps the notebook', async () => {
    const bad = manifest.find((e) => e.expect === 'error' && !e.sheet);
    await page.setInputFiles('#file-input', join(fixtures, bad.file));
    await page.waitForSelector('#message:not([hidden])', { timeout: 30000 });
    const msg = await page.textContent('#message');
    expect(msg.length > 20, msg);
    expect(await runCount() === 2, 'runs lost after a malformed file');
    expect(/surgery-complications\.csv/.test(await page.textContent('.facts')), 'the table was replaced');
    await shot('malformed');
  });

  await check('keyboard only: every control is reached by Tab and has a name', async () => {
    await page.evaluate(() => { document.activeElement?.blur(); window.scrollTo(0, 0); });
    const controls = await page.$$eval('button, input, select, textarea, a[href], summary, [tabindex]:not([tabindex="-1"])', (els) => els
      .filter((e) => !e.disabled && e.getClientRects().length > 0 && getComputedStyle(e).visibility !== 'hidden')
      // A group of radio buttons is one stop of the Tab key (arrow keys move within it).
      .map((e) => (e.type === 'radio' ? `radio group ${e.name}` : e.id || e.outerHTML.slice(0, 80))));
    const seen = new Set();
    let first = null;
    for (let k = 0; k < 600; k++) {
      await page.keyboard.press('Tab');
      const at = await page.evaluate(() => {
        const e = document.activeElement;
        if (!e || e === document.body) return '';
        return e.type === 'radio' ? `radio group ${e.name}` : (e.id || e.outerHTML.slice(0, 80));
      });
      if (at === first) break;
      if (!first && at) first = at;
      if (at) seen.add(at);
    }
    const missed = [...new Set(controls)].filter((c) => !seen.has(c));
    expect(missed.length === 0, `not reached by Tab: ${missed.slice(0, 6).join(' | ')}`);
    // A name as assistive technology computes it, roughly: a label, aria-label(ledby), or own text.
    const unnamed = await page.$$eval('button, input, select, textarea, a[href], summary', (els) => els
      .filter((e) => e.getClientRects().length > 0)
      .filter((e) => {
        const label = [...(e.labels ?? [])].map((l) => l.textContent).join('').trim();
        const by = (e.getAttribute('aria-labelledby') ?? '').split(' ').map((i) => document.getElementById(i)?.textContent ?? '').join('').trim();
        const own = ['BUTTON', 'A', 'SUMMARY'].includes(e.tagName) ? e.textContent.trim() : '';
        return !(label || by || own || e.getAttribute('aria-label') || e.title);
      })
      .map((e) => e.outerHTML.slice(0, 100)));
    expect(unnamed.length === 0, `controls without a name: ${unnamed.slice(0, 4).join(' | ')}`);
    console.log(`  ${seen.size} controls reached by Tab`);
  });

  for (const [w, h] of [[1280, 720], [390, 844]]) {
    await check(`at ${w}x${h} nothing is wider than the screen but the scrolling tables`, async () => {
      await page.setViewportSize({ width: w, height: h });
      await page.waitForTimeout(300);
      const wide = await page.evaluate((width) => [...document.querySelectorAll('#app *')]
        .filter((e) => e.getClientRects().length > 0 && !e.closest('.scroll, pre, table'))
        .filter((e) => e.getBoundingClientRect().right > width + 1)
        .map((e) => `${e.tagName.toLowerCase()}#${e.id}.${e.className} (${Math.round(e.getBoundingClientRect().right)} px)`), w);
      expect(wide.length === 0, `wider than ${w} px: ${wide.slice(0, 5).join(' | ')}`);
      const page_ = await page.evaluate(() => document.documentElement.scrollWidth);
      expect(page_ <= w + 1, `the page scrolls sideways: ${page_} px wide at ${w}`);
      await shot(`at-${w}x${h}`);
    });
  }

  await checkNothingLeft(requests, origin, consoleErrors);
} finally {
  await wrapUp(browser, server);
}
