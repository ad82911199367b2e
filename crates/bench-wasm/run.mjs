// Times the explain benchmark's wasm build under Node (figures printed, nothing asserted):
//   node crates/bench-wasm/run.mjs DIR [ROWS] [TREES]
// DIR holds wasm-bindgen's `--target nodejs` output of spinney-bench-wasm (scripts/bench
// explain makes it). The clock is JavaScript's; each call runs to the end on this thread.
// CPU seconds (this process's, from process.cpuUsage) are printed beside wall-clock ones: on
// a shared machine the wall clock also counts other programs' turns.
import { createRequire } from 'node:module';
import { join, resolve } from 'node:path';
import { performance } from 'node:perf_hooks';

const [dir, rows = '50000', trees = '300'] = process.argv.slice(2);
const bench = createRequire(import.meta.url)(join(resolve(dir), 'spinney_bench_wasm.js'));
const time = (what) => {
  const [start, cpu] = [performance.now(), process.cpuUsage()];
  const value = what();
  const used = process.cpuUsage(cpu);
  const wall = (performance.now() - start) / 1000;
  return [`${wall.toFixed(1)} s wall, ${((used.user + used.system) / 1e6).toFixed(1)} s CPU`, value];
};
const [fitting, leaves] = time(() => bench.fit(Number(rows), Number(trees)));
console.log(`wasm fit (with generating the rows): ${trees} trees of depth 8 on ${rows} x 30: ${fitting} (mean ${leaves.toFixed(0)} leaves a tree)`);
const [shap, total] = time(() => bench.shap());
console.log(`wasm TreeSHAP, every row: ${rows} rows x ${trees} trees: ${shap} (sum of |contributions| ${total.toExponential(12)})`);
const [importance, losses] = time(() => bench.importance());
console.log(`wasm permutation importance, 5 shuffles x 30 predictors on ${Math.min(Number(rows), 10000)} rows, ${trees} trees: ${importance} (sum of mean losses ${losses.toExponential(15)})`);
