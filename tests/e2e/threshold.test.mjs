// Browser test of the threshold step (issue 7, step 6): grow a forest on the demo records,
// see its out-of-bag predictions at threshold 0.5 agree with its out-of-bag error, check
// the shown intervals against the Wilson score formula (Wilson 1927, as in Newcombe 1998,
// method 3) and net benefit against Vickers & Elkin (2006), move the threshold by number,
// by keyboard on the slider, refuse a threshold outside (0, 1), and see a single tree's
// figures labelled as training (apparent), never as a validation, and a boosting run's too.
// Screenshots go to tests/out/e2e/.
//   node tests/e2e/threshold.test.mjs    (after trunk build)
import { join } from 'node:path';
import { serve } from '../../scripts/static-server.mjs';
import { check, checkNothingLeft, chooseOutcome, expect, launch, openDemo, out, root, watchedPage, wrapUp } from './harness.mjs';

const server = await serve(join(root, 'dist'), 0);
const origin = `http://127.0.0.1:${server.address().port}`;
const browser = await launch();
const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
const { page, requests, consoleErrors } = await watchedPage(context);

/** The 95% Wilson score interval (z = 1.959964), written out here from the formula. */
function wilson(k, n) {
  const z = 1.959963984540054, p = k / n, z2 = z * z;
  const centre = (p + z2 / (2 * n)) / (1 + z2 / n);
  const half = (z / (1 + z2 / n)) * Math.sqrt(p * (1 - p) / n + z2 / (4 * n * n));
  return [centre - half, centre + half];
}
const shown = () => page.$eval('.threshold-tables', (t) => ({
  threshold: Number(t.dataset.threshold), tp: Number(t.dataset.tp), fp: Number(t.dataset.fp),
  tn: Number(t.dataset.tn), fn: Number(t.dataset.fn), nb: Number(t.dataset.netBenefit),
  oob: t.dataset.outOfSample,
  rows: [...document.querySelectorAll('table.figures tbody tr')].map((r) => [...r.querySelectorAll('td')].map((d) => d.textContent)),
}));
const waitThreshold = (t) => page.waitForFunction((x) => Number(document.querySelector('.threshold-tables')?.dataset.threshold) === x, t);

