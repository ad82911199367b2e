// Browser test of "private and offline" (issue 7): the served page carries its
// Content-Security-Policy as an HTTP header equal to its meta tag; it says where users look
// that the data stays on this machine; after one visit its service worker keeps a copy, so
// with the network off and the server gone a reload still opens the page, which still reads
// the demo file and grows a model; and the one-file build (scripts/build-single-file) opens
// from file:// and reads a file, fetching nothing. Screenshots go to tests/out/e2e/.
//   node tests/e2e/offline.test.mjs      (after trunk build and scripts/build-single-file)
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { serve } from '../../scripts/static-server.mjs';
import { check, expect, finish, fixtures, foreign, launch, out, root, watchedPage } from './harness.mjs';

const manifest = JSON.parse(readFileSync(join(fixtures, 'manifest.json'), 'utf8'));
const plain = manifest.find((e) => e.file === 'plain_comma.csv');
const server = await serve(join(root, 'dist'), 0);
const origin = `http://127.0.0.1:${server.address().port}`;
const browser = await launch();

/** The directives of a policy, each with its sources sorted, for comparing two policies. */
const directives = (policy) => policy.split(';').map((d) => d.trim().split(/\s+/)).filter((d) => d[0])
  .map(([name, ...sources]) => `${name} ${sources.sort().join(' ')}`).sort();

try {
  await check('the server sends the page\'s Content-Security-Policy as a header, equal to the meta tag', async () => {
    for (const path of ['/index.html', '/worker_loader.js', '/offline-worker.js']) {
      const res = await fetch(`${origin}${path}`);
      expect(res.ok, `${path}: status ${res.status}`);
      const header = res.headers.get('content-security-policy') ?? '';
      const html = readFileSync(join(root, 'dist', 'index.html'), 'utf8');
      const meta = html.match(/<meta http-equiv="Content-Security-Policy" content="([^"]*)"/)[1];
      expect(JSON.stringify(directives(header)) === JSON.stringify(directives(meta)), `${path}: header ${header}`);
      // What issue 7 asks of the policy.
      const d = directives(header);
      for (const want of ["default-src 'none'", "connect-src 'self'", "form-action 'none'", "base-uri 'none'"]) {
        expect(d.includes(want), `${path}: policy lacks ${want}`);
      }
      const scripts = d.find((x) => x.startsWith('script-src ')).split(' ').slice(1);
      expect(scripts.includes("'self'") && scripts.includes("'wasm-unsafe-eval'"), `script-src ${scripts}`);
      expect(scripts.every((s) => s === "'self'" || s === "'wasm-unsafe-eval'" || s.startsWith("'sha256-")), `script-src allows more: ${scripts}`);
    }
  });

  const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
  const { page, requests, consoleErrors } = await watchedPage(context);

  await check('the page says where users look that the data stays on this computer', async () => {
    await page.goto(`${origin}/`);
    await page.waitForSelector('#app[data-ready=yes]', { timeout: 30000 });
    const tagline = await page.textContent('.tagline');
    expect(/runs on this computer/.test(tagline) && /nothing is uploaded/.test(tagline), tagline);
    const hint = await page.textContent('#drop .hint');
    expect(/never leave your computer/.test(hint), hint);
  });

  await check('after one visit the page keeps an offline copy of its files', async () => {
    await page.waitForSelector('#offline-note[data-offline=ready]', { timeout: 30000 });
    const cached = await page.evaluate(async () => {
      const keys = await caches.keys();
      const cache = await caches.open(keys.find((k) => k.startsWith('spinney-')));
      return (await cache.keys()).map((r) => new URL(r.url).pathname);
    });
    for (const f of ['/index.html', '/worker_bg.wasm', '/worker.js', '/worker_loader.js', '/demo-data/surgery-complications.csv']) {
      expect(cached.includes(f), `${f} not kept (kept: ${cached.join(', ')})`);
    }
    expect(cached.some((f) => /^\/page-.*_bg\.wasm$/.test(f)), 'the page\'s wasm not kept');
  });

  await check('with the network off and the server stopped, a reload opens the page and it reads the demo file', async () => {
    await context.setOffline(true);
    // Off for certain: the server stops too, so only the browser's kept copy can answer.
    await new Promise((ok) => { server.close(ok); server.closeAllConnections(); });
    await page.reload();
    await page.waitForSelector('#app[data-ready=yes]', { timeout: 30000 });
    await page.click('#demo-surgery');
    await page.waitForFunction(() => document.querySelector('.facts')?.textContent.includes('surgery-complications.csv'), null, { timeout: 30000 });
    const names = await page.$$eval('table.columns tbody th[scope=row]', (s) => s.map((x) => x.textContent));
    const col = names.indexOf('complication_30d');
    expect(col >= 0, `columns ${names}`);
    // The worker works offline too: a small forest is grown.
    await page.selectOption(`select[data-field=role][data-col="${col}"]`, 'outcome');
    await page.fill('#set-trees', '10');
    await page.click('#run-start');
    await page.waitForSelector('#step-runs[data-runs="1"]', { timeout: 60000 });
    await page.screenshot({ path: join(out, 'offline-reload.png'), fullPage: true });
  });

  await check('the served page asked nothing of any other origin, and logged no errors', async () => {
    const away = foreign(requests, origin);
    expect(away.length === 0, `foreign requests: ${away.slice(0, 3)}`);
    // Failed network fetches while offline are the point of the test, not errors of the page.
    const errors = consoleErrors.filter((e) => !/ERR_INTERNET_DISCONNECTED|net::ERR_/.test(e));
    expect(errors.length === 0, errors.slice(0, 3).join(' | '));
  });
  await context.close();

  const single = join(root, 'dist-single', 'spinney.html');
  await check('the one-file build opens from file:// and reads a file, fetching nothing', async () => {
    expect(existsSync(single), `${single} is missing; run scripts/build-single-file first`);
    const ctx = await browser.newContext({ viewport: { width: 1280, height: 900 } });
    const w = await watchedPage(ctx);
    const url = pathToFileURL(single).href;
    await w.page.goto(url);
    await w.page.waitForSelector('#app[data-ready=yes]', { timeout: 30000 });
    await w.page.waitForSelector('#offline-note[data-offline=file]');
    await w.page.setInputFiles('#file-input', join(fixtures, plain.file));
    await w.page.waitForSelector('table.columns');
    const facts = await w.page.textContent('.facts');
    expect(facts.includes(`${plain.rows} rows`), `facts: ${facts}`);
    // The embedded demo records work too.
    await w.page.click('#demo-surgery');
    await w.page.waitForFunction(() => document.querySelector('.facts')?.textContent.includes('surgery-complications.csv'), null, { timeout: 30000 });
    await w.page.screenshot({ path: join(out, 'single-file.png'), fullPage: true });
    const away = w.requests.filter((u) => u !== url && !u.startsWith('data:') && !u.startsWith('blob:'));
    expect(away.length === 0, `requests beyond the file: ${away.slice(0, 3)}`);
    expect(w.consoleErrors.length === 0, w.consoleErrors.slice(0, 3).join(' | '));
    await ctx.close();
  });
} finally {
  await browser.close();
  server.close();
}
finish();
