/**
 * Each map kind against its formula (DESIGN §4), computed here in plain JavaScript from raw
 * gradients (themselves checked against PyTorch in test/core/autodiff) and activations.
 */
import { strict as assert } from 'node:assert';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { explainMaps, MapResult, Question } from '../../../core/methods/maps';
import { gradientsAt, lossSeed } from '../../../core/methods/gradient';
import { loadModel } from '../../../core/model/load';
import { tensorValues } from '../../../core/model/tensor';
import { readNpy } from '../../../core/io/npy';
import { bytesPerSeed } from '../../../core/engine/budget';
import { FIXTURES, relL2, toNumbers } from '../../helpers';

const RESNET = path.join(FIXTURES, 'arch', 'resnet');
const DEMO = path.join(FIXTURES, 'parts', 'parts-sorter.onnx');

function gradCam(g: Float32Array, a: Float32Array, C: number, HW: number): Float32Array {
  // Grad-CAM (Selvaraju et al., ICCV 2017): α_k = mean over space of ∂s/∂A_k; map = ReLU(Σ_k α_k A_k).
  const map = new Float32Array(HW);
  for (let k = 0; k < C; k++) {
    let alpha = 0;
    for (let i = 0; i < HW; i++) alpha += g[k * HW + i];
    alpha /= HW;
    for (let i = 0; i < HW; i++) map[i] += alpha * a[k * HW + i];
  }
  return map.map((v) => Math.max(v, 0));
}

