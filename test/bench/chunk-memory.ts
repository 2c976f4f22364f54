/**
 * Peak RSS, RSS held afterwards and time of exact mismatch sweeps of the bench ResNet-18 under a given seed budget,
 * in its own process (so the peak is its own): calibrates core/engine/budget.ts.
 *
 * Usage: npx tsx test/bench/chunk-memory.ts <budget MiB> [layer]
 * Environment: ARENA=1 turns the arena on for every session, ARENA=0 off for all (default: the sweep's backward only), THREADS=n (default 2), PROBE=K times a K-probe estimate instead, SWEEPS=n sweeps in a row (default 1; the last is reported).
 */
import { Engine } from '../../core/engine/engine';
import { explainMaps } from '../../core/methods/maps';
import { loadModel } from '../../core/model/load';
import { readNpy } from '../../core/io/npy';
import { seedChunkSize } from '../../core/engine/budget';
import { headBasis } from '../../core/methods/head-basis';
(async () => {
  const budget = Number(process.argv[2]) * 2 ** 20; const layer = process.argv[3] ?? 'stage2';
  const e = new Engine({ threads: Number(process.env.THREADS ?? 2), arena: process.env.ARENA === '1' ? 'always' : process.env.ARENA === '0' ? 'never' : 'sweeps' });
  const pm = await e.prepare(loadModel('.cache/bench/resnet18.onnx'), [1, 3, 224, 224]);
  const x = (await readNpy('.cache/bench/input.npy')).data as Float32Array;
  headBasis(pm);
  await e.scores(pm, x);
  const rss0 = process.resourceUsage().maxRSS / 1024;
  const sweep = () => explainMaps(e, pm, x, [{ kind: 'mismatch', fact: 0 }], [layer], { estimate: process.env.PROBE ? { mode: 'probe', k: Number(process.env.PROBE), seed: 1 } : { mode: 'exact' }, budgetBytes: budget });
  for (let i = 1; i < Number(process.env.SWEEPS ?? 1); i++) await sweep();
  const t = performance.now(); const c0 = process.cpuUsage();
  const r = await sweep();
  const c = process.cpuUsage(c0);
  console.log(JSON.stringify({ budgetMiB: budget / 2 ** 20, layer, chunk: seedChunkSize(pm, [layer], budget) - 2, seeds: r[0].estimate!.seeds, wall: Math.round(performance.now() - t), cpu: Math.round((c.user + c.system) / 1e3), rss0: Math.round(rss0), peakRss: Math.round(process.resourceUsage().maxRSS / 1024), rssAfter: Math.round(process.memoryUsage().rss / 2 ** 20) }));
  await e.dispose();
})();
