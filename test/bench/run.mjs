// `npm run bench -- [--quick] [--no-resnet50] [--json <file>]`: ours (onnxruntime-node, 2 threads)
// against the PyTorch peer (Debian python3-torch, 2 threads) on the same ResNet-18 (and ResNet-50)
// weights and input, in the same run. Each side's groups run in child processes so each peak RSS is its own.
// Prints medians with min–max and ours/peer; never fails on timing.
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync, statSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import * as os from 'node:os';

const here = path.dirname(fileURLToPath(import.meta.url));
const root = path.resolve(here, '..', '..');
const cache = path.join(root, '.cache', 'bench');
const PY = '/usr/bin/python3';

const args = process.argv.slice(2);
const quick = args.includes('--quick');
const withResnet50 = !args.includes('--no-resnet50');
const jsonAt = args.indexOf('--json');
const jsonFile = jsonAt >= 0 ? args[jsonAt + 1] : undefined;
if (jsonAt >= 0 && !jsonFile) { console.error('--json needs a file name'); process.exit(2); }
const repeats = quick ? 2 : 7;
const sweepRepeats = quick ? 1 : 3;
// Chunk sizes tried for PyTorch's batched paths (the best on a 200-class partial sweep is used).
const batchedChunks = quick ? '50' : '25,50,100';
const vmapChunks = quick ? '100' : '50,100,250';

const log = (s) => process.stderr.write(s + '\n');

function run(cmd, argv, what) {
  log(`· ${what}`);
  const r = spawnSync(cmd, argv, { cwd: root, encoding: 'utf8', maxBuffer: 256 * 1024 * 1024 });
  if (r.status !== 0) {
    log(`  ${what} failed (exit ${r.status}): ${(r.stderr || '').trim().split('\n').slice(-3).join(' | ')}`);
    return null;
  }
  const line = r.stdout.trim().split('\n').pop();
  try { return JSON.parse(line); } catch { log(`  ${what}: no JSON on stdout`); return null; }
}

const torchOk = spawnSync(PY, ['-c', 'import torch, torchvision, onnx, functorch'], { encoding: 'utf8' }).status === 0;
if (!torchOk) {
  log(`PyTorch is not available to ${PY}: the peer columns will be null, and the bench model cannot be made.`);
  log('Install it with: sudo apt-get install -y python3-torch python3-torchvision python3-onnx');
}

const generator = path.join(here, 'make_models.py');
const made = path.join(cache, 'meta.json');
if (!existsSync(made) || statSync(made).mtimeMs < statSync(generator).mtimeMs || !existsSync(path.join(cache, 'resnet50.onnx'))) {
  if (!torchOk) { log('No bench model in .cache/bench and no PyTorch to make one: stopping.'); process.exit(1); }
  mkdirSync(cache, { recursive: true });
  if (!run(PY, [generator, cache], 'making ResNet-18, ResNet-50, input and MatMul models (.cache/bench)')) process.exit(1);
}
const meta = JSON.parse(readFileSync(made, 'utf8'));

const tsx = path.join(root, 'node_modules', '.bin', 'tsx');
const oursTs = path.join(here, 'ours.ts');
const peerPy = path.join(here, 'peer.py');
const ours = run(tsx, [oursTs, cache, 'main', String(repeats)], 'ours: forward, first map, step, exact and probe sweeps, MatMul');
const oursRss = run(tsx, [oursTs, cache, 'rss-exact', '1'], 'ours: peak RSS of one exact sweep (child process)');
const oursBase = run(tsx, [oursTs, cache, 'rss-base', '1'], 'ours: peak RSS of prepare + forward only');
const peer = torchOk ? {
  basic: run(PY, [peerPy, cache, 'basic', String(repeats)], 'peer: forward, first map'),
  batched: run(PY, [peerPy, cache, 'batched', String(sweepRepeats), batchedChunks], `peer: autograd.grad is_grads_batched (chunks ${batchedChunks})`),
  vmap: run(PY, [peerPy, cache, 'vmap', String(sweepRepeats), vmapChunks], `peer: functorch.vmap over vjp (chunks ${vmapChunks})`),
  loop: quick ? null : run(PY, [peerPy, cache, 'loop', '1'], 'peer: per-class loop of 1000 autograd.grad calls'),
  mm: run(PY, ['-c', PEER_MATMUL(meta.matmul_n, repeats)], 'peer: dense MatMul through torch'),
} : {};
// ResNet-50: the first map and the exact sweep at stage2, against the peer's same questions.
const ours50 = withResnet50 ? run(tsx, [oursTs, cache, 'resnet50', String(repeats), String(sweepRepeats)], 'ours: ResNet-50 first map and exact sweep') : null;
const peer50 = torchOk && withResnet50 ? {
  basic: run(PY, [peerPy, cache, 'basic:resnet50', String(repeats)], 'peer: ResNet-50 forward, first map'),
  batched: run(PY, [peerPy, cache, 'batched:resnet50', String(sweepRepeats), quick ? '50' : '25,50'], 'peer: ResNet-50 autograd.grad is_grads_batched'),
  vmap: run(PY, [peerPy, cache, 'vmap:resnet50', String(sweepRepeats), quick ? '50' : '50,100'], 'peer: ResNet-50 functorch.vmap over vjp'),
} : {};

