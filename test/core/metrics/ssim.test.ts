import { strict as assert } from 'assert';
import { ssim } from '../../../core/metrics';

const W = 24;
const H = 20;

/** The closed-form test pattern of make-references.py: a Gaussian blob plus a texture. */
function pattern(cx: number, cy: number, phase: number): Float32Array {
  const a = new Float32Array(W * H);
  for (let y = 0; y < H; y++) {
    for (let x = 0; x < W; x++) {
      a[y * W + x] = Math.exp(-((x - cx) ** 2 + (y - cy) ** 2) / 18) + 0.3 * Math.sin(0.7 * x + phase) * Math.cos(0.5 * y);
    }
  }
  return a;
}

describe('metrics/ssim (Wang et al., IEEE TIP 2004)', () => {
  it('is 1 for identical maps', () => {
    const a = pattern(10, 8, 0);
    assert.ok(Math.abs(ssim(a, a, W, H) - 1) < 1e-12);
  });

  it('is 1 for two constant maps, by the formula with C1, C2', () => {
    // Scaled to [0,1] a constant map is all 0: μ = σ = 0, so SSIM = (C1·C2)/(C1·C2) = 1.
    assert.equal(ssim(new Float32Array(W * H).fill(3), new Float32Array(W * H).fill(-7), W, H), 1);
  });

  it('ignores the units of each map (own min–max scaling)', () => {
    const a = pattern(10, 8, 0);
    const scaled = a.map((v) => 40 * v + 5);
    assert.ok(Math.abs(ssim(a, scaled, W, H) - 1) < 1e-6);
  });

  it('is strongly negative for a map against its negative', () => {
    const a = pattern(10, 8, 0);
    const value = ssim(a, a.map((v) => -v), W, H);
    assert.ok(value < -0.5, `got ${value}`);
  });

  it('matches scikit-image structural_similarity (make-references.py)', () => {
    // Reference: skimage.metrics.structural_similarity(gaussian_weights=True, sigma=1.5,
    // use_sample_covariance=False, data_range=1) on the min–max scaled maps: 0.6114288621105832
    // and −0.7481046588855116 for the negative (float64 there, float32 inputs here).
    const a = pattern(10, 8, 0);
    assert.ok(Math.abs(ssim(a, pattern(13, 9, 0.4), W, H) - 0.6114288621105832) < 1e-6);
    assert.ok(Math.abs(ssim(a, a.map((v) => -v), W, H) - -0.7481046588855116) < 1e-6);
  });

  it('drops below 1 for a shifted copy and keeps dropping as the shift grows', () => {
    const clean = pattern(10, 8, 0);
    // pattern(10 + dx, 8, −0.7·dx)(x, y) = pattern(10, 8, 0)(x − dx, y): the same map moved dx pixels right.
    const scores = [1, 2, 3, 4].map((dx) => ssim(clean, pattern(10 + dx, 8, -0.7 * dx), W, H));
    assert.ok(scores[0] < 1);
    for (let i = 1; i < scores.length; i++) assert.ok(scores[i] < scores[i - 1], `shift ${i + 1}: ${scores}`);
  });

  it('works on a map smaller than the window (7×7: window shrunk to 7)', () => {
    const a = new Float32Array(49).map((_, i) => i % 7);
    assert.ok(Math.abs(ssim(a, a, 7, 7) - 1) < 1e-12);
    assert.ok(ssim(a, a.map((v, i) => v + ((i * 37) % 5)), 7, 7) < 1);
  });
});
