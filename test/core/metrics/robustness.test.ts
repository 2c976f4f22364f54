import { strict as assert } from 'assert';
import { addGaussianNoise, mapDrift, pearson, spearman, ssim } from '../../../core/metrics';

describe('metrics/mapDrift', () => {
  const w = 24;
  const h = 20;
  const clean = new Float32Array(w * h).map((_, i) => Math.exp(-(((i % w) - 10) ** 2 + (Math.floor(i / w) - 8) ** 2) / 18));

  it('reports the three similarity measures of the sanity check', () => {
    const noisy = addGaussianNoise(clean, 0.05, 1);
    assert.deepEqual(mapDrift(clean, noisy, w, h), {
      spearman: spearman(clean, noisy), ssim: ssim(clean, noisy, w, h), pearson: pearson(clean, noisy),
    });
    const same = mapDrift(clean, clean, w, h);
    assert.ok(Math.abs(same.spearman - 1) < 1e-12 && Math.abs(same.ssim - 1) < 1e-12 && Math.abs(same.pearson - 1) < 1e-12);
  });

  it('moves further from 1 as the perturbation grows', () => {
    const drifts = [0.01, 0.1, 0.5].map((sigma) => mapDrift(clean, addGaussianNoise(clean, sigma, 5), w, h));
    for (const key of ['spearman', 'ssim', 'pearson'] as const) {
      assert.ok(drifts[0][key] > drifts[1][key] && drifts[1][key] > drifts[2][key], `${key}: ${drifts.map((d) => d[key])}`);
    }
  });
});
