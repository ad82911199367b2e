// Browser test of scoring new records (issue 7, step 7): grow a forest on the demo records
// in the page, score a second file with it and download the predictions as CSV; the same
// forest fitted and applied by the command line (`spinney fit ... --save-model` then
// `spinney predict ... --keep patient_id`) writes the same predictions byte for byte, and
// each row's three largest contributions (TreeSHAP) are those of `spinney explain
// --contributions all`. A file
// lacking a predictor is refused with the command line's own words, labels never seen in
// training are noted as the command line notes them, and the step's controls are reached by
// keyboard. Screenshots go to tests/out/e2e/.
//   node tests/e2e/score.test.mjs        (after trunk build and cargo build -p spinney-cli)
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { serve } from '../../scripts/static-server.mjs';
import { check, checkNothingLeft, chooseOutcome, expect, launch, openDemo, out, root, spinney, watchedPage, wrapUp } from './harness.mjs';

const demo = join(root, 'demo-data', 'surgery-complications.csv');
const lines = readFileSync(demo, 'utf8').trimEnd().split('\n');
const header = lines[0].split(',');
// New records: 300 rows of the demo file without their outcome, as a clinic would send them.
const outcomeAt = header.indexOf('complication_30d');
const drop = (line, at) => line.split(',').filter((_, i) => i !== at).join(',');
const fresh = join(out, 'new-records.csv');
writeFileSync(fresh, lines.slice(0, 301).map((l) => drop(l, outcomeAt)).join('\n') + '\n');
// The same without the column 'age', and with a ward never seen in training.
const noAge = join(out, 'new-records-no-age.csv');
writeFileSync(noAge, lines.slice(0, 51).map((l) => drop(drop(l, outcomeAt), header.indexOf('age'))).join('\n') + '\n');
const oak = join(out, 'new-records-oak.csv');
const wardAt = header.indexOf('ward');
writeFileSync(oak, lines.slice(0, 51).map((l, i) => {
  const f = l.split(',');
  if (i > 0 && i <= 3) f[wardAt] = 'Oak';
  return f.filter((_, k) => k !== outcomeAt).join(',');
}).join('\n') + '\n');


const server = await serve(join(root, 'dist'), 0);
const origin = `http://127.0.0.1:${server.address().port}`;
const browser = await launch();
const context = await browser.newContext({ viewport: { width: 1280, height: 900 }, acceptDownloads: true });
const { page, requests, consoleErrors } = await watchedPage(context);

async function score(file) {
  await page.evaluate(() => { document.querySelector('#score-result').textContent = ''; document.querySelector('#score-message').textContent = ''; });
  await page.setInputFiles('#score-input', file);
  await page.waitForFunction(() => document.querySelector('#score-result .facts') || document.querySelector('#score-message').textContent, null, { timeout: 60000 });
}

