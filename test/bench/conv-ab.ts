/**
 * A/B of the exact mismatch sweep at one layer under different backward forms and runtime
 * options, in one process, alternating the variants round by round so that load on the machine
 * falls on all of them alike. Each variant gets its own engine (its own compiled plan); the
 * compile and a warm-up run are not timed. Also checks that every variant gives the same map
 * (rel L2 against the first variant).
 *
 * Variants (comma-separated, default product,polyphase):
 *   product     the engine as shipped (strided Conv input gradients as onnxruntime ConvTranspose)
 *   polyphase   strided Conv input gradients as polyphase stride-1 Convs (polyphase-conv.ts)
 *   relu-where  the ReLU input gradient as Where(x > 0, g, 0) instead of g · float(x > 0)
 *   opt-extended, opt-basic   graph optimization level 'extended' / 'basic' instead of 'all'
 *   arena       onnxruntime's CPU memory arena on for every session (default: the sweep's backward only)
 *   no-arena    the arena off for every session
 *   spin        intra-op thread spinning on
 *   chunk<N>    seed rows per run capped at N (memory budget set to N rows; runs never exceed RUN_BYTES)
 *   mib<N>      memory budget of N MiB per run
 * Levers combine with '+', e.g. polyphase+chunk64.
 *
 * Usage: npx tsx test/bench/conv-ab.ts [cache dir] [resnet18|resnet50] [rounds] [variants] [layer]
 */
import * as path from 'node:path';
import { Engine } from '../../core/engine/engine';
import { RuntimeOptions } from '../../core/engine/runtime';
import { bytesPerSeed, seedChunkSize } from '../../core/engine/budget';
import { explainMaps, Question } from '../../core/methods/maps';
import { headBasis } from '../../core/methods/head-basis';
import { loadModel } from '../../core/model/load';
import { readNpy } from '../../core/io/npy';
import { gradientRules } from '../../core/autodiff/rules';
import { GradientRule } from '../../core/autodiff/rule';
import { polyphaseConv } from './polyphase-conv';
import { withRules } from './rule-swap';

interface Variant { name: string; rules: Record<string, GradientRule>; options: Partial<RuntimeOptions>; chunkRows?: number; chunkMiB?: number }

const productRelu = gradientRules.Relu;

/** The ReLU input gradient as Where(x > 0, g, 0), the form shipped before the float-mask Mul. */
const reluWhere: GradientRule = (ctx) => {
  const g = ctx.gradOut[0];
  if (!g || !ctx.needs[0] || ctx.relu === 'guided') return productRelu(ctx);
  const { b } = ctx;
  return [b.op1('Where', [b.op1('Greater', [ctx.node.inputs[0], b.scalarF(0)]), g, b.scalarF(0)])];
};

function variant(name: string): Variant {
  if (name.includes('+')) {
    const parts = name.split('+').map(variant);
    return parts.reduce((a, p) => ({ name, rules: { ...a.rules, ...p.rules }, options: { ...a.options, ...p.options }, chunkRows: p.chunkRows ?? a.chunkRows, chunkMiB: p.chunkMiB ?? a.chunkMiB }), { name, rules: {}, options: {} } as Variant);
  }
  const v: Variant = { name, rules: {}, options: {} };
  if (name === 'product') return v;
  if (name === 'polyphase') return { ...v, rules: { Conv: polyphaseConv } };
  if (name === 'relu-where') return { ...v, rules: { Relu: reluWhere } };
  if (name === 'opt-extended') return { ...v, options: { optimization: 'extended' } };
  if (name === 'opt-basic') return { ...v, options: { optimization: 'basic' } };
  if (name === 'arena') return { ...v, options: { arena: 'always' } };
  if (name === 'no-arena') return { ...v, options: { arena: 'never' } };
  if (name === 'spin') return { ...v, options: { spinning: true } };
  const chunk = /^chunk(\d+)$/.exec(name);
  if (chunk) return { ...v, chunkRows: Number(chunk[1]) };
  const mib = /^mib(\d+)$/.exec(name);
  if (mib) return { ...v, chunkMiB: Number(mib[1]) };
  throw new Error(`unknown variant '${name}'`);
}

const median = (v: number[]) => { const s = [...v].sort((a, b) => a - b); const m = s.length >> 1; return s.length % 2 ? s[m] : (s[m - 1] + s[m]) / 2; };

function relL2(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let num = 0, den = 0;
  for (let i = 0; i < a.length; i++) { num += (a[i] - b[i]) ** 2; den += b[i] ** 2; }
  return Math.sqrt(num / den);
}

async function main(): Promise<void> {
  const [cache = '.cache/bench', arch = 'resnet18', roundsArg = '3', variantsArg = 'product,polyphase', layer = 'stage2'] = process.argv.slice(2);
  const variants = variantsArg.split(',').map(variant);
  const rounds = Number(roundsArg);
  const model = loadModel(path.join(cache, `${arch}.onnx`));
  const x = (await readNpy(path.join(cache, 'input.npy'))).data as Float32Array;
  const q: Question[] = [{ kind: 'mismatch', fact: 0 }];
  const times = new Map<string, number[]>(variants.map((v) => [v.name, []]));
  const maps = new Map<string, Float32Array>();
  const rowsPerRun = new Map<string, number>();
  for (let r = 0; r < rounds; r++) {
    const order = r % 2 ? [...variants].reverse() : variants;
    for (const v of order) {
      const engine = new Engine({ threads: 2, ...v.options });
      try {
        await withRules(v.rules, async () => {
          const pm = await engine.prepare(model, [1, 3, 224, 224]);
          headBasis(pm);
          const budgetBytes = v.chunkRows ? v.chunkRows * bytesPerSeed(pm, [layer]) : v.chunkMiB ? v.chunkMiB * 2 ** 20 : undefined;
          if (!rowsPerRun.has(v.name)) rowsPerRun.set(v.name, seedChunkSize(pm, [layer], budgetBytes));
          await explainMaps(engine, pm, x, q, [layer], { estimate: { mode: 'probe', k: 8, seed: 1 } }); // compile, warm
          const t = performance.now();
          const out = await explainMaps(engine, pm, x, q, [layer], { estimate: { mode: 'exact' }, ...(budgetBytes ? { budgetBytes } : {}) });
          times.get(v.name)!.push(performance.now() - t);
          if (!maps.has(v.name)) maps.set(v.name, Float32Array.from(out[0].raw.data));
        });
      } finally {
        await engine.dispose();
      }
    }
  }
  const ref = maps.get(variants[0].name)!;
  const base = median(times.get(variants[0].name)!);
  const rows = variants.map((v) => {
    const t = times.get(v.name)!;
    return { variant: v.name, rows_per_run: rowsPerRun.get(v.name), median_ms: median(t), min_ms: Math.min(...t), max_ms: Math.max(...t), vs_first: median(t) / base, map_rel_l2_vs_first: relL2(maps.get(v.name)!, ref), times_ms: t };
  });
  for (const r of rows) {
    console.error(`${arch} ${layer} ${r.variant.padEnd(13)} ${r.median_ms.toFixed(0).padStart(7)} ms (${r.min_ms.toFixed(0)}–${r.max_ms.toFixed(0)})  ×${r.vs_first.toFixed(3)}  ${r.rows_per_run} rows/run  map rel L2 ${r.map_rel_l2_vs_first.toExponential(1)}`);
  }
  console.log(JSON.stringify({ arch, layer, rounds, rows }));
}

main().catch((e) => { console.error(e); process.exit(1); });
