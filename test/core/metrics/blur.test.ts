import { strict as assert } from 'assert';
import { gaussianBlurInput } from '../../../core/metrics';
import { reflectIndex } from '../../../core/metrics/blur';

describe('metrics/gaussianBlurInput', () => {
  it('reflects indices without repeating the edge (… c b | a b c d | c b …)', () => {
    assert.deepEqual([-3, -2, -1, 0, 1, 2, 3, 4, 5, 6].map((i) => reflectIndex(i, 4)), [3, 2, 1, 0, 1, 2, 3, 2, 1, 0]);
  });

  it('matches scipy.ndimage.gaussian_filter(mode="mirror", truncate=3) (make-references.py)', () => {
    // Reference: scipy 1.10 on the 6×5 image (3x + 7y) mod 5, σ = 1.2 (radius int(3·1.2 + 0.5) = 4 = ⌈3σ⌉).
    const expected = [1.6007065271035072, 1.6758172278768093, 1.902418207973707, 2.1741640491435454, 2.2979796502637946, 2.298535202380779, 1.737160521998882, 1.7558765523203812, 1.8745896072803014, 2.0944508876326102, 2.2574030127582354, 2.29819935801806, 2.049675262785658, 1.9782576758976416, 1.8828659037721942, 1.9327246962607012, 2.0924347551000197, 2.177758675153228, 2.290703820580177, 2.2057252427037075, 1.990822034632187, 1.8290151302503679, 1.8639193181300726, 1.9303327279871505, 2.3575972821899556, 2.2919726794257524, 2.063244587740252, 1.807589876554176, 1.7582230390639753, 1.8003423522417314];
    const img = new Float32Array(30);
    for (let y = 0; y < 5; y++) for (let x = 0; x < 6; x++) img[y * 6 + x] = (3 * x + 7 * y) % 5;
    const got = gaussianBlurInput(img, 6, 5, 1, 'NCHW', 1.2);
    for (let i = 0; i < 30; i++) assert.ok(Math.abs(got[i] - expected[i]) < 1e-5, `pixel ${i}: ${got[i]} vs ${expected[i]}`);
  });

  it('blurs each channel on its own, the same in NCHW and NHWC', () => {
    const w = 5;
    const h = 4;
    const nchw = new Float32Array(3 * w * h).map((_, i) => Math.sin(i) * (1 + Math.floor(i / (w * h))));
    const nhwc = new Float32Array(nchw.length);
    for (let c = 0; c < 3; c++) for (let p = 0; p < w * h; p++) nhwc[p * 3 + c] = nchw[c * w * h + p];
    const a = gaussianBlurInput(nchw, w, h, 3, 'NCHW', 0.8);
    const b = gaussianBlurInput(nhwc, w, h, 3, 'NHWC', 0.8);
    for (let c = 0; c < 3; c++) {
      const single = gaussianBlurInput(nchw.subarray(c * w * h, (c + 1) * w * h), w, h, 1, 'NCHW', 0.8);
      for (let p = 0; p < w * h; p++) {
        assert.equal(a[c * w * h + p], single[p]);
        assert.equal(b[p * 3 + c], single[p]);
      }
    }
  });

  it('keeps a constant image constant and σ = 0 is the identity', () => {
    const flat = gaussianBlurInput(new Float32Array(12).fill(0.7), 4, 3, 1, 'NCHW', 2);
    for (const v of flat) assert.ok(Math.abs(v - 0.7) < 1e-6);
    const x = new Float32Array([1, 5, 2, 8]);
    assert.deepEqual(gaussianBlurInput(x, 2, 2, 1, 'NHWC', 0), x);
  });
});
