/**
 * Every gradient rule against float64 central finite differences (and float64 PyTorch autograd)
 * on tiny single-op graphs. References: test-fixtures/ops/<case>/grad_fd.npy, computed by
 * test-fixtures/gen with an independent float64 implementation of each op per the ONNX spec.
 */
import { strict as assert } from 'node:assert';
import { readdirSync, readFileSync, existsSync } from 'node:fs';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { gradientsAt } from '../../../core/methods/gradient';
import { loadModel } from '../../../core/model/load';
import { readNpy } from '../../../core/io/npy';
import { FIXTURES, relL2, toNumbers } from '../../helpers';

const OPS = path.join(FIXTURES, 'ops');
// float32 forward/backward vs float64 references: 1e-4 relative L2 is ~100× float32 epsilon
// accumulated over a few ops (common practice, no source).
const TOLERANCE = 1e-4;

describe('gradient rules vs float64 finite differences (test-fixtures/ops)', () => {
  const engine = new Engine();
  after(() => engine.dispose());
  const cases = existsSync(OPS) ? readdirSync(OPS).filter((c) => existsSync(path.join(OPS, c, 'case.json'))) : [];
  it('has the per-op fixtures', () => assert.ok(cases.length > 50, `found ${cases.length} cases`));
  for (const c of cases) {
    it(`${c}`, async () => {
      const dir = path.join(OPS, c);
      const meta = JSON.parse(readFileSync(path.join(dir, 'case.json'), 'utf8'));
      const model = loadModel(path.join(dir, 'model.onnx'), { anyInput: true });
      const x = await readNpy(path.join(dir, 'x.npy'));
      const seed = await readNpy(path.join(dir, 'seed.npy'));
      const fd = await readNpy(path.join(dir, 'grad_fd.npy'));
      const torch = await readNpy(path.join(dir, 'grad_torch.npy'));
      const pm = await engine.prepare(model, meta.x_shape, { anyScores: true });
      const R = pm.scores.numClasses;
      const base = Float32Array.from(toNumbers(seed.data));
      assert.equal(base.length, R);
      const grads = await gradientsAt(engine, pm, Float32Array.from(toNumbers(x.data)), [model.input.name], { base, coef: new Float32Array(1), k: 1 });
      const g = grads.get(model.input.name)!.data;
      const eFd = relL2(g, toNumbers(fd.data));
      const eTorch = relL2(g, toNumbers(torch.data));
      assert.ok(eFd < TOLERANCE, `rel L2 vs finite differences ${eFd.toExponential(2)} (op ${meta.op}: ${meta.notes})`);
      assert.ok(eTorch < TOLERANCE, `rel L2 vs torch autograd ${eTorch.toExponential(2)}`);
    });
  }
});