function PEER_MATMUL(n, reps) {
  return `import torch,time,json;torch.set_num_threads(2);torch.manual_seed(3)
a=torch.rand(${n},${n})-.5;b=torch.rand(${n},${n})-.5;a@b
t=[]
for _ in range(${reps}):
  s=time.perf_counter();a@b;t.append((time.perf_counter()-s)*1e3)
print(json.dumps({"times":t,"gflops":2*${n}**3/(min(t)/1e3)/1e9}))`;
}

const median = (xs) => { const s = [...xs].sort((a, b) => a - b); const m = s.length >> 1; return s.length % 2 ? s[m] : (s[m - 1] + s[m]) / 2; };
const summary = (xs) => (xs && xs.length ? { median: median(xs), min: Math.min(...xs), max: Math.max(...xs), n: xs.length } : null);

function pearson(a, b) {
  const n = a.length; let ma = 0, mb = 0;
  for (let i = 0; i < n; i++) { ma += a[i]; mb += b[i]; }
  ma /= n; mb /= n;
  let sab = 0, saa = 0, sbb = 0;
  for (let i = 0; i < n; i++) { const x = a[i] - ma, y = b[i] - mb; sab += x * y; saa += x * x; sbb += y * y; }
  return sab / Math.sqrt(saa * sbb);
}

const results = {};
function metric(name, oursTimes, peerTimes, unit, extra = {}) {
  const o = Array.isArray(oursTimes) ? summary(oursTimes) : oursTimes == null ? null : { median: oursTimes };
  const p = Array.isArray(peerTimes) ? summary(peerTimes) : peerTimes == null ? null : { median: peerTimes };
  results[name] = {
    ours: o?.median ?? null, peer: p?.median ?? null, unit,
    ratio: o && p ? o.median / p.median : null,
    ours_min: o?.min ?? null, ours_max: o?.max ?? null, ours_n: o?.n ?? null,
    peer_min: p?.min ?? null, peer_max: p?.max ?? null, peer_n: p?.n ?? null,
    ...extra,
  };
}

const fastest = (p) => [p.batched, p.vmap].filter((x) => x && x.times)
  .map((x) => ({ ...x, path: x === p.batched ? 'autograd.grad(is_grads_batched=True)' : 'functorch.vmap(vjp)', med: median(x.times) }))
  .sort((a, b) => a.med - b.med)[0];
const bestSweep = fastest(peer);

