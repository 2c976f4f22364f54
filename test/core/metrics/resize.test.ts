import { strict as assert } from 'assert';
import * as path from 'path';
import * as ort from 'onnxruntime-node';
import { resizeBilinear } from '../../../core/metrics';

function near(actual: ArrayLike<number>, expected: number[], tol = 1e-6): void {
  assert.equal(actual.length, expected.length);
  for (let i = 0; i < expected.length; i++) assert.ok(Math.abs(actual[i] - expected[i]) < tol, `at ${i}: ${actual[i]} vs ${expected[i]}`);
}

describe('metrics/resizeBilinear (ONNX Resize, mode linear, half_pixel)', () => {
  // ONNX operator spec, Resize: x_original = (x_resized + 0.5) / scale − 0.5, clamped to the edge.
  it('upsamples 2×2 → 4×4 as the spec formula gives', () => {
    // scale 2: x_original = −0.25→0, 0.25, 0.75, 1.25→1 (same for y).
    // Row y=0: 0, 0.25, 0.75, 1; each next row adds 2·y_frac: +0.5, +1.5, +2.
    near(resizeBilinear(new Float32Array([0, 1, 2, 3]), 2, 2, 4, 4), [
      0, 0.25, 0.75, 1,
      0.5, 0.75, 1.25, 1.5,
      1.5, 1.75, 2.25, 2.5,
      2, 2.25, 2.75, 3,
    ]);
  });

  it('resizes by a non-integer factor 3 → 5', () => {
    // scale 5/3: x_original = −0.2→0, 0.4, 1.0, 1.6, 2.2→2, over [0, 10, 30]:
    // 0, 0.4·10 = 4, 10, 10 + 0.6·20 = 22, 30.
    near(resizeBilinear(new Float32Array([0, 10, 30]), 3, 1, 5, 1), [0, 4, 10, 22, 30]);
  });

  it('downsamples 4 → 2 by averaging neighbours', () => {
    // scale 1/2: x_original = 0.5, 2.5 → (0+1)/2, (2+3)/2.
    near(resizeBilinear(new Float32Array([0, 1, 2, 3]), 4, 1, 2, 1), [0.5, 2.5]);
  });

  it('agrees with onnxruntime running the Resize fixture (linear, half_pixel, ×2)', async () => {
    // Reference: onnxruntime-node on test-fixtures/ops/resize_linear_half_pixel/model.onnx, x [1,2,3,4] → y [1,2,6,8].
    const model = path.join(__dirname, '../../../test-fixtures/ops/resize_linear_half_pixel/model.onnx');
    const session = await ort.InferenceSession.create(model);
    const x = new Float32Array(24).map((_, i) => Math.sin(1.3 * i) * 5 + (i % 4));
    const out = await session.run({ x: new ort.Tensor('float32', x, [1, 2, 3, 4]) });
    const y = out.y.data as Float32Array;
    for (let c = 0; c < 2; c++) {
      near(resizeBilinear(x.subarray(c * 12, (c + 1) * 12), 4, 3, 8, 6), Array.from(y.subarray(c * 48, (c + 1) * 48)), 1e-5);
    }
  });
});
