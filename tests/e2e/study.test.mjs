// Browser test of the study file and the browser's kept copy (issue 7): grow two runs on the
// demo records, save the study (without and with the data; the fingerprint checked against
// Node's SHA-256, the included data against Node's base64; with the fitted models, which
// `spinney predict` then reads), reload (the kept copy restores
// the notebook and grows its runs again to the same figures), clear the kept copy, open the
// saved study and choose the same data (same figures to the bit), choose other data (refused
// with the reason, then run as new data on request), open broken studies (message, notebook
// intact), reach every new control by keyboard, and remove a run (gone from every step and
// from the kept copy, so a reload does not bring it back), and grow a baseline as a run (its
// row against `spinney evaluate --baseline`, then saved and reopened to the same figures).
// Screenshots go to tests/out/e2e/.
//   node tests/e2e/study.test.mjs        (after trunk build and cargo build -p spinney-cli)
import { createHash } from 'node:crypto';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { serve } from '../../scripts/static-server.mjs';
import { check, checkNothingLeft, chooseOutcome, expect, launch, openDemo, out, root, spinney, watchedPage, wrapUp } from './harness.mjs';

const demo = join(root, 'demo-data', 'surgery-complications.csv');
const demoBytes = readFileSync(demo);
const server = await serve(join(root, 'dist'), 0);
const origin = `http://127.0.0.1:${server.address().port}`;
const browser = await launch();
const context = await browser.newContext({ viewport: { width: 1280, height: 900 }, acceptDownloads: true });
const { page, requests, consoleErrors } = await watchedPage(context);

const runRows = () => page.$$eval('table.runs tbody tr', (rows) => rows.map((r) => ({
  oob: r.dataset.oob, training: r.dataset.training, same: r.dataset.same, text: r.textContent,
  rows: r.querySelector('td:nth-of-type(3)').textContent,
})));
const saves = () => page.$eval('#autosave-status', (e) => e.dataset.saves ?? '');
async function waitSaves(before) {
  await page.waitForFunction((b) => {
    const s = document.querySelector('#autosave-status').dataset.saves;
    return s !== undefined && s !== 'cleared' && Number(s) > b;
  }, Number(before) || 0, { timeout: 30000 });
}
async function download(click, as) {
  const [file] = await Promise.all([page.waitForEvent('download'), click()]);
  const path = join(out, as);
  await file.saveAs(path);
  return { name: file.suggestedFilename(), path, text: readFileSync(path, 'utf8') };
}
async function openStudy(path) {
  await page.evaluate(() => { document.querySelector('#study-status').textContent = ''; });
  await page.setInputFiles('#study-input', path);
  // The first words may be the interim "Opening the study…"; wait for the outcome.
  await page.waitForFunction(() => {
    const t = document.querySelector('#study-status').textContent;
    return t.length > 0 && !t.endsWith('…');
  }, null, { timeout: 60000 });
  return page.textContent('#study-status');
}
async function regrown(n) {
  await page.waitForFunction((k) => document.querySelector('#step-runs').dataset.runs >= 0
    && document.querySelectorAll('table.runs tbody tr').length === k
    && document.querySelector('#study-status').dataset.regrown !== undefined
    && document.querySelector('#fit-status').hidden, n, { timeout: 90000 });
}