metric('forward', ours?.forward, peer.basic?.forward, 'ms');
metric('first_map_all_stages', ours?.first_map_all_stages, peer.basic?.first_map_all_stages, 'ms', {
  ours_what: 'explainPrediction: contrast margin of top-1 vs top-2 at stage1..stage4, prediction and maps in one run',
  ours_two_step_ms: ours?.first_map_two_step ? median(ours.first_map_two_step) : null,
  peer_what: 'forward with hooks at stage1..4 (frozen weights), backward of z_fact − z_foil, Grad-CAM at each stage',
  ours_cold_ms: ours?.first_map_cold_ms ?? null,
});
metric('mismatch_exact_layer2', ours?.mismatch_exact_layer2, bestSweep?.times, 'ms', {
  peer_path: bestSweep?.path ?? null, peer_chunk: bestSweep?.chunk ?? null, ours_chunk_rows: ours?.mismatch_chunk ?? null,
  ours_seeds: ours?.mismatch_seeds ?? null, ours_path: 'spectral basis of the centred head (rank seeds) at the scores, chunked under the budget',
  peer_batched: peer.batched ? { median: peer.batched.times ? median(peer.batched.times) : null, chunk: peer.batched.chunk, chunk_trials_ms_est: peer.batched.chunk_trials_ms_est, peak_rss_mib: peer.batched.peak_rss_mib } : null,
  peer_vmap: peer.vmap ? { median: peer.vmap.times ? median(peer.vmap.times) : null, chunk: peer.vmap.chunk, chunk_trials_ms_est: peer.vmap.chunk_trials_ms_est, peak_rss_mib: peer.vmap.peak_rss_mib } : null,
  map_pearson_ours_vs_peer: ours?.map && bestSweep?.map ? pearson(ours.map, bestSweep.map) : null,
});
if (ours?.mismatch_exact_onehot_layer2) metric('mismatch_exact_layer2_onehot', ours.mismatch_exact_onehot_layer2, bestSweep?.times, 'ms', {
  what: 'ours with the definition\'s 1000 one-hot seeds instead of the spectral basis (1 run)', rel_l2_vs_spectral: ours.onehot_rel_l2_vs_spectral,
});
metric('mismatch_exact_layer2_loop', ours?.mismatch_exact_layer2, peer.loop?.times ?? null, 'ms', {
  peer_path: quick ? 'skipped in --quick' : '1000 torch.autograd.grad calls, retain_graph',
});
metric('mismatch_probe32_layer2', ours?.mismatch_probe32_layer2, null, 'ms', {
  pearson_vs_exact: ours?.probe32_pearson_vs_exact ?? null, rel_l2_vs_exact: ours?.probe32_rel_l2_vs_exact ?? null,
  fraction_of_exact: ours ? median(ours.mismatch_probe32_layer2) / median(ours.mismatch_exact_layer2) : null,
  probe: `${ours?.probe32_design ?? '?'}, seed 1`,
});
metric('step_layer', ours?.step_layer, null, 'ms', { what: `panel path: display range + colorizeOntoImage at image size (${ours?.step_layer_image ?? '?'})` });
metric('step_layer_png', ours?.step_layer_png, null, 'ms', { what: 'save/CLI path: the overlay blended onto the photo and PNG-encoded (sharp)' });
metric('peak_rss_mib', oursRss?.peak_rss_mib ?? null, bestSweep?.peak_rss_mib ?? null, 'MiB', {
  what: 'whole-process peak RSS of a child doing one exact sweep at stage2 (default 1 GiB budget); peer: the process of its best path',
  ours_floor_mib: oursBase?.peak_rss_mib ?? null,
  peer_loop_mib: peer.loop?.peak_rss_mib ?? null,
});
if (withResnet50) {
  const best50 = fastest(peer50);
  metric('resnet50_first_map_all_stages', ours50?.first_map_all_stages, peer50.basic?.first_map_all_stages, 'ms', { ours_cold_ms: ours50?.first_map_cold_ms ?? null });
  metric('resnet50_mismatch_exact_layer2', ours50?.mismatch_exact_layer2, best50?.times, 'ms', {
    peer_path: best50?.path ?? null, peer_chunk: best50?.chunk ?? null, ours_seeds: ours50?.mismatch_seeds ?? null, ours_chunk_rows: ours50?.mismatch_chunk ?? null,
    peer_batched_median: peer50.batched?.times ? median(peer50.batched.times) : null, peer_vmap_median: peer50.vmap?.times ? median(peer50.vmap.times) : null,
    map_pearson_ours_vs_peer: ours50?.map && best50?.map ? pearson(ours50.map, best50.map) : null,
    ours_gflops: ours50?.mismatch_seeds ? ((ours50.mismatch_seeds + 2) * 2 * meta.resnet50.macs_above.stage2) / (median(ours50.mismatch_exact_layer2) / 1e3) / 1e9 : null,
  });
}
metric('matmul_gflops', ours?.matmul?.gflops ?? null, peer.mm?.gflops ?? null, 'GFLOP/s', { n: meta.matmul_n, what: 'dense float32 MatMul N×N·N×N, best of repeats, 2 threads; ours through onnxruntime, peer torch.mm' });
// Backward MACs of one seed from the scores down to stage2: the data gradient of every Conv/Gemm
// above stage2 costs the same MACs as its forward (ConvTranspose or flipped Conv, same operand
// sizes); weight gradients are not needed. FLOPs = 2 · MACs. Seeds: ours the spectral basis + the
// two statistic rows of the last run; the peer 1000 one-hot + one for μ.
const seedsOurs = ours?.mismatch_seeds != null ? ours.mismatch_seeds + 2 : null;
const flopsPerSeed = 2 * meta.macs_above.stage2;
const gf = (seeds, ms) => (seeds && ms ? (seeds * flopsPerSeed) / (ms / 1e3) / 1e9 : null);
metric('exact_sweep_gflops', ours ? gf(seedsOurs, median(ours.mismatch_exact_layer2)) : null, bestSweep ? gf(1001, bestSweep.med) : null, 'GFLOP/s', {
  counting: `seeds × 2 × ${meta.macs_above.stage2} MACs (forward MACs of the Conv/Gemm nodes above stage2; a data gradient costs its forward's MACs)`,
  seeds_ours: seedsOurs, of_matmul_peak: ours?.matmul ? gf(seedsOurs, median(ours.mismatch_exact_layer2)) / ours.matmul.gflops : null,
  onehot_gflops: ours?.mismatch_exact_onehot_layer2 ? gf(1002, median(ours.mismatch_exact_onehot_layer2)) : null,
});

