/**
 * Layers of shifted-window transformers (test-fixtures/variants/shifted_window_opset*, made by
 * test-fixtures/gen/make_variants_windowed.py from torchvision's SwinTransformer): their token
 * tensors are [1,H,W,C] (channels last), so the map grid is [H,W] and the channel axis is the
 * last one; the cyclically shifted and window-partitioned tensors in between sit off the image
 * grid and are not offered as layers.
 */
import { strict as assert } from 'node:assert';
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { explainMaps } from '../../../core/methods/maps';
import { gradientsAt, lossSeed } from '../../../core/methods/gradient';
import { loadModel } from '../../../core/model/load';
import { readNpy } from '../../../core/io/npy';
import { bytesPerSeed } from '../../../core/engine/budget';
import { FIXTURES, relL2, toNumbers } from '../../helpers';

const DIR = path.join(FIXTURES, 'variants');

interface Row { name: string; model: string; input: string; checks: { layer: string; loss: string; target: number; grad: string }[]; token_grids: Record<string, [number, number]> }

describe('shifted-window transformer layers (channels-last token grids)', function () {
  this.timeout(60_000);
  const engine = new Engine();
  after(() => engine.dispose());
  const rows: Row[] = JSON.parse(readFileSync(path.join(DIR, 'refs.json'), 'utf8')).variants.filter((v: { name: string }) => v.name.startsWith('shifted_window'));
  it('has the fixtures (opset 17 and 12)', () => assert.deepEqual(rows.map((r) => r.name).sort(), ['shifted_window_opset12', 'shifted_window_opset17']));

  for (const r of rows) {
    it(`${r.name}: the stage outputs are token grids [H,W] read from [1,H,W,C]; shifted and partitioned tensors are not layers`, async () => {
      const model = loadModel(path.join(DIR, r.model));
      const pm = await engine.prepare(model, [1, 3, 32, 32]);
      for (const [id, grid] of Object.entries(r.token_grids)) {
        const l = pm.layers.find((x) => x.id === id);
        assert.ok(l, `${id} is a layer`);
        assert.equal(l!.kind, 'tokens');
        assert.deepEqual(l!.grid, grid);
        assert.deepEqual(l!.shape.slice(0, 2), grid);
      }
      // Every token layer on a channels-last grid has the grid of its own H and W.
      for (const l of pm.layers) if (l.kind === 'tokens' && l.shape.length === 3) assert.deepEqual(l.grid, l.shape.slice(0, 2), l.id);
      // The cyclic shift (torch.roll) is exported as Slice pieces joined by a Concat along H or W: not a layer.
      const rolled = model.graph.nodes.filter((n) => n.opType === 'Concat' && [1, 2, -3, -2].includes(Number(n.attrs.get('axis')))).map((n) => n.outputs[0]);
      assert.ok(rolled.length >= 2, 'the export has the cyclic shifts');
      for (const t of rolled) assert.ok(!pm.layers.some((l) => l.id === t), `shifted tensor ${t} is offered as a layer`);
      // Window-partitioned tensors ([windows, tokens, C]) have no batch of 1 and are never layers either.
      assert.ok(pm.layers.filter((l) => l.isStage).some((l) => l.grid.join() === '8,8'), 'a stage on the 8x8 grid after patch merging');
    });
  }

  it('Grad-CAM at a channels-last stage equals the formula on PyTorch float64 gradients (reference) and the activations', async () => {
    // Grad-CAM (Selvaraju et al., ICCV 2017): α_c = mean over the grid of ∂s/∂A_c; map = ReLU(Σ_c α_c A_c), here with A[h,w,c].
    const r = rows.find((x) => x.name === 'shifted_window_opset17')!;
    const pm = await engine.prepare(loadModel(path.join(DIR, r.model)), [1, 3, 32, 32]);
    const x = Float32Array.from(toNumbers((await readNpy(path.join(DIR, r.input))).data));
    for (const layer of ['stage1', 'stage2']) {
      const c = r.checks.find((k) => k.layer === layer && k.loss === 'logit')!;
      const g = toNumbers((await readNpy(path.join(DIR, c.grad))).data);
      const [H, W, C] = pm.layers.find((l) => l.id === layer)!.shape;
      const A = (await engine.activations(pm, x, [layer])).get(layer)!;
      const alpha = new Float64Array(C);
      for (let i = 0; i < H * W; i++) for (let k = 0; k < C; k++) alpha[k] += g[i * C + k] / (H * W);
      const expected = new Float64Array(H * W);
      for (let i = 0; i < H * W; i++) { let s = 0; for (let k = 0; k < C; k++) s += alpha[k] * A[i * C + k]; expected[i] = Math.max(s, 0); }
      const [m] = await explainMaps(engine, pm, x, [{ kind: 'evidence', fact: c.target }], [layer]);
      assert.equal(m.raw.width, W);
      assert.equal(m.raw.height, H);
      assert.ok(relL2(m.raw.data, expected) < 1e-4, `${layer}: ${relL2(m.raw.data, expected)}`);
    }
  });

  it('exact mismatch at a channels-last stage equals the per-class loop of single-seed gradients (DESIGN §4 statistics)', async () => {
    const r = rows.find((x) => x.name === 'shifted_window_opset12')!;
    const pm = await engine.prepare(loadModel(path.join(DIR, r.model)), [1, 3, 32, 32]);
    const x = Float32Array.from(toNumbers((await readNpy(path.join(DIR, r.input))).data));
    const layer = 'stage2', R = pm.scores.numClasses;
    const [H, W, C] = pm.layers.find((l) => l.id === layer)!.shape;
    const A = (await engine.activations(pm, x, [layer])).get(layer)!;
    const G: Float32Array[] = [];
    for (let k = 0; k < R; k++) G.push((await gradientsAt(engine, pm, x, [layer], lossSeed(R, k, 'ce'))).get(layer)!.data);
    const gradient = new Float64Array(H * W), weighted = new Float64Array(H * W);
    for (let i = 0; i < H * W; i++) for (let k = 0; k < C; k++) {
      const j = i * C + k;
      let s = 0; for (let q = 0; q < R; q++) s += G[q][j];
      const mu = s / R;
      let v = 0; for (let q = 0; q < R; q++) v += (G[q][j] - mu) ** 2;
      v /= R; // population variance
      gradient[i] += Math.abs(mu) * v;
      weighted[i] += Math.abs(mu * v * A[j]);
    }
    const maps = await explainMaps(engine, pm, x, [{ kind: 'mismatch', fact: 0 }, { kind: 'mismatch', fact: 0, mismatch: 'gradient' }], [layer], { budgetBytes: 4 * bytesPerSeed(pm, [layer]) });
    assert.ok(relL2(maps[0].raw.data, weighted) < 1e-4, `weighted ${relL2(maps[0].raw.data, weighted)}`);
    assert.ok(relL2(maps[1].raw.data, gradient) < 1e-4, `gradient ${relL2(maps[1].raw.data, gradient)}`);
  });
});