let forestOob;
try {
  await check('a forest\'s out-of-bag predictions at 0.5 agree with its out-of-bag error', async () => {
    await openDemo(page, origin);
    await chooseOutcome(page);
    await page.check('input[name=method][value=forest]');
    await page.fill('#set-trees', '60');
    await page.click('#run-start');
    await page.waitForSelector('#step-runs[data-runs="1"]', { timeout: 60000 });
    await page.waitForSelector('#step-threshold:not([hidden]) .threshold-tables', { timeout: 30000 });
    forestOob = Number(await page.$eval('table.runs tbody tr', (r) => r.dataset.oob));
    const s = await shown();
    expect(s.oob === 'true', `source ${s.oob}`);
    const text = await page.textContent('#threshold-result');
    expect(/Out-of-sample predictions \(out-of-bag records\)/.test(text) && /out-of-sample/.test(text), text.slice(0, 200));
    const n = s.tp + s.fp + s.tn + s.fn;
    const left = Number((text.match(/(\d+) left out/) ?? [0, 0])[1]);
    expect(n + left === 4000, `${n} counted + ${left} left out`);
    // The forest's own out-of-bag error calls the class with the larger share; at 0.5 the
    // threshold does the same but for exact ties, so the two agree closely.
    const accuracy = (s.tp + s.tn) / n;
    expect(Math.abs(accuracy - (1 - forestOob)) < 0.01, `accuracy ${accuracy} vs 1 - oob ${1 - forestOob}`);
    await page.screenshot({ path: join(out, 'threshold-forest.png'), fullPage: true });
  });

  await check('intervals follow the Wilson score formula and net benefit Vickers & Elkin\'s', async () => {
    const s = await shown();
    const cells = [[s.tp, s.tp + s.fn], [s.tn, s.tn + s.fp], [s.tp, s.tp + s.fp], [s.tn, s.tn + s.fn]];
    cells.forEach(([k, total], i) => {
      if (total === 0) return;
      const [lo, hi] = wilson(k, total);
      const value = Number(s.rows[i][0]);
      const [slo, shi] = s.rows[i][1].split(' to ').map(Number);
      expect(Math.abs(value - k / total) < 6e-4 && Math.abs(slo - lo) < 6e-4 && Math.abs(shi - hi) < 6e-4,
        `row ${i}: shown ${s.rows[i]} vs ${k}/${total} = ${k / total} [${lo}, ${hi}]`);
    });
    const n = s.tp + s.fp + s.tn + s.fn;
    const nb = s.tp / n - (s.fp / n) * (s.threshold / (1 - s.threshold));
    expect(Math.abs(s.nb - nb) < 1e-12, `net benefit ${s.nb} vs ${nb}`);
  });

  await check('a lower threshold typed in the box calls more records positive', async () => {
    const before = await shown();
    await page.fill('#threshold-number', '0.2');
    await waitThreshold(0.2);
    const after = await shown();
    expect(after.tp + after.fp >= before.tp + before.fp && after.tp >= before.tp, `called positive ${before.tp + before.fp} -> ${after.tp + after.fp}`);
    expect(await page.$eval('#threshold-range', (r) => r.value) === '0.2', 'slider not moved with the box');
  });

  await check('keyboard: the slider and box are labelled, reached by Tab, and moved by arrow keys', async () => {
    await page.evaluate(() => { const h = document.querySelector('#step-threshold-title'); h.tabIndex = -1; h.focus(); });
    const seen = [];
    for (let k = 0; k < 8; k++) {
      await page.keyboard.press('Tab');
      seen.push(await page.evaluate(() => document.activeElement?.id ?? ''));
    }
    for (const id of ['threshold-run', 'threshold-positive', 'threshold-range', 'threshold-number']) {
      expect(seen.includes(id), `${id} not reached (${seen.join(', ')})`);
    }
    for (const id of ['threshold-run', 'threshold-positive', 'threshold-range']) {
      const label = await page.$eval(`#${id}`, (e) => e.labels?.[0]?.textContent.trim() ?? '');
      expect(label.length > 2, `#${id} has no label`);
    }
    expect((await page.getAttribute('#threshold-number', 'aria-label')).length > 5, 'box not named');
    await page.focus('#threshold-range');
    for (let k = 0; k < 3; k++) await page.keyboard.press('ArrowRight');
    await waitThreshold(0.23);
    expect(await page.$eval('#threshold-number', (r) => r.value) === '0.23', 'box not moved with the slider');
  });

  await check('a threshold outside (0, 1) is refused beside the box; the figures stay', async () => {
    await page.fill('#threshold-number', '1.5');
    await page.waitForSelector('#threshold-error:not([hidden])');
    expect(/above 0 and below 1/.test(await page.textContent('#threshold-error')), 'no message');
    expect((await shown()).threshold === 0.23, 'figures changed');
    await page.fill('#threshold-number', '0.5');
    await page.waitForSelector('#threshold-error', { state: 'hidden' });
  });

  await check('an unjudged single tree\'s figures are labelled training (apparent), never validation', async () => {
    await page.check('input[name=method][value=tree]');
    await page.fill('#set-depth', '3');
    await page.selectOption('#judging', 'none');
    await page.click('#run-start');
    await page.waitForSelector('#step-runs[data-runs="2"]', { timeout: 60000 });
    // The chosen run stays the forest until another is picked.
    expect((await shown()).oob === 'true', 'the choice of run changed by itself');
    await page.selectOption('#threshold-run', '1');
    await page.waitForFunction(() => document.querySelector('.threshold-tables')?.dataset.outOfSample === 'false', null, { timeout: 30000 });
    const text = await page.textContent('#threshold-result');
    expect(/Training predictions \(apparent\)/.test(text) && /not a validation/.test(text), text.slice(0, 300));
    expect(!/out-of-sample/.test(text), 'training figures called out-of-sample');
    const s = await shown();
    expect(s.tp + s.fp + s.tn + s.fn === 4000, 'not every training record counted');
    // Switching the class called positive swaps the roles of the cells.
    const before = s;
    await page.selectOption('#threshold-positive', '0');
    await page.waitForFunction((tp) => Number(document.querySelector('.threshold-tables').dataset.tp) !== tp, before.tp);
    const after = await shown();
    expect(after.tp + after.fn === before.tn + before.fp, `positives ${after.tp + after.fn} vs negatives before ${before.tn + before.fp}`);
    await page.screenshot({ path: join(out, 'threshold-tree.png'), fullPage: true });
  });

  await check('a gradient boosting run judged by 5-fold cross-validation brings its out-of-sample predictions', async () => {
    await page.check('input[name=method][value=boosting]');
    await page.fill('#set-rounds', '20');
    await page.selectOption('#judging', 'folds:5');
    await page.click('#run-start');
    await page.waitForSelector('#step-runs[data-runs="3"]', { timeout: 60000 });
    await page.selectOption('#threshold-run', '2');
    await page.waitForFunction(() => /Gradient boosting/.test(document.querySelector('#threshold-run').selectedOptions[0].textContent)
      && document.querySelector('.threshold-tables')?.dataset.outOfSample === 'true', null, { timeout: 30000 });
    const s = await shown();
    // Every record is held out once in 5-fold cross-validation, so all 4,000 are counted.
    expect(s.tp + s.fp + s.tn + s.fn === 4000, `${s.tp + s.fp + s.tn + s.fn} records counted`);
    const text = await page.textContent('#threshold-result');
    expect(/Out-of-sample predictions \(5-fold cross-validation\)/.test(text), text.slice(0, 300));
    expect(!(await page.$('#threshold-result .message.error')), await page.textContent('#threshold-result'));
  });

  await checkNothingLeft(requests, origin, consoleErrors);
} finally {
  await wrapUp(browser, server);
}
