import { strict as assert } from 'assert';
import { pixelOrder } from '../../../core/metrics';

describe('metrics/pixelOrder', () => {
  it('sorts most salient first, ties in index order, NaN last', () => {
    // values 0.2 0.9 0.2 0.5 NaN 0.9 → 0.9 (1, 5), 0.5 (3), 0.2 (0, 2), NaN (4)
    assert.deepEqual(Array.from(pixelOrder(new Float32Array([0.2, 0.9, 0.2, 0.5, NaN, 0.9]))), [1, 5, 3, 0, 2, 4]);
  });
});