let saved, savedWithData, figures;
try {
  await check('two runs grown on the demo records are kept in the browser after each change', async () => {
    await openDemo(page, origin);
    await waitSaves(0);
    await chooseOutcome(page);
    await page.check('input[name=method][value=forest]');
    await page.fill('#set-trees', '30');
    await page.click('#run-start');
    await page.waitForSelector('#step-runs[data-runs="1"]', { timeout: 60000 });
    await page.check('input[name=method][value=tree]');
    await page.fill('#set-depth', '4');
    const before = await saves();
    await page.click('#run-start');
    await page.waitForSelector('#step-runs[data-runs="2"]', { timeout: 60000 });
    await waitSaves(before);
    figures = await runRows();
    expect(figures.length === 2 && figures[0].oob !== '', JSON.stringify(figures));
    const note = await page.textContent('#autosave-status');
    expect(/this browser's own storage on this computer/.test(note), note);
  });

  await check('the study is saved as a versioned JSON file with the data\'s fingerprint, without the data', async () => {
    saved = await download(() => page.click('#study-save'), 'saved.spinney-study.json');
    expect(saved.name === 'surgery-complications.spinney-study.json', saved.name);
    const s = JSON.parse(saved.text);
    expect(s.format === 'spinney-study' && s.version.major === 1, `${s.format} ${JSON.stringify(s.version)}`);
    // Fingerprint against Node's own SHA-256 (OpenSSL; FIPS 180-4).
    const want = createHash('sha256').update(demoBytes).digest('hex');
    expect(s.data.fingerprint === want, `fingerprint ${s.data.fingerprint}, Node says ${want}`);
    expect(!('included' in s.data), 'data included without being asked');
    expect(s.runs.length === 2 && s.runs[0].method === 'forest' && s.runs[0].settings.trees === '30' && s.runs[0].seed === 1, JSON.stringify(s.runs[0]));
    expect(s.runs[1].method === 'tree' && s.runs[1].settings.depth === '4', JSON.stringify(s.runs[1]));
    expect(s.data.columns.find((c) => c.name === 'complication_30d').role === 'outcome', 'outcome role not saved');
    expect(String(s.runs[0].result.out_of_bag_error) === figures[0].oob, `oob ${s.runs[0].result.out_of_bag_error} vs ${figures[0].oob}`);
  });

  await check('ticking "put the data itself in" includes the file, byte for byte', async () => {
    await page.check('#study-include-data');
    savedWithData = await download(() => page.click('#study-save'), 'saved-with-data.spinney-study.json');
    await page.uncheck('#study-include-data');
    const s = JSON.parse(savedWithData.text);
    // Decoded by Node's base64 (RFC 4648).
    expect(Buffer.from(s.data.included, 'base64').equals(demoBytes), 'included data differs from the file');
    expect(/with the data itself inside/.test(await page.textContent('#study-status')), 'no word of the included data');
  });

  await check('ticking "put the fitted models in" adds model files that spinney predict reads', async () => {
    await page.check('#study-include-models');
    const withModels = await download(() => page.click('#study-save'), 'saved-with-models.spinney-study.json');
    await page.uncheck('#study-include-models');
    const s = JSON.parse(withModels.text);
    expect(s.runs.every((r) => r.model?.format === 'spinney-model'), 'a run lacks its model');
    expect(s.runs[0].model.method === 'forest' && s.runs[0].model.trees.length === 30, `${s.runs[0].model.method}, ${s.runs[0].model.trees?.length} trees`);
    expect(/2 fitted model\(s\) inside/.test(await page.textContent('#study-status')), await page.textContent('#study-status'));
    const modelPath = join(out, 'from-study.model.json');
    writeFileSync(modelPath, JSON.stringify(s.runs[0].model));
    const predicted = spinney(['predict', modelPath, demo]);
    expect(predicted.status === 0, predicted.stderr);
    expect(predicted.stdout.trimEnd().split('\n').length === 4001, 'not a prediction per record');
  });

  await check('a reload restores the notebook from the browser\'s copy, its runs grown to the same figures', async () => {
    await page.reload();
    await page.waitForSelector('#app[data-ready=yes]', { timeout: 30000 });
    await regrown(2);
    const rows = await runRows();
    expect(rows.every((r) => r.same === 'yes'), JSON.stringify(rows.map((r) => r.same)));
    expect(rows[0].oob === figures[0].oob && rows[1].training === figures[1].training, 'figures differ after the restore');
    const role = await page.$eval('table.columns tbody tr.role-outcome th', (t) => t.textContent);
    expect(role === 'complication_30d', `outcome after restore: ${role}`);
    expect(/Restored the notebook kept in this browser/.test(await page.textContent('#study-status')), await page.textContent('#study-status'));
    await page.screenshot({ path: join(out, 'study-restored.png'), fullPage: true });
  });

  await check('the button clears the browser\'s copy: a reload then starts empty', async () => {
    await page.click('#study-forget');
    await page.waitForSelector('#autosave-status[data-saves=cleared]');
    await page.reload();
    await page.waitForSelector('#app[data-ready=yes]', { timeout: 30000 });
    await page.waitForTimeout(1500);
    expect(await page.$eval('#step-roles', (e) => e.hidden), 'a notebook came back after clearing');
    const kept = await page.evaluate(() => new Promise((ok) => {
      const r = indexedDB.open('spinney', 1);
      r.onsuccess = () => { const g = r.result.transaction('notebook').objectStore('notebook').count(); g.onsuccess = () => ok(g.result); };
      r.onerror = () => ok(-1);
    }));
    expect(kept === 0, `${kept} record(s) still kept`);
  });

  await check('opening the saved study and choosing the same data grows every run to the same figures', async () => {
    const text = await openStudy(saved.path);
    expect(/choose or drop that same data file/.test(text), text);
    await page.setInputFiles('#file-input', demo);
    await regrown(2);
    const rows = await runRows();
    expect(rows.every((r) => r.same === 'yes'), JSON.stringify(rows.map((r) => r.same)));
    expect(rows[0].oob === figures[0].oob && rows[0].training === figures[0].training && rows[1].training === figures[1].training, 'figures differ');
    expect(/every figure the same as in the study/.test(await page.textContent('#study-status')), await page.textContent('#study-status'));
    await page.screenshot({ path: join(out, 'study-reopened.png'), fullPage: true });
  });

  await check('a study with its data inside opens on its own', async () => {
    await openStudy(savedWithData.path);
    await page.waitForFunction(() => /Study opened on its own data/.test(document.querySelector('#study-status').textContent) || document.querySelector('#study-status').dataset.regrown);
    await regrown(2);
    expect((await runRows()).every((r) => r.same === 'yes'), 'figures differ');
  });

  await check('other data is refused with the reason; on request the runs are grown on it as new data', async () => {
    const lines = demoBytes.toString('utf8').split('\n');
    const other = join(out, 'surgery-first-3000.csv');
    writeFileSync(other, lines.slice(0, 3001).join('\n') + '\n');
    // Loaded before the study is opened ...
    await page.setInputFiles('#file-input', other);
    await page.waitForFunction(() => / 3000 rows/.test(document.querySelector('.facts')?.textContent));
    await openStudy(saved.path);
    await page.waitForSelector('#study-mismatch:not([hidden])');
    let why = await page.textContent('#study-mismatch');
    expect(/not the study's data/.test(why), why);
    // ... or chosen after it: the same refusal.
    await page.evaluate(() => { document.querySelector('#study-mismatch').hidden = true; });
    await page.setInputFiles('#file-input', other);
    await page.waitForSelector('#study-mismatch:not([hidden])');
    why = await page.textContent('#study-mismatch');
    expect(/not the study's data/.test(why) && /4000 rows/.test(why) && /3000 rows/.test(why) && /fingerprint/.test(why), why);
    await page.screenshot({ path: join(out, 'study-other-data.png'), fullPage: true });
    await page.click('#study-as-new');
    await regrown(2);
    const rows = await runRows();
    expect(rows.every((r) => r.same === '' && r.rows === '3000'), JSON.stringify(rows.map((r) => [r.same, r.rows])));
    expect(/Grown: 2 run/.test(await page.textContent('#study-status')), await page.textContent('#study-status'));
  });

  await check('broken studies are refused with what is wrong, and the notebook stays', async () => {
    const before = await runRows();
    const cut = join(out, 'cut.spinney-study.json');
    writeFileSync(cut, saved.text.slice(0, Math.floor(saved.text.length / 2)));
    let msg = await openStudy(cut);
    expect(/cut short/.test(msg) && /notebook is unchanged/.test(msg), msg);
    const newer = join(out, 'newer.spinney-study.json');
    writeFileSync(newer, saved.text.replace('"major": 1', '"major": 7'));
    msg = await openStudy(newer);
    expect(/format version 7\.\d/.test(msg) && /Update Spinney/.test(msg), msg);
    const model = join(out, 'not-a-study.json');
    writeFileSync(model, '{"format": "spinney-model", "version": {"major": 1, "minor": 0}}');
    msg = await openStudy(model);
    expect(/model file, not a study/.test(msg), msg);
    expect(JSON.stringify(await runRows()) === JSON.stringify(before), 'runs changed by a broken study');
  });

  await check('keyboard: the study controls are reached with Tab, named, and work with keys', async () => {
    // Start from the bar's heading, as a reader arriving at it would.
    await page.evaluate(() => { const h = document.querySelector('#step-study-title'); h.tabIndex = -1; h.focus(); });
    const want = ['study-save', 'study-include-data', 'study-include-models', 'study-input', 'study-forget'];
    const seen = new Set();
    for (let k = 0; k < 40 && want.some((w) => !seen.has(w)); k++) {
      await page.keyboard.press('Tab');
      seen.add(await page.evaluate(() => document.activeElement?.id ?? ''));
    }
    for (const w of want) expect(seen.has(w), `${w} not reached by Tab (reached ${[...seen].join(', ')})`);
    for (const w of want) {
      const name = await page.$eval(`#${w}`, (e) => (e.labels?.[0]?.textContent ?? e.textContent ?? '').trim());
      expect(name.length > 3, `#${w} has no name`);
    }
    await page.focus('#study-include-data');
    await page.keyboard.press('Space');
    expect(await page.$eval('#study-include-data', (e) => e.checked), 'Space did not tick the box');
    await page.keyboard.press('Space');
    const [file] = await Promise.all([page.waitForEvent('download'), (async () => { await page.focus('#study-save'); await page.keyboard.press('Enter'); })()]);
    expect(/spinney-study\.json$/.test(file.suggestedFilename()), file.suggestedFilename());
  });

  await check('a run removed in step 4 (a labelled button, by keyboard) leaves every step and the kept copy, and stays gone after a reload', async () => {
    const before = await runRows();
    expect(before.length === 2, `${before.length} runs before`);
    const button = '#compare-table button[data-remove="0"]';
    const label = await page.$eval(button, (b) => b.getAttribute('aria-label'));
    expect(/^Remove run 1 \(Random forest/.test(label), label);
    const saved0 = await saves();
    await page.focus(button);
    await page.keyboard.press('Enter');
    await page.waitForFunction(() => document.querySelectorAll('table.runs tbody tr').length === 1);
    await waitSaves(saved0);
    const after = await runRows();
    expect(after[0].training === before[1].training && /Single tree/.test(after[0].text), JSON.stringify(after));
    const compared = await page.$$eval('#compare-table tr[data-run]', (r) => r.map((x) => x.textContent));
    expect(compared.length === 1 && /Single tree/.test(compared[0]), JSON.stringify(compared));
    expect(/Run 1 \(random forest\) removed; the other runs are unchanged/.test(await page.textContent('#compare-message')), await page.textContent('#compare-message'));
    // The steps that pick a run offer only the one left.
    for (const id of ['insight-run', 'score-run']) {
      const offered = await page.$$eval(`#${id} option`, (o) => o.map((x) => x.textContent));
      expect(offered.length === 1 && /Single tree/.test(offered[0]), `${id}: ${offered}`);
    }
    await page.reload();
    await page.waitForSelector('#app[data-ready=yes]', { timeout: 30000 });
    await regrown(1);
    const restored = await runRows();
    expect(restored.length === 1 && restored[0].training === before[1].training && restored[0].same === 'yes', JSON.stringify(restored));
  });

  await check('a baseline grown as a run has its own row with AUC and interval equal to `spinney evaluate --baseline`\'s, and survives save and reopen', async () => {
    await page.check('input[name=method][value=baseline]');
    // Its one setting, with its help, checked as typed.
    expect(/pulled towards zero/.test(await page.textContent('#help-penalty')), 'no help for the penalty');
    await page.fill('#set-penalty', '0');
    expect(/not a number above 0/.test(await page.textContent('#err-penalty')), await page.textContent('#err-penalty'));
    await page.fill('#set-penalty', '1');
    await page.selectOption('#judging', 'folds:5');
    await page.click('#run-start');
    await page.waitForSelector('#step-runs[data-runs="2"]', { timeout: 60000 });
    const row = () => page.$eval('#compare-table tr[data-run="2"]', (r) => {
      const auc = r.querySelector('[data-figure=auc]');
      return { text: r.textContent, auc: auc.dataset.value, shown: auc.textContent };
    });
    const first = await row();
    expect(/Baseline, penalty 1/.test(first.text) && /\d\.\d{3} \(\d\.\d{3} to \d\.\d{3}\)/.test(first.shown), JSON.stringify(first));
    // The command line judges the same baseline beside a run on the same splits (seed 1, 500
    // resamples, the run's predictors).
    await page.evaluate(() => window.dispatchEvent(new Event('beforeprint')));
    const predictors = await page.$eval('#report .report-run[data-run="2"] [data-report=predictors]', (e) => e.textContent);
    const cli = spinney(['evaluate', join(out, 'surgery-first-3000.csv'), '--outcome', 'complication_30d', '--method', 'tree',
      '--validate', 'folds:5', '--baseline', '--resamples', '500', '--predictors', predictors.split(', ').join(','), '--json']);
    expect(cli.status === 0, cli.stderr);
    const auc = JSON.parse(cli.stdout).baseline.metrics.auc;
    expect(Number(first.auc) === auc.value, `page ${first.auc}, command line ${auc.value}`);
    const [low, high] = /\((\d\.\d+) to (\d\.\d+)\)/.exec(first.shown).slice(1).map(Number);
    expect(low === Number(auc.low.toFixed(3)) && high === Number(auc.high.toFixed(3)), `interval ${low} to ${high} vs ${auc.low} to ${auc.high}`);
    const file = await download(() => page.click('#study-save'), 'with-baseline.spinney-study.json');
    const st = JSON.parse(file.text);
    expect(st.version.minor === 2 && st.runs[1].method === 'baseline' && st.runs[1].settings.penalty === '1', `${JSON.stringify(st.version)} ${JSON.stringify(st.runs[1]).slice(0, 200)}`);
    // The same data is loaded, so the study grows its runs on it at once.
    await page.evaluate(() => { delete document.querySelector('#study-status').dataset.regrown; });
    const text = await openStudy(file.path);
    expect(/Study opened on its own data/.test(text), text);
    await regrown(2);
    const rows = await runRows();
    expect(rows.every((r) => r.same === 'yes'), JSON.stringify(rows.map((r) => r.same)));
    const again = await row();
    expect(again.auc === first.auc && again.shown === first.shown, `reopened: ${again.shown} vs ${first.shown}`);
  });

  await check('step 5 shows the baseline\'s coefficients and a record\'s contributions that add up to its probability; steps 6 and 7 use it', async () => {
    await page.selectOption('#insight-run', '1');
    await page.click('#insight-go');
    await page.waitForSelector('#coefficients-numbers table', { state: 'attached', timeout: 60000 });
    await page.waitForFunction(() => document.querySelector('#insight-status').hidden, null, { timeout: 60000 });
    expect(await page.$eval('#insight-importance', (f) => f.hidden) && !(await page.$eval('#insight-coefficients', (f) => f.hidden)), 'tree charts shown for a baseline');
    expect(/not trees/.test(await page.textContent('#insight-notes')), 'no word of what does not apply');
    await page.locator('#step-insight').screenshot({ path: join(out, 'study-baseline-insight.png') });
    const facts = await page.$eval('#insight-record-facts .facts', (f) => ({ base: Number(f.dataset.base), sum: Number(f.dataset.sum), predicted: f.dataset.predicted, text: f.textContent }));
    const amounts = await page.$$eval('#contributions-numbers table.contributions-all tbody td.num', (c) => c.map((x) => Number(x.textContent)));
    const total = facts.base + amounts.reduce((a, b) => a + b, 0);
    // Local accuracy (Lundberg & Lee 2017): base + contributions = the log-odds, whose
    // logistic function is the probability the page shows.
    // The sentence rounds to four decimals; the paragraph carries the prediction unrounded
    // (classes in order: no, yes).
    const shown = Number(facts.predicted.split(' ')[1]);
    expect(/probability of 'yes' ([0-9.]+)/.exec(facts.text)?.[1] === shown.toFixed(4), `words ${facts.text}`);
    expect(Math.abs(total - facts.sum) < 1e-9 && Math.abs(1 / (1 + Math.exp(-facts.sum)) - shown) < 1e-9, `${total} / ${facts.sum} / ${shown}`);
    // Step 6 on its cross-validated predictions: every one of the 3000 records counted.
    await page.selectOption('#threshold-run', '1');
    await page.waitForFunction(() => document.querySelector('.threshold-tables')?.dataset.outOfSample === 'true'
      && /5-fold cross-validation/.test(document.querySelector('#threshold-result').textContent), null, { timeout: 30000 });
    const cells = await page.$eval('.threshold-tables', (t) => ['tp', 'fp', 'tn', 'fn'].reduce((a, k) => a + Number(t.dataset[k]), 0));
    expect(cells === 3000, `${cells} records in the confusion matrix`);
    await page.selectOption('#score-run', '1');
    await page.setInputFiles('#score-input', join(out, 'surgery-first-3000.csv'));
    await page.waitForFunction(() => document.querySelector('#score-result .facts') || document.querySelector('#score-message').textContent, null, { timeout: 60000 });
    expect(await page.$eval('#score-result .facts', (f) => f.dataset.rows) === '3000', await page.textContent('#score-message'));
    const header = await page.$$eval('#score-result table thead th', (h) => h.map((x) => x.textContent));
    expect(header.includes('probability_yes') && header.includes('top_1_predictor'), header.join(','));
  });

  await checkNothingLeft(requests, origin, consoleErrors);
} finally {
  await wrapUp(browser, server);
}
