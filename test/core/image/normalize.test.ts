import { strict as assert } from 'node:assert';
import { writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { displayRange, percentile, sharedDisplayRange } from '../../../core/image/normalize';
import { requirePython, runPython, throwsUserError, useTempDir } from '../io/support';

describe('core/image/normalize', () => {
  const tmp = useTempDir('normalize');

  it('computes percentiles by linear interpolation between closest ranks (worked examples)', () => {
    // h = p/100·(n − 1): [1,2,3,4] at 50 → h = 1.5 → 2.5; 0..100 at 99.5 → 99.5; at 0/100 → min/max.
    assert.equal(percentile([4, 1, 3, 2], 50), 2.5);
    assert.equal(percentile(Array.from({ length: 101 }, (_, i) => i), 99.5), 99.5);
    assert.equal(percentile([3, 9, -1], 0), -1);
    assert.equal(percentile([3, 9, -1], 100), 9);
    assert.equal(percentile([NaN, 5, Infinity, 1], 50), 3, 'non-finite values are ignored');
    assert.equal(percentile([], 99.5), 0);
  });

  it('agrees with numpy.percentile (default method)', function () {
    // Reference: numpy.percentile, method 'linear' (NumPy's default).
    requirePython(this, 'numpy');
    const values = Float32Array.from({ length: 5000 }, (_, i) => ((i * 7919) % 5003) / 37 - (i % 3 === 0 ? 0 : 40));
    const file = path.join(tmp(), 'v.f32');
    writeFileSync(file, Buffer.from(values.buffer));
    const ps = [0, 1, 25, 50, 90, 99, 99.5, 99.9, 100];
    const ref = JSON.parse(runPython(`import sys, json, numpy as np
v = np.fromfile(sys.argv[1], dtype=np.float32).astype(np.float64)
print(json.dumps([float(np.percentile(v, p)) for p in ${JSON.stringify(ps)}]))`, [file]).toString());
    ps.forEach((p, i) => assert.ok(Math.abs(percentile(values, p) - ref[i]) <= 1e-9 * Math.max(1, Math.abs(ref[i])), `p${p}: ${percentile(values, p)} vs ${ref[i]}`));
  });

  it('defaults to [0, p99.5] (DESIGN §4) and supports max, fixed and symmetric ranges', () => {
    const v = Float32Array.from({ length: 1001 }, (_, i) => i / 10); // 0 … 100
    assert.deepEqual(displayRange(v), { lo: 0, hi: percentile(v, 99.5) });
    assert.ok(Math.abs(displayRange(v).hi - 99.5) < 1e-4);
    assert.deepEqual(displayRange(v, { kind: 'max' }), { lo: 0, hi: 100 });
    assert.deepEqual(displayRange(v, { kind: 'fixed', lo: 2, hi: 3 }), { lo: 2, hi: 3 });
    const signed = Float32Array.from([-4, -1, 0, 2, 3]);
    assert.deepEqual(displayRange(signed, { kind: 'symmetric', p: 100 }), { lo: -4, hi: 4 });
    assert.deepEqual(displayRange(new Float32Array(16)), { lo: 0, hi: 0 }, 'a flat map gives a flat range');
    assert.deepEqual(displayRange(Float32Array.from([-3, -1]), { kind: 'max' }), { lo: 0, hi: 0 });
    throwsUserError(() => displayRange(v, { kind: 'fixed', lo: 3, hi: 3 }), /not a valid range/);
    throwsUserError(() => displayRange(v, { kind: 'percentile', p: 120 }), /outside 0\.\.100/);
  });

  it('shares one range over a group: the statistic of all values together', () => {
    const a = Float32Array.from([0, 1, 2, 3]);
    const b = Float32Array.from([10, 20]);
    assert.deepEqual(sharedDisplayRange([a, b], { kind: 'max' }), { lo: 0, hi: 20 });
    assert.deepEqual(sharedDisplayRange([a, b], { kind: 'percentile', p: 50 }), { lo: 0, hi: percentile([0, 1, 2, 3, 10, 20], 50) });
    assert.equal(percentile([0, 1, 2, 3, 10, 20], 50), 2.5);
    assert.deepEqual(sharedDisplayRange([]), { lo: 0, hi: 0 });
  });
});
