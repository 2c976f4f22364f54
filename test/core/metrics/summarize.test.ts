import { strict as assert } from 'assert';
import { max, mean, min, sampleStandardDeviation } from 'simple-statistics';
import { mulberry32, summarize } from '../../../core/metrics';

describe('metrics/summarize', () => {
  it('matches a worked example', () => {
    // mean 2.5; Σ(v−2.5)² = 2.25+.25+.25+2.25 = 5; sample sd √(5/3).
    const s = summarize([1, 2, 3, 4]);
    assert.equal(s.mean, 2.5);
    assert.ok(Math.abs(s.sd - Math.sqrt(5 / 3)) < 1e-12);
    assert.deepEqual([s.n, s.min, s.max, s.skipped], [4, 1, 4, 0]);
  });

  it('agrees with simple-statistics mean / sampleStandardDeviation / min / max', () => {
    const next = mulberry32(9);
    const values = Array.from({ length: 57 }, () => next() * 3 - 1);
    const s = summarize(values);
    assert.ok(Math.abs(s.mean - mean(values)) < 1e-12);
    assert.ok(Math.abs(s.sd - sampleStandardDeviation(values)) < 1e-12);
    assert.equal(s.min, min(values));
    assert.equal(s.max, max(values));
  });

  it('leaves out undefined scores and counts them', () => {
    const s = summarize([NaN, 1, 3, Infinity]);
    assert.deepEqual([s.mean, s.n, s.skipped], [2, 2, 2]);
    assert.ok(Number.isNaN(summarize([5]).sd)); // one value has no sample sd
    assert.equal(summarize([]).n, 0);
  });
});
