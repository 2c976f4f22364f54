import { strict as assert } from 'assert';
import { sampleCorrelation, sampleRankCorrelation } from 'simple-statistics';
import { averageRanks, mulberry32, pearson, spearman, spearmanAbs } from '../../../core/metrics';
import { UserError } from '../../../core/errors';

describe('metrics/correlation', () => {
  it('pearson matches a worked example', () => {
    // means 2.5 and 5; deviations (−1.5,−.5,.5,1.5) and (−3,−1,0,4);
    // Σdadb = 4.5+.5+0+6 = 11, Σda² = 5, Σdb² = 26 → r = 11/√130 = 0.9647638…
    assert.ok(Math.abs(pearson([1, 2, 3, 4], [2, 4, 5, 9]) - 11 / Math.sqrt(130)) < 1e-12);
  });

  it('average ranks give ties the mean of the ranks they span', () => {
    // 10 is smallest (rank 1); the two 20s share ranks 2,3 → 2.5; 30 is rank 4.
    assert.deepEqual(Array.from(averageRanks([20, 10, 30, 20])), [2.5, 1, 4, 2.5]);
  });

  it('spearman matches a worked example with ties', () => {
    // ranks (1,2.5,2.5,4) and (1,3,2,4), both of mean 2.5; Σdadb = 2.25+0+0+2.25 = 4.5,
    // Σda² = 4.5, Σdb² = 5 → ρ = 4.5/√22.5 = 3/√10 = 0.9486833…
    assert.ok(Math.abs(spearman([1, 2, 2, 3], [1, 3, 2, 4]) - 3 / Math.sqrt(10)) < 1e-12);
  });

  it('spearmanAbs ignores a sign flip that spearman sees', () => {
    const a = [-3, 1, -2, 0];
    const b = [3, -1, 2, 0];
    assert.ok(Math.abs(spearman(a, b) + 1) < 1e-12); // b = −a: perfectly reversed ranks
    assert.ok(Math.abs(spearmanAbs(a, b) - 1) < 1e-12); // |a| = |b|
  });

  it('agrees with simple-statistics sampleCorrelation and sampleRankCorrelation on random maps with ties', () => {
    // Reference: simple-statistics (general-purpose npm statistics package), midrank Spearman.
    for (let seed = 1; seed <= 5; seed++) {
      const next = mulberry32(seed);
      const a = Array.from({ length: 200 }, () => Math.round(next() * 10)); // few levels → many ties
      const b = a.map((v) => Math.round(v + 6 * next()));
      assert.ok(Math.abs(pearson(a, b) - sampleCorrelation(a, b)) < 1e-12, `pearson seed ${seed}`);
      assert.ok(Math.abs(spearman(a, b) - sampleRankCorrelation(a, b)) < 1e-12, `spearman seed ${seed}`);
      const signed = a.map((v) => v - 5);
      const other = b.map((v) => 4 - v);
      const absRef = sampleRankCorrelation(signed.map(Math.abs), other.map(Math.abs));
      assert.ok(Math.abs(spearmanAbs(signed, other) - absRef) < 1e-12, `spearmanAbs seed ${seed}`);
    }
  });

  it('is NaN for a constant map (undefined, not 0)', () => {
    assert.ok(Number.isNaN(pearson([1, 1, 1], [1, 2, 3])));
    assert.ok(Number.isNaN(spearman([1, 2, 3], [5, 5, 5])));
  });

  it('refuses maps of different sizes with a UserError', () => {
    assert.throws(() => pearson(new Float32Array(4), new Float32Array(5)), UserError);
  });
});
