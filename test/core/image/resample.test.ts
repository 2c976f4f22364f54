import { strict as assert } from 'node:assert';
import { writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { cropRgb, resizeRgb } from '../../../core/image/resample';
import { requirePython, runPython, useTempDir } from '../io/support';

/** Deterministic pseudo-random bytes (a linear congruential generator, constants of the C standard's example rand()). */
function noise(n: number, seed = 1): Uint8Array {
  const out = new Uint8Array(n);
  let s = seed;
  for (let i = 0; i < n; i++) {
    s = (s * 1103515245 + 12345) & 0x7fffffff;
    out[i] = (s >> 16) & 255;
  }
  return out;
}

describe('core/image/resample', () => {
  const tmp = useTempDir('resample');

  it('matches a hand-computed 2× bilinear downsample (triangle filter widened ×2)', () => {
    // One row 0, 80, 160, 240 → 2 pixels. Output 0: centre 1, taps j = 0, 1, 2 with weights
    // tri(|j + 0.5 − 1|/2) = 0.75, 0.75, 0.25 (sum 1.75): (0·.75 + 80·.75 + 160·.25)/1.75 = 57.14 → 57.
    // Output 1: centre 3, taps 1, 2, 3, weights .25, .75, .75: (20 + 120 + 180)/1.75 = 182.86 → 183.
    const row = Uint8Array.from([0, 80, 160, 240].flatMap((v) => [v, v, v]));
    assert.deepEqual([...resizeRgb(row, 4, 1, 2, 1)], [57, 57, 57, 183, 183, 183]);
    // Same along y: a column.
    assert.deepEqual([...resizeRgb(row, 1, 4, 1, 2)], [57, 57, 57, 183, 183, 183]);
  });

  it('matches a hand-computed 2× bilinear upsample', () => {
    // 0, 100 → 4 pixels: centres at 0.25, 0.75, 1.25, 1.75 in input coordinates; input centres at
    // 0.5 and 1.5; tri weights give 0, 25, 75, 100 (the edge pixels clamp to the nearest input).
    const row = Uint8Array.from([0, 0, 0, 100, 100, 100]);
    assert.deepEqual([...resizeRgb(row, 2, 1, 4, 1)].filter((_, i) => i % 3 === 0), [0, 25, 75, 100]);
  });

  it('keeps constant images constant at any scale', () => {
    const img = new Uint8Array(37 * 23 * 3).fill(0);
    for (let i = 0; i < img.length; i += 3) img.set([12, 130, 251], i);
    for (const [w, h] of [[5, 7], [224, 224], [37, 1], [100, 23]]) {
      const out = resizeRgb(img, 37, 23, w, h);
      for (let i = 0; i < out.length; i += 3) assert.deepEqual([out[i], out[i + 1], out[i + 2]], [12, 130, 251]);
    }
  });

  it('agrees with Pillow Image.resize(BILINEAR) within one level', function () {
    // Reference: Pillow's resampler (Debian python3-pil). Pillow uses 22-bit fixed-point weights, we
    // use doubles, so an occasional ±1 is expected (measured: at most 1, on under 1 % of samples).
    requirePython(this, 'numpy', 'PIL');
    const cases = [[64, 48, 32, 24], [64, 48, 17, 13], [20, 30, 224, 224], [300, 200, 224, 224], [7, 5, 14, 10], [640, 480, 224, 160], [5, 3, 1, 1]];
    for (const [W, H, w, h] of cases) {
      const src = noise(W * H * 3, W * 31 + H);
      const file = path.join(tmp(), `in-${W}x${H}.bin`);
      writeFileSync(file, src);
      const pil = runPython(
        `import sys, numpy as np
from PIL import Image
a = np.fromfile(sys.argv[1], dtype=np.uint8).reshape(${H}, ${W}, 3)
sys.stdout.buffer.write(np.asarray(Image.fromarray(a).resize((${w}, ${h}), Image.BILINEAR)).tobytes())`,
        [file],
      );
      const ours = resizeRgb(src, W, H, w, h);
      let max = 0, off = 0;
      for (let i = 0; i < ours.length; i++) {
        const d = Math.abs(ours[i] - pil[i]);
        max = Math.max(max, d);
        if (d) off++;
      }
      assert.ok(max <= 1, `${W}×${H}→${w}×${h}: max diff ${max}`);
      assert.ok(off / ours.length < 0.01, `${W}×${H}→${w}×${h}: ${off} of ${ours.length} differ`);
    }
  });

  it('samples pixel centres for nearest', () => {
    const row = Uint8Array.from([10, 20, 30, 40, 50, 60].flatMap((v) => [v, v, v]));
    assert.deepEqual([...resizeRgb(row, 6, 1, 3, 1, 'nearest')].filter((_, i) => i % 3 === 0), [20, 40, 60]);
  });

  it('crops a rectangle', () => {
    const img = Uint8Array.from({ length: 4 * 3 * 3 }, (_, i) => i);
    assert.deepEqual([...cropRgb(img, 4, 1, 1, 2, 2)], [15, 16, 17, 18, 19, 20, 27, 28, 29, 30, 31, 32]);
  });
});
