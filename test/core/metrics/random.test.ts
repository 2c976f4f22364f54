import { strict as assert } from 'assert';
import { addGaussianNoise, gaussianSampler, mulberry32, randomMap } from '../../../core/metrics';

// Statistical checks against the known moments of the uniform and normal distributions;
// tolerances are several standard errors wide for n = 100 000 (stated beside each).
describe('metrics/random', () => {
  const n = 100_000;

  it('mulberry32 is reproducible and uniform on [0,1)', () => {
    const a = mulberry32(7);
    const b = mulberry32(7);
    const counts = new Array(10).fill(0);
    let sum = 0;
    for (let i = 0; i < n; i++) {
      const u = a();
      assert.equal(u, b());
      assert.ok(u >= 0 && u < 1);
      sum += u;
      counts[Math.floor(u * 10)]++;
    }
    assert.ok(Math.abs(sum / n - 0.5) < 0.005); // standard error 0.289/√n ≈ 0.0009
    const chi2 = counts.reduce((s, c) => s + (c - n / 10) ** 2 / (n / 10), 0);
    assert.ok(chi2 < 27.9, `χ² = ${chi2}`); // 9 degrees of freedom: P(χ² > 27.9) ≈ 0.001
    assert.notEqual(mulberry32(8)(), mulberry32(7)());
  });

  it('Box–Muller draws have mean 0, variance 1, and 68.27 % within one sd', () => {
    const z = gaussianSampler(3);
    let sum = 0;
    let ss = 0;
    let within = 0;
    for (let i = 0; i < n; i++) {
      const v = z();
      sum += v;
      ss += v * v;
      if (Math.abs(v) < 1) within++;
    }
    assert.ok(Math.abs(sum / n) < 0.015); // standard error 1/√n ≈ 0.0032
    assert.ok(Math.abs(ss / n - 1) < 0.02); // standard error √(2/n) ≈ 0.0045
    assert.ok(Math.abs(within / n - 0.682689) < 0.007); // standard error ≈ 0.0015
  });

  it('addGaussianNoise adds noise of the requested sd, reproducibly, without touching the input', () => {
    const input = new Float32Array(n).fill(2);
    const noisy = addGaussianNoise(input, 0.25, 11);
    assert.deepEqual(addGaussianNoise(input, 0.25, 11), noisy);
    assert.notDeepEqual(addGaussianNoise(input, 0.25, 12), noisy);
    assert.equal(input[0], 2);
    let ss = 0;
    for (const v of noisy) ss += (v - 2) ** 2;
    assert.ok(Math.abs(Math.sqrt(ss / n) - 0.25) < 0.003);
  });

  it('randomMap is reproducible from the seed', () => {
    assert.deepEqual(randomMap(5, 3, 42), randomMap(5, 3, 42));
    assert.equal(randomMap(5, 3, 42).length, 15);
  });
});
