/**
 * Our side of the benchmark: the same questions as peer.py, answered by the engine on the ONNX
 * export of the same ResNet-18, with onnxruntime-node at 2 intra-op threads.
 *
 * Usage: npx tsx test/bench/ours.ts <cache dir> <group> <repeats>
 * Groups: main (everything timed), rss-exact (one exact sweep, for peak RSS), rss-base (prepare
 * and one forward only: the floor the sweep's RSS sits on), resnet50 (first map and exact sweep
 * on ResNet-50). Prints one JSON object on stdout.
 */
import * as path from 'node:path';
import * as ort from 'onnxruntime-node';
import { Engine } from '../../core/engine/engine';
import { explainMaps, explainPrediction, MapResult, Question } from '../../core/methods/maps';
import { seedChunkSize } from '../../core/engine/budget';
import { headBasis } from '../../core/methods/head-basis';
import { DEFAULT_PROBE_DESIGN } from '../../core/methods/mismatch-seeds';
import { loadModel } from '../../core/model/load';
import { PreparedModel } from '../../core/plan/prepared';
import { readNpy } from '../../core/io/npy';
import { pearson } from '../../core/metrics/correlation';
import { computeGeometry } from '../../core/image/preprocess';
import { displayRange } from '../../core/image/normalize';
import { renderOverlayPng } from '../../core/image/overlay';
import { colorizeOntoImage } from '../../webview/map-render';
import { geometrySummary } from '../../core/engine-process/service';
import { colorIndexFor, colormapTable } from '../../webview/colormap';
import type { DecodedImage } from '../../core/image/decode';
import { mulberry32 } from '../../core/metrics/random';

const THREADS = 2;
const STAGES = ['stage1', 'stage2', 'stage3', 'stage4'];
const LAYER = 'stage2';
const PROBE_KS = [8, 16, 32, 64, 128];
/** Probe seeds averaged per K on the error curve (the spread shows the estimator's variance). */
const PROBE_SEEDS = [1, 2, 3];

async function timed<T>(repeats: number, fn: () => Promise<T>): Promise<{ times: number[]; out: T }> {
  const times: number[] = [];
  let out!: T;
  for (let i = 0; i < repeats; i++) {
    const t = performance.now();
    out = await fn();
    times.push(performance.now() - t);
  }
  return { times, out };
}

function topTwo(z: Float32Array): [number, number] {
  let a = 0, b = -1;
  for (let i = 1; i < z.length; i++) {
    if (z[i] > z[a]) { b = a; a = i; } else if (b < 0 || z[i] > z[b]) b = i;
  }
  return [a, b];
}

function relL2(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let num = 0, den = 0;
  for (let i = 0; i < a.length; i++) { num += (a[i] - b[i]) ** 2; den += b[i] ** 2; }
  return Math.sqrt(num / den);
}

async function setup(cache: string, arch = 'resnet18'): Promise<{ engine: Engine; pm: PreparedModel; x: Float32Array }> {
  const engine = new Engine({ threads: THREADS });
  const pm = await engine.prepare(loadModel(path.join(cache, `${arch}.onnx`)), [1, 3, 224, 224]);
  const x = (await readNpy(path.join(cache, 'input.npy'))).data as Float32Array;
  return { engine, pm, x };
}

const exactQ: Question[] = [{ kind: 'mismatch', fact: 0 }];
const exact = (s: Awaited<ReturnType<typeof setup>>, basis: 'auto' | 'one-hot' = 'auto') => explainMaps(s.engine, s.pm, s.x, exactQ, [LAYER], { estimate: { mode: 'exact' }, exactBasis: basis });
const probe = (s: Awaited<ReturnType<typeof setup>>, k: number, seed: number) =>
  explainMaps(s.engine, s.pm, s.x, exactQ, [LAYER], { estimate: { mode: 'probe', k, seed } });

/** A seeded 640×480 "photo": the panel draws on the original image, centre-cropped to 224². */
function syntheticPhoto(): DecodedImage {
  const width = 640, height = 480, rand = mulberry32(7);
  const rgb = new Uint8Array(width * height * 3);
  for (let i = 0; i < rgb.length; i++) rgb[i] = (rand() * 256) | 0;
  return { width, height, rgb, format: 'png', path: 'synthetic.png' };
}

