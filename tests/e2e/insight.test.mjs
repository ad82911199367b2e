// Browser test of insight into one run (issue 7, step 5): grow a forest on the demo records
// in the page, then check the step's importance chart and its table, that the predictors it
// ranks highest are the demo generator's true drivers (demo-data/README.md, "Generating
// model"), that one record's contributions plus the base value equal the prediction the page
// shows for it (local accuracy of SHAP values: Lundberg et al., Nat Mach Intell 2020, eq. 1 /
// property 1), and that importance, partial dependence and contributions equal those of
// `spinney explain` on the same data with the same forest (the command line's own fit). The
// step's controls are reached by keyboard. A gradient boosting run judged by 5-fold
// cross-validation shows permutation importance on held-out records (its judging's folds
// refitted), equal to `spinney explain --held-out folds:5`, with the noise predictors' figures
// near zero there though positive on the training records (definitional: Breiman 2001;
// Fisher, Rudin & Dominici 2019). A long computation is cancelled (the runs stay, a later one
// works). Screenshots go to tests/out/e2e/.
//   node tests/e2e/insight.test.mjs        (after trunk build and cargo build -p spinney-cli)
import { join } from 'node:path';
import { serve } from '../../scripts/static-server.mjs';
import { check, checkNothingLeft, chooseOutcome, expect, launch, openDemo, out, root, spinney, watchedPage, wrapUp } from './harness.mjs';

const demo = join(root, 'demo-data', 'surgery-complications.csv');
// demo-data/README.md: the outcome's log-odds use these columns and no others.
const trueDrivers = ['age', 'operation_minutes', 'fitness_grade', 'smoker', 'albumin_g_l', 'ward'];
const noise = ['sex', 'admission_date'];

const server = await serve(join(root, 'dist'), 0);
const origin = `http://127.0.0.1:${server.address().port}`;
const browser = await launch();
const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
const { page, requests, consoleErrors } = await watchedPage(context);

/** The rows of the table inside `selector` (the first table there unless `nth`), as text. */
const tableRows = (selector, nth = 0) => page.$$eval(`${selector} table:nth-of-type(${nth + 1}) tbody tr`,
  (rows) => rows.map((r) => [...r.children].map((c) => c.textContent)));
const close = (a, b, tol) => Math.abs(a - b) <= tol;
// Tables show 4 decimals: a match is within half a unit of the last one.
const FOUR = 0.00005 + 1e-12;

/** Waits until no insight request is in flight. */
const settled = () => page.waitForFunction(() => document.querySelector('#insight-status').hidden, null, { timeout: 120000 });

// The same forest grown by the command line (the page's form sends these settings; every
// other one is the default in both; see score.test.mjs), and its explanation.
const model = join(out, 'insight-forest.model.json');
let cli;