try {
  await check('a forest grown in the page scores a second file; the rows are shown', async () => {
    await openDemo(page, origin);
    await chooseOutcome(page);
    await page.check('input[name=method][value=forest]');
    await page.fill('#set-trees', '25');
    await page.click('#run-start');
    await page.waitForSelector('#step-runs[data-runs="1"]', { timeout: 60000 });
    await page.waitForSelector('#step-score:not([hidden])');
    await score(fresh);
    expect(await page.$eval('#score-result .facts', (f) => f.dataset.rows) === '300', 'not 300 rows scored');
    const head = await page.$$eval('table.predictions thead th', (t) => t.map((x) => x.textContent));
    expect(JSON.stringify(head) === JSON.stringify(['Row', 'patient_id', 'predicted_complication_30d', 'probability_no', 'probability_yes',
      'top_1_predictor', 'top_1_amount', 'top_2_predictor', 'top_2_amount', 'top_3_predictor', 'top_3_amount', 'amount_scale']), head.join(' | '));
    // Model numbers read to four decimals, unrounded in data-value.
    const first = await page.$$eval('table.predictions tbody tr:first-child td', (t) => t.map((x) => x.dataset.value ?? x.textContent));
    const shown = await page.$$eval('table.predictions tbody tr:first-child td', (t) => t.map((x) => x.textContent));
    expect(shown[2] === Number(first[2]).toFixed(4), `probability shown as ${shown[2]} for ${first[2]}`);
    expect(first[0] === 'P00001' && ['yes', 'no'].includes(first[1]) && Math.abs(Number(first[2]) + Number(first[3]) - 1) < 1e-12, first.join(' | '));
    await page.screenshot({ path: join(out, 'score-step.png'), fullPage: true });
  });

  await check('the downloaded predictions equal `spinney predict` with the same forest, byte for byte', async () => {
    const [file] = await Promise.all([page.waitForEvent('download'), page.click('#score-download')]);
    expect(file.suggestedFilename() === 'new-records.predictions.csv', file.suggestedFilename());
    const fromPage = readFileSync(await file.path(), 'utf8');
    // The page's form sends these settings; every other one is the default in both.
    const model = join(out, 'score-forest.model.json');
    const fit = spinney(['fit', demo, '--outcome', 'complication_30d', '--method', 'forest', '--set', 'trees=25',
      '--set', 'predictors_per_split=3', '--set', 'leaf_size=1', '--set', 'seed=1', '--save-model', model]);
    expect(fit.status === 0, `spinney fit: ${fit.stderr}`);
    const predicted = spinney(['predict', model, fresh, '--keep', 'patient_id']);
    expect(predicted.status === 0, `spinney predict: ${predicted.stderr}`);
    writeFileSync(join(out, 'new-records.cli.csv'), predicted.stdout);
    expect(fromPage.split('\n').length === 302, `${fromPage.split('\n').length} lines`);
    // The predictions: the first four columns, byte for byte (no field here needs quoting).
    const firstFour = fromPage.split('\n').map((l) => l.split(',').slice(0, 4).join(',')).join('\n');
    expect(firstFour === predicted.stdout, `page and command line differ (first lines: ${firstFour.slice(0, 120)} | ${predicted.stdout.slice(0, 120)})`);
    // The top three contributions per row, from the command line's TreeSHAP of every row.
    const explained = spinney(['explain', model, fresh, '--importance', 'impurity', '--contributions', 'all', '--json', '--interactions', '0']);
    expect(explained.status === 0, `spinney explain: ${explained.stderr}`);
    const cli = JSON.parse(explained.stdout);
    const names = cli.model.predictors;
    const rows = fromPage.trimEnd().split('\n').slice(1).map((l) => l.split(','));
    rows.forEach((f, i) => {
      const c = cli.contributions.rows[i].contributions.map((v, j) => [names[j], v[1]]).filter((x) => x[1] !== 0);
      c.sort((a, b) => Math.abs(b[1]) - Math.abs(a[1]));
      for (let t = 0; t < 3; t++) {
        expect(f[4 + 2 * t] === c[t][0] && Number(f[5 + 2 * t]) === c[t][1], `row ${i + 1}, top ${t + 1}: page ${f[4 + 2 * t]} ${f[5 + 2 * t]}, command line ${c[t]}`);
      }
      expect(f[10] === "probability of 'yes'", `row ${i + 1}: scale ${f[10]}`);
    });
  });

  await check('a file without a predictor is refused in the command line\'s words, and nothing changes', async () => {
    await score(noAge);
    const msg = await page.textContent('#score-message');
    const model = join(out, 'score-forest.model.json');
    const fromCli = spinney(['predict', model, noAge]).stderr.trim();
    // The command line says "Error: PATH: <reason>"; the page "FILE: <reason>. Nothing was scored."
    const reason = fromCli.slice(fromCli.indexOf(noAge) + noAge.length + 2);
    expect(reason.includes("the model needs the column(s) 'age'"), `command line: ${fromCli}`);
    expect(msg.includes(`new-records-no-age.csv: ${reason}`) && /Nothing was scored/.test(msg), `page: ${msg}`);
    expect(await page.$eval('#score-result', (r) => r.textContent === ''), 'old result left beside the refusal');
  });

  await check('labels never seen in training are noted as the command line notes them', async () => {
    await score(oak);
    const notes = await page.textContent('#score-notes');
    const model = join(out, 'score-forest.model.json');
    const note = spinney(['predict', model, oak]).stderr.split('\n').find((l) => /not seen in training/.test(l));
    expect(note && notes.includes(note.replace(/^note: /, '')), `page: ${notes} | command line: ${note}`);
  });

  await check('keyboard: the run choice, the file chooser and the download are reached with Tab', async () => {
    await page.evaluate(() => { const h = document.querySelector('#step-score-title'); h.tabIndex = -1; h.focus(); });
    const seen = [];
    for (let k = 0; k < 6; k++) {
      await page.keyboard.press('Tab');
      seen.push(await page.evaluate(() => document.activeElement?.id ?? ''));
    }
    for (const id of ['score-run', 'score-input', 'score-download']) expect(seen.includes(id), `${id} not reached (${seen.join(', ')})`);
    expect((await page.$eval('#score-run', (e) => e.labels[0].textContent)).includes('Score with'), 'run choice not labelled');
    const [file] = await Promise.all([page.waitForEvent('download'), (async () => { await page.focus('#score-download'); await page.keyboard.press('Enter'); })()]);
    expect(/predictions\.csv$/.test(file.suggestedFilename()), file.suggestedFilename());
  });

  await checkNothingLeft(requests, origin, consoleErrors);
} finally {
  await wrapUp(browser, server);
}