async function matmulGflops(cache: string, n: number, repeats: number): Promise<{ times: number[]; gflops: number }> {
  const s = await ort.InferenceSession.create(path.join(cache, 'matmul.onnx'), { intraOpNumThreads: THREADS, interOpNumThreads: 1, graphOptimizationLevel: 'all' });
  const rand = mulberry32(3);
  const a = new ort.Tensor('float32', Float32Array.from({ length: n * n }, () => rand() - 0.5), [n, n]);
  const b = new ort.Tensor('float32', Float32Array.from({ length: n * n }, () => rand() - 0.5), [n, n]);
  await s.run({ a, b });
  const { times } = await timed(repeats, () => s.run({ a, b }));
  const best = Math.min(...times);
  await s.release();
  return { times, gflops: (2 * n ** 3) / (best / 1e3) / 1e9 };
}

/** ResNet-50: the first map at every stage and the exact sweep at stage2 (`sweeps` times). */
async function resnet50(cache: string, repeats: number, sweeps: number): Promise<Record<string, unknown>> {
  const res: Record<string, unknown> = {};
  const s = await setup(cache, 'resnet50');
  await s.engine.scores(s.pm, s.x);
  const firstMap = () => explainPrediction(s.engine, s.pm, s.x, 'contrast', STAGES);
  let t = performance.now();
  await firstMap();
  res.first_map_cold_ms = performance.now() - t;
  res.first_map_all_stages = (await timed(repeats, firstMap)).times;
  t = performance.now();
  const b50 = headBasis(s.pm);
  b50?.seeds(b50.rank); // the vectors are made on first use: time them with the values
  res.head_basis_ms = performance.now() - t;
  await probe(s, 8, 1);
  res.mismatch_chunk = seedChunkSize(s.pm, [LAYER]);
  const ex = await timed(sweeps, () => exact(s));
  res.mismatch_exact_layer2 = ex.times;
  res.mismatch_seeds = ex.out[0].estimate?.seeds ?? null;
  res.map = Array.from(ex.out[0].raw.data);
  await s.engine.dispose();
  return res;
}

