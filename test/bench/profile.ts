/**
 * Where the time of one seed chunk goes: runs the mismatch plan of the bench ResNet-18 at one
 * layer with onnxruntime's profiler on and prints per-op-type totals (and the heaviest nodes).
 *
 * Usage: npx tsx test/bench/profile.ts [cache dir] [layer] [seeds per run] [runs] [resnet18|resnet50] [product|polyphase]
 * (polyphase: strided Conv input gradients as polyphase-conv.ts builds them, for comparison)
 * (after `npm run bench -- --quick` has made .cache/bench). Prints a table on stdout.
 */
import { readdirSync, readFileSync, rmSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import * as ort from 'onnxruntime-node';
import { Engine } from '../../core/engine/engine';
import { loadModel } from '../../core/model/load';
import { composePlan } from '../../core/plan/compose';
import { readNpy } from '../../core/io/npy';
import { mulberry32 } from '../../core/metrics/random';
import { polyphaseConv } from './polyphase-conv';
import { withRules } from './rule-swap';
import { gradientRules } from '../../core/autodiff/rules';

interface Event { cat: string; name: string; dur: number; args?: { op_name?: string } }

async function profiled(bytes: Uint8Array, feeds: Record<string, ort.Tensor>, runs: number, tag: string): Promise<Event[]> {
  const prefix = path.join(os.tmpdir(), `ff-profile-${process.pid}-${tag}`);
  const s = await ort.InferenceSession.create(bytes, {
    intraOpNumThreads: Number(process.env.THREADS ?? 2), interOpNumThreads: 1, graphOptimizationLevel: 'all', enableCpuMemArena: true, // as the sweep's backward session runs (runtime.ts)
    enableProfiling: true, profileFilePrefix: prefix,
  });
  const fed = Object.fromEntries(Object.entries(feeds).filter(([k]) => s.inputNames.includes(k)));
  for (let i = 0; i < runs; i++) await s.run(fed);
  s.endProfiling();
  await s.release();
  const file = readdirPrefix(prefix);
  const events = JSON.parse(readFileSync(file, 'utf8')) as Event[];
  rmSync(file);
  return events;
}

function readdirPrefix(prefix: string): string {
  const dir = path.dirname(prefix), base = path.basename(prefix);
  return path.join(dir, readdirSync(dir).find((n) => n.startsWith(base))!);
}

function table(events: Event[], runs: number, title: string): void {
  const byOp = new Map<string, { ms: number; n: number }>();
  const byNode = new Map<string, number>();
  let total = 0;
  for (const e of events) {
    if (e.cat !== 'Node' || !e.name.endsWith('_kernel_time')) continue;
    const op = e.args?.op_name ?? '?';
    const x = byOp.get(op) ?? { ms: 0, n: 0 };
    x.ms += e.dur / 1e3 / runs; x.n += 1 / runs;
    byOp.set(op, x);
    byNode.set(e.name, (byNode.get(e.name) ?? 0) + e.dur / 1e3 / runs);
    total += e.dur / 1e3 / runs;
  }
  console.log(`\n${title}: ${total.toFixed(1)} ms of kernel time per run`);
  for (const [op, x] of [...byOp].sort((a, b) => b[1].ms - a[1].ms).slice(0, 14)) {
    console.log(`  ${op.padEnd(22)} ${x.ms.toFixed(1).padStart(8)} ms  ${(100 * x.ms / total).toFixed(1).padStart(5)} %  ${x.n.toFixed(0).padStart(4)} nodes`);
  }
  console.log('  heaviest nodes:');
  for (const [n, ms] of [...byNode].sort((a, b) => b[1] - a[1]).slice(0, 8)) console.log(`    ${n.replace('_kernel_time', '').padEnd(50)} ${ms.toFixed(1)} ms`);
}

async function main(): Promise<void> {
  const [cache = '.cache/bench', layer = 'stage2', kArg = '100', runsArg = '3', arch = 'resnet18', form = 'product'] = process.argv.slice(2);
  const k = Number(kArg), runs = Number(runsArg);
  const engine = new Engine({ threads: 2 });
  const pm = await engine.prepare(loadModel(path.join(cache, `${arch}.onnx`)), [1, 3, 224, 224]);
  const x = (await readNpy(path.join(cache, 'input.npy'))).data as Float32Array;
  const rule = form === 'polyphase' ? polyphaseConv : gradientRules.Conv;
  const plan = await withRules({ Conv: rule }, async () => composePlan(pm, { passes: [{ relu: 'standard', layers: [layer], heads: ['mismatch'] }] }));
  const R = pm.scores.numClasses;
  const rand = mulberry32(1);
  const base = Float32Array.from({ length: k * R }, () => (rand() < 0.5 ? -1 : 1));
  const info = pm.layers.find((l) => l.id === layer)!;
  const feeds: Record<string, ort.Tensor> = {
    [pm.model.input.name]: new ort.Tensor('float32', x, pm.inputDims),
    [plan.seedBase]: new ort.Tensor('float32', base, [k, R]),
    [plan.seedCoef]: new ort.Tensor('float32', new Float32Array(k), [k, 1]),
    [plan.accInputs.get(layer)!]: new ort.Tensor('float32', new Float32Array(info.shape.reduce((a, b) => a * b, 1)), [1, ...info.shape]),
    ...(plan.accScale ? { [plan.accScale]: new ort.Tensor('float32', Float32Array.of(1), []) } : {}),

  };
  feeds[plan.sweepFrom!] = new ort.Tensor('int64', BigInt64Array.of(0n), [1]);
  table(await profiled(plan.bytes, feeds, runs, 'all'), runs, `${arch} ${layer}, ${k} seeds, ${form}, one session`);
  await engine.dispose();
}

main().catch((e) => { console.error(e); process.exit(1); });