const out = {
  date: new Date().toISOString(), command: `npm run bench -- ${args.join(' ')}`.trim(),
  machine: { cpus: os.cpus().length, model: os.cpus()[0]?.model, mem_gib: os.totalmem() / 2 ** 30, node: process.version, threads_each_side: 2 },
  versions: { onnxruntime: ours?.ort_version ?? null, torch: meta.torch, torchvision: meta.torchvision, onnx: meta.onnx },
  model: 'torchvision ResNet-18 (and ResNet-50), random weights (seed 0), 224x224, 1000 classes, opset 17; input seed 1',
  load_average: os.loadavg(),
  results,
  probe_curve: ours?.probe_curve?.map((c) => ({ ...c, pearson_mean: c.pearson.reduce((a, b) => a + b, 0) / c.pearson.length, rel_l2_mean: c.rel_l2.reduce((a, b) => a + b, 0) / c.rel_l2.length })) ?? null,
  cold: { head_basis_ms: ours?.head_basis_ms ?? null, head_values_ms: ours?.head_values_ms ?? null, head_basis_probe32_ms: ours?.head_basis_probe32_ms ?? null, resnet50_head_basis_ms: ours50?.head_basis_ms ?? null, head_rank: ours?.head_rank ?? null, prepare_ms: ours?.prepare_ms ?? null, forward_cold_ms: ours?.forward_cold_ms ?? null, first_map_cold_ms: ours?.first_map_cold_ms ?? null, mismatch_compile_ms: ours?.mismatch_compile_ms ?? null },
};

const f = (v) => (v == null ? '—' : Math.abs(v) >= 100 ? v.toFixed(0) : Math.abs(v) >= 1 ? v.toFixed(1) : v.toPrecision(3));
const cell = (m, side) => (m[side] == null ? '—' : m[`${side}_min`] != null && m[`${side}_n`] > 1 ? `${f(m[side])} (${f(m[`${side}_min`])}–${f(m[`${side}_max`])})` : f(m[side]));
const rows = [['metric', 'unit', 'ours median (min–max)', 'peer median (min–max)', 'ours/peer']];
for (const [k, m] of Object.entries(results)) rows.push([k, m.unit, cell(m, 'ours'), cell(m, 'peer'), m.ratio == null ? '—' : m.ratio.toFixed(2)]);
const w = rows[0].map((_, i) => Math.max(...rows.map((r) => r[i].length)));
console.log(rows.map((r, j) => '| ' + r.map((c, i) => c.padEnd(w[i])).join(' | ') + ' |' + (j === 0 ? '\n|' + w.map((x) => '-'.repeat(x + 2)).join('|') + '|' : '')).join('\n'));
const p = results.mismatch_probe32_layer2;
console.log(`\nprobe K=32: Pearson ${f(p.pearson_vs_exact)}, rel L2 ${f(p.rel_l2_vs_exact)} vs exact; ${f(p.fraction_of_exact)} of exact time`);
if (out.probe_curve) for (const c of out.probe_curve) console.log(`  K=${String(c.k).padStart(3)}  Pearson ${c.pearson_mean.toFixed(4)}  rel L2 ${c.rel_l2_mean.toFixed(4)}  (${c.seeds.length} seeds)`);
console.log(`peer best exact path: ${results.mismatch_exact_layer2.peer_path ?? '—'} at chunk ${results.mismatch_exact_layer2.peer_chunk ?? '—'}`);
const r50 = results.resnet50_mismatch_exact_layer2;
if (r50) console.log(`ResNet-50 exact: ours ${r50.ours_seeds ?? '—'} seeds, peer ${r50.peer_path ?? '—'} at chunk ${r50.peer_chunk ?? '—'}; map Pearson ours vs peer ${r50.map_pearson_ours_vs_peer == null ? '—' : r50.map_pearson_ours_vs_peer.toFixed(6)}`);
console.log(`load average at the end (1, 5, 15 min): ${os.loadavg().map((v) => v.toFixed(2)).join(', ')}`);
if (jsonFile) { writeFileSync(jsonFile, JSON.stringify(out, null, 1) + '\n'); log(`wrote ${jsonFile}`); }