async function main(): Promise<void> {
  const [cache, group, repeatsArg, sweepsArg] = process.argv.slice(2);
  const repeats = Number(repeatsArg ?? 5);
  if (group === 'resnet50') {
    console.log(JSON.stringify(await resnet50(cache, repeats, Number(sweepsArg ?? 1))));
    return;
  }
  if (group === 'rss-base' || group === 'rss-exact') {
    const s = await setup(cache);
    await s.engine.scores(s.pm, s.x);
    headBasis(s.pm); // computed once per model; the sweep's peak is what is measured
    const t = performance.now();
    if (group === 'rss-exact') await exact(s);
    const ms = performance.now() - t;
    console.log(JSON.stringify({ peak_rss_mib: process.resourceUsage().maxRSS / 1024, ms }));
    await s.engine.dispose();
    return;
  }
  const res: Record<string, unknown> = {};
  const tPrep = performance.now();
  const s = await setup(cache);
  res.prepare_ms = performance.now() - tPrep;

  // forward: the plan with no passes is the model itself plus unused seed inputs.
  let t = performance.now();
  let z = await s.engine.scores(s.pm, s.x);
  res.forward_cold_ms = performance.now() - t;
  res.forward = (await timed(repeats, () => s.engine.scores(s.pm, s.x))).times;

  // first map at every stage from a new image: the prediction (for fact and foil), then one run.
  // One run: the plan takes fact and foil from the prediction inside the graph.
  const firstMap = async (): Promise<MapResult[]> => {
    const r = await explainPrediction(s.engine, s.pm, s.x, 'contrast', STAGES);
    z = r.scores;
    return r.maps;
  };
  // The two-step way (a forward for the prediction, then the maps), for comparison.
  const firstMapTwoStep = async (): Promise<MapResult[]> => {
    z = await s.engine.scores(s.pm, s.x);
    const [fact, foil] = topTwo(z);
    return explainMaps(s.engine, s.pm, s.x, [{ kind: 'contrast', fact, foil }], STAGES);
  };
  t = performance.now();
  await firstMap();
  res.first_map_cold_ms = performance.now() - t; // includes composing and compiling the plan
  const fm = await timed(repeats, firstMap);
  res.first_map_all_stages = fm.times;
  await firstMapTwoStep();
  res.first_map_two_step = (await timed(repeats, firstMapTwoStep)).times;

  // step_layer: what the panel pays per key press. All stages' maps arrive with the first run
  // (float32 at the model input); stepping only colours the next one onto the image at its own
  // size (webview/view/paint.ts: display range, colorizeOntoImage, then putImageData) — the very
  // functions the webview bundles, run here in Node. step_layer_png: what Save and the CLI pay on
  // top (the same overlay blended onto the photo and PNG-encoded by sharp).
  const img = syntheticPhoto();
  const geom = computeGeometry(img.width, img.height, [224, 224], 'crop');
  const panelGeom = geometrySummary(geom); // the geometry the panel is sent
  const steps: number[] = [];
  const stepsPng: number[] = [];
  let pngBytes = 0;
  for (let r = 0; r < Math.max(3, repeats); r++) for (const m of fm.out) {
    const t0 = performance.now();
    const range = displayRange(m.up.data);
    const px = colorizeOntoImage(m.up, panelGeom, img.width, img.height, colorIndexFor(range, 'viridis'), colormapTable('viridis'));
    steps.push(performance.now() - t0);
    if (px.length !== img.width * img.height * 4) throw new Error('step_layer: wrong overlay size');
    const t1 = performance.now();
    const png = await renderOverlayPng(img, m.up, geom, { colormap: 'viridis', opacity: 0.5, range });
    stepsPng.push(performance.now() - t1);
    pngBytes = png.length;
  }
  res.step_layer = steps;
  res.step_layer_png = stepsPng;
  res.step_layer_image = `${img.width}x${img.height} original, centre crop to 224x224, viridis; PNG ${pngBytes} B`;

  // exact mismatch at stage2: the head's spectral basis is computed once per model (timed
  // apart), then a small probe warms the compiled plan.
  t = performance.now();
  const basis = headBasis(s.pm);
  const valuesMs = performance.now() - t;
  basis?.seeds(32);
  res.head_basis_probe32_ms = performance.now() - t; // what a probe:32 map waits for
  basis?.seeds(basis.rank);
  res.head_basis_ms = performance.now() - t;
  res.head_values_ms = valuesMs;
  res.head_rank = basis?.rank ?? null;
  t = performance.now();
  await probe(s, 8, 1);
  res.mismatch_compile_ms = performance.now() - t;
  res.mismatch_chunk = seedChunkSize(s.pm, [LAYER]);
  const ex = await timed(Math.max(1, Math.min(repeats, 3)), () => exact(s));
  res.mismatch_exact_layer2 = ex.times;
  res.mismatch_seeds = ex.out[0].estimate?.seeds ?? null;
  const exactMap = ex.out[0].raw.data;
  res.map = Array.from(exactMap);
  if (process.env.BENCH_ONE_HOT !== '0') {
    // The definition's sweep over all 1000 one-hot seeds, for the spectral basis' gain in the same run.
    const oh = await timed(1, () => exact(s, 'one-hot'));
    res.mismatch_exact_onehot_layer2 = oh.times;
    res.onehot_rel_l2_vs_spectral = relL2(exactMap, oh.out[0].raw.data);
  }

  const p32 = await timed(repeats, () => probe(s, 32, 1));
  res.mismatch_probe32_layer2 = p32.times;
  res.probe32_design = (p32.out[0].estimate as { design?: string } | undefined)?.design ?? DEFAULT_PROBE_DESIGN;
  res.probe32_pearson_vs_exact = pearson(p32.out[0].raw.data, exactMap);
  res.probe32_rel_l2_vs_exact = relL2(p32.out[0].raw.data, exactMap);

  const curve: Record<string, unknown>[] = [];
  for (const k of PROBE_KS) {
    const ps: number[] = [], ls: number[] = [], ts: number[] = [];
    for (const seed of PROBE_SEEDS) {
      const t0 = performance.now();
      const m = (await probe(s, k, seed))[0].raw.data;
      ts.push(performance.now() - t0);
      ps.push(pearson(m, exactMap));
      ls.push(relL2(m, exactMap));
    }
    curve.push({ k, probe: res.probe32_design, seeds: PROBE_SEEDS, pearson: ps, rel_l2: ls, ms: ts });
  }
  res.probe_curve = curve;

  res.matmul = await matmulGflops(cache, Number(process.env.BENCH_MATMUL_N ?? 2048), repeats);
  res.ort_version = ort.env.versions?.common ?? null;
  console.log(JSON.stringify(res));
  await s.engine.dispose();
}

main().catch((e) => { console.error(e); process.exit(1); });