try {
  await check('a forest grown in the page opens step 5 with its importance chart and table', async () => {
    await openDemo(page, origin);
    await chooseOutcome(page);
    await page.check('input[name=method][value=forest]');
    await page.fill('#set-trees', '25');
    await page.click('#run-start');
    await page.waitForSelector('#step-runs[data-runs="1"]', { timeout: 60000 });
    await page.waitForSelector('#step-insight:not([hidden])');
    // Nothing is computed before it is asked for.
    expect(await page.$eval('#insight-body', (b) => b.hidden), 'insight shown before it was asked for');
    await page.click('#insight-go');
    await page.waitForSelector('#importance-numbers table', { state: 'attached', timeout: 120000 });
    await page.waitForSelector('#insight-dependence[data-predictor]', { timeout: 120000 });
    await settled();
    expect((await page.textContent('#step-insight-title')).includes('5'), 'step not numbered 5');
    const rows = await tableRows('#importance-numbers');
    expect(rows.length === 12, `${rows.length} predictors in the importance table`);
    const size = await page.$eval('#importance-canvas', (c) => [c.width, c.height]);
    expect(size[0] > 200 && size[1] > 100, `importance canvas ${size}`);
    // Something is drawn: the canvas is not one colour.
    const colours = await page.$eval('#importance-canvas', (c) => {
      const d = c.getContext('2d').getImageData(0, 0, c.width, c.height).data;
      const seen = new Set();
      for (let i = 0; i < d.length; i += 4 * 97) seen.add(`${d[i]},${d[i + 1]},${d[i + 2]}`);
      return seen.size;
    });
    expect(colours > 3, `importance canvas looks blank (${colours} colours)`);
    expect(/records it did not learn from/.test(await page.textContent('#insight-importance-facts')), 'out-of-bag records not named');
    expect((await page.textContent('#impurity-numbers')).includes('favours predictors with many distinct values'), 'impurity caution missing');
    expect(await page.$eval('#insight-run', (e) => e.labels[0].textContent.includes('Run to look into')), 'run choice not labelled');
    await page.screenshot({ path: join(out, 'insight-step.png'), fullPage: true });
  });

  await check('the top predictors are the demo generator\'s true drivers (demo-data/README.md), noise lower', async () => {
    const rows = await tableRows('#importance-numbers');
    const top = rows.slice(0, 3).map((r) => r[1]);
    for (const name of top) expect(trueDrivers.includes(name), `${name} is in the top 3 (${top.join(', ')}) but is no driver`);
    const rank = (name) => rows.findIndex((r) => r[1] === name);
    for (const n of noise) expect(rank(n) >= 4, `${n} ranked ${rank(n) + 1}`);
  });

  await check('a record\'s contributions plus the base value equal its prediction shown (local accuracy, Lundberg et al. 2020)', async () => {
    await page.click('button[data-record="4"]');
    await page.waitForFunction(() => document.querySelector('#insight-record-facts .facts')?.dataset.record === '5', null, { timeout: 60000 });
    await settled();
    const facts = await page.$eval('#insight-record-facts .facts', (f) => ({ base: Number(f.dataset.base), predicted: f.dataset.predicted, text: f.textContent }));
    const amounts = (await tableRows('#contributions-numbers', 1)).map((r) => Number(r[2]));
    expect(amounts.length >= 5, `${amounts.length} contributions`);
    // The sentence rounds to four decimals; the paragraph carries the prediction unrounded
    // (classes in order: no, yes).
    const shown = Number(facts.predicted.split(' ')[1]);
    const words = /probability of 'yes' ([0-9.]+)/.exec(facts.text)?.[1];
    expect(Number.isFinite(shown) && words === shown.toFixed(4), `probability of 'yes' ${words} in the words, ${facts.predicted} carried`);
    const total = facts.base + amounts.reduce((a, b) => a + b, 0);
    expect(close(total, shown, 1e-9), `base + contributions ${total} but the page shows ${shown}`);
    expect(facts.text.includes('mean of the trees'), `scale not stated: ${facts.text}`);
    expect(await page.$eval('#insight-row', (e) => e.value) === '5', 'the number box does not follow the clicked record');
  });

  await check('importance, partial dependence and contributions equal `spinney explain` on the same data', async () => {
    const fit = spinney(['fit', demo, '--outcome', 'complication_30d', '--method', 'forest', '--set', 'trees=25',
      '--set', 'predictors_per_split=3', '--set', 'leaf_size=1', '--set', 'seed=1', '--save-model', model]);
    expect(fit.status === 0, `spinney fit: ${fit.stderr}`);
    const r = spinney(['explain', model, demo, '--json', '--contributions', '5', '--dependence', 'age', '--ice', '50', '--interactions', '0']);
    expect(r.status === 0, `spinney explain: ${r.stderr}`);
    cli = JSON.parse(r.stdout);
    const names = cli.model.predictors;
    // Out-of-bag importance (the chart's table, 4 decimals).
    const oob = await tableRows('#importance-numbers', 0);
    for (const [, name, value, spread] of oob) {
      const j = names.indexOf(name);
      expect(close(Number(value), cli.out_of_bag.mean[j], FOUR) && close(Number(spread), cli.out_of_bag.standard_error[j], FOUR),
        `out-of-bag ${name}: page ${value} ± ${spread}, command line ${cli.out_of_bag.mean[j]} ± ${cli.out_of_bag.standard_error[j]}`);
    }
    // Permutation importance on the training rows (second table).
    const perm = await tableRows('#importance-numbers', 1);
    expect(perm.length === names.length, `${perm.length} rows of permutation importance`);
    for (const [, name, value, spread] of perm) {
      const e = cli.permutation.entries.find((x) => x.predictors.length === 1 && x.predictors[0] === name);
      expect(e && close(Number(value), e.mean, FOUR) && close(Number(spread), e.spread, FOUR), `permutation ${name}: page ${value} ± ${spread}, command line ${e?.mean} ± ${e?.spread}`);
    }
    // Impurity importance.
    for (const [, name, value] of await tableRows('#impurity-numbers')) {
      expect(close(Number(value), cli.impurity.importance[names.indexOf(name)], FOUR), `impurity ${name}: page ${value}`);
    }
    // Contributions of record 5, unrounded.
    const base = await page.$eval('#insight-record-facts .facts', (f) => Number(f.dataset.base));
    expect(close(base, cli.contributions.base[1], 1e-12), `base: page ${base}, command line ${cli.contributions.base[1]}`);
    const row = cli.contributions.rows[0];
    for (const [name, , amount] of await tableRows('#contributions-numbers', 1)) {
      const j = names.indexOf(name);
      expect(close(Number(amount), row.contributions[j][1], 1e-12), `${name}: page ${amount}, command line ${row.contributions[j][1]}`);
    }
  });

  await check('partial dependence on a chosen predictor equals the command line\'s, with the records\' counts', async () => {
    await page.selectOption('#insight-predictor', 'age');
    await page.waitForSelector('#insight-dependence[data-predictor=age]', { timeout: 60000 });
    await settled();
    const rows = await tableRows('#dependence-numbers', 0);
    const grid = cli.dependence.grids[0];
    expect(rows.length === grid.values.length, `${rows.length} grid values, command line ${grid.values.length}`);
    rows.forEach(([value, average], c) => {
      expect(close(Number(value), grid.values[c], FOUR), `grid value ${c}: ${value} vs ${grid.values[c]}`);
      expect(close(Number(average), cli.dependence.average[2 * c + 1], FOUR), `average at ${value}: ${average} vs ${cli.dependence.average[2 * c + 1]}`);
    });
    const counts = (await tableRows('#dependence-numbers', 1)).filter((r) => r[0] !== 'missing').map((r) => Number(r[1]));
    expect(JSON.stringify(counts) === JSON.stringify(grid.counts), `counts ${counts} vs ${grid.counts}`);
    await page.locator('#step-insight').screenshot({ path: join(out, 'insight-dependence.png') });
  });

  await check('a typed record number beyond the table is refused with what to do, and nothing shown is lost', async () => {
    const before = await page.textContent('#insight-record-facts');
    await page.fill('#insight-row', '4001');
    await page.click('#insight-row-go');
    const msg = await page.textContent('#insight-message');
    expect(/from 1 to 4000/.test(msg), `message: ${msg}`);
    expect(await page.textContent('#insight-record-facts') === before, 'the shown record changed');
  });

  await check('the tree picture: the first of 25 trees, summarised as too big to read whole', async () => {
    const facts = await page.textContent('#insight-tree-facts');
    expect(/first of 25 trees/.test(facts) && /splits on most/.test(facts), facts);
  });

  await check('keyboard: run, predictor, record number and the record buttons are reached with Tab; Enter explains', async () => {
    await page.evaluate(() => { const h = document.querySelector('#step-insight-title'); h.tabIndex = -1; h.focus(); });
    const seen = [];
    for (let k = 0; k < 12; k++) {
      await page.keyboard.press('Tab');
      seen.push(await page.evaluate(() => document.activeElement?.id || document.activeElement?.dataset?.record || ''));
    }
    for (const id of ['insight-run', 'insight-predictor', 'insight-row', 'insight-row-go']) expect(seen.includes(id), `${id} not reached (${seen.join(', ')})`);
    await page.focus('#insight-row');
    await page.fill('#insight-row', '7');
    await page.keyboard.press('Enter');
    await page.waitForFunction(() => document.querySelector('#insight-record-facts .facts')?.dataset.record === '7', null, { timeout: 60000 });
    expect(await page.$eval('#insight-row', (e) => e.labels[0].textContent.includes('Record')), 'record box not labelled');
  });

  await check('a boosting run judged by 5-fold cross-validation shows importance on held-out records, equal to `spinney explain --held-out folds:5`', async () => {
    await page.check('input[name=method][value=boosting]');
    await page.fill('#set-rounds', '60');
    await page.selectOption('#judging', 'folds:5');
    await page.click('#run-start');
    await page.waitForSelector('#step-runs[data-runs="2"]', { timeout: 120000 });
    await page.waitForSelector('#insight-run option[value="1"]', { state: 'attached' });
    await page.selectOption('#insight-run', '1');
    await page.click('#insight-go');
    await page.waitForSelector('#insight-importance-facts [data-basis=held-out]', { timeout: 180000 });
    await settled();
    const facts = await page.textContent('#insight-importance-facts');
    expect(/on held-out records, 5 folds/.test(facts), `held-out records not named: ${facts}`);
    const heldOut = await tableRows('#importance-numbers', 0);
    const apparent = await tableRows('#importance-numbers', 1);
    expect(heldOut.length === 12 && apparent.length === 12, `${heldOut.length} and ${apparent.length} rows`);
    expect((await page.textContent('#importance-numbers')).includes('apparent'), 'the training-record table is not marked apparent');
    // The same run by the command line: the page's form sends rounds=60 and seed=1 beside
    // the defaults, and judges with the splits' seed 1.
    const boostModel = join(out, 'insight-boosting.model.json');
    const fit = spinney(['fit', demo, '--outcome', 'complication_30d', '--method', 'boosting', '--set', 'rounds=60',
      '--set', 'seed=1', '--save-model', boostModel]);
    expect(fit.status === 0, `spinney fit: ${fit.stderr}`);
    const r = spinney(['explain', boostModel, demo, '--json', '--held-out', 'folds:5', '--split-seed', '1', '--interactions', '0']);
    expect(r.status === 0, `spinney explain --held-out: ${r.stderr}`);
    const held = JSON.parse(r.stdout).held_out;
    expect(held.splits === 5 && held.basis === 'on held-out records, 5 folds', JSON.stringify(held.basis));
    for (const [, name, value, spread] of heldOut) {
      const e = held.entries.find((x) => x.predictors[0] === name);
      expect(e && close(Number(value), e.mean, FOUR) && close(Number(spread), e.spread, FOUR),
        `held-out ${name}: page ${value} ± ${spread}, command line ${e?.mean} ± ${e?.spread}`);
    }
    // Noise (demo-data/README.md): near zero on held-out records, below its apparent figure.
    for (const n of noise) {
      const h = Number(heldOut.find((x) => x[1] === n)[2]);
      const a = Number(apparent.find((x) => x[1] === n)[2]);
      expect(Math.abs(h) < 0.01 && h < a, `${n}: held out ${h}, apparent ${a}`);
    }
    const top = heldOut.slice(0, 3).map((x) => x[1]);
    for (const name of top) expect(trueDrivers.includes(name), `${name} is in the held-out top 3 (${top.join(', ')}) but is no driver`);
    await page.locator('#step-insight').screenshot({ path: join(out, 'insight-held-out.png') });
  });

  await check('a long insight computation is cancelled, says so, keeps the runs, and a later one works', async () => {
    // A bigger forest, whose importance takes seconds (each of its 800 trees shuffled).
    await page.check('input[name=method][value=forest]');
    await page.fill('#set-trees', '800');
    await page.selectOption('#judging', 'oob');
    await page.click('#run-start');
    await page.waitForSelector('#step-runs[data-runs="3"]', { timeout: 180000 });
    await page.selectOption('#insight-run', '2');
    await page.click('#insight-go');
    await page.waitForFunction(() => Number(document.querySelector('#insight-progress').value) > 0, null, { timeout: 60000 });
    const t0 = Date.now();
    await page.click('#insight-cancel');
    await page.waitForSelector('#insight-status', { state: 'hidden', timeout: 1000 });
    const said = await page.$eval('#insight-message', (m) => ({ text: m.textContent, how: m.dataset.cancelled, hidden: m.hidden }));
    expect(!said.hidden && /^Cancelled: the computation was stopped/.test(said.text) && said.how === 'in-place', JSON.stringify(said));
    expect(await page.$$eval('table.runs tbody tr', (r) => r.length) === 3, 'a run was lost by the cancel');
    // The big forest itself still answers: a typed record's contributions (one record, quick,
    // where its importance would have taken many seconds).
    await page.fill('#insight-row', '3');
    await page.click('#insight-row-go');
    await page.waitForFunction(() => document.querySelector('#insight-record-facts .facts')?.dataset.record === '3', null, { timeout: 120000 });
    console.log(`  (cancel to the big forest's record answered: ${Date.now() - t0} ms)`);
    // The worker is free again: the small forest's insight comes (it would wait behind the big
    // one's importance had that not stopped).
    await page.selectOption('#insight-run', '0');
    await page.click('#insight-go');
    await page.waitForSelector('#importance-numbers table', { state: 'attached', timeout: 120000 });
    await settled();
    console.log(`  (cancel to the next insight answered: ${Date.now() - t0} ms)`);
    expect(await page.$eval('#insight-message', (m) => m.hidden), 'the cancel message stayed after a new answer');
    expect((await tableRows('#importance-numbers')).length === 12, 'importance of the small forest missing');
  });

  await checkNothingLeft(requests, origin, consoleErrors);
} finally {
  await wrapUp(browser, server);
}
