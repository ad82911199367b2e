// Runs every browser test file in tests/e2e (*.test.mjs) one after another and prints the
// summed "N passed, N failed" line that scripts/test reads.
import { spawnSync } from 'node:child_process';
import { readdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

const here = dirname(fileURLToPath(import.meta.url));
let passed = 0, failed = 0;
for (const file of readdirSync(here).filter((f) => f.endsWith('.test.mjs')).sort()) {
  console.log(`--- ${file}`);
  const run = spawnSync(process.execPath, [join(here, file)], { encoding: 'utf8', stdio: ['ignore', 'pipe', 'inherit'] });
  process.stdout.write(run.stdout ?? '');
  const m = (run.stdout ?? '').match(/^(\d+) passed, (\d+) failed$/m);
  if (m) { passed += Number(m[1]); failed += Number(m[2]); }
  if (run.status !== 0 && (!m || Number(m[2]) === 0)) { failed++; console.log(`FAIL ${file} exited with status ${run.status}`); }
}
console.log(`${passed} passed, ${failed} failed`);
process.exit(failed ? 1 : 0);
