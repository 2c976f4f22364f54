/**
 * `npm run fuzz -- --cases N --seed S [--workers W] [--timeout MS] [--keep DIR] [--models a,b|all] [--messages]`: a longer fuzz
 * campaign than the one in `npm test`. Prints the summary; exits 1 when any case failed, after
 * copying the failing inputs to DIR (default test-output/fuzz-failures/) for minimizing and
 * keeping under test-fixtures/fuzz-regressions/.
 */
import { parseArgs } from 'node:util';
import { readdirSync } from 'node:fs';
import * as path from 'node:path';
import { runFuzz, summarize } from './harness';

const { values } = parseArgs({
  options: { cases: { type: 'string' }, seed: { type: 'string' }, workers: { type: 'string' }, timeout: { type: 'string' }, keep: { type: 'string' }, messages: { type: 'boolean' }, models: { type: 'string' } },
});
const cases = Number(values.cases ?? 1000);
const seed = Number(values.seed ?? Date.now() % 1_000_000);
const keepDir = path.resolve(values.keep ?? 'test-output/fuzz-failures');
// --models all: the demo and every architecture fixture; else paths relative to test-fixtures/.
const fixtures = path.resolve(__dirname, '../../test-fixtures');
const models = values.models === 'all'
  ? [path.join(fixtures, 'parts/parts-sorter.onnx'), ...readdirSync(path.join(fixtures, 'arch')).sort().map((f) => path.join(fixtures, 'arch', f, 'model.onnx'))]
  : values.models?.split(',').map((m) => path.join(fixtures, m));

runFuzz({
  cases, seed, models, workers: Number(values.workers ?? 2), timeoutMs: Number(values.timeout ?? 20_000), keepDir,
  onProgress: (done, total) => { if (process.stderr.isTTY && (done % 25 === 0 || done === total)) process.stderr.write(`\r  ${done}/${total}`); },
}).then((r) => {
  if (process.stderr.isTTY) process.stderr.write('\n');
  process.stdout.write(`seed ${seed}\n${summarize(r)}\n`);
  if (values.messages) for (const [m, n] of [...r.distinctMessages].sort((a, b) => b[1] - a[1])) process.stdout.write(`${String(n).padStart(5)}  ${m}\n`);
  for (const [k, t] of Object.entries(r.byKind).sort()) process.stdout.write(`  ${k.padEnd(48)} ok ${t.ok}  user errors ${t.userErrors}  failures ${t.failures}\n`);
  if (r.failures.length) process.stdout.write(`failing inputs copied to ${keepDir}\n`);
  process.exitCode = r.failures.length ? 1 : 0;
}, (e) => { process.stderr.write(`fuzz: ${(e as Error).stack}\n`); process.exitCode = 1; });
