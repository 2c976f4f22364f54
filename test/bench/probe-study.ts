/**
 * Probe design study (issue: speed): error of the K-seed estimate of the mismatch map against the
 * exact sweep, per design, at equal K. Designs: rademacher (±1, the published estimator),
 * centered (±1 minus its mean: orthogonal to the all-ones vector), spectral (top K singular
 * directions of the centred head, deterministic), rescaled (the same, scaled by the dropped share
 * of the spectrum), deflated (top k exactly + K − k centred probes of the rest). Errors: Pearson and relative L2 of the final `weighted` map at layer resolution.
 *
 * Usage: npx tsx test/bench/probe-study.ts [--json out.json] [--quick] [--designs a,b]
 *   bench ResNet-18 (.cache/bench, made by `npm run bench`) at stage2, K = 8…128, seeds 1–3;
 *   the parts demo model at stage2 and stage3 over one image per class, K = 2, 4, 8.
 */
import { existsSync, readdirSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { Engine } from '../../core/engine/engine';
import { explainMaps } from '../../core/methods/maps';
import { PROBE_DESIGNS, ProbeDesign } from '../../core/methods/mismatch-seeds';
import { headBasis } from '../../core/methods/head-basis';
import { loadModel } from '../../core/model/load';
import { PreparedModel } from '../../core/plan/prepared';
import { readNpy } from '../../core/io/npy';
import { pearson } from '../../core/metrics/correlation';
import { openModel } from '../../core/workflow/open-model';
import { imageInput } from '../../core/workflow/model-input';

const root = path.resolve(__dirname, '..', '..');
const args = process.argv.slice(2);
const quick = args.includes('--quick');
const jsonAt = args.indexOf('--json');
const designsAt = args.indexOf('--designs');
const designs = (designsAt >= 0 ? args[designsAt + 1].split(',') : PROBE_DESIGNS) as ProbeDesign[];

function relL2(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let num = 0, den = 0;
  for (let i = 0; i < a.length; i++) { num += (a[i] - b[i]) ** 2; den += b[i] ** 2; }
  return Math.sqrt(num / den);
}

interface Row { model: string; layer: string; design: ProbeDesign; k: number; pearson: number; rel_l2: number; pearson_min: number; runs: number; exact_directions?: number }

async function study(engine: Engine, pm: PreparedModel, name: string, inputs: Float32Array[], layers: string[], ks: number[], seeds: number[]): Promise<Row[]> {
  const rows: Row[] = [];
  for (const layer of layers) {
    const exact = [];
    for (const x of inputs) exact.push((await explainMaps(engine, pm, x, [{ kind: 'mismatch', fact: 0 }], [layer]))[0].raw.data);
    for (const design of designs) for (const k of ks) {
      const ps: number[] = [], ls: number[] = [];
      let directions: number | undefined;
      for (const [i, x] of inputs.entries()) for (const seed of design === 'spectral' || design === 'rescaled' ? [1] : seeds) {
        const m = (await explainMaps(engine, pm, x, [{ kind: 'mismatch', fact: 0 }], [layer], { estimate: { mode: 'probe', k, seed, design } }))[0];
        ps.push(pearson(m.raw.data, exact[i]));
        ls.push(relL2(m.raw.data, exact[i]));
        directions = m.estimate?.seeds;
      }
      const mean = (xs: number[]) => xs.reduce((a, b) => a + b, 0) / xs.length;
      rows.push({ model: name, layer, design, k, pearson: mean(ps), rel_l2: mean(ls), pearson_min: Math.min(...ps), runs: ps.length, exact_directions: design === 'spectral' || design === 'rescaled' ? directions : undefined });
      process.stderr.write(`  ${name} ${layer} ${design.padEnd(10)} K=${String(k).padStart(3)}  Pearson ${mean(ps).toFixed(4)}  rel L2 ${mean(ls).toFixed(4)}\n`);
    }
  }
  return rows;
}

async function main(): Promise<void> {
  const engine = new Engine({ threads: 2 });
  const rows: Row[] = [];
  const spectra: Record<string, { rank: number; energy_top: Record<number, number> }> = {};
  const energy = (pm: PreparedModel, ks: number[]) => {
    const b = headBasis(pm)!;
    const total = b.values.reduce((x, y) => x + y, 0);
    return { rank: b.rank, energy_top: Object.fromEntries(ks.map((k) => [k, b.values.slice(0, k).reduce((x, y) => x + y, 0) / total])) };
  };

  const cache = path.join(root, '.cache', 'bench');
  if (existsSync(path.join(cache, 'resnet18.onnx'))) {
    const pm = await engine.prepare(loadModel(path.join(cache, 'resnet18.onnx')), [1, 3, 224, 224]);
    const x = (await readNpy(path.join(cache, 'input.npy'))).data as Float32Array;
    const ks = quick ? [8, 32] : [8, 16, 32, 64, 128];
    spectra['resnet18'] = energy(pm, ks);
    rows.push(...(await study(engine, pm, 'resnet18 (random weights)', [x], ['stage2'], ks, quick ? [1] : [1, 2, 3])));
  } else process.stderr.write('no .cache/bench/resnet18.onnx: run `npm run bench -- --quick` once to make it\n');

  const demo = path.join(root, 'test-fixtures', 'parts', 'parts-sorter.onnx');
  const ctx = await openModel(engine, demo);
  const dir = path.join(root, 'test-fixtures', 'parts', 'demo');
  const images = readdirSync(dir, { withFileTypes: true }).filter((d) => d.isDirectory()).sort((a, b) => a.name.localeCompare(b.name))
    .map((d) => path.join(dir, d.name, readdirSync(path.join(dir, d.name)).filter((f) => f.endsWith('.png')).sort()[0]));
  const inputs = await Promise.all((quick ? images.slice(0, 2) : images).map(async (f) => (await imageInput(ctx, f)).data));
  spectra['parts-sorter'] = energy(ctx.pm, [2, 4, 8]);
  rows.push(...(await study(engine, ctx.pm, `parts-sorter (${inputs.length} demo images)`, inputs, ['stage2', 'stage3'], [2, 4, 8], quick ? [1] : [1, 2, 3])));

  const line = (r: Row) => `| ${r.model} | ${r.layer} | ${r.design} | ${r.k} | ${r.pearson.toFixed(4)} | ${r.pearson_min.toFixed(4)} | ${r.rel_l2.toFixed(4)} | ${r.runs} |`;
  console.log('| model | layer | design | K | Pearson (mean) | Pearson (min) | rel L2 (mean) | runs |\n|---|---|---|---|---|---|---|---|');
  for (const r of rows) console.log(line(r));
  console.log(`\nhead spectra (share of Σλ in the top k directions): ${JSON.stringify(spectra)}`);
  if (jsonAt >= 0) writeFileSync(args[jsonAt + 1], JSON.stringify({ date: new Date().toISOString(), rows, spectra }, null, 1) + '\n');
  await engine.dispose();
}

main().catch((e) => { console.error(e); process.exit(1); });