describe('map kinds vs their formulas', function () {
  const engine = new Engine();
  after(() => engine.dispose());
  let x: Float32Array;
  before(async () => { x = Float32Array.from(toNumbers((await readNpy(path.join(RESNET, 'input.npy'))).data)); });
  const prepare = () => engine.prepare(loadModel(path.join(RESNET, 'model.onnx')), [1, 3, 64, 64]);

  it('evidence and both contrast variants equal Grad-CAM of their seeds at every layer in one run', async () => {
    const pm = await prepare();
    const layers = ['stage1', 'stage2', 'stage3', 'stage4'];
    const qs: Question[] = [{ kind: 'evidence', fact: 5 }, { kind: 'contrast', fact: 5, foil: 0 }, { kind: 'contrast', fact: 5, foil: 0, contrast: 'loss' }];
    const maps = await explainMaps(engine, pm, x, qs, layers);
    const acts = await engine.activations(pm, x, layers);
    for (const layer of layers) {
      const [C, H, W] = pm.layers.find((l) => l.id === layer)!.shape;
      const seeds = [lossSeed(10, 5, 'logit'), { base: (() => { const b = new Float32Array(10); b[5] = 1; b[0] = -1; return b; })(), coef: new Float32Array(1), k: 1 }, lossSeed(10, 0, 'ce')];
      for (let i = 0; i < 3; i++) {
        const g = (await gradientsAt(engine, pm, x, [layer], seeds[i])).get(layer)!.data;
        const expected = gradCam(g, acts.get(layer)!, C, H * W);
        const got = maps.find((m) => m.layer === layer && m.question === qs[i])!;
        assert.equal(got.raw.width, W);
        assert.ok(relL2(got.raw.data, expected) < 1e-5, `${layer} question ${i}: ${relL2(got.raw.data, expected)}`);
      }
    }
  });

  it('analytic GAP→Gemm head: evidence at the last stage is ReLU(Σ_k W[fact,k]·A_k)/HW, contrast uses W[fact]−W[foil]', async () => {
    // Closed form: z = W·GAP(A) + b, so ∂z_f/∂A_k = W_fk/HW everywhere and α_k = W_fk/HW.
    const model = loadModel(DEMO);
    const pm = await engine.prepare(model, [1, 3, 112, 112]);
    const input = Float32Array.from({ length: 3 * 112 * 112 }, (_, i) => Math.sin(i * 0.37));
    const W = tensorValues(model.graph.initializers.get('head.weight')!) as Float32Array; // [8, C]
    const [C, H, Wd] = pm.layers.find((l) => l.id === 'stage4')!.shape;
    const A = (await engine.activations(pm, input, ['stage4'])).get('stage4')!;
    const maps = await explainMaps(engine, pm, input, [{ kind: 'evidence', fact: 2 }, { kind: 'contrast', fact: 2, foil: 1 }], ['stage4']);
    for (const [m, w] of [[maps[0], (k: number) => W[2 * C + k]], [maps[1], (k: number) => W[2 * C + k] - W[1 * C + k]]] as [MapResult, (k: number) => number][]) {
      const expected = new Float32Array(H * Wd);
      for (let k = 0; k < C; k++) for (let i = 0; i < H * Wd; i++) expected[i] += (w(k) / (H * Wd)) * A[k * H * Wd + i];
      assert.ok(relL2(m.raw.data, expected.map((v) => Math.max(v, 0))) < 1e-5);
    }
  });

  it('exact mismatch equals the brute-force per-class loop of single-seed runs (DESIGN §4 statistics)', async () => {
    const pm = await prepare();
    const layer = 'stage3';
    const [C, H, W] = pm.layers.find((l) => l.id === layer)!.shape;
    const n = C * H * W, R = 10;
    const A = (await engine.activations(pm, x, [layer])).get(layer)!;
    const G: Float32Array[] = [];
    for (let r = 0; r < R; r++) G.push((await gradientsAt(engine, pm, x, [layer], lossSeed(R, r, 'ce'))).get(layer)!.data);
    const mu = new Float64Array(n), v = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      let s = 0; for (let r = 0; r < R; r++) s += G[r][i];
      mu[i] = s / R;
      let q = 0; for (let r = 0; r < R; r++) q += (G[r][i] - mu[i]) ** 2;
      v[i] = q / R; // population variance
    }
    const weighted = new Float64Array(H * W), gradient = new Float64Array(H * W);
    for (let k = 0; k < C; k++) for (let i = 0; i < H * W; i++) {
      const j = k * H * W + i;
      weighted[i] += Math.abs(mu[j] * v[j] * A[j]);
      gradient[i] += Math.abs(mu[j]) * v[j];
    }
    const maps = await explainMaps(engine, pm, x, [{ kind: 'mismatch', fact: 0 }, { kind: 'mismatch', fact: 0, mismatch: 'gradient' }], [layer], { budgetBytes: 4 * bytesPerSeed(pm, [layer]) }); // runs of 4 rows: several chunks
    assert.ok(relL2(maps[0].raw.data, weighted) < 1e-4, `weighted ${relL2(maps[0].raw.data, weighted)}`);
    assert.ok(relL2(maps[1].raw.data, gradient) < 1e-4, `gradient ${relL2(maps[1].raw.data, gradient)}`);
  });

  for (const design of ['rademacher', 'centered'] as const) it(`probe estimate (${design}): converges to exact and its error falls roughly like 1/√K (Hutchinson-type estimator)`, async () => {
    const pm = await prepare();
    const layer = 'stage2';
    const exact = (await explainMaps(engine, pm, x, [{ kind: 'mismatch', fact: 0, mismatch: 'gradient' }], [layer]))[0].raw.data;
    const err = async (k: number) => {
      let total = 0;
      for (let seed = 1; seed <= 6; seed++) {
        const m = await explainMaps(engine, pm, x, [{ kind: 'mismatch', fact: 0, mismatch: 'gradient' }], [layer], { estimate: { mode: 'probe', k, seed, design } });
        total += relL2(m[0].raw.data, exact);
      }
      return total / 6;
    };
    const e16 = await err(16), e256 = await err(256);
    // 16× more probes → ≈4× smaller error; allow 2.5–7 for sampling noise over 6 seeds.
    assert.ok(e16 / e256 > 2.5 && e16 / e256 < 7, `e16 ${e16}, e256 ${e256}`);
    assert.ok(e256 < 0.1, `e256 ${e256}`);
  });

  it('mismatch `gradient` is flagged flat where only pooling and linear ops lead to the scores', async () => {
    const pm = await engine.prepare(loadModel(DEMO), [1, 3, 112, 112]);
    const input = Float32Array.from({ length: 3 * 112 * 112 }, (_, i) => Math.cos(i * 0.11));
    const [flat, shaped] = await explainMaps(engine, pm, input, [{ kind: 'mismatch', fact: 0, mismatch: 'gradient' }], ['stage4', 'stage3'], { estimate: { mode: 'probe', k: 8, seed: 3 } });
    assert.ok(flat.note?.includes('flat'));
    const spread = Math.max(...flat.raw.data) - Math.min(...flat.raw.data);
    assert.ok(spread <= 1e-5 * Math.max(...flat.raw.data), 'the map really is constant');
    assert.equal(shaped.note, undefined);
  });

  it('detail is the positive part of the guided gradient, max over channels; guided-evidence multiplies it by the upsampled evidence', async () => {
    const pm = await prepare();
    const maps = await explainMaps(engine, pm, x, [{ kind: 'detail', fact: 5 }, { kind: 'guided-evidence', fact: 5 }, { kind: 'evidence', fact: 5 }], ['stage2']);
    const detail = maps.find((m) => m.question.kind === 'detail')!;
    const g = (await gradientsAt(engine, pm, x, ['input'], lossSeed(10, 5, 'logit'), 'guided')).get('input')!.data;
    const HW = 64 * 64;
    const expected = new Float32Array(HW).map((_, i) => Math.max(0, g[i], g[HW + i], g[2 * HW + i]));
    assert.ok(relL2(detail.raw.data, expected) < 1e-6);
    const ev = maps.find((m) => m.question.kind === 'evidence')!;
    const ge = maps.find((m) => m.question.kind === 'guided-evidence')!;
    assert.ok(relL2(ge.raw.data, detail.raw.data.map((d, i) => d * ev.up.data[i])) < 1e-6);
  });
});
