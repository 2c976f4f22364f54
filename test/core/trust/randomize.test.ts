/**
 * Weight randomization for the sanity check (Adebayo et al., NeurIPS 2018): shapes kept, exactly
 * the chosen initializers changed, deterministic per seed, and mean/std matched — the moments
 * checked with simple-statistics, an independent general-purpose package.
 */
import { strict as assert } from 'node:assert';
import * as path from 'node:path';
import * as ss from 'simple-statistics';
import { Engine } from '../../../core/engine/engine';
import { loadModel, LoadedModel } from '../../../core/model/load';
import { tensorValues } from '../../../core/model/tensor';
import { prepareRandomized, randomizedModel, stageWeightBlocks } from '../../../core/trust/randomize';
import { FIXTURES } from '../../helpers';

const DEMO = path.join(FIXTURES, 'parts', 'parts-sorter.onnx');

function values(m: LoadedModel, name: string): Float32Array {
  return tensorValues(m.graph.initializers.get(name)!) as Float32Array;
}

describe('randomizedModel', () => {
  const model = loadModel(DEMO);
  const chosen = ['head.weight', 'head.bias', 'onnx::Conv_146'];
  const rnd = randomizedModel(model, chosen, 11);

  it('keeps every initializer shape and changes exactly the chosen ones', () => {
    assert.equal(rnd.graph.initializers.size, model.graph.initializers.size);
    for (const [name, t] of model.graph.initializers) {
      const r = rnd.graph.initializers.get(name)!;
      assert.deepEqual(r.dims, t.dims, name);
      const a = values(model, name);
      const b = values(rnd, name);
      assert.equal(b.length, a.length);
      let same = 0;
      for (let i = 0; i < a.length; i++) if (a[i] === b[i]) same++;
      if (chosen.includes(name)) assert.ok(same <= 1, `${name}: ${same} of ${a.length} values unchanged`);
      else assert.equal(same, a.length, `${name} changed`);
    }
    assert.notEqual(rnd.sha256, model.sha256);
  });

  it('matches the original mean and population standard deviation (checked with simple-statistics)', () => {
    for (const name of chosen) {
      const a = Array.from(values(model, name));
      const b = Array.from(values(rnd, name));
      const sdA = ss.standardDeviation(a);
      assert.ok(Math.abs(ss.mean(b) - ss.mean(a)) < 1e-5 * Math.max(1, sdA) + 1e-6, `${name} mean`);
      assert.ok(Math.abs(ss.standardDeviation(b) / sdA - 1) < 1e-4, `${name} std`);
      // Not a permutation of the old values: new draws (an ordering-only change would keep the histogram).
      assert.notDeepEqual([...b].sort(), [...a].sort());
    }
  });

  it('is deterministic for a seed, different across seeds, and a tensor draws the same values whatever else is chosen', () => {
    assert.equal(randomizedModel(model, chosen, 11).sha256, rnd.sha256);
    assert.notEqual(randomizedModel(model, chosen, 12).sha256, rnd.sha256);
    const alone = randomizedModel(model, ['onnx::Conv_146'], 11);
    assert.deepEqual(values(alone, 'onnx::Conv_146'), values(rnd, 'onnx::Conv_146'));
  });

  it('refuses unknown initializer names with the model path', () => {
    assert.throws(() => randomizedModel(model, ['no-such'], 1), /parts-sorter\.onnx: no initializer named 'no-such'/);
  });

  it('gives a model onnxruntime runs, with other scores for the same input', async () => {
    const engine = new Engine();
    try {
      const x = new Float32Array(3 * 112 * 112).map((_, i) => Math.sin(i));
      const a = await engine.scores(await engine.prepare(model), x);
      const b = await engine.scores(await engine.prepare(rnd), x);
      assert.equal(b.length, 8);
      assert.ok(b.every(Number.isFinite));
      assert.ok(a.some((v, i) => Math.abs(v - b[i]) > 1e-3));
    } finally {
      await engine.dispose();
    }
  });
});

describe('prepareRandomized', () => {
  it('reuses the shape facts yet runs the randomized weights: the same scores as a fresh probe', async () => {
    const engine = new Engine();
    try {
      const model = loadModel(DEMO);
      const pm = await engine.prepare(model);
      const rnd = randomizedModel(model, ['head.weight', 'onnx::Conv_146'], 5);
      const x = new Float32Array(3 * 112 * 112).map((_, i) => Math.cos(i / 7));
      const viaFacts = await engine.scores(prepareRandomized(pm, rnd), x);
      const probed = await engine.scores(await engine.prepare(rnd), x);
      assert.deepEqual(Array.from(viaFacts), Array.from(probed));
      assert.ok(Array.from(await engine.scores(pm, x)).some((v, i) => Math.abs(v - probed[i]) > 1e-3));
    } finally {
      await engine.dispose();
    }
  });
});

describe('stageWeightBlocks', () => {
  it('cuts the demo ResNet at its stages, scores first, covering every weight once', async () => {
    const engine = new Engine();
    try {
      const model = loadModel(DEMO);
      const pm = await engine.prepare(model);
      const blocks = stageWeightBlocks(pm);
      // The fixture's architecture (test-fixtures/parts/gen): stem, 4 residual stages, GAP, linear head.
      // Each block is named after the tensor it computes: the head computes the scores ('logits').
      assert.deepEqual(blocks.map((b) => b.stage), ['logits', 'stage4', 'stage3', 'stage2', 'stage1']);
      assert.deepEqual(blocks[0].initializers.sort(), ['head.bias', 'head.weight']);
      // stage4's block (from stage3 up) holds stages.3's conv1, conv2 and shortcut weights and biases.
      assert.deepEqual(blocks[1].initializers.sort(), ['onnx::Conv_143', 'onnx::Conv_144', 'onnx::Conv_146', 'onnx::Conv_147', 'onnx::Conv_149', 'onnx::Conv_150']);
      // The lowest block (computing stage1 from the image) holds the stem and stages.0.
      assert.ok(blocks[4].initializers.length >= 6, blocks[4].initializers.join());
      const all = blocks.flatMap((b) => b.initializers);
      assert.equal(new Set(all).size, all.length, 'a weight in two blocks');
      assert.deepEqual(new Set(all), new Set(model.graph.initializers.keys()));
    } finally {
      await engine.dispose();
    }
  });
});
