// A tiny static file server for dist/ on 127.0.0.1 only (Node's standard library, no
// dependencies). Used by scripts/serve and by the browser tests. Every response carries the
// page's Content-Security-Policy as an HTTP header, the same policy as the meta tag in the
// served index.html (read from it, so the two cannot drift apart); the header also covers the
// worker and service-worker scripts, which a meta tag cannot reach. The cross-origin isolation
// headers let the page share memory with its worker (see the comment below).
//   node scripts/static-server.mjs DIR [PORT]     (PORT 0 = any free port)
// Prints "serving DIR at http://127.0.0.1:PORT/" once listening.
import { createServer } from 'node:http';
import { readFile, stat } from 'node:fs/promises';
import { extname, join, normalize, resolve } from 'node:path';

const TYPES = {
  '.html': 'text/html; charset=utf-8', '.js': 'text/javascript; charset=utf-8',
  '.mjs': 'text/javascript; charset=utf-8', '.css': 'text/css; charset=utf-8',
  '.wasm': 'application/wasm', '.json': 'application/json', '.csv': 'text/csv; charset=utf-8',
  '.md': 'text/markdown; charset=utf-8', '.png': 'image/png', '.svg': 'image/svg+xml',
  '.ico': 'image/x-icon', '.webmanifest': 'application/manifest+json',
};

/** The policy in DIR/index.html's meta tag, or the strictest one if there is none. */
export async function pagePolicy(root) {
  const html = await readFile(join(root, 'index.html'), 'utf8').catch(() => '');
  const meta = html.match(/<meta\s+http-equiv="Content-Security-Policy"\s+content="([^"]*)"/i);
  return meta ? meta[1] : "default-src 'none'";
}

export function serve(dir, port = 0) {
  const root = resolve(dir);
  const server = createServer(async (req, res) => {
    try {
      const url = new URL(req.url, 'http://127.0.0.1');
      let path = normalize(join(root, decodeURIComponent(url.pathname)));
      if (!path.startsWith(root)) { res.writeHead(403).end(); return; }
      if ((await stat(path).catch(() => null))?.isDirectory()) path = join(path, 'index.html');
      const body = await readFile(path);
      // Read per request: a rebuild changes the hashes of the inline scripts.
      const policy = await pagePolicy(root);
      res.writeHead(200, {
        'content-security-policy': policy,
        'content-type': TYPES[extname(path)] ?? 'application/octet-stream',
        'cache-control': 'no-cache',
        'x-content-type-options': 'nosniff',
        'referrer-policy': 'no-referrer',
        // Cross-origin isolation: the page loads nothing from elsewhere anyway, and with these
        // two the browser grants shared memory, through which Cancel stops step 5's work in
        // the worker without restarting it (and losing the models it holds).
        'cross-origin-opener-policy': 'same-origin',
        'cross-origin-embedder-policy': 'require-corp',
      });
      res.end(body);
    } catch {
      res.writeHead(404, { 'content-type': 'text/plain', 'content-security-policy': "default-src 'none'" }).end('not found');
    }
  });
  return new Promise((ok, fail) => {
    server.once('error', (e) => {
      // The chosen port is taken: take any free one rather than fail.
      if (e.code === 'EADDRINUSE' && port !== 0) server.listen(0, '127.0.0.1', () => ok(server));
      else fail(e);
    });
    server.listen(port, '127.0.0.1', () => ok(server));
  });
}

if (import.meta.url === `file://${process.argv[1]}`) {
  const [dir = 'dist', port = '8080'] = process.argv.slice(2);
  const server = await serve(dir, Number(port));
  console.log(`serving ${dir} at http://127.0.0.1:${server.address().port}/`);
}
