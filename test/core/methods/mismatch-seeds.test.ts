/**
 * Mismatch sweeps with fewer seeds must keep DESIGN §4's statistics: the exact sweep over the
 * head's spectral basis (or centred one-hot seeds) against the definition's one-hot sweep over
 * all R classes (itself checked against the per-class loop in maps.test.ts and PyTorch in
 * maps-vs-pytorch.test.ts), and the probe designs against what they promise.
 */
import { strict as assert } from 'node:assert';
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { explainMaps, Question } from '../../../core/methods/maps';
import { sweepSeeds } from '../../../core/methods/mismatch-seeds';
import { headBasis } from '../../../core/methods/head-basis';
import { loadModel, modelFromBytes } from '../../../core/model/load';
import { decodeModelProto, encodeModelProto } from '../../../core/model/proto';
import { floatTensor } from '../../../core/model/tensor';
import { mulberry32 } from '../../../core/metrics/random';
import { readNpy } from '../../../core/io/npy';
import { FIXTURES, relL2, toNumbers } from '../../helpers';

const RESNET = path.join(FIXTURES, 'arch', 'resnet');
const BOTH: Question[] = [{ kind: 'mismatch', fact: 0 }, { kind: 'mismatch', fact: 0, mismatch: 'gradient' }];
// float32 sums of squares over different bases of the same space: 1e-4 is the project's bound
// for gradient checks (test/core/autodiff), not a published figure.
const BOUND = 1e-4;

/** The ResNet fixture with its 10-class head widened to `classes` seeded random classes (more classes than the 64 features). */
function widenedResnet(classes: number): ReturnType<typeof modelFromBytes> {
  const proto = decodeModelProto(readFileSync(path.join(RESNET, 'model.onnx')));
  const g = proto.graph!;
  const gemm = g.node!.find((n) => n.op_type === 'Gemm')!;
  const [, wName, bName] = gemm.input!;
  const w = g.initializer!.find((t) => t.name === wName)!;
  const D = Number(w.dims![1]);
  const rand = mulberry32(11);
  g.initializer = g.initializer!.filter((t) => t.name !== wName && t.name !== bName);
  g.initializer.push(floatTensor(wName, [classes, D], Float32Array.from({ length: classes * D }, () => (rand() - 0.5) * 0.3)));
  g.initializer.push(floatTensor(bName, [classes], Float32Array.from({ length: classes }, () => rand() - 0.5)));
  for (const o of g.output!) if (o.name === gemm.output![0]) o.type!.tensor_type!.shape!.dim![1] = { dim_value: classes };
  return modelFromBytes(encodeModelProto(proto), 'resnet-wide-head.onnx');
}

