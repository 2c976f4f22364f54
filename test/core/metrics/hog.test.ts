import { strict as assert } from 'assert';
import { hogFeatures, hogPearson } from '../../../core/metrics';

/** 16×16 step edge: 0 left of column 8, 1 from it (vertical) or the same by rows (horizontal). */
function stepEdge(vertical: boolean): Float32Array {
  const a = new Float32Array(256);
  for (let y = 0; y < 16; y++) for (let x = 0; x < 16; x++) a[y * 16 + x] = (vertical ? x : y) >= 8 ? 1 : 0;
  return a;
}

describe('metrics/hog (Dalal & Triggs, CVPR 2005)', () => {
  const opts = { cellSize: 8, blockSize: 2, minSide: 16 };

  it('matches a worked example: a vertical step edge', () => {
    // [−1,0,1] gives gx = 1 at columns 7 and 8 (I(8)−I(6), I(9)−I(7)), gy = 0, so θ = 0°, which lies
    // halfway between the bin centres 170° and 10°: each pixel votes 0.5 into bin 0 and bin 8.
    // Cells of 8×8: column 7 is in the left cells, column 8 in the right ones; 8 rows each →
    // every cell holds 4 in bin 0 and 4 in bin 8. One 2×2 block: 8 entries of 4, norm √128;
    // 4/√128 = 0.354 > 0.2 → clipped to 0.2, renormalised: 0.2/√(8·0.04) = 1/√8 each.
    const f = hogFeatures(stepEdge(true), 16, 16, opts);
    assert.equal(f.length, 4 * 9);
    for (let cell = 0; cell < 4; cell++) {
      for (let bin = 0; bin < 9; bin++) {
        const expected = bin === 0 || bin === 8 ? 1 / Math.sqrt(8) : 0;
        assert.ok(Math.abs(f[cell * 9 + bin] - expected) < 1e-6, `cell ${cell} bin ${bin}: ${f[cell * 9 + bin]}`);
      }
    }
  });

  it('puts a horizontal edge (θ = 90°) wholly into the 90° bin', () => {
    // Bin centres 10°, 30°, …, 170°: 90° is the centre of bin 4; the same arithmetic as above with
    // one bin of 8 per cell → 4 entries of 8 → 8/16 = 0.5 > 0.2 → clipped, renormalised → 0.5.
    const f = hogFeatures(stepEdge(false), 16, 16, opts);
    for (let cell = 0; cell < 4; cell++) assert.ok(Math.abs(f[cell * 9 + 4] - 0.5) < 1e-6);
  });

  it('hogPearson is 1 for the same map in other units, below 0 for orthogonal edges', () => {
    const v = stepEdge(true);
    assert.ok(Math.abs(hogPearson(v, v.map((x) => 3 * x - 1), 16, 16, opts) - 1) < 1e-9);
    assert.ok(hogPearson(v, stepEdge(false), 16, 16, opts) < 0);
  });

  it('upsamples a 7×7 layer map before taking cells (default minSide 32 → ×5 = 35×35)', () => {
    const blob = new Float32Array(49).map((_, i) => Math.exp(-(((i % 7) - 3) ** 2 + (Math.floor(i / 7) - 3) ** 2) / 4));
    // 35×35 holds 4×4 cells of 8 px → 3×3 blocks of 2×2 cells × 9 bins = 324 values.
    assert.equal(hogFeatures(blob, 7, 7).length, 324);
    const moved = new Float32Array(49).map((_, i) => Math.exp(-(((i % 7) - 1) ** 2 + (Math.floor(i / 7) - 4) ** 2) / 4));
    assert.ok(hogPearson(blob, blob, 7, 7) > 0.999999);
    assert.ok(hogPearson(blob, moved, 7, 7) < 0.9);
  });
});
