/**
 * Sweep sessions keep their memory arena between chunk runs (core/engine/runtime.ts), so the
 * engine lets only the latest sweep's backward session live: sweeping another layer releases the
 * previous one, and sweeping the first layer again makes it anew with the same maps.
 */
import { strict as assert } from 'node:assert';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { explainMaps } from '../../../core/methods/maps';
import { loadModel } from '../../../core/model/load';
import { readNpy } from '../../../core/io/npy';
import { bytesPerSeed } from '../../../core/engine/budget';
import { FIXTURES, toNumbers } from '../../helpers';

const RESNET = path.join(FIXTURES, 'arch', 'resnet');

describe('sweep sessions', () => {
  const engine = new Engine();
  after(() => engine.dispose());

  it('only the latest split sweep holds a backward session; a released one comes back with the same map, also mid-sweep', async () => {
    const pm = await engine.prepare(loadModel(path.join(RESNET, 'model.onnx')), [1, 3, 64, 64]);
    const x = Float32Array.from(toNumbers((await readNpy(path.join(RESNET, 'input.npy'))).data));
    // Runs of 4 seed rows: 10 classes take several runs, so each sweep is a split plan.
    const sweep = (layer: string) => explainMaps(engine, pm, x, [{ kind: 'mismatch', fact: 0 }], [layer], { budgetBytes: 4 * bytesPerSeed(pm, [layer]) });
    const first = await sweep('stage3');
    assert.equal(await engine.sweepSessions(), 1);
    await sweep('stage2');
    assert.equal(await engine.sweepSessions(), 1, 'the stage3 sweep session is released when stage2 sweeps');
    const again = await sweep('stage3');
    assert.equal(await engine.sweepSessions(), 1);
    assert.deepEqual(Array.from(again[0].raw.data), Array.from(first[0].raw.data));

    // Two sweeps at once take the session from each other chunk by chunk; a release waits for
    // the run in flight, so both finish with the maps they give alone.
    const [a, b] = await Promise.all([sweep('stage3'), sweep('stage2')]);
    const alone2 = await sweep('stage2');
    assert.deepEqual(Array.from(a[0].raw.data), Array.from(first[0].raw.data));
    assert.deepEqual(Array.from(b[0].raw.data), Array.from(alone2[0].raw.data));
    assert.equal(await engine.sweepSessions(), 1);
  });
});