describe('mismatch sweep seeds (DESIGN §4)', function () {
  this.timeout(120_000);
  const engine = new Engine();
  after(() => engine.dispose());
  let x: Float32Array;
  before(async () => { x = Float32Array.from(toNumbers((await readNpy(path.join(RESNET, 'input.npy'))).data)); });

  for (const [name, model] of [['ResNet fixture, 10 classes < 64 features', () => loadModel(path.join(RESNET, 'model.onnx'))], ['ResNet with a 100-class head > 64 features', () => widenedResnet(100)]] as const) {
    it(`exact over the spectral basis equals the one-hot sweep over all classes (${name})`, async () => {
      const pm = await engine.prepare(model(), [1, 3, 64, 64]);
      const basis = headBasis(pm)!;
      assert.equal(basis.rank, Math.min(pm.scores.numClasses - 1, 64));
      for (const layer of ['stage2', 'stage3']) {
        const spectral = await explainMaps(engine, pm, x, BOTH, [layer], { estimate: { mode: 'exact' } });
        const oneHot = await explainMaps(engine, pm, x, BOTH, [layer], { estimate: { mode: 'exact' }, exactBasis: 'one-hot', budgetBytes: 4 * 1024 ** 2 });
        assert.equal(spectral[0].estimate!.seeds, basis.rank);
        assert.equal(oneHot[0].estimate!.seeds, pm.scores.numClasses);
        for (let i = 0; i < 2; i++) {
          const e = relL2(spectral[i].raw.data, oneHot[i].raw.data);
          assert.ok(e < BOUND, `${layer} ${BOTH[i].mismatch ?? 'weighted'}: rel L2 ${e}`);
          if (process.env.FACTFOIL_VERBOSE) console.log(`${name} ${layer} ${BOTH[i].mismatch ?? 'weighted'} rel L2 ${e.toExponential(2)}`);
        }
      }
    });
  }

  it('without a linear head (SqueezeNet fixture: a Conv head) exact uses centred one-hot seeds, equal to the one-hot definition', async () => {
    const pm = await engine.prepare(loadModel(path.join(FIXTURES, 'arch', 'squeezenet', 'model.onnx')), [1, 3, 66, 66]);
    assert.equal(headBasis(pm), undefined);
    assert.equal(sweepSeeds(pm, { mode: 'exact' }).used, 'centered one-hot');
    const input = Float32Array.from(toNumbers((await readNpy(path.join(FIXTURES, 'arch', 'squeezenet', 'input.npy'))).data));
    const layer = pm.layers[Math.floor(pm.layers.length / 2)].id;
    const centred = await explainMaps(engine, pm, input, BOTH, [layer], { estimate: { mode: 'exact' } });
    const oneHot = await explainMaps(engine, pm, input, BOTH, [layer], { estimate: { mode: 'exact' }, exactBasis: 'one-hot' });
    for (let i = 0; i < 2; i++) assert.ok(relL2(centred[i].raw.data, oneHot[i].raw.data) < BOUND, `${relL2(centred[i].raw.data, oneHot[i].raw.data)}`);
  });

  it('deflated probes with K ≥ rank are the exact sweep; spectral top-k is a lower bound that grows with k', async () => {
    const pm = await engine.prepare(widenedResnet(100), [1, 3, 64, 64]);
    const exact = await explainMaps(engine, pm, x, BOTH, ['stage2'], { estimate: { mode: 'exact' } });
    const full = await explainMaps(engine, pm, x, BOTH, ['stage2'], { estimate: { mode: 'probe', k: 80, seed: 5, design: 'deflated' } });
    assert.equal(full[0].estimate!.seeds, 64);
    for (let i = 0; i < 2; i++) assert.ok(relL2(full[i].raw.data, exact[i].raw.data) < BOUND);
    // `gradient` = Σ_k |μ|·σ²: σ² from the top k directions misses a sum of squares, so it can only be lower.
    let previous: Float32Array | undefined;
    for (const k of [4, 16, 48]) {
      const m = (await explainMaps(engine, pm, x, [BOTH[1]], ['stage2'], { estimate: { mode: 'probe', k, seed: 1, design: 'spectral' } }))[0].raw.data;
      const ex = exact[1].raw.data;
      for (let i = 0; i < m.length; i++) {
        assert.ok(m[i] <= ex[i] * (1 + 1e-4) + 1e-12, `k ${k}: ${m[i]} > exact ${ex[i]} at ${i}`);
        if (previous) assert.ok(previous[i] <= m[i] * (1 + 1e-4) + 1e-12, `k ${k} below a smaller k at ${i}`);
      }
      previous = m;
    }
  });

  it('deflated and centred probes are unbiased: their mean over seeds approaches exact', async () => {
    const pm = await engine.prepare(widenedResnet(100), [1, 3, 64, 64]);
    const exact = (await explainMaps(engine, pm, x, [BOTH[1]], ['stage3'], { estimate: { mode: 'exact' } }))[0].raw.data;
    for (const design of ['deflated', 'centered'] as const) {
      const mean = new Float64Array(exact.length);
      let single = 0;
      const n = 12;
      for (let seed = 1; seed <= n; seed++) {
        const m = (await explainMaps(engine, pm, x, [BOTH[1]], ['stage3'], { estimate: { mode: 'probe', k: 16, seed, design } }))[0].raw.data;
        single += relL2(m, exact) / n;
        for (let i = 0; i < m.length; i++) mean[i] += m[i] / n;
      }
      // The `gradient` map is linear in σ², so averaging n unbiased estimates divides the error by ≈ √n.
      const averaged = relL2(mean, exact);
      assert.ok(averaged < single / 2, `${design}: mean of ${n} has rel L2 ${averaged}, one estimate ${single}`);
    }
  });
});
